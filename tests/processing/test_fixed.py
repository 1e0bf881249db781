"""C99 integer semantics of the detection path.

Reference: ISO C99 6.5.5p6 and its footnote ("truncation toward zero"; clause number from memory); Python's
fractions.Fraction and math.trunc give the exact truncated quotient independently of our helpers.
"""

import math
from fractions import Fraction

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from processing.fixed import tdiv, tdiv_pow2, tdiv_pow2_np, to_counts

ints = st.integers(-(2**40), 2**40)


@given(ints, st.integers(-(2**20), 2**20).filter(lambda b: b != 0))
def test_tdiv_truncates_toward_zero(a, b):
    assert tdiv(a, b) == math.trunc(Fraction(a, b))


@given(ints, st.integers(0, 20))
def test_tdiv_pow2_matches_division(a, k):
    assert tdiv_pow2(a, k) == math.trunc(Fraction(a, 2**k))


@given(st.lists(ints, min_size=1, max_size=50), st.integers(0, 20))
def test_numpy_form_matches_scalar(values, k):
    got = tdiv_pow2_np(np.array(values, np.int64), k).tolist()
    assert got == [tdiv_pow2(v, k) for v in values]


def test_worked_examples():
    # C99: -7 / 2 == -3 and 7 / -2 == -3 (floor division would give -4).
    assert tdiv(-7, 2) == -3 and tdiv(7, -2) == -3 and tdiv(-7, -2) == 3
    assert tdiv_pow2(-257, 8) == -1 and tdiv_pow2(-255, 8) == 0 and to_counts(-511) == -1
