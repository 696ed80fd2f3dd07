"""The review JSON's encoder: pieces that join to one valid document, whatever the values hold."""

import json
import math

import numpy as np
import orjson
from hypothesis import given, settings
from hypothesis import strategies as st

from sicheck.reports.json_report import json_pieces

scalars = st.one_of(st.none(), st.booleans(), st.integers(-10**12, 10**12),
                    st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=12))
records = st.dictionaries(st.text(max_size=6), scalars, max_size=4)
documents = st.dictionaries(st.text(max_size=8), st.one_of(scalars, st.lists(records, max_size=5), records), max_size=5)


@settings(max_examples=60, deadline=None)
@given(documents)
def test_pieces_read_back_as_the_document(doc):
    text = b"".join(json_pieces(doc))
    assert json.loads(text) == doc
    assert text == orjson.dumps(doc)            # the same bytes as encoding it at once


def test_numpy_values_and_gaps():
    doc = {"a": [np.float64(1.25), np.int64(7), np.bool_(True), None], "b": np.float64(math.nan)}
    assert json.loads(b"".join(json_pieces(doc))) == {"a": [1.25, 7, True, None], "b": None}


def test_text_that_is_not_valid_unicode_is_escaped_not_fatal():
    # a lone surrogate cannot be UTF-8; the document stays valid JSON and reads back the same
    doc = {"nets": [{"net": "CLK\ud800", "z0_ohm": 50.0, "layer": "L1 é"}], "n": np.int64(1)}
    text = b"".join(json_pieces(doc))
    assert json.loads(text) == {"nets": [{"net": "CLK\ud800", "z0_ohm": 50.0, "layer": "L1 é"}], "n": 1}
