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
