"""The production check of one unit against a profile's acceptance limits (pure: events in, verdicts out).

`UnitProbe` collects what the check needs while a session runs (fed by `padtune check` through the
front end's pipeline, or by a test with made-up frames); `evaluate` gives every channel's verdict with
its reasons. No I/O, no clock: the front end (`tui.headless.production`) decides the phases' timing.

Phase 1, hands off: every channel must be alive (its baseline inside `baseline_min_counts ..
baseline_max_counts`; outside it in the direction of less capacitance is an open pad, of more capacitance
a shorted pad), quiet (noise pp and RMS of the released deltas below `max_noise_pp_counts` and
`max_noise_rms_counts`) and untouched (a key that the profile's settings report as touched while nobody
touches the panel is stuck). Phase 2, with `--touch`: each key in turn is touched; its touch must be
detected with the profile's settings, and its SNR (median touched delta / hands-off noise pp) must reach
`min_snr_pp`. A limit the profile leaves out is reported as not checked, never as passed silently.

Limits are per channel: `evaluate` takes one `Limits` for every channel or one per channel
(`Profile.limits_for`), and each verdict's reason quotes the limit it was judged by.
`missing_limits` says which channels a strict check (the default of `padtune check`) cannot judge.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from processing.detections import DetectionEvent, KeyState, Release, StuckRelease, Touch
from processing.session import Session
from processing.settings import Limits
from protocol.events import Event, FrameBlock

PASS, FAIL, UNCHECKED = "pass", "fail", "not checked"
BASELINE_KEYS = ("baseline_min_counts", "baseline_max_counts")
NOISE_KEYS = ("max_noise_pp_counts", "max_noise_rms_counts")
Phase = Literal["quiet", "touch"]
MIN_TOUCH_FRAMES = 3


@dataclass
class ChannelVerdict:
    channel: int
    name: str
    baseline_counts: float | None
    noise_pp_counts: float | None
    noise_rms_counts: float | None
    signal_counts: float | None = None
    snr_pp: float | None = None
    stuck_at_s: float | None = None
    checks: dict[str, str] = field(default_factory=dict)
    reasons: list[str] = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return FAIL not in self.checks.values()

    def as_dict(self) -> dict[str, Any]:
        def num(v: float | None) -> float | None:
            return None if v is None or not math.isfinite(v) else round(float(v), 3)

        return {"name": self.name, "index": self.channel, "passed": self.passed,
                "baseline": num(self.baseline_counts), "noise_pp": num(self.noise_pp_counts),
                "noise_rms": num(self.noise_rms_counts), "signal": num(self.signal_counts),
                "snr": num(self.snr_pp), "stuck_at_s": num(self.stuck_at_s), "checks": dict(self.checks),
                "reasons": list(self.reasons)}


class UnitProbe:
    """Collects what the check needs from a running session, phase by phase."""

    def __init__(self, session: Session, origin_t_s: float) -> None:
        self.session, self.origin_t_s = session, origin_t_s
        self.phase: Phase = "quiet"  # hands off, then "touch": each key in turn
        self.quiet_frames = 0
        self.t_s: list[np.ndarray] = []
        self.readings: list[np.ndarray] = []
        self.deltas: list[np.ndarray] = []
        self.states: list[np.ndarray] = []
        self.touched_at: dict[int, float] = {}  # channel -> first touch with hands off (run time)
        self.quiet_touches: dict[int, int] = {}  # channel -> touches reported with hands off
        self.touch_samples: dict[int, list[int]] = {}  # phase 2: touched deltas per key
        self.touch_seen: set[int] = set()
        self.done_keys: set[int] = set()

    def feed(self, events: Iterable[Event]) -> list[DetectionEvent]:
        """Hand `events` to the session one by one (each block's deltas are read right after it ran)."""
        detections: list[DetectionEvent] = []
        for ev in events:
            found = self.session.handle([ev])
            detections.extend(found)
            if isinstance(ev, FrameBlock) and self.session.engine is not None and len(ev):
                self._frames(ev)
            for det in found:
                self._detection(det)
        return detections

    def _frames(self, block: FrameBlock) -> None:
        eng = self.session.engine
        assert eng is not None
        if self.phase == "quiet":
            self.quiet_frames += len(block)
            self.t_s.append(block.t_s - self.origin_t_s)
            self.readings.append(np.asarray(block.readings))
            self.deltas.append(eng.last_deltas.copy())
            self.states.append(eng.last_states.copy())
            return
        touched = eng.last_states == KeyState.TOUCHED
        for c in np.flatnonzero(touched.any(axis=0)).tolist():
            if c in self.touch_seen:
                self.touch_samples.setdefault(c, []).extend(eng.last_deltas[touched[:, c], c].tolist())

    def _detection(self, det: DetectionEvent) -> None:
        if isinstance(det, Touch):
            if self.phase == "quiet":
                self.touched_at.setdefault(det.channel, det.t_s - self.origin_t_s)
                self.quiet_touches[det.channel] = self.quiet_touches.get(det.channel, 0) + 1
            else:
                self.touch_seen.add(det.channel)
        elif (isinstance(det, Release | StuckRelease) and self.phase == "touch"
              and len(self.touch_samples.get(det.channel, [])) >= MIN_TOUCH_FRAMES):
            self.done_keys.add(det.channel)

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        if not self.readings:
            z = np.zeros((0, 0), np.int64)
            return np.zeros(0), z, z, z
        width = self.readings[-1].shape[1]
        keep = [i for i, r in enumerate(self.readings) if r.shape[1] == width]
        return tuple(np.concatenate([part[i] for i in keep]) for part in
                     (self.t_s, self.readings, self.deltas, self.states))  # type: ignore[return-value]


def touch_figures(probe: UnitProbe, channel: int) -> tuple[float | None, float | None]:
    """(median touched delta, SNR pp) of one key so far, for the operator's prompt."""
    samples = probe.touch_samples.get(channel, [])
    if not samples:
        return None, None
    signal = float(np.median(samples))
    _, _, deltas, states = probe.arrays()
    quiet = deltas[states[:, channel] == KeyState.RELEASED, channel] if len(states) else np.zeros(0)
    pp = float(quiet.max() - quiet.min()) if len(quiet) >= 8 else None
    return signal, (signal / pp if pp else None)


def _alive(v: ChannelVerdict, limits: Limits, polarity: int) -> None:
    lo, hi = limits.baseline_min_counts, limits.baseline_max_counts
    if (lo is None and hi is None) or v.baseline_counts is None:
        v.checks["alive"] = UNCHECKED if v.baseline_counts is not None else FAIL
        if v.baseline_counts is None:
            v.reasons.append("no frames: dead channel")
        return
    b = v.baseline_counts
    span = f"{'-inf' if lo is None else lo}..{'inf' if hi is None else hi}"
    above = hi is not None and b > hi
    if above or (lo is not None and b < lo):
        # Counts rise with capacitance when a touch raises them (polarity +1), and fall otherwise.
        more_capacitance = above if polarity > 0 else not above
        kind = "shorted pad" if more_capacitance else "open pad"
        side = "above" if above else "below"
        what = "more" if more_capacitance else "less"
        v.checks["alive"] = FAIL
        v.reasons.append(f"{kind}? baseline {b:.0f} is {side} the allowed {span} "
                         f"({what} capacitance than a healthy pad)")
    else:
        v.checks["alive"] = PASS


def _noise(v: ChannelVerdict, limits: Limits) -> None:
    pairs = ((limits.max_noise_pp_counts, v.noise_pp_counts, "pp"),
             (limits.max_noise_rms_counts, v.noise_rms_counts, "RMS"))
    if all(limit is None for limit, _, _ in pairs):
        v.checks["noise"] = UNCHECKED
        return
    over = [f"{form} {value:.1f} counts (limit {limit:g})" for limit, value, form in pairs
            if limit is not None and value is not None and value > limit]
    unmeasured = any(limit is not None and value is None for limit, value, _ in pairs)
    v.checks["noise"] = FAIL if over or unmeasured else PASS
    if over:
        v.reasons.append("noisy pad: noise " + ", ".join(over))
    elif unmeasured:
        v.reasons.append("noise not measured: too few released frames")


def missing_limits(limits: Sequence[Limits], touch: bool) -> dict[int, list[str]]:
    """Channel -> what it has no limit for ("baseline range", "noise", with `touch` "SNR"): a strict
    check refuses to start rather than pass a channel it cannot judge."""
    out: dict[int, list[str]] = {}
    for c, lim in enumerate(limits):
        lacks = [what for what, keys in (("baseline range", BASELINE_KEYS), ("noise", NOISE_KEYS))
                 if all(getattr(lim, k) is None for k in keys)]
        if touch and lim.min_snr_pp is None:
            lacks.append("SNR")
        if lacks:
            out[c] = lacks
    return out


def evaluate(probe: UnitProbe, limits: Limits | Sequence[Limits], names: list[str], polarity: list[int],
             touch: bool) -> list[ChannelVerdict]:
    """The verdict of every channel from the collected phases, each by its own limits (one `Limits`
    for all, or one per channel)."""
    _, readings, deltas, states = probe.arrays()
    out = []
    for c, name in enumerate(names):
        lim = limits if isinstance(limits, Limits) else limits[c]
        released = states[:, c] == KeyState.RELEASED if len(states) else np.zeros(0, bool)
        r = readings[released, c] if released.any() else readings[:, c] if len(readings) else np.zeros(0)
        d = deltas[released, c] if released.any() else np.zeros(0)
        baseline = float(np.median(r)) if len(r) else None
        pp = float(d.max() - d.min()) if len(d) >= 8 else None
        rms = float(np.std(d)) if len(d) >= 8 else None
        v = ChannelVerdict(c, name, baseline, pp, rms)
        _alive(v, lim, polarity[c] if c < len(polarity) else 1)
        _noise(v, lim)
        _stuck(v, probe, states)
        if touch:
            _snr(v, probe, lim)
        out.append(v)
    return out


def _stuck(v: ChannelVerdict, probe: UnitProbe, states: np.ndarray) -> None:
    """Touched with hands off: held to the end is a stuck key; touch after touch with a failed noise
    check is noise making false touches (the noise reason says how much)."""
    c = v.channel
    held = bool(len(states)) and states[-1, c] in (KeyState.TOUCHED, KeyState.RELEASING)
    count = probe.quiet_touches.get(c, 0)
    if not held and count == 0:
        v.checks["stuck"] = PASS
        return
    v.checks["stuck"] = FAIL
    v.stuck_at_s = probe.touched_at.get(c)
    when = f" from {v.stuck_at_s:.1f} s" if v.stuck_at_s is not None else ""
    times = "once" if count == 1 else f"{count} times"
    if not held and v.checks.get("noise") == FAIL:
        v.reasons.append(f"false touches: reported touched {times} with hands off, from its noise")
    elif held:
        v.reasons.append(f"stuck key: reported touched{when} while nobody touched the panel")
    else:
        v.reasons.append(f"false touches: reported touched {times}{when} while nobody touched the panel")


def _snr(v: ChannelVerdict, probe: UnitProbe, limits: Limits) -> None:
    samples = probe.touch_samples.get(v.channel, [])
    if v.channel not in probe.touch_seen or len(samples) < MIN_TOUCH_FRAMES:
        v.checks["touch"] = FAIL
        v.reasons.append("no touch detected with the profile's settings (dead key or threshold too high)")
        return
    v.checks["touch"] = PASS
    v.signal_counts = float(np.median(samples))
    if v.noise_pp_counts:
        v.snr_pp = v.signal_counts / v.noise_pp_counts
    elif v.noise_pp_counts == 0:
        v.snr_pp = math.inf
    if limits.min_snr_pp is None:
        v.checks["snr"] = UNCHECKED
    elif v.snr_pp is None or v.snr_pp < limits.min_snr_pp:
        v.checks["snr"] = FAIL
        shown = "unknown" if v.snr_pp is None else f"{v.snr_pp:.1f}"
        v.reasons.append(f"weak touch: SNR {shown} is below the limit {limits.min_snr_pp:g}")
    else:
        v.checks["snr"] = PASS
