"""The --json text against the standard library's encoder, which defines it: json.dumps(document, indent=2)."""

from __future__ import annotations

import enum
import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lanesolve.json_text import dumps_indented

SCALARS = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(allow_nan=True, allow_infinity=True),
                    st.text())
RECORD_KEYS = st.lists(st.text(min_size=0, max_size=6), min_size=1, max_size=5, unique=True)


class Kind(enum.IntEnum):
    LANE = 3


@st.composite
def record_lists(draw):
    keys = draw(RECORD_KEYS)
    return [{key: draw(SCALARS) for key in keys} for _ in range(draw(st.integers(0, 6)))]


DOCUMENTS = st.dictionaries(st.text(max_size=8), st.one_of(
    SCALARS, record_lists(), st.recursive(SCALARS, lambda inner: st.lists(inner, max_size=3)
                                          | st.dictionaries(st.text(max_size=4), inner, max_size=3), max_leaves=8)),
    max_size=6)


@settings(max_examples=300, deadline=None)
@given(DOCUMENTS)
def test_any_document_is_written_as_the_standard_encoder_writes_it(document):
    # Reference: Python's json.dumps with indent=2 (the text --json printed before it was made faster).
    assert dumps_indented(document) == json.dumps(document, indent=2)


@pytest.mark.parametrize("document", [
    {},
    {"flows": []},
    {"flows": [{"origin": "Dépôt {1}", "flow": math.nan, "cost": math.inf}, {"origin": "E", "flow": -math.inf,
                                                                          "cost": -0.0}]},
    {"flows": [{"a": 1, "b": 2}, {"b": 2, "a": 1}]},  # keys in another order: not one template
    {"flows": [{"a": 1}, {"a": [1, 2]}]},  # a nested value
    {"flows": [{"a": np.float64(0.1)}, {"a": Kind.LANE}]},  # float and int subclasses
    {"flows": [{"{x}": "}{", "\u2192": "\n\t\"\\"}, {"{x}": "", "\u2192": None}]},
    {"flows": [{}, {}]},
    {"flows": [{"a": 1}, 5]},
    {1: "a non-text key"},
    [1, 2],
])
def test_edge_cases_are_written_as_the_standard_encoder_writes_them(document):
    # Reference: Python's json.dumps with indent=2.
    assert dumps_indented(document) == json.dumps(document, indent=2)


def test_a_value_the_standard_encoder_refuses_is_refused_the_same_way():
    # Reference: json.dumps raises TypeError for a NumPy bool (not a Python bool or int).
    document = {"flows": [{"a": np.bool_(True)}, {"a": False}]}
    with pytest.raises(TypeError):
        json.dumps(document, indent=2)
    with pytest.raises(TypeError):
        dumps_indented(document)
