"""Net topology from the trace list's from/to/driver columns (sicheck/topology.py) and its use in the review.

Expected trees are worked out by hand: a tree's routes and their summed delays are plain graph facts.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings, strategies as st

from sicheck.errors import InputError
from sicheck.topology import build, chain

MM = 1e-3
PS_PER_MM = 6.67e-12        # any constant delay per length will do for the shapes


def _tree(rows):
    """rows: (from, to, length_mm[, load_given]) -> Topology (driver from the driver column on row 1)."""
    frm = [r[0] for r in rows]
    to = [r[1] for r in rows]
    ln = [r[2] * MM for r in rows]
    return build("N", list(range(2, 2 + len(rows))), frm, to, ["U1.1"] + [""] * (len(rows) - 1), ln,
                 [x * PS_PER_MM / MM for x in ln], [len(r) > 3 and r[3] for r in rows], "t.csv")


# driver U1.1, 40 mm trunk to T, two 30 mm branches to U2.1 and U3.1, a 12 mm stub at mid-trunk to a test pad
T_ROWS = [("U1.1", "M", 20.0), ("M", "T", 20.0), ("T", "U2.1", 30.0), ("T", "U3.1", 30.0), ("M", "TP7", 12.0)]


def test_t_with_mid_line_stub():
    t = _tree(T_ROWS)
    assert t.driver == "U1.1" and "driver column" in t.driver_source
    assert t.receivers == ("U2.1", "U3.1")          # equal delays: name order decides, not row order
    assert t.open_ends == ("TP7",)
    assert t.path == (0, 1, 2)
    assert t.receiver_length == pytest.approx((70 * MM, 70 * MM))
    stubs = {(s.node, s.end): s for s in t.stubs}
    assert set(stubs) == {("M", "TP7"), ("T", "U3.1")}
    assert stubs[("M", "TP7")].length == pytest.approx(12 * MM)
    assert stubs[("T", "U3.1")].segments == (3,)
    assert t.parent == (-1, 0, 1, 1, 0)


def test_longest_route_inside_a_stub_and_no_pins():
    # no leaf is REF.PIN: every open end is a receiver (stated in the note)
    t = build("N", [2, 3, 4, 5], ["a", "b", "c", "c"], ["b", "c", "d", "e"], ["", "", "", ""],
              [0.01, 0.02, 0.005, 0.007], [1e-12, 2e-12, 5e-13, 7e-13], [False] * 4, "t.csv")
    assert t.driver == "a" and "first row's 'from'" in t.driver_source
    assert set(t.receivers) == {"d", "e"} and t.receivers[0] == "e" and "every open end is a receiver" in t.note


def test_load_pf_makes_a_leaf_a_receiver():
    t = _tree([("U1.1", "X", 10.0), ("X", "pad", 5.0, True), ("X", "via9", 3.0)])
    assert t.receivers == ("pad",) and t.open_ends == ("via9",)


def test_chain_without_nodes():
    t = chain([0.01, 0.02], [1e-11, 2e-11])
    assert t.path == (0, 1) and not t.stubs and "in the order listed" in t.note


def _signature(t, rows):
    """What must not depend on the listed order: nodes, receivers, path rows, stubs."""
    return (t.driver, t.receivers, t.open_ends, tuple(rows[i] for i in t.path),
            tuple(sorted((s.node, s.end, round(s.length * 1e9)) for s in t.stubs)),
            tuple(round(d * 1e18) for d in t.receiver_delay))


@settings(max_examples=40, deadline=None)
@given(st.permutations(range(len(T_ROWS))), st.lists(st.booleans(), min_size=len(T_ROWS), max_size=len(T_ROWS)),
       st.integers(0, len(T_ROWS) - 1))
def test_shuffled_and_reversed_rows_give_the_same_tree(perm, flips, driver_row):
    ref = _signature(_tree(T_ROWS), [10 + i for i in range(len(T_ROWS))])
    rows = [T_ROWS[i] for i in perm]
    rows = [(b, a, ln) if f else (a, b, ln) for (a, b, ln), f in zip(rows, flips)]
    driver = [""] * len(rows)
    driver[driver_row] = "U1.1"
    t = build("N", [10 + i for i in perm], [r[0] for r in rows], [r[1] for r in rows], driver,
              [r[2] * MM for r in rows], [r[2] * PS_PER_MM for r in rows], [False] * len(rows), "t.csv")
    assert _signature(t, [10 + i for i in perm]) == ref


@pytest.mark.parametrize("rows,driver,words", [
    ([("U1.1", "A"), ("A", "B"), ("B", "U1.1")], ["U1.1", "", ""], "rows 2, 3, 4 form a loop"),
    ([("U1.1", "A"), ("B", "U2.1")], ["U1.1", ""], "rows 3 do not connect to the driver 'U1.1'"),
    ([("U1.1", "A"), ("A", "")], ["U1.1", ""], "row 3, column 'to'"),
    ([("U1.1", "U1.1")], ["U1.1"], "same node"),
    ([("U1.1", "A"), ("A", "U2.1")], ["U1.1", "U2.1"], "different drivers"),
    ([("U1.1", "A")], ["U7.1"], "is not a node"),
])
def test_bad_topologies_name_file_and_rows(rows, driver, words):
    with pytest.raises(InputError) as e:
        build("N", list(range(2, 2 + len(rows))), [r[0] for r in rows], [r[1] for r in rows], driver,
              [0.01] * len(rows), [1e-10] * len(rows), [False] * len(rows), "t.csv")
    assert words in str(e.value) and "t.csv" in str(e.value)


# ------------------------------------------------------------------ in the review (CLI end to end)

HEAD = "net,layer,length,width,rise_time,from,to,driver,load_pf\n"
TREE = ("BUS,L1,20mm,0.3mm,300ps,U1.1,M,U1.1,\n"
        "BUS,L1,20mm,0.3mm,300ps,M,T,,\n"
        "BUS,L1,30mm,0.3mm,300ps,T,U2.1,,\n"
        "BUS,L1,30mm,0.3mm,300ps,T,U3.1,,\n"
        "BUS,L1,12mm,0.3mm,300ps,M,TP7,,\n")


def _review_json(run, board, tmp_path, text, *extra):
    tr, st = board(text)
    js = tmp_path / "r.json"
    code, out, err = run("review", tr, "--stackup", st, "--json", js, *extra)
    assert code in (0, 1), err
    return json.loads(js.read_text())


def test_review_uses_the_longest_path(run, board, tmp_path):
    data = _review_json(run, board, tmp_path, HEAD + TREE)
    (n,) = data["nets"]
    assert n["length_mm"] == pytest.approx(70.0) and n["copper_length_mm"] == pytest.approx(112.0)
    fnd = [f for f in data["findings"] if f["rule"] == "stub"]
    assert {f["message"].split("'")[1] for f in fnd} == {"M", "T"}
    el = next(f for f in data["findings"] if f["rule"] == "electrical-length")
    assert "farthest 'U2.1'" in el["message"] and "1 open stub end" in el["message"]


def test_review_reverse_order_same_result(run, board, tmp_path):
    lines = TREE.splitlines()
    rev = [l.split(",") for l in reversed(lines)]
    for r in rev:                     # swap from/to as well
        r[5], r[6] = r[6], r[5]
    fwd = _review_json(run, board, tmp_path, HEAD + TREE)
    back = _review_json(run, board, tmp_path, HEAD + "\n".join(",".join(r) for r in rev) + "\n")
    keep = ("length_mm", "copper_length_mm", "delay_ps", "td_over_tr", "termination", "z_driver_end_ohm")
    assert {k: fwd["nets"][0][k] for k in keep} == {k: back["nets"][0][k] for k in keep}
    assert sorted(f["key"] for f in fwd["findings"]) == sorted(f["key"] for f in back["findings"])


def test_rows_in_series_without_nodes_is_stated(run, board, tmp_path):
    data = _review_json(run, board, tmp_path, "net,layer,length,width,rise_time\nA,L1,60mm,0.3mm,300ps\n"
                                              "A,L1,60mm,0.3mm,300ps\n")
    assert data["nets"][0]["length_mm"] == pytest.approx(120.0)
    el = next(f for f in data["findings"] if f["rule"] == "electrical-length")
    assert "in series in the order listed, driver first" in el["message"]


HOSTILE = ["=cmd|' /C calc'!A0", "+SUM(1)", "@x", "-1", "node, \"quoted\"", "ünïcødé/∆", "U1.1"]


def test_hostile_node_names_end_to_end(run, board, tmp_path):
    a, b, c, d, e, f, drv = HOSTILE
    rows = [(drv, a), (a, b), (b, "U9.2"), (a, c), (c, d), (b, e), (e, f)]
    text = "net,layer,length,width,rise_time,from,to,driver\n" + "".join(
        f'"/top/bus{{a}};x",L1,25mm,0.3mm,300ps,"{p.replace(chr(34), chr(34) * 2)}","{q.replace(chr(34), chr(34) * 2)}",'
        f'{drv if i == 0 else ""}\n' for i, (p, q) in enumerate(rows))
    tr, st = board(text)
    out_x, js = tmp_path / "h.xlsx", tmp_path / "h.json"
    code, out, err = run("review", tr, "--stackup", st, "--json", js, "--out", out_x)
    assert code in (0, 1) and "Traceback" not in err
    data = json.loads(js.read_text())
    stubs = [x for x in data["findings"] if x["rule"] == "stub"]
    assert stubs and any(a in x["message"] for x in stubs)
    # a loop among hostile names: exit 2 with file, row and the rows of the loop
    tr, st = board(text + f'"/top/bus{{a}};x",L1,5mm,0.3mm,300ps,"{d}","{f}",\n')
    code, out, err = run("review", tr, "--stackup", st)
    assert code == 2 and "row 9" in err and "form a loop" in err and "Traceback" not in err


def test_disconnected_net_exit_2(run, board, tmp_path):
    tr, st = board(HEAD + TREE + "BUS,L1,5mm,0.3mm,300ps,Q,R,,\n")
    code, out, err = run("review", tr, "--stackup", st)
    assert code == 2 and "row 7" in err and "in pieces" in err


def test_trace_list_load_pf_reaches_the_simulation_in_pf(run, board, tmp_path):
    tr, st = board("net,layer,length,width,rise_time,driver_ohm,load_pf\nA,L1,150mm,0.3mm,300ps,10,7\n")
    js = tmp_path / "r.json"
    run("review", tr, "--stackup", st, "--json", js)
    sim = json.loads(js.read_text())["nets"][0]["simulation"]
    assert sim["load_pf"] == {"value": 7.0, "source": "trace list"}


def test_pair_termination_ignores_a_neck_down_listed_first(run, board, tmp_path):
    # a 0.5 mm neck-down (narrow, high Zdiff) before or after the 60 mm pair: the driver-end impedance is the
    # first segment reaching ignore_shorter_than_tr x Tr (0.1 x 250 ps), so both orders give one proposal
    head = "net,layer,length,width,rise_time,pair,gap\n"
    neck = "D_P,L1,0.5mm,0.1mm,250ps,D_N,0.3mm\n"
    main = "D_P,L1,60mm,0.3mm,250ps,D_N,0.15mm\n"
    a = _review_json(run, board, tmp_path, head + neck + main)["nets"][0]
    b = _review_json(run, board, tmp_path, head + main + neck)["nets"][0]
    for k in ("z_driver_end_ohm", "advice", "recommended_termination"):
        assert a[k] == b[k], k
    assert "ohm" in a["recommended_termination"]


# ------------------------------------------------------------------ driver from the net class, pins passed through

def test_class_driver_pattern_any_row_order():
    rows = [("T", "U3.1", 30.0), ("M", "T", 20.0), ("U1.1", "M", 20.0), ("T", "U2.1", 30.0)]
    t = build("N", [2, 3, 4, 5], [r[0] for r in rows], [r[1] for r in rows], [""] * 4, [r[2] * MM for r in rows],
              [r[2] * PS_PER_MM for r in rows], [False] * 4, "t.csv", ("u1.*",), "BUS")
    assert t.driver == "U1.1" and "net class 'BUS'" in t.driver_source and set(t.receivers) == {"U2.1", "U3.1"}
    with pytest.raises(InputError, match="several nodes match"):
        build("N", [2, 3, 4, 5], [r[0] for r in rows], [r[1] for r in rows], [""] * 4, [0.01] * 4, [1e-10] * 4,
              [False] * 4, "t.csv", ("U*",), "BUS")
    # no node matches: the first row's from, stated
    t = build("N", [2, 3, 4, 5], [r[0] for r in rows], [r[1] for r in rows], [""] * 4, [0.01] * 4, [1e-10] * 4,
              [False] * 4, "t.csv", ("Q9.*",), "BUS")
    assert t.driver == "T" and "first row's 'from'" in t.driver_source


def test_pin_passed_through_on_a_daisy_chain_receives():
    # U1.1 -> U2.1 -> U3.1 (fly-by) and a test pad hanging off U3.1's far side
    t = _tree([("U1.1", "U2.1", 30.0), ("U2.1", "U3.1", 30.0), ("U3.1", "TP1", 4.0)])
    assert t.receivers == ("U3.1", "U2.1") and t.open_ends == ("TP1",)
    assert [(s.node, s.end) for s in t.stubs] == [("U3.1", "TP1")]


def test_class_driver_end_to_end(run, board, tmp_path):
    text = HEAD + "".join(r for r in reversed(TREE.splitlines(True))).replace(",M,U1.1,", ",M,,")
    assert ",M,U1.1," not in text          # no driver column value: the class pattern decides
    tr, st, rl = board(text, rules='[[net_class]]\nname = "BUS"\nmatch = ["BUS"]\ndriver = ["U1.*"]\n')
    js = tmp_path / "r.json"
    code, out, err = run("review", tr, "--stackup", st, "--rules", rl, "--json", js)
    assert code in (0, 1), err
    n = json.loads(js.read_text())["nets"][0]
    assert n["length_mm"] == pytest.approx(70.0) and n["simulation"]["topology"]["driver"] == "U1.1"
    tr, st, rl = board(text, rules='[[net_class]]\nname = "BUS"\nmatch = ["BUS"]\ndriver = [3]\n')
    code, out, err = run("review", tr, "--stackup", st, "--rules", rl)
    assert code == 2 and "driver" in err and "Traceback" not in err


def test_json_topology_of_a_tree(run, board, tmp_path):
    data = _review_json(run, board, tmp_path, HEAD + TREE)
    t = data["nets"][0]["topology"]
    assert t["driver"] == "U1.1" and [r["node"] for r in t["receivers"]] == ["U2.1", "U3.1"]
    assert t["receivers"][0]["length_mm"] == pytest.approx(70.0) and t["open_ends"] == ["TP7"]
    assert {(s["node"], s["end"], s["length_mm"]) for s in t["stubs"]} == {("M", "TP7", 12.0), ("T", "U3.1", 30.0)}
    plain = _review_json(run, board, tmp_path, "net,layer,length,width,rise_time\nA,L1,60mm,0.3mm,300ps\n")
    assert "topology" not in plain["nets"][0]
