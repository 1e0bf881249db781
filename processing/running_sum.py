"""A compensated running sum of floats, for figures summed a piece at a time over a recording of any
length (the RMS of streaming tuning): Neumaier's variant of Kahan summation (A. Neumaier, "Rundungsfehler-
analyse einiger Verfahren zur Summation endlicher Summen", ZAMM 54, 1974; from memory). Its error stays
about one rounding of the total whatever the number of terms, in two floats of memory. Pure, no I/O.
"""

from __future__ import annotations


class RunningSum:
    """`add(x)` term by term; `value` the sum, compensated."""

    __slots__ = ("carry", "total")

    def __init__(self) -> None:
        self.total = 0.0
        self.carry = 0.0

    def add(self, x: float) -> None:
        t = self.total + x
        if abs(self.total) >= abs(x):
            self.carry += (self.total - t) + x
        else:
            self.carry += (x - t) + self.total
        self.total = t

    @property
    def value(self) -> float:
        return self.total + self.carry
