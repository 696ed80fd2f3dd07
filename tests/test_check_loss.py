"""loss-budget on hand-made tables (no solver)."""

from __future__ import annotations

from check_tables import cls, findings, rules, segments


def _pair(loss_each_segment):
    return segments(*[{"net": n, "pair": p, "net_class": "LV", "loss_db": loss_each_segment, "length_mm": 60.0}
                      for n, p in (("D_P", "D_N"), ("D_P", "D_N"), ("D_N", "D_P"), ("D_N", "D_P"))])


def test_loss_budget_passes():
    assert findings(_pair(0.5), rules([cls("LV", max_loss_db=1.5)]), "loss-budget") == []


def test_loss_budget_fails_once_per_pair():
    (f,) = findings(_pair(1.0), rules([cls("LV", max_loss_db=1.5)]), "loss-budget")
    assert (f.value, f.limit, f.unit, f.severity) == (2.0, 1.5, "dB", "error")
    assert f.key == "loss-budget|D_N & D_P" and f.row == 2 and "exceeds the LV budget of 1.5 dB" in f.message


def test_loss_budget_off():
    assert findings(_pair(1.0), rules([cls("LV", max_loss_db=1.5)], severity={"loss-budget": "off"}),
                    "loss-budget") == []


def test_loss_budget_param_unset_means_no_budget():
    assert findings(_pair(10.0), rules([cls("LV")]), "loss-budget") == []
