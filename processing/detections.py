"""The detection events the engine, groups and sliders report: small frozen dataclasses.

`index` is the frame index from the FrameBlock (`first_index + row`), `t_s` the host time of that frame.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum


class KeyState(IntEnum):
    """Detection state of one channel. The integer values are the ones the C library uses."""

    RELEASED = 0
    CONFIRMING = 1  # delta reached the threshold; counting the touch debounce
    TOUCHED = 2
    RELEASING = 3  # delta fell below threshold - hysteresis; counting the release debounce

    @property
    def reported_touched(self) -> bool:
        return self in (KeyState.TOUCHED, KeyState.RELEASING)


@dataclass(frozen=True, slots=True)
class Touch:
    channel: int
    index: int
    t_s: float
    delta_counts: int


@dataclass(frozen=True, slots=True)
class Release:
    channel: int
    index: int
    t_s: float
    held_s: float
    held_frames: int
    delta_counts: int


@dataclass(frozen=True, slots=True)
class StuckRelease:
    """A key held longer than its stuck timeout: released and re-baselined at this frame."""

    channel: int
    index: int
    t_s: float
    held_s: float
    held_frames: int
    delta_counts: int


@dataclass(frozen=True, slots=True)
class Rebaselined:
    """The baseline was set to this frame's reading (on demand, new session or board reset)."""

    channel: int
    index: int
    t_s: float
    was_touched: bool


@dataclass(frozen=True, slots=True)
class GroupChange:
    """The reported member of an exclusive group changed; `channel` None means none is touched."""

    group: str
    index: int
    t_s: float
    channel: int | None


@dataclass(frozen=True, slots=True)
class SliderChange:
    """A slider or wheel moved, was touched or was released. `position` is None when untouched."""

    slider: str
    index: int
    t_s: float
    position: int | None
    touched: bool


DetectionEvent = Touch | Release | StuckRelease | Rebaselined | GroupChange | SliderChange
