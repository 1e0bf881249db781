"""Exact order statistics (medians, percentiles, any rank) of value streams read a pass at a time.

Streaming tuning never holds a whole recording, yet its medians and percentiles must equal, bit for bit,
what numpy gives on the whole array. `select` finds the values of given ranks (0-based, ascending order)
by going through the data several times: a query whose values fit the memory budget is collected in one
pass and partitioned; a larger one is narrowed first (a pass for its least and greatest value, then
passes that count its values in equal-width bins and keep only the bin holding a wanted rank) until what
is left fits, or is a single repeated value.

Why the bins are exact: the bin of x, floor((x - lo) / (hi - lo) * bins) clipped, is monotone
non-decreasing in x under IEEE rounding (each step rounds a monotone function), so a bin is a stretch of
the sorted order and its values are exactly those between its least and greatest value. Each level keeps
the least and greatest value of every bin, so the next level's candidates are simply the values within
[least, greatest] of the bin kept: one interval, no chain of tests. The least value always lands in the
first bin and the greatest in the last, so every level drops at least one value: narrowing ends.

Signed zeros: results equal numpy's as floats compare (`==`), and bit for bit unless the values hold
both -0.0 and +0.0: then which zero numpy returns follows the order its partition leaves equal values
in, which no pass-wise method can see. Producers of values keep -0.0 out (x + 0.0 is +0.0 for x = -0.0;
the deltas of `processing.baseline_stream` do).

Memory: values collected in one pass stay within `budget_values`; a query being narrowed costs three
arrays of its bins (counts, least, greatest: `bins` at most, fewer for a smaller query), charged to the
same budget; queries that do not fit wait for a later pass. Beyond the budget, a handful of numbers per
query (its ranks, its first look's least and greatest value). Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

# passes(active) starts a fresh pass: piece after piece, query index -> its float64 values in the piece
# (only queries in `active`; a query left out of a piece has no values there). Every pass is the same.
Passes = Callable[[Sequence[int]], Iterator[Mapping[int, np.ndarray]]]

BUDGET_VALUES = 1 << 20  # values collected in one pass at most: 8 MiB of float64
BINS = 1024  # bins per narrowing level: each level keeps about 1/1024 of a spread-out query
MIN_BUDGET_VALUES = 8


@dataclass(slots=True)
class _Task:
    """Ranks of one query still to find, all among its `n` values within [lo, hi] (every value when lo
    is None), `below` of its values being less than lo."""

    query: int
    ranks: list[int]
    n: int
    below: int = 0
    lo: float | None = None
    hi: float | None = None

    def inside(self, values: np.ndarray) -> np.ndarray:
        if self.lo is None:
            return values
        return values[(values >= self.lo) & (values <= self.hi)]


Answers = dict[tuple[int, int], float]  # (query, rank) -> value


def _mismatch(task: _Task, seen: int) -> ValueError:
    return ValueError(f"query {task.query}: a pass gave {seen} values where {task.n} were expected "
                      "(counts wrong, or passes that differ)")


def _check_finite(task: _Task, values: np.ndarray) -> None:
    if not np.isfinite(values).all():
        raise ValueError(f"query {task.query}: values must be finite numbers (NaN or infinity found)")


@dataclass(slots=True)
class _Collect:
    """Gather the task's candidates into one array of exactly `n`, then partition it."""

    task: _Task
    buffer: np.ndarray = field(init=False)
    at: int = 0

    def __post_init__(self) -> None:
        self.buffer = np.empty(self.task.n, np.float64)

    def cost(self) -> int:
        return self.task.n

    def feed(self, values: np.ndarray) -> None:
        if self.task.lo is None:
            _check_finite(self.task, values)
        chosen = self.task.inside(values)
        end = self.at + len(chosen)
        if end > self.task.n:
            raise _mismatch(self.task, end)
        self.buffer[self.at:end] = chosen
        self.at = end

    def finish(self) -> tuple[Answers, list[_Task]]:
        t = self.task
        if self.at != t.n:
            raise _mismatch(t, self.at)
        local = sorted({r - t.below for r in t.ranks})
        self.buffer.partition(local)
        return {(t.query, r): float(self.buffer[r - t.below]) for r in t.ranks}, []


@dataclass(slots=True)
class _Bounds:
    """First look at a large query: its least and greatest value (and a check of its count)."""

    task: _Task
    seen: int = 0
    lo: float = math.inf
    hi: float = -math.inf

    def cost(self) -> int:
        return 0

    def feed(self, values: np.ndarray) -> None:
        if not len(values):
            return
        _check_finite(self.task, values)
        self.seen += len(values)
        self.lo = min(self.lo, float(values.min()))
        self.hi = max(self.hi, float(values.max()))

    def finish(self) -> tuple[Answers, list[_Task]]:
        t = self.task
        if self.seen != t.n:
            raise _mismatch(t, self.seen)
        if self.lo == self.hi:
            return {(t.query, r): self.lo for r in t.ranks}, []
        return {}, [_Task(t.query, t.ranks, t.n, 0, self.lo, self.hi)]


def bin_of(values: np.ndarray, lo: float, hi: float, bins: int) -> np.ndarray:
    """Bin (0 .. bins-1) of each value of [lo, hi] (lo < hi), equal widths, monotone non-decreasing in
    the value; lo falls in bin 0 and hi in the last bin."""
    span = hi - lo
    if not math.isfinite(span):  # a spread beyond the float range: halving such values is exact
        return bin_of(values / 2, lo / 2, hi / 2, bins)
    share = (values - lo) / span
    return np.clip(np.floor(share * bins), 0, bins - 1).astype(np.intp)


@dataclass(slots=True)
class _Histogram:
    """One narrowing level: count the candidates in `bins` equal-width bins over [lo, hi], keeping each
    bin's least and greatest value; the bins holding wanted ranks become the next tasks."""

    task: _Task
    bins: int
    counts: np.ndarray = field(init=False)
    least: np.ndarray = field(init=False)
    greatest: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        self.counts = np.zeros(self.bins, np.int64)
        self.least = np.full(self.bins, np.inf)
        self.greatest = np.full(self.bins, -np.inf)

    def cost(self) -> int:
        return 3 * self.bins

    def feed(self, values: np.ndarray) -> None:
        chosen = self.task.inside(values)
        if not len(chosen):
            return
        at = bin_of(chosen, self.task.lo, self.task.hi, self.bins)
        self.counts += np.bincount(at, minlength=self.bins)
        np.minimum.at(self.least, at, chosen)
        np.maximum.at(self.greatest, at, chosen)

    def finish(self) -> tuple[Answers, list[_Task]]:
        t = self.task
        total = int(self.counts.sum())
        if total != t.n:
            raise _mismatch(t, total)
        ends = np.cumsum(self.counts)
        by_bin: dict[int, list[int]] = {}
        for r in t.ranks:
            k = int(np.searchsorted(ends, r - t.below, side="right"))
            by_bin.setdefault(k, []).append(r)
        answers: Answers = {}
        tasks = []
        for k, ranks in by_bin.items():
            lo, hi = float(self.least[k]), float(self.greatest[k])
            if lo == hi:
                answers.update({(t.query, r): lo for r in ranks})
                continue
            before = int(ends[k - 1]) if k else 0
            tasks.append(_Task(t.query, ranks, int(self.counts[k]), t.below + before, lo, hi))
        return answers, tasks


_Work = _Collect | _Bounds | _Histogram


# A level need not cut a query finer than about this many values a bin (a bin that small is collected
# next pass anyway), and fewer bins let more queries narrow in one pass: bins cost memory like values.
VALUES_PER_BIN = 32


def _bins_for(task: _Task, bins: int) -> int:
    return max(2, min(bins, task.n // VALUES_PER_BIN))


def _narrowing(task: _Task, bins: int) -> _Work:
    return _Bounds(task) if task.lo is None else _Histogram(task, _bins_for(task, bins))


def _narrow_cost(task: _Task, bins: int) -> int:
    """Values' worth of memory one narrowing step holds: a first look keeps two numbers (counted with
    the query itself, not against the budget), a level three arrays of its bins."""
    return 0 if task.lo is None else 3 * _bins_for(task, bins)


def _plan(tasks: list[_Task], budget: int, bins: int) -> tuple[list[_Work], list[_Task]]:
    """This pass's work within `budget`, and the tasks left waiting. Queries too large for the budget
    narrow first (they need the most passes). Of the others the smallest are collected while they fit;
    when the rest would all fit the next pass they wait for it, otherwise room is kept to narrow them
    now (a narrowed query then shares the next pass easily), collecting fewer."""
    work: list[_Work] = []
    waiting: list[_Task] = []
    left = budget
    for t in tasks:
        if t.n > budget:
            left = _narrow_or_wait(t, bins, left, work, waiting)
    fitting = sorted((t for t in tasks if t.n <= budget), key=lambda t: t.n)
    taken = _collectable(fitting, left, 0, bins)
    if sum(t.n for t in fitting[taken:]) > budget:
        taken = _collectable(fitting, left, sum(_narrow_cost(t, bins) for t in fitting), bins)
        work += [_Collect(t) for t in fitting[:taken]]
        left -= sum(t.n for t in fitting[:taken])
        for t in fitting[taken:]:
            left = _narrow_or_wait(t, bins, left, work, waiting)
        return work, waiting
    work += [_Collect(t) for t in fitting[:taken]]
    return work, waiting + fitting[taken:]


def _collectable(fitting: list[_Task], left: int, reserve: int, bins: int) -> int:
    """How many of `fitting` (smallest first) can be collected in `left`, keeping room to narrow the
    others (`reserve`: what narrowing every one of them would hold)."""
    for i, t in enumerate(fitting):
        reserve -= _narrow_cost(t, bins)
        if t.n + reserve > left:
            return i
        left -= t.n
    return len(fitting)


def _narrow_or_wait(t: _Task, bins: int, left: int, work: list[_Work], waiting: list[_Task]) -> int:
    if _narrow_cost(t, bins) <= left:
        work.append(_narrowing(t, bins))
        return left - _narrow_cost(t, bins)
    waiting.append(t)
    return left


def _run_pass(passes: Passes, work: list[_Work]) -> tuple[Answers, list[_Task]]:
    by_query: dict[int, list[_Work]] = {}
    for w in work:
        by_query.setdefault(w.task.query, []).append(w)
    for piece in passes(sorted(by_query)):
        for q, raw in piece.items():
            if q not in by_query:
                raise ValueError(f"a pass gave values of query {q}, which it was not asked for")
            values = np.asarray(raw, np.float64)
            if values.ndim != 1:
                values = values.reshape(-1)
            for w in by_query[q]:
                w.feed(values)
    answers: Answers = {}
    tasks: list[_Task] = []
    for w in work:
        found, more = w.finish()
        answers.update(found)
        tasks += more
    return answers, tasks


def _initial_tasks(counts: Sequence[int], ranks: Sequence[Sequence[int]]) -> list[_Task]:
    if len(counts) != len(ranks):
        raise ValueError(f"one list of ranks per query: {len(ranks)} lists for {len(counts)} queries")
    tasks = []
    for q, (n, wanted) in enumerate(zip(counts, ranks, strict=True)):
        if n < 0:
            raise ValueError(f"query {q}: a count of values cannot be negative ({n})")
        bad = [r for r in wanted if not 0 <= r < n]
        if bad:
            raise ValueError(f"query {q}: rank {bad[0]} is outside 0 .. {n - 1} ({n} values)")
        if wanted:
            tasks.append(_Task(q, sorted({int(r) for r in wanted}), int(n)))
    return tasks


def select(passes: Passes, counts: Sequence[int], ranks: Sequence[Sequence[int]], *,
           budget_values: int = BUDGET_VALUES, bins: int = BINS) -> list[list[float]]:
    """out[q][i] = the value of 0-based rank ranks[q][i] among query q's `counts[q]` values sorted
    ascending (ValueError for a rank outside [0, counts[q]), NaN or infinite values, or passes that do
    not give `counts[q]` values). At most about `budget_values` values are held at once, narrowing
    bins included, beyond a few numbers per query and the pieces of a pass."""
    if budget_values < MIN_BUDGET_VALUES:
        raise ValueError(f"the budget holds at least {MIN_BUDGET_VALUES} values, not {budget_values}")
    if bins < 2:
        raise ValueError(f"narrowing needs at least 2 bins, not {bins}")
    bins = max(2, min(bins, budget_values // 3))  # one narrowing level always fits the budget
    tasks = _initial_tasks(counts, ranks)
    answers: Answers = {}
    while tasks:
        work, waiting = _plan(tasks, budget_values, bins)
        found, more = _run_pass(passes, work)
        answers.update(found)
        tasks = waiting + more
    return [[answers[(q, int(r))] for r in wanted] for q, wanted in enumerate(ranks)]


# ---------------------------------------------------------------- medians and percentiles as numpy has them


def median_ranks(n: int) -> tuple[int, ...]:
    """The ranks `np.median` of n values reads: the middle one, or the two middle ones when n is even."""
    if n < 1:
        raise ValueError(f"a median needs at least one value, not {n}")
    return (n // 2 - 1, n // 2) if n % 2 == 0 else ((n - 1) // 2,)


def median_from(n: int, values: Sequence[float]) -> float:
    """`np.median` from the values of `median_ranks(n)`: numpy takes the mean of the middle slice, i.e.
    the value itself, or (a + b) / 2 summed then divided in float64."""
    if len(values) != len(median_ranks(n)):
        raise ValueError(f"the median of {n} values needs {len(median_ranks(n))} middle values")
    if n % 2:
        return float(values[0])
    return (float(values[0]) + float(values[1])) / 2.0


def _virtual_index(n: int, q: float) -> float:
    if not 0.0 <= q <= 100.0:
        raise ValueError(f"percentiles must be in the range [0, 100], not {q}")
    if n < 1:
        raise ValueError(f"a percentile needs at least one value, not {n}")
    return float(n - 1) * (float(q) / 100.0)  # numpy's "linear" method: (n - 1) * (q / 100)


def percentile_ranks(n: int, q: float) -> tuple[int, ...]:
    """The ranks `np.percentile(x, q)` (method "linear") reads for n values: the two neighbours of its
    virtual index, or the last value when the index reaches it."""
    index = _virtual_index(n, q)
    if index >= n - 1:
        return (n - 1,)
    below = math.floor(index)
    return (below, below + 1)


def percentile_from(n: int, q: float, values: Sequence[float]) -> float:
    """`np.percentile(x, q)` from the values of `percentile_ranks(n, q)`, as numpy's `_lerp` computes it:
    a + (b - a) * t, or b - (b - a) * (1 - t) when t >= 0.5, t the virtual index less its floor."""
    ranks = percentile_ranks(n, q)
    if len(values) != len(ranks):
        raise ValueError(f"the {q} percentile of {n} values needs {len(ranks)} neighbouring values")
    if len(ranks) == 1:
        return float(values[0])  # numpy interpolates the last value with itself: exactly that value
    index = _virtual_index(n, q)
    a, b = float(values[0]), float(values[1])
    t = index - math.floor(index)
    diff = b - a
    return b - diff * (1.0 - t) if t >= 0.5 else a + diff * t


def medians(passes: Passes, counts: Sequence[int], **select_kw: int) -> list[float | None]:
    """`np.median` of each query's values (None for a query with none), in as few passes as the budget
    allows (keywords as `select`)."""
    ranks = [median_ranks(n) if n > 0 else () for n in counts]
    found = select(passes, counts, ranks, **select_kw)
    return [median_from(n, v) if n > 0 else None for n, v in zip(counts, found, strict=True)]
