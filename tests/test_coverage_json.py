"""The coverage JSON view's encoder against the standard library's ``json.dumps``.

Reference: Python's own ``json`` module (``json.dumps(value, indent=2,
ensure_ascii=False)``), which the view used before; the output must be the same
byte for byte for every JSON value, including those it leaves to the module.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.report.coverage import indented_json

_SCALARS = st.one_of(
    st.none(), st.booleans(), st.integers(), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=8), st.sampled_from(["REQ-SYS-001", "Ladestation \u00fc\u00df", "tab\tquote\"\\", "\u2028\x00"]),
)
_VALUES = st.recursive(
    _SCALARS,
    lambda inner: st.one_of(st.lists(inner, max_size=5), st.lists(st.text(max_size=6), max_size=5),
                            st.dictionaries(st.text(max_size=6), inner, max_size=5)),
    max_leaves=30,
)


@settings(max_examples=300, deadline=None)
@given(_VALUES)
def test_same_bytes_as_json_dumps(value):
    assert indented_json(value) == json.dumps(value, indent=2, ensure_ascii=False)


def test_values_it_does_not_handle_are_refused_not_misencoded():
    # The view then falls back to json.dumps (which writes a tuple as a list and turns
    # keys into strings); a guess here could differ from it.
    for value in ({1: "a"}, ("a", "b"), [("a",)], {"k": {None: 1}}, {"k": b"bytes"}):
        with pytest.raises(TypeError):
            indented_json(value)
