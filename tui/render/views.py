"""The plain snapshots the screens draw: one per channel, group, slider and for the link, and the
selected channel's recent history and noise spectrum for the detail panel.

They are built by `tui.source` from the live session once per screen frame, so drawing never reaches
into the engine while it runs, and the same snapshots can be printed by the headless output.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from processing.history import LongSeries
from processing.measure import NoiseSpectrum


@dataclass(frozen=True, slots=True)
class ChannelView:
    index: int
    name: str
    reading: int
    baseline: int
    delta: int
    state: str
    threshold: int
    release: int  # threshold minus hysteresis: the delta below which a touch ends
    noise_pp: float | None = None
    noise_rms: float | None = None
    snr: float | None = None
    verdict: str | None = None
    spark: tuple[float, ...] = ()
    group: str | None = None
    edited: bool = False  # differs from the profile on disk
    polarity: int | None = 1  # +1 counts rise on touch, -1 fall, None while it is learned
    provisional: bool = False  # settings from its noise (no profile, not edited)
    phase: str = "ready"  # "measuring" its quiet second, "learning" its direction, or "ready"


@dataclass(frozen=True, slots=True)
class GroupView:
    name: str
    members: tuple[str, ...]
    winner: str | None


@dataclass(frozen=True, slots=True)
class SliderView:
    name: str
    members: tuple[str, ...]
    position: int | None  # None while not touched
    resolution: int


@dataclass(frozen=True, slots=True)
class LinkView:
    port: str
    baud: int
    state: str  # a protocol LinkState value
    fps: float
    frames: int = field(default=0, compare=False)  # grows every frame: not a reason to redraw
    lost: int = 0
    garbled: int = 0
    bad_checksum: int = 0
    resets: int = 0
    overflow: int = 0
    detail: str = ""
    board: str | None = None
    recording: str | None = None  # path while recording
    recording_error: str | None = None  # why the last recording stopped by itself (a full disk)
    profile_name: str = "(defaults)"
    unsaved: bool = False
    paused: bool = False
    saving: bool = False  # a profile or export is being written (off the screen's thread)
    silent_s: int | None = None  # whole seconds without a frame while connected (None: frames arrive)
    scale: int = 1  # a plain form's fixed scale: readings are the printed values x scale (PROTOCOL.md 6)
    silence: str = "NO FRAMES"  # "SILENT" while the link reports no bytes at all (its `silent` event)
    twin: int | None = None  # frames where the board's own key states disagreed with padtune's (None:
    #                          the board sends no states, PROTOCOL.md section 3)
    extra: dict[str, int] = field(default_factory=dict)


@dataclass(frozen=True, slots=True)
class Series:
    """Reading and baseline over time for one channel (counts; t in seconds, newest last)."""

    t_s: np.ndarray
    reading: np.ndarray
    baseline: np.ndarray
    polarity: int


# What the detail panel draws for the spectrum: processing's own figures (its bins and finding, or how
# many untouched frames are collected of how many it needs), under the name the sources use.
Spectrum = NoiseSpectrum


@dataclass(frozen=True, slots=True)
class LongView:
    """The detail panel's zoomed-out plot: one channel's decimated history (`processing.history`) over
    the last `window_s` seconds (None: the whole session), with what the panel says about it."""

    series: LongSeries
    now_s: float  # host time of the newest frame: the plot's 0
    window_s: float | None
    session_s: float  # how long the history covers
    polarity: int
    bucket_s: float  # one bucket's length at the board's rate

    def drift_counts(self) -> float:
        """How far the baseline moved across the view (newest bucket's middle minus the oldest's)."""
        s = self.series
        mid = (s.baseline_min + s.baseline_max) / 2
        return float(mid[-1] - mid[0]) if len(mid) else 0.0

    def covered_s(self) -> float:
        s = self.series
        return float(self.now_s - s.t_first_s[0]) if len(s) else 0.0


def time_unit(span_s: float) -> tuple[str, float]:
    """The plot's time axis unit for a span: seconds up to 2 min, minutes up to 2 h, then hours."""
    if span_s <= 120:
        return "s", 1.0
    if span_s <= 7200:
        return "min", 60.0
    return "h", 3600.0


def span_words(span_s: float) -> str:
    """`45 s`, `12 min`, `1.5 h`: a span in the unit the axis uses."""
    unit, scale = time_unit(span_s)
    value = span_s / scale
    text = f"{value:.1f}" if value < 10 else f"{value:.0f}"
    return f"{text[:-2] if text.endswith('.0') else text} {unit}"
