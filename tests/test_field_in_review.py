"""The field solver inside `review`: cache, findings, keys."""

import json

import pytest

from sicheck import field_solve
from sicheck.physics.cross_section import CrossSection, Stratum

OFFSET = """\
name = "offset"
units = "mm"
[[layers]]
type = "plane"
name = "G1"
copper = "1oz"
[[layers]]
type = "dielectric"
thickness = 0.1
er = 4.2
[[layers]]
type = "signal"
name = "S"
copper = "0.5oz"
[[layers]]
type = "dielectric"
thickness = 0.5
er = 3.8
[[layers]]
type = "plane"
name = "G2"
copper = "1oz"
"""


def test_review_field_solver_keys_cache_and_formula_finding(run, board, tmp_path, monkeypatch):
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path / "cache"))
    tr, st = board("net,layer,length,width,rise_time,pair,gap\nA,S,50mm,0.1mm,300ps,,\n"
                   "B,S,50mm,0.1mm,300ps,,\nP,S,50mm,0.1mm,300ps,N,0.12mm\n", stackup=OFFSET)
    js = tmp_path / "r.json"
    # no fabrication band here (zero tolerances): this test counts the nominal solves
    nb = tmp_path / "noband.toml"
    nb.write_text("[fabrication]\nwidth_tol = '0mm'\ndielectric_tol_pct = 0\ner_tol_pct = 0\ncopper_tol_pct = 0\n")
    code, out, err = run("review", tr, "--stackup", st, "--solver", "field", "--json", js, "--rules", nb)
    assert code in (0, 1), err
    d = json.loads(js.read_text())
    segs = {s["net"]: s for s in d["segments"]}
    assert segs["A"]["solver"] == "field" and segs["A"]["uncertainty_pct"] <= 0.3
    assert "formula_z0_ohm" in segs["A"] and "formula_zdiff_ohm" in segs["P"]
    # a 5:1 offset stripline in two dielectrics: the closed form misses by more than 2 %
    fv = [f for f in d["findings"] if f["rule"] == "formula-vs-field"]
    assert fv and "field solution" in fv[0]["message"] and "closed form" in fv[0]["message"]
    cached = list((tmp_path / "cache").glob("*.json"))
    # one single-ended and one pair cross-section; the conductor loss comes from the same solves
    assert len(cached) == 2
    assert 0 < segs["A"]["loss_uncertainty_pct"] <= 2.0 and 0 < segs["P"]["loss_uncertainty_pct"] <= 2.0

    calls = []
    monkeypatch.setenv("SICHECK_WORKERS", "1")      # solve in this process so that the spy sees every solve
    real = field_solve._solve_one
    monkeypatch.setattr(field_solve, "_solve_one", lambda a: calls.append(1) or real(a))
    code, _, err = run("review", tr, "--stackup", st, "--solver", "field", "--json", js, "--rules", nb)
    assert calls == []                 # warm cache: nothing solved again
    code, _, err = run("review", tr, "--stackup", st, "--solver", "field", "--no-cache", "--json", js, "--rules", nb)
    assert len(calls) == 2


def test_cache_key_is_the_exact_geometry():
    a = CrossSection("stripline", 1e-4, 1e-5, (Stratum(1e-4, 4.0),), (Stratum(1e-4, 4.0),))
    b = CrossSection("stripline", 1e-4, 1e-5, (Stratum(1e-4, 4.0),), (Stratum(1e-4, 4.0001),))
    assert field_solve.cache_key(a, 0.3) == field_solve.cache_key(a, 0.3)
    assert field_solve.cache_key(a, 0.3) != field_solve.cache_key(b, 0.3)
    assert field_solve.cache_key(a, 0.3) != field_solve.cache_key(a, 0.1)


def test_damaged_cache_entry_is_recomputed(tmp_path, monkeypatch):
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path))
    xs = CrossSection("stripline", 1e-4, 0.0, (Stratum(1e-4, 4.0),), (Stratum(1e-4, 4.0),))
    (tmp_path / f"{field_solve.cache_key(xs, 0.3)}.json").write_text("{not json")
    r = field_solve.solve_field_all([xs])[0]
    assert r.model == "field-2d" and r.z0 > 0


def test_pair_listed_from_either_leg_gives_the_same_numbers(board, run, tmp_path, monkeypatch):
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path / "c"))
    nb = tmp_path / "noband.toml"        # the nominal numbers only: no fabrication band solves
    nb.write_text("[fabrication]\nwidth_tol = '0mm'\ndielectric_tol_pct = 0\ner_tol_pct = 0\ncopper_tol_pct = 0\n")
    out = []
    for first, second in (("P", "N"), ("N", "P")):
        tr, st = board(f"net,layer,length,width,rise_time,pair,gap\n{first},S,40mm,0.1mm,300ps,{second},0.12mm\n",
                       stackup=OFFSET)
        js = tmp_path / f"{first}.json"
        run("review", tr, "--stackup", st, "--solver", "field", "--json", js, "--rules", nb)
        out.append(json.loads(js.read_text()))
    za = out[0]["segments"][0]["zdiff_ohm"]
    zb = out[1]["segments"][0]["zdiff_ohm"]
    assert za == pytest.approx(zb, rel=1e-12)
    da = {n["net"]: n["delay_ps"] for n in out[0]["nets"]}
    db = {n["net"]: n["delay_ps"] for n in out[1]["nets"]}
    assert da == db
