"""The compensated running sum (processing.running_sum) against math.fsum (Python's standard library: the
correctly rounded sum, the reference), on terms a plain float sum gets badly wrong."""

from __future__ import annotations

import math

import numpy as np
import pytest

from processing.running_sum import RunningSum


@pytest.mark.parametrize("seed", range(10))
def test_the_running_sum_is_within_an_ulp_or_two_of_the_exact_sum(seed: int) -> None:
    rng = np.random.default_rng(seed)
    terms = (rng.normal(size=20_000) * 10.0 ** rng.integers(-8, 12, 20_000)).tolist()
    terms += [1e16, 1.0, -1e16] * 50  # cancellation a plain sum loses every 1.0 of
    s = RunningSum()
    for x in terms:
        s.add(x)
    exact = math.fsum(terms)
    assert abs(s.value - exact) <= 2 * math.ulp(max(abs(exact), 1e-300))
    assert sum(terms) != exact  # the plain sum does go wrong here: the case is worth having
