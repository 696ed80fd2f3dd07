"""LineLoss.many (checked as arrays) and LineLoss pickling (rebuilt without a check): the same objects as the
constructor makes, and the constructor's error for a value out of range."""

import pickle

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sicheck.physics.causal_line import LineLoss

values = st.tuples(st.floats(1e3, 1e11), st.floats(0, 50), st.floats(0, 0.99), st.floats(0, 10))


@settings(max_examples=50, deadline=None)
@given(st.lists(values, max_size=20))
def test_many_and_pickling_give_the_constructors_objects(rows):
    want = [LineLoss(*r) for r in rows]
    got = LineLoss.many(*(zip(*rows) if rows else ([], [], [], [])))
    assert got == want and [hash(x) for x in got] == [hash(x) for x in want]
    assert pickle.loads(pickle.dumps(want)) == want


@pytest.mark.parametrize("bad", [(0.0, 1, 0.01, 0), (1e9, -1, 0.01, 0), (1e9, 1, 1.0, 0), (1e9, 1, 0.01, -0.5),
                                 (float("nan"), 1, 0.01, 0), (1e9, 1, float("nan"), 0)])
def test_a_value_out_of_range_is_the_constructors_error(bad):
    rows = [(1e9, 2.0, 0.02, 0.1), bad, (2e9, 1.0, 0.01, 0.0)]
    with pytest.raises(ValueError, match="loss out of range") as many:
        LineLoss.many(*zip(*rows))
    with pytest.raises(ValueError) as one:
        LineLoss(*map(float, bad))
    assert str(many.value) == str(one.value)
    with pytest.raises(AttributeError):
        LineLoss.many(*zip(*rows[:1]))[0].f_ref = 1.0          # still frozen
