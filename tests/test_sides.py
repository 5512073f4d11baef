"""The per-end link index of tracecheck.sides against a plain scan of the codes."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.sides import _EndIndex


@settings(max_examples=200, deadline=None)
@given(st.integers(0, 12).flatmap(lambda n: st.tuples(st.just(n), st.lists(st.integers(-1, n + 3), max_size=60))))
def test_links_of_each_code_are_those_with_that_end_in_file_order(case):
    # Reference: a list comprehension over the codes (file order by construction).
    # Codes at or above n (ends naming no element) and -1 are never asked for.
    n, codes = case
    index = _EndIndex(np.array(codes, dtype=np.int64), n)
    for code in range(n):
        assert index.links(code) == [i for i, c in enumerate(codes) if c == code]
