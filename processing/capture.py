"""Guided capture and touch finding: the pure logic behind the capture wizard and `padtune tune`.

`CaptureWizard` sequences the steps (hands off, then per key "touch and hold" and "release"), notices when
nothing happened (or the wrong key moved) and asks again, and collects untouched and touched deltas per
key. It is fed FrameBlocks and the current time, so it runs the same under Textual, a script or a test.

Deltas here are measured against the wizard's own per-key baseline: the mean reading of the last second
in which that key was not being touched (frozen from the moment its own step starts), so an untuned
threshold that lets the engine's baseline creep under a finger cannot shrink the touch signal.

`choose_keys` reads which keys to capture from what a user typed (numbers, ranges, names, a group's
name); `key_ranges` writes a set of keys back in the same words.

`processing.touch_search` does the same job on a recording.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from processing.crosstalk import Coupling, TouchedNoise, couplings, touched_noise
from processing.measure import VerdictBounds, rests_on
from processing.recording import Mark
from processing.settings import ChannelSettings
from processing.slider import SliderSpec
from processing.stretches import KeyFigures, expand_polarity, key_figures
from processing.suggest import Refusal, Suggestion, suggest
from protocol.events import FrameBlock

QUIET, TOUCH, RELEASE, DONE = "quiet", "touch", "release", "done"


# ---------------------------------------------------------------- which keys


def steps_for(keys: int) -> int:
    """Steps of a capture of `keys` keys: hands off once, then touch and release each."""
    return 1 + 2 * keys


def _number(text: str, count: int) -> int | None:
    """A key number as the table shows it (1 = the first key) to a channel, None when not a number."""
    if not text.isdigit():
        return None
    n = int(text)
    if not 1 <= n <= count:
        raise ValueError(f"there is no key {n}: keys are numbered 1-{count}")
    return n - 1


def _item(item: str, names: Sequence[str], sets: Mapping[str, Sequence[int]]) -> list[int]:
    """One comma- or space-separated item of `choose_keys`."""
    index = {name: c for c, name in enumerate(names)}
    folded = {name.casefold(): c for c, name in enumerate(names)}
    if item in index:  # a key's own name wins over every other reading (names may hold digits and -)
        return [index[item]]
    if item.casefold() in folded:
        return [folded[item.casefold()]]
    if (chosen := _number(item, len(names))) is not None:
        return [chosen]
    named_sets = {k.casefold(): v for k, v in sets.items()}
    if item.casefold() in named_sets:
        return list(named_sets[item.casefold()])
    for m in re.finditer("-", item):  # a range: numbers or names either side of one of its dashes
        left, right = item[:m.start()], item[m.end():]
        ends = []
        for end in (left, right):
            c = index.get(end, folded.get(end.casefold()))
            if c is None and end.isdigit():
                c = _number(end, len(names))
            ends.append(c)
        if None not in ends:
            a, b = ends
            assert a is not None and b is not None
            return list(range(a, b + 1)) if a <= b else list(range(a, b - 1, -1))
    example = f"1-{len(names)}" if len(names) > 1 else "1"
    raise ValueError(f"no key {item!r}: give numbers ({example}), ranges such as 3-{max(3, len(names))}, "
                     f"key names such as {names[0]}" + (", or a group's name" if sets else ""))


def choose_keys(text: str, names: Sequence[str],
                sets: Mapping[str, Sequence[int]] | None = None) -> list[int]:
    """The channels a user asks to capture, in the order asked, each once.

    `text` holds items separated by commas or spaces: a key number as the screen shows it (1 is the
    first key), a range of numbers (`3-10`, or `10-3` for the other order), a key's name, a range of
    names (`zone1-zone4`, in board order), or the name of a set (`sets`: exclusive groups, sliders).
    A key's exact name wins over the other readings. Raises ValueError with one line saying what is
    wrong and what would do.
    """
    if not names:
        raise ValueError("no keys yet: the board has not said how many it has")
    text = re.sub(r"\s*-\s*", "-", text.strip())  # "3 - 10" is one range, not three items
    items = [i for i in re.split(r"[,\s]+", text) if i]
    if not items:
        raise ValueError(f"type the keys to capture: numbers 1-{len(names)}, ranges, or names")
    chosen: dict[int, None] = {}
    for item in items:
        chosen.update(dict.fromkeys(_item(item, names, sets or {})))
    return list(chosen)


def key_ranges(channels: Sequence[int], names: Sequence[str]) -> str:
    """Channels in the words `choose_keys` reads: runs of neighbours as `first-last`, others by name."""
    parts: list[str] = []
    run: list[int] = []
    for c in [*channels, None]:
        if run and c is not None and c == run[-1] + 1:
            run.append(c)
            continue
        if run:
            a, b = names[run[0]], names[run[-1]]
            parts.append(a if len(run) == 1 else f"{a} {b}" if len(run) == 2 else f"{a}-{b}")
        run = [] if c is None else [c]
    return ", ".join(parts)


@dataclass(frozen=True, slots=True)
class Step:
    kind: str  # quiet, touch, release
    channel: int | None
    name: str

    def instruction(self) -> str:
        if self.kind == QUIET:
            return "Hands off the panel: measuring noise"
        if self.kind == TOUCH:
            return f"Touch and hold {self.name}"
        return f"Release {self.name}"


@dataclass
class KeyCapture:
    """What the wizard collected for one key (deltas in counts, touch positive)."""

    channel: int
    name: str
    quiet: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # hands-off frames
    touched: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    # what this key read while another key was held: the other key -> its deltas (crosstalk, not noise)
    crosstalk: dict[int, list[int]] = field(default_factory=dict)
    attempts: int = 0
    seen: bool = False  # a touch clearly rose above the noise
    level_counts: float = float("inf")  # the delta above which it counts as moved (set after hands off)

    def _coupled(self, values: np.ndarray) -> np.ndarray:
        """The frames of `values` that are coupling, not this key being touched (a stray finger): below
        half its own typical touch once it has one, else not beyond its moved level."""
        if len(self.touched):
            return values < 0.5 * float(np.median(self.touched))
        return values <= self.level_counts

    def crossed(self, source: int) -> np.ndarray:
        """Its deltas while `source` was held, stray-finger frames left out (crosstalk from `source`)."""
        values = np.array(self.crosstalk.get(source, ()), np.int64)
        return values[self._coupled(values)]

    @property
    def stray_frames(self) -> int:
        """Frames it read while another key was held that were a stray finger on it (left out)."""
        values = np.array([v for vs in self.crosstalk.values() for v in vs], np.int64)
        return int(len(values) - self._coupled(values).sum())

    @property
    def untouched(self) -> np.ndarray:
        """What this key saw while not touched: hands off, and while the others were held (what its
        threshold must clear; its noise figures are of `quiet` alone: crosstalk is not noise).

        A frame that reached half this key's own typical touch was this key being touched (a stray
        finger), not crosstalk, and is left out (without a touch of its own yet: one beyond its noise).
        """
        return np.concatenate([self.quiet, *(self.crossed(src) for src in self.crosstalk)])


# Frames before a disturbance's first clear frame that still count as touched when a hands-off stretch
# is cut short: a finger approaching moves the counts before it clears 8 sigmas. The same 0.3 s guard
# `processing.touch_search` keeps around touches (common practice, no source).
DISTURB_GUARD_S = 0.3


def first_disturbed(quiet: np.ndarray, min_rise_counts: float) -> int | None:
    """Where something first touched the key during hands off: the first frame of a run of 3+ frames
    beyond 8 robust sigmas (None when nothing did).

    The robust sigma is 1.4826 x the median absolute deviation (the normal-distribution consistency
    factor, NIST/SEMATECH e-Handbook 1.3.5.6); 8 sigmas is far beyond any noise peak in a few seconds.
    """
    q = np.asarray(quiet, np.float64)
    if len(q) < 8:
        return None
    centre = np.median(q)
    sigma = max(1.4826 * float(np.median(np.abs(q - centre))), 0.5)
    beyond = np.abs(q - centre) > max(8.0 * sigma, 2.0 * min_rise_counts)
    run = np.convolve(beyond.astype(np.int8), np.ones(3, np.int8), mode="valid")
    starts = np.flatnonzero(run >= 3)
    return int(starts[0]) if len(starts) else None


def disturbed(quiet: np.ndarray, min_rise_counts: float) -> bool:
    """Did something touch the key during hands off? (`first_disturbed` found a run.)"""
    return first_disturbed(quiet, min_rise_counts) is not None


def _level(quiet: np.ndarray, min_rise_counts: float) -> float:
    """The delta above which a key counts as moved: clear of the hands-off spread."""
    if len(quiet) == 0:
        return min_rise_counts
    spread = float(np.max(np.abs(quiet - np.median(quiet))))
    return max(2.0 * spread, 6.0 * float(np.std(quiet)), min_rise_counts)


class CaptureWizard:
    """Step sequencing, collection and "nothing happened" detection for guided capture."""

    def __init__(self, names: Sequence[str], polarity: Sequence[int], rate_hz: float, *, quiet_s: float = 3.0,
                 hold_s: float = 2.0, settle_s: float = 0.2, release_s: float = 0.5, timeout_s: float = 8.0,
                 max_attempts: int = 3, min_rise_counts: float = 3.0, channels: Sequence[int] | None = None):
        self.names = list(names)
        # 0 for a key whose direction is not known yet: the touch asked for teaches it (`learned`)
        self.polarity = expand_polarity(polarity, len(names))
        self.learned: dict[int, int] = {}
        self.rate_hz = rate_hz
        self.quiet_frames = max(8, round(quiet_s * rate_hz))
        self.hold_frames = max(4, round(hold_s * rate_hz))
        self.settle_frames = round(settle_s * rate_hz)
        self.release_frames = max(1, round(release_s * rate_hz))
        self.timeout_s, self.max_attempts, self.min_rise_counts = timeout_s, max_attempts, min_rise_counts
        keys = list(range(len(names))) if channels is None else list(channels)
        self.steps = [Step(QUIET, None, "all keys")]
        for c in keys:
            self.steps += [Step(TOUCH, c, self.names[c]), Step(RELEASE, c, self.names[c])]
        self.keys = {c: KeyCapture(c, self.names[c]) for c in keys}
        self.step_index = 0
        self.notice = ""
        self._quiet_tries = 0
        self.marks: list[Mark] = []  # quiet-start/-end, touch-start/-end at frame times, as they happen
        self.closed = False  # `close()` was called: no more frames are taken
        self._t_s = 0.0
        self._baseline = np.zeros(len(names))
        self._follow = 1.0 / max(1.0, rate_hz)  # baselines follow drift with a one-second time constant
        self._levels = np.full(len(names), min_rise_counts, float)
        self._reset_step(None)

    # -- state shown to the user
    @property
    def step(self) -> Step | None:
        return self.steps[self.step_index] if self.step_index < len(self.steps) else None

    @property
    def done(self) -> bool:
        return self.step is None

    @property
    def progress(self) -> float:
        step = self.step
        if step is None:
            return 1.0
        if step.kind == QUIET:
            return min(1.0, self._count / self.quiet_frames)
        if step.kind == TOUCH:
            return min(1.0, len(self._held) / self.hold_frames)
        return min(1.0, self._count / self.release_frames)

    @property
    def message(self) -> str:
        step = self.step
        return "Capture complete" if step is None else step.instruction()

    # -- feeding
    def feed(self, block: FrameBlock, now_s: float) -> None:
        """Take new frames (readings) and the current time; advances steps as they complete."""
        if len(block) == 0 or self.done or self.closed:
            self._check_timeout(now_s)
            return
        readings = np.asarray(block.readings, np.int64)
        if readings.shape[1] != len(self.names):
            raise ValueError(f"frames have {readings.shape[1]} channels, the capture {len(self.names)}")
        if self._started_s is None:
            self._started_s = now_s
        for row, t_s in zip(readings, np.asarray(block.t_s, np.float64).tolist(), strict=True):
            if self.done:
                break
            self._t_s = t_s
            self._frame(row, now_s)
        self._check_timeout(now_s)

    def _mark(self, kind: str, channel: int | None = None, t_s: float | None = None,
              why: str = "") -> None:
        """Record where a stretch began or ended (frame time), for a recording made meanwhile."""
        self.marks.append(Mark(self._t_s if t_s is None else t_s, kind,
                               None if channel is None else self.names[channel],
                               f"guided capture: {why}" if why else "guided capture"))

    def _reset_step(self, now_s: float | None) -> None:
        self._count = 0
        self._held: list[int] = []
        self._onset = False
        self._low_run = 0
        self._rows: list[np.ndarray] = []
        self._row_t: list[float] = []  # the frame time of each of `_rows`
        self._started_s = now_s

    def _advance(self, now_s: float) -> None:
        self.step_index += 1
        self.notice = ""
        self._reset_step(now_s)

    def _deltas(self, row: np.ndarray) -> np.ndarray:
        return self.polarity * (row - self._baseline)

    def _learn(self, c: int, row: np.ndarray) -> None:
        """A key of unknown direction, asked for: the first clear move either way is its touch."""
        moved = float(row[c] - self._baseline[c])
        if abs(moved) > self._levels[c]:
            self.polarity[c] = self.learned[c] = 1 if moved > 0 else -1

    def _frame(self, row: np.ndarray, now_s: float) -> None:
        step = self.step
        assert step is not None
        if step.kind == QUIET:
            if not self._rows:
                self._mark("quiet-start")
            self._rows.append(row)
            self._row_t.append(self._t_s)
            self._count += 1
            if self._count >= self.quiet_frames:
                self._finish_quiet(now_s)
            return
        c = step.channel
        assert c is not None
        if step.kind == TOUCH and self.polarity[c] == 0:
            self._learn(c, row)
        deltas = self._deltas(row)
        self._track_baseline(row, deltas, c)
        others = [k for k in range(len(self.names)) if k != c]
        if step.kind == TOUCH:
            self._touch_frame(c, deltas, others, now_s)
        else:
            self._release_frame(c, deltas, now_s)

    def _quiet(self) -> np.ndarray:
        """The hands-off frames so far as deltas from their own mean (touch positive), and that mean."""
        rows = np.array(self._rows, np.int64)
        self._baseline = rows.mean(axis=0)
        sign = np.where(self.polarity == 0, 1, self.polarity)  # the spread is the same either way
        return (sign * (rows - self._baseline)).round().astype(np.int64)

    def _moved(self, quiet: np.ndarray) -> dict[int, int]:
        """Keys touched during hands off -> the first frame of their disturbance."""
        firsts = {c: first_disturbed(quiet[:, c], self.min_rise_counts) for c in range(len(self.names))}
        return {c: f for c, f in firsts.items() if f is not None}

    def _end_quiet_early(self, moved: dict[int, int], why: str) -> None:
        """`quiet-end` for a hands-off stretch that is given up: at its last frame clear of the first
        disturbance (less the approach guard), so a recording's quiet stretches hold no touch."""
        keep = len(self._rows)
        if moved:
            keep = max(0, min(moved.values()) - round(DISTURB_GUARD_S * self.rate_hz))
        self._mark("quiet-end", t_s=self._row_t[max(0, keep - 1)], why=why)

    def _finish_quiet(self, now_s: float, force: bool = False) -> None:
        quiet = self._quiet()
        moved = self._moved(quiet)
        if moved and not force and self._quiet_tries + 1 < self.max_attempts:
            self._quiet_tries += 1
            first = self.names[min(moved, key=moved.__getitem__)]
            self._end_quiet_early(moved, f"{first} moved, hands off measured again")
            self._reset_step(now_s)
            self.notice = f"{first} moved during hands off: measuring again, hands off please"
            return
        self._mark("quiet-end")
        self._levels = np.array([_level(quiet[:, c], self.min_rise_counts) for c in range(len(self.names))])
        for c, key in self.keys.items():
            key.quiet = quiet[:, c].copy()
            key.level_counts = float(self._levels[c])
        self._advance(now_s)

    def _track_baseline(self, row: np.ndarray, deltas: np.ndarray, target: int) -> None:
        """Follow slow drift on every key that is quiet now, except the one being asked for.

        A key that rose beyond its noise level (a stray finger, strong crosstalk) keeps its baseline,
        so one stray touch cannot pull the baseline up and make the frames after it look negative.
        """
        follow = (np.abs(deltas) <= self._levels) & (np.arange(len(row)) != target)
        self._baseline = np.where(follow, self._baseline + (row - self._baseline) * self._follow,
                                  self._baseline)

    def _touch_frame(self, c: int, deltas: np.ndarray, others: list[int], now_s: float) -> None:
        key = self.keys[c]
        level = self._levels[c]
        if not self._onset:
            if deltas[c] > level:
                self._onset, self._count, self.notice = True, 0, ""
                key.seen = True
            elif others and (moved := [k for k in others if deltas[k] > self._levels[k]]):
                self.notice = f"That moved {self.names[moved[0]]}; touch {self.names[c]}"
            return
        self._count += 1
        if deltas[c] < level / 2:
            self._low_run += 1
            if self._low_run >= 3:  # the finger left before the hold was complete
                if self._held:
                    self._mark("touch-end", c)
                self._held, self._onset, self._low_run, self._started_s = [], False, 0, now_s
                self.notice = f"Lifted too soon: touch and hold {self.names[c]} until the bar is full"
            return
        self._low_run = 0
        if self._count > self.settle_frames:
            if not self._held:
                self._mark("touch-start", c)
            self._held.append(round(deltas[c]))
            for k in others:  # what the finger on this key does to the others
                if k not in self.keys:
                    continue
                # all kept: which frames were a stray finger rather than coupling is decided once the
                # key's own touch is known (`KeyCapture.crossed`)
                self.keys[k].crosstalk.setdefault(c, []).append(round(deltas[k]))
            if len(self._held) >= self.hold_frames:
                key.touched = np.array(self._held, np.int64)
                self._mark("touch-end", c)
                self._advance(now_s)

    def _release_frame(self, c: int, deltas: np.ndarray, now_s: float) -> None:
        if deltas[c] < self._levels[c] / 2 or not self.keys[c].seen:
            self._count += 1
            if self._count >= self.release_frames:
                self._advance(now_s)
        else:
            self._count = 0

    def _check_timeout(self, now_s: float) -> None:
        step = self.step
        if step is None or step.kind == QUIET or self._started_s is None:
            return
        if now_s - self._started_s < self.timeout_s:
            return
        key = self.keys[step.channel] if step.channel is not None else None
        if step.kind == TOUCH and not self._onset and key is not None:
            key.attempts += 1
            if key.attempts >= self.max_attempts:
                self._advance(now_s)
                self.step_index += 1  # nothing to release either
                self.notice = f"Nothing happened on {step.name}: skipped after {key.attempts} tries"
                return
            self.notice = f"Nothing happened: touch and hold {step.name} (try {key.attempts + 1})"
        elif step.kind == RELEASE:
            self.notice = f"Still touched? Lift your finger from {step.name}"
        self._started_s = now_s

    def close(self) -> None:
        """The capture is closed (or starts again) mid-step: end the stretch under way, so every
        `quiet-start` has its `quiet-end` and every `touch-start` its `touch-end`; take no more frames."""
        step = self.step
        if self.closed or step is None:
            self.closed = True
            return
        self.closed = True
        if step.kind == QUIET and self._rows:
            self._end_quiet_early(self._moved(self._quiet()), "closed during hands off")
        elif step.kind == TOUCH and self._held:
            self._mark("touch-end", step.channel, why="closed during the touch")

    def skip(self, now_s: float) -> None:
        """The user skips the current key (or the hands-off step)."""
        step = self.step
        if step is None:
            return
        if step.kind == QUIET:
            if len(self._rows) >= 8:
                self._finish_quiet(now_s, force=True)
            return
        if step.kind == TOUCH and self._held:
            self._mark("touch-end", step.channel)
        self._advance(now_s)
        if step.kind == TOUCH:
            self.step_index += 1


# ---------------------------------------------------------------- the wizard's results


@dataclass(frozen=True)
class CaptureOutcome:
    """One key at the end of a guided capture: figures, verdict, suggestion (or why not), new settings."""

    channel: int
    name: str
    figures: KeyFigures
    verdict: str
    suggestion: Suggestion | Refusal
    before: ChannelSettings
    after: ChannelSettings  # == before when refused
    untouched: np.ndarray
    touched: np.ndarray
    stray_frames: int = 0
    touched_noise: TouchedNoise | None = None  # noise while touched, the touch level removed
    crosstalk: tuple[Coupling, ...] = ()  # what touching each other key did to this one, largest first
    touches: int = 0  # touches the signal rests on (a guided capture holds one per key)
    quiet_frames: int = 0  # hands-off frames the noise rests on
    rate_hz: float = 0.0
    names: tuple[str, ...] = ()  # every key's name, for the crosstalk lines

    def basis(self) -> str:
        """What the verdict rests on (touches and frames)."""
        return rests_on(self.touches, len(self.touched), self.quiet_frames)

    @property
    def suggested(self) -> bool:
        return isinstance(self.suggestion, Suggestion)


def summarise(wizard: CaptureWizard, settings_of: Callable[[int], ChannelSettings],
              bounds: VerdictBounds | None = None,
              sliders: Sequence[SliderSpec] = ()) -> list[CaptureOutcome]:
    """Figures and suggestions for every key the wizard captured (`settings_of(channel)` gives today's);
    pads of one of `sliders` moving together are slider neighbours, not crosstalk."""
    bounds = bounds or VerdictBounds()
    out = []
    thresholds: dict[int, float | None] = {}
    pending = []
    for c, key in wizard.keys.items():
        figures = key_figures(key.quiet, key.touched)
        result: Suggestion | Refusal
        if not key.seen:
            result = Refusal(f"no touch seen on {key.name} in {key.attempts} tries: nothing to suggest")
        else:
            result = suggest(key.untouched, key.touched, wizard.rate_hz)
        before = settings_of(c)
        after = result.apply(before) if isinstance(result, Suggestion) else before
        thresholds[c] = float(after.threshold_counts)
        pending.append((c, key, figures, result, before, after))
    # crosstalk: each key's deltas while another key alone was held, against its own hands-off median
    during = {(src, c): key.crossed(src) for c, key in wizard.keys.items() for src in key.crosstalk}
    found = couplings({c: key.quiet for c, key in wizard.keys.items()}, during, thresholds, sliders)
    for c, key, figures, result, before, after in pending:
        held = touched_noise([key.touched], wizard.rate_hz) if len(key.touched) else None
        out.append(CaptureOutcome(c, key.name, figures, bounds.verdict(figures.snr_pp), result, before, after,
                                  key.untouched, key.touched, key.stray_frames, held,
                                  tuple(x for x in found if x.target == c), int(len(key.touched) > 0),
                                  len(key.quiet), wizard.rate_hz, tuple(wizard.names)))
    return out
