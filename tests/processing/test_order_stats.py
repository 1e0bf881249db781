"""Exact order statistics by passes (processing.order_stats) against numpy on the whole array.

The reference throughout is numpy itself, outside this project: `np.sort` for any rank, `np.median` and
`np.percentile` (default method "linear") for the figures tuning reports. Equality is exact (`==` on
floats), never approximate."""

from __future__ import annotations

import tracemalloc
from collections.abc import Iterator, Mapping, Sequence

import numpy as np
import pytest

from processing.order_stats import (
    bin_of,
    median_from,
    median_ranks,
    medians,
    percentile_from,
    percentile_ranks,
    select,
)


class Stream:
    """Queries' values served in random pieces (the same cuts every pass), counting passes and checking
    that each pass asks only for what it gets."""

    def __init__(self, data: Sequence[np.ndarray], rng: np.random.Generator, pieces: int = 6) -> None:
        self.data = [np.asarray(x, np.float64) for x in data]
        self.cuts = [np.sort(rng.integers(0, len(x) + 1, int(rng.integers(0, pieces)))) for x in self.data]
        self.calls = 0
        self.asked: list[list[int]] = []

    def __call__(self, active: Sequence[int]) -> Iterator[Mapping[int, np.ndarray]]:
        self.calls += 1
        self.asked.append(list(active))
        parts = {q: np.split(self.data[q], self.cuts[q]) for q in active}
        for i in range(max((len(p) for p in parts.values()), default=0)):
            yield {q: p[i] for q, p in parts.items() if i < len(p) and len(p[i])}


def _random_values(rng: np.random.Generator, kind: str, n: int) -> np.ndarray:
    if kind == "normal":
        return rng.normal(3.0, 25.0, n)
    if kind == "ties":
        return rng.integers(-4, 5, n).astype(np.float64)
    if kind == "equal":
        return np.full(n, -7.25)
    if kind == "two":
        return rng.choice([-1.5, 1e9], n)
    if kind == "spread":
        return rng.normal(0.0, 1.0, n) * 10.0 ** rng.integers(-12, 15, n)
    if kind == "negative":
        return -rng.exponential(1000.0, n) - 1e6
    raise AssertionError(kind)


KINDS = ("normal", "ties", "equal", "two", "spread", "negative")


@pytest.mark.parametrize("seed", range(40))
def test_any_ranks_equal_numpy_sort(seed: int) -> None:
    rng = np.random.default_rng(seed)
    data = [_random_values(rng, KINDS[int(rng.integers(len(KINDS)))], int(rng.integers(1, 2500)))
            for _ in range(int(rng.integers(1, 8)))]
    ranks = [sorted(rng.integers(0, len(x), int(rng.integers(0, 5))).tolist()) for x in data]
    stream = Stream(data, rng)
    got = select(stream, [len(x) for x in data], ranks, budget_values=int(rng.integers(8, 400)),
                 bins=int(rng.integers(2, 64)))
    for x, wanted, values in zip(data, ranks, got, strict=True):
        assert values == [float(v) for v in np.sort(x)[wanted]]  # reference: numpy's sort


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 17, 1000, 4097])
def test_medians_equal_numpy_median(kind: str, n: int) -> None:
    rng = np.random.default_rng(n)
    data = [_random_values(rng, kind, n) for _ in range(3)]
    for budget in (8, 50, 10_000):
        stream = Stream(data, rng)
        got = medians(stream, [len(x) for x in data], budget_values=budget, bins=16)
        assert got == [float(np.median(x)) for x in data]  # reference: np.median


@pytest.mark.parametrize("q", [0.0, 0.5, 1.0, 12.5, 25.0, 33.3, 50.0, 75.0, 99.0, 99.5, 99.9, 100.0])
@pytest.mark.parametrize("kind", KINDS)
def test_percentiles_equal_numpy_percentile(q: float, kind: str) -> None:
    rng = np.random.default_rng(int(q * 10))
    data = [_random_values(rng, kind, n) for n in (1, 2, 3, 10, 199, 2001)]
    counts = [len(x) for x in data]
    stream = Stream(data, rng)
    found = select(stream, counts, [percentile_ranks(n, q) for n in counts], budget_values=64, bins=8)
    got = [percentile_from(n, q, v) for n, v in zip(counts, found, strict=True)]
    assert got == [float(np.percentile(x, q)) for x in data]  # reference: np.percentile, method "linear"


@pytest.mark.parametrize("seed", range(200))
def test_interpolation_alone_equals_numpy(seed: int) -> None:
    """median_from / percentile_from given sorted neighbours: the float arithmetic of numpy's median
    (mean of the middle two) and its `_lerp` (the t >= 0.5 branch included), on awkward values."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 60))
    x = rng.normal(0, 1, n) * 10.0 ** rng.integers(-300, 300, n)
    s = np.sort(x)
    assert median_from(n, [float(s[r]) for r in median_ranks(n)]) == float(np.median(x))
    q = float(rng.uniform(0, 100))
    got = percentile_from(n, q, [float(s[r]) for r in percentile_ranks(n, q)])
    assert got == float(np.percentile(x, q))


def test_many_queries_at_once_with_a_tiny_budget() -> None:
    rng = np.random.default_rng(7)
    data = [_random_values(rng, KINDS[i % len(KINDS)], int(rng.integers(1, 300))) for i in range(300)]
    counts = [len(x) for x in data]
    stream = Stream(data, rng)
    got = medians(stream, counts, budget_values=100, bins=4)
    assert got == [float(np.median(x)) for x in data]  # reference: np.median
    assert stream.calls > 10  # the budget forced batches and several narrowing levels
    # after the first look at every query (two numbers each), each query in a pass holds at least one
    # value of the budget of 100
    assert len(stream.asked[0]) == 300 and all(len(asked) <= 100 for asked in stream.asked[1:])


def test_passes_ask_only_for_unfinished_queries() -> None:
    rng = np.random.default_rng(3)
    small, large = rng.normal(size=50), rng.normal(size=5000)
    stream = Stream([small, large], rng)
    got = medians(stream, [50, 5000], budget_values=1000, bins=16)
    assert got == [float(np.median(small)), float(np.median(large))]  # reference: np.median
    assert stream.asked[0] == [0, 1]
    assert all(asked == [1] for asked in stream.asked[1:])  # the small one was done in the first pass
    assert stream.calls == 3  # bounds, one narrowing level, then collect the wanted bin


def test_everything_that_fits_takes_one_pass() -> None:
    rng = np.random.default_rng(4)
    data = [rng.normal(size=n) for n in (10, 1000, 30_000)]
    stream = Stream(data, rng)
    assert medians(stream, [len(x) for x in data]) == [float(np.median(x)) for x in data]
    assert stream.calls == 1


def test_counts_of_zero_give_none() -> None:
    rng = np.random.default_rng(5)
    x = rng.normal(size=11)
    stream = Stream([np.zeros(0), x], rng)
    assert medians(stream, [0, 11]) == [None, float(np.median(x))]  # reference: np.median


def test_a_pass_that_disagrees_with_the_counts_is_refused() -> None:
    rng = np.random.default_rng(6)
    x = rng.normal(size=100)
    with pytest.raises(ValueError, match="expected"):
        select(Stream([x], rng), [99], [[5]])
    with pytest.raises(ValueError, match="expected"):
        select(Stream([x], rng), [101], [[5]], budget_values=10)


def test_bad_input_is_refused() -> None:
    rng = np.random.default_rng(8)
    x = rng.normal(size=20)
    with pytest.raises(ValueError, match="outside"):
        select(Stream([x], rng), [20], [[20]])
    with pytest.raises(ValueError, match="outside"):
        select(Stream([x], rng), [20], [[-1]])
    for budget in (10_000, 10):
        y = x.copy()
        y[7] = np.nan
        with pytest.raises(ValueError, match="finite"):
            select(Stream([y], rng), [20], [[3]], budget_values=budget)
    with pytest.raises(ValueError, match="budget"):
        select(Stream([x], rng), [20], [[3]], budget_values=2)
    with pytest.raises(ValueError, match=r"range \[0, 100\]"):
        percentile_ranks(20, 100.5)
    with pytest.raises(ValueError, match="one list of ranks per query"):
        select(Stream([x], rng), [20, 3], [[1]])


def test_a_pass_giving_unasked_queries_is_refused() -> None:
    def passes(active: Sequence[int]) -> Iterator[Mapping[int, np.ndarray]]:
        yield {0: np.ones(3), 1: np.ones(3)}

    with pytest.raises(ValueError, match="not asked"):
        select(passes, [3, 3], [[1], []])


@pytest.mark.parametrize("seed", range(20))
def test_bins_are_monotone_and_span_the_range(seed: int) -> None:
    rng = np.random.default_rng(seed)
    x = np.sort(_random_values(rng, KINDS[seed % len(KINDS)], 3000))
    if x[0] == x[-1]:
        x = np.append(x, x[-1] + 1.0)
    bins = int(rng.integers(2, 2000))
    at = bin_of(x, float(x[0]), float(x[-1]), bins)
    assert (np.diff(at) >= 0).all()
    assert at[0] == 0 and at[-1] == bins - 1
    huge = np.array([-1.7e308, -1e307, 0.0, 1e307, 1.7e308])  # a spread beyond the float range
    at = bin_of(huge, -1.7e308, 1.7e308, 4)
    assert at.tolist() == [0, 1, 2, 2, 3]  # shares 0, 0.47, 0.5, 0.53, 1 of the span, by hand


def test_memory_stays_within_the_budget() -> None:
    rng = np.random.default_rng(9)
    x = rng.normal(0, 30, 2_000_000)
    piece = 20_000

    def passes(active: Sequence[int]) -> Iterator[Mapping[int, np.ndarray]]:
        for a in range(0, len(x), piece):
            yield {0: x[a:a + piece]}  # views: the pass itself allocates nothing

    want = [float(v) for v in np.sort(x)[[0, 999_999, 1_000_000, 1_990_000]]]  # reference: np.sort
    tracemalloc.start()
    try:
        got = select(passes, [len(x)], [[0, 999_999, 1_000_000, 1_990_000]], budget_values=100_000)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert got == [want]
    assert peak < 2_000_000  # bytes: the 16 MB array is never copied; budget 800 kB plus piece temporaries
