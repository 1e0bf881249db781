"""A lot's statistics from its units' results (pure: `UnitRecord`s in, a `LotSummary` out).

A unit tested more than once counts once: its first test decides the first-pass yield, its latest
test the final yield, the failures and the distributions (a retested unit's newest answer is the one
that ships). Units are told apart by `UnitRecord.key` (unit id, else serial, else each test alone).
Tests that ended in a setup error (`error`: no data, a port that would not open) have no verdict: they
are counted and listed, never in the yield.

Distributions per channel (baseline, noise pp, SNR) over the units' latest tests: count, min, median,
max, and the spread as the sample standard deviation and the quartiles (Python's `statistics`
definitions: `median`, `stdev`, `quantiles(method="inclusive")`; the code computes them itself).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from processing.results_db import UnitRecord

MEASURES = ("baseline", "noise_pp", "snr")


@dataclass(frozen=True)
class Distribution:
    n: int
    min: float
    q1: float
    median: float
    q3: float
    max: float
    stdev: float | None  # sample standard deviation; None below two values
    values: tuple[float, ...]

    def as_dict(self) -> dict[str, Any]:
        r = lambda v: None if v is None else round(v, 3)  # noqa: E731
        return {"n": self.n, "min": r(self.min), "q1": r(self.q1), "median": r(self.median),
                "q3": r(self.q3), "max": r(self.max), "stdev": r(self.stdev)}


def _quantile(xs: Sequence[float], p: float) -> float:
    """The p-quantile of sorted `xs` by linear interpolation between order statistics (the
    'inclusive' method: position p * (n - 1))."""
    pos = p * (len(xs) - 1)
    lo = math.floor(pos)
    hi = min(lo + 1, len(xs) - 1)
    return xs[lo] + (xs[hi] - xs[lo]) * (pos - lo)


def distribution(values: Sequence[float]) -> Distribution | None:
    """min, quartiles, median, max and sample standard deviation of finite `values` (None if none)."""
    xs = sorted(float(v) for v in values if v is not None and math.isfinite(v))
    if not xs:
        return None
    n = len(xs)
    stdev = None
    if n >= 2:
        mean = math.fsum(xs) / n
        stdev = math.sqrt(math.fsum((x - mean) ** 2 for x in xs) / (n - 1))
    return Distribution(n, xs[0], _quantile(xs, 0.25), _quantile(xs, 0.5), _quantile(xs, 0.75), xs[-1],
                        stdev, tuple(xs))


@dataclass
class ChannelStats:
    name: str
    index: int
    failed_units: int = 0
    failures_by_check: dict[str, int] = field(default_factory=dict)
    measures: dict[str, Distribution | None] = field(default_factory=dict)


@dataclass
class LotSummary:
    tests: int
    units: int
    judged: int  # units whose latest test has a verdict
    passed: int  # of those, passed on their latest test
    first_pass: int  # units whose first judged test passed
    errors: list[UnitRecord]
    failed_units: list[UnitRecord]
    failures_by_check: dict[str, int]  # check -> units failing it on their latest test
    channels: list[ChannelStats]

    @property
    def yield_pct(self) -> float | None:
        return 100.0 * self.passed / self.judged if self.judged else None

    @property
    def first_pass_yield_pct(self) -> float | None:
        return 100.0 * self.first_pass / self.judged if self.judged else None

    def as_dict(self) -> dict[str, Any]:
        r = lambda v: None if v is None else round(v, 2)  # noqa: E731
        return {
            "type": "lot", "tests": self.tests, "units": self.units, "judged": self.judged,
            "passed": self.passed, "failed": self.judged - self.passed, "yield_pct": r(self.yield_pct),
            "first_pass": self.first_pass, "first_pass_yield_pct": r(self.first_pass_yield_pct),
            "errors": [{"unit": u.key, "port": u.port, "reason": u.reason} for u in self.errors],
            "failed_units": [{"unit": u.key, "port": u.port, "started_utc": u.started_utc,
                              "channels": [c["name"] for c in u.channels if not c["passed"]],
                              "reason": u.reason} for u in self.failed_units],
            "failures_by_check": dict(self.failures_by_check),
            "channels": [{"name": c.name, "index": c.index, "failed_units": c.failed_units,
                          "failures_by_check": dict(c.failures_by_check),
                          **{m: (d.as_dict() if d else None) for m, d in c.measures.items()}}
                         for c in self.channels]}


def summarise(records: Sequence[UnitRecord]) -> LotSummary:
    """The lot's yield, failures and distributions from every test in it (oldest first)."""
    first: dict[str, UnitRecord] = {}
    latest: dict[str, UnitRecord] = {}
    errors_only: dict[str, UnitRecord] = {}
    for rec in records:
        if rec.status == "error":
            errors_only[rec.key] = rec
            continue
        first.setdefault(rec.key, rec)
        latest[rec.key] = rec
    errors = [rec for key, rec in errors_only.items() if key not in latest]
    judged = list(latest.values())
    failed = [u for u in judged if u.status != "pass"]
    by_check: dict[str, int] = {}
    chans: dict[int, ChannelStats] = {}
    samples: dict[int, dict[str, list[float]]] = {}
    for u in judged:
        unit_checks: set[str] = set()
        for ch in u.channels:
            st = chans.setdefault(ch["index"], ChannelStats(ch["name"], ch["index"]))
            bad = [name for name, result in ch.get("checks", {}).items() if result == "fail"]
            if bad or not ch["passed"]:
                st.failed_units += 1
            for name in bad:
                st.failures_by_check[name] = st.failures_by_check.get(name, 0) + 1
            unit_checks.update(bad)
            per = samples.setdefault(ch["index"], {m: [] for m in MEASURES})
            for m in MEASURES:
                if ch.get(m) is not None:
                    per[m].append(ch[m])
        for name in unit_checks:
            by_check[name] = by_check.get(name, 0) + 1
    for index, st in chans.items():
        st.measures = {m: distribution(samples[index][m]) for m in MEASURES}
    return LotSummary(
        tests=len(records), units=len(latest) + len(errors), judged=len(judged),
        passed=len(judged) - len(failed), first_pass=sum(1 for u in first.values() if u.status == "pass"),
        errors=errors, failed_units=failed, failures_by_check=dict(sorted(by_check.items())),
        channels=[chans[i] for i in sorted(chans)])
