"""Integer helpers that behave exactly like C99 on the detection path (see ALGORITHM.md).

C99 integer division truncates toward zero; Python's `//` floors. Right shifts of negative numbers are
implementation-defined in C, so the algorithm never shifts a negative value: it divides by a power of two
(truncating toward zero), which these helpers reproduce for Python ints and numpy int64 arrays alike.
"""

from __future__ import annotations

import numpy as np

FRAC_BITS = 8  # fractional bits of the fixed-point baseline: 1 count = 256 units
ONE_FP = 1 << FRAC_BITS


def tdiv(a: int, b: int) -> int:
    """C99 `a / b` for integers: the quotient truncated toward zero (b != 0)."""
    q = abs(a) // abs(b)
    return q if (a >= 0) == (b > 0) else -q


def tdiv_pow2(a: int, k: int) -> int:
    """C99 `a / (1 << k)`: truncation toward zero, written without shifting a negative number."""
    q = abs(a) >> k
    return -q if a < 0 else q


def tdiv_pow2_np(a: np.ndarray, k: np.ndarray | int) -> np.ndarray:
    """`tdiv_pow2` element-wise over int64 arrays (k may be an array that broadcasts against a)."""
    q = np.abs(a) >> k
    return np.where(a < 0, -q, q)


def to_counts(value_fp: int) -> int:
    """A fixed-point value in whole counts, truncated toward zero (as C would print it)."""
    return tdiv_pow2(value_fp, FRAC_BITS)
