"""stub on hand-made tables with a hand-made tree (no solver).

1 mm at eps_eff 4 is 6.67 ps; the edge is 500 ps, so the 0.1 x Tr limit is 50 ps, about 7.5 mm.
"""

from __future__ import annotations

from check_tables import rules, segments, cls
from sicheck.checks import ReviewContext, by_id, run_checks
from sicheck.review import _net_table
from sicheck.topology import build

C0 = 299_792_458.0


def _findings(stub_mm, rs, pair=""):
    # driver U1.1 -> 40 mm to T -> 30 mm to U2.1; a stub of stub_mm from T to a test pad
    rows = [("U1.1", "T", 40.0), ("T", "U2.1", 30.0), ("T", "TP1", stub_mm)]
    seg = segments(*({"net": "BUS", "length_mm": ln, "row": 5 + i, "pair": pair, "net_class": "BUS"}
                     for i, (_, _, ln) in enumerate(rows)))
    topo = build("BUS", list(seg["row"]), [r[0] for r in rows], [r[1] for r in rows], ["U1.1", "", ""],
                 list(seg["length"]), list(seg["delay"]), [False] * 3, "t.csv")
    ctx = ReviewContext(segments=seg, nets=_net_table(seg, rs), rules=rs, topology={"BUS": topo})
    return run_checks(ctx, [by_id("stub")])


def test_stub_passes_when_short():
    assert _findings(5.0, rules()) == []


def test_stub_fails_when_long():
    (f,) = _findings(20.0, rules())
    assert f.severity == "warning" and f.row == 7 and f.unit == "x Tr" and f.limit == 0.1
    assert abs(f.value - 0.020 * 2 / C0 / 500e-12) < 1e-9
    assert "node 'T'" in f.message and "'TP1'" in f.message and "20.0 mm" in f.message
    assert f.key == "stub|BUS|T|TP1"


def test_stub_off():
    assert _findings(20.0, rules(severity={"stub": "off"})) == []


def test_stub_params():
    assert _findings(20.0, rules(max_stub_td_over_tr=0.3)) == []
    assert _findings(20.0, rules(classes=[cls("BUS", ["BUS"], max_stub_td_over_tr=0.3)])) == []
    assert len(_findings(5.0, rules(max_stub_td_over_tr=0.05))) == 1


def test_stub_nets_without_nodes_have_none():
    seg = segments({"net": "A", "length_mm": 80.0}, {"net": "A", "length_mm": 80.0})
    rs = rules()
    assert run_checks(ReviewContext(segments=seg, nets=_net_table(seg, rs), rules=rs), [by_id("stub")]) == []
