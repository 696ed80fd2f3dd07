"""round_sig (whole columns of the review JSON) gives exactly what _num gives one value at a time."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from sicheck.reports.json_report import _num, round_sig


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.floats(), st.floats(-1e6, 1e6).map(lambda x: round(x, 3)),
                          st.sampled_from([0.0, -0.0, 0.5, 2.5, 1234.5, 1e23, float("nan")])), max_size=200),
       st.sampled_from([4, 5, 6]))
def test_round_sig_is_num_over_a_column(values, digits):
    a = np.array(values, dtype=float)
    assert round_sig(a, digits) == [_num(v, digits) for v in values]


_maybe_number = st.one_of(st.none(), st.floats(), st.sampled_from([0.0, -0.0, 2.5, 1e23]), st.integers(-10**6, 10**6))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["length", "waveform"]), st.sampled_from(["warning", "info"]),
                          st.text(max_size=5), st.sampled_from(["", "L1"]), st.sampled_from(["", "a|b|c"]),
                          st.one_of(st.none(), st.integers(1, 99)), _maybe_number, _maybe_number,
                          st.sampled_from(["", "ps", "%"])), max_size=30))
def test_findings_column_wise_are_the_findings_one_by_one(rows):
    import json

    from sicheck.findings import Finding
    from sicheck.reports.json_report import findings_json
    from sicheck.reports.signoff_columns import finding_json
    fs = [Finding(rule, sev, net, layer, "msg", row=row, key=key, value=v, limit=lim, unit=unit)
          for rule, sev, net, layer, key, row, v, lim, unit in rows]
    want = [f.as_dict() | finding_json(None, f) for f in fs]
    got = findings_json(fs, None)
    assert json.dumps(got) == json.dumps(want)         # the same text: -0.0 stays -0.0, keys in the same order
