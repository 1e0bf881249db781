"""Pure logic of the capture wizard and of finding touches in a recording (no Textual, no ports)."""

from __future__ import annotations

import numpy as np
import pytest
from rich.console import Console

from processing.capture import QUIET, RELEASE, TOUCH, CaptureWizard
from processing.recording import Mark
from processing.stretches import key_figures
from protocol.events import FrameBlock
from tests.processing.tune_reference import estimate_baseline, find_touches
from tui.render.histogram import DeltaHistogram, bar_row, bin_counts

RATE_HZ = 100.0
NAMES = ("zone1", "zone2", "stop")


class User:
    """A simulated person who follows the wizard's instructions (or not), frame by frame."""

    def __init__(self, wizard: CaptureWizard, rng: np.random.Generator, polarity: int = 1,
                 touch_counts: int = 200, noise_counts: float = 2.0, ignore: set[str] = frozenset(),
                 delay_frames: int = 30, wrong_key: dict[str, str] | None = None) -> None:
        self.w, self.rng, self.pol = wizard, rng, polarity
        self.touch_counts, self.noise_counts, self.ignore = touch_counts, noise_counts, ignore
        self.delay_frames, self.wrong_key = delay_frames, wrong_key or {}
        self.frame = 0
        self.pressing: str | None = None
        self.wait = 0
        self.notices: list[str] = []

    def react(self) -> None:
        step = self.w.step
        if step is None:
            self.pressing = None
        elif step.kind == TOUCH and step.name not in self.ignore:
            if self.pressing != step.name and self.wait < self.delay_frames:
                self.wait += 1
                self.pressing = self.wrong_key.get(step.name) if self.wait > self.delay_frames // 2 else None
            else:
                self.pressing = step.name
        else:
            self.pressing, self.wait = None, 0

    def run(self, max_s: float = 120.0) -> None:
        t_s = 0.0
        while not self.w.done and t_s < max_s:
            self.react()
            row = 1000 + self.rng.normal(0, self.noise_counts, len(NAMES)) + 0.5 * t_s  # slow drift
            if self.pressing is not None:
                row[NAMES.index(self.pressing)] += self.pol * self.touch_counts
            block = FrameBlock(np.array([t_s]), np.array([self.frame]), row.round().astype(np.int64)[None, :],
                               self.frame)
            self.w.feed(block, t_s)
            if self.w.notice and (not self.notices or self.notices[-1] != self.w.notice):
                self.notices.append(self.w.notice)
            self.frame += 1
            t_s += 1 / RATE_HZ


def test_steps_are_quiet_then_touch_and_release_per_key():
    w = CaptureWizard(NAMES, (1,), RATE_HZ)
    assert [(s.kind, s.name) for s in w.steps] == [
        (QUIET, "all keys"), (TOUCH, "zone1"), (RELEASE, "zone1"), (TOUCH, "zone2"), (RELEASE, "zone2"),
        (TOUCH, "stop"), (RELEASE, "stop")]
    assert w.message.startswith("Hands off") and w.progress == 0.0


@pytest.mark.parametrize("polarity", [1, -1])
def test_a_cooperative_user_completes_the_capture(polarity):
    w = CaptureWizard(NAMES, (polarity,), RATE_HZ, quiet_s=2.0, hold_s=1.0)
    user = User(w, np.random.default_rng(3), polarity=polarity)
    user.run()
    assert w.done and w.progress == 1.0
    for key in w.keys.values():
        assert key.seen and key.attempts == 0
        assert len(key.quiet) == 200 and len(key.touched) == 100
        figures = key_figures(key.quiet, key.touched)
        # The touch adds 200 counts; the wizard's baseline follows the 0.5 count/s drift.
        assert figures.signal_counts == pytest.approx(200, abs=6)
        assert figures.noise_rms_counts == pytest.approx(2.0, rel=0.25)
        assert len(key.untouched) > len(key.quiet)  # crosstalk frames while other keys were held


def test_keys_of_unknown_direction_learn_it_from_the_touch_asked_for():
    # Polarity 0 (not known yet): the first clear move of the key asked for, either way, is its touch;
    # the figures then come out as for a board that stated it.
    w = CaptureWizard(NAMES, (0, 0, 0), RATE_HZ, quiet_s=2.0, hold_s=1.0)
    user = User(w, np.random.default_rng(3), polarity=-1)
    user.run()
    assert w.done and w.learned == {0: -1, 1: -1, 2: -1} and w.polarity.tolist() == [-1, -1, -1]
    for key in w.keys.values():
        assert key.seen and key_figures(key.quiet, key.touched).signal_counts == pytest.approx(200, abs=6)


def test_nothing_happened_asks_again_then_skips():
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=0.5, timeout_s=2.0, max_attempts=3)
    user = User(w, np.random.default_rng(4), ignore={"zone2"})
    user.run()
    assert w.done
    assert w.keys[1].attempts == 3 and not w.keys[1].seen and len(w.keys[1].touched) == 0
    assert "Nothing happened: touch and hold zone2 (try 2)" in user.notices
    assert any("skipped after 3 tries" in n for n in user.notices)
    assert w.keys[0].seen and w.keys[2].seen


def test_touching_the_wrong_key_is_pointed_out():
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=0.5)
    user = User(w, np.random.default_rng(5), wrong_key={"stop": "zone1"}, delay_frames=60)
    user.run()
    assert "That moved zone1; touch stop" in user.notices
    assert w.done and w.keys[2].seen


def test_lifting_too_soon_restarts_the_hold():
    w = CaptureWizard(("a",), (1,), RATE_HZ, quiet_s=0.5, hold_s=1.0)
    t = 0.0
    frame = 0

    def feed(value: int, frames: int) -> None:
        nonlocal t, frame
        for _ in range(frames):
            w.feed(FrameBlock(np.array([t]), np.array([frame]), np.array([[value]]), frame), t)
            t += 0.01
            frame += 1

    feed(1000, 50)
    assert w.step.kind == TOUCH
    feed(1300, 40)  # held 0.4 s of the 1 s needed
    assert 0.0 < w.progress < 1.0
    feed(1000, 5)
    assert w.notice.startswith("Lifted too soon") and w.progress == 0.0
    feed(1300, 130)
    assert w.step.kind == RELEASE
    feed(1000, 60)
    assert w.done


def test_histogram_counts_match_numpy_and_render_plain():
    # Outside reference: numpy.histogram gives the bin counts.
    values = np.array([0, 1, 1, 2, 9, 10])
    counts = bin_counts(values, 0, 10, 5)
    assert counts.tolist() == np.histogram(values, bins=5, range=(0, 10))[0].tolist()
    assert bar_row(np.array([0, 1, 4])) == " ▂█"
    console = Console(width=60, file=None, force_terminal=False, color_system=None, record=True)
    console.print(DeltaHistogram([0, 1, -1, 2], [100, 110, 105], threshold=50, width=40))
    text = console.export_text()
    assert "untouched" in text and "touched" in text and "^ threshold 50" in text


def synthetic_recording(rng, drift_per_s=2.0):
    n = 3000
    t_s = np.arange(n) / RATE_HZ
    readings = 5000 - (rng.normal(0, 3, (n, 2)) + drift_per_s * t_s[:, None])
    truth = {0: [(500, 700), (1500, 1650)], 1: [(2200, 2500)]}
    for c, runs in truth.items():
        for a, b in runs:
            readings[a:b, c] -= 150  # polarity -1: touch lowers the count
    return t_s, readings.round().astype(np.int64), truth


def test_find_touches_without_marks_finds_the_touched_stretches():
    t_s, readings, truth = synthetic_recording(np.random.default_rng(7))
    traces = find_touches(t_s, readings, ("k0", "k1"), (-1,), RATE_HZ)
    for trace in traces:
        assert len(trace.stretches) == len(truth[trace.channel])
        for (a, b), (ta, tb) in zip(trace.stretches, truth[trace.channel], strict=True):
            assert abs(a - ta) <= 3 and abs(b - tb) <= 3
        assert np.median(trace.touched) == pytest.approx(150, abs=8)
        assert float(np.std(trace.quiet)) == pytest.approx(3, rel=0.3)  # numpy.std as the reference


def test_find_touches_with_marks_uses_them():
    t_s, readings, _ = synthetic_recording(np.random.default_rng(8))
    marks = [Mark(5.0, "touch-start", "k0"), Mark(7.0, "touch-end", "k0"),
             Mark(0.5, "quiet-start"), Mark(4.0, "quiet-end")]
    traces = find_touches(t_s, readings, ("k0", "k1"), (-1,), RATE_HZ, marks)
    assert traces[0].from_marks and traces[0].stretches == [(500, 700)]
    assert traces[1].stretches == []
    assert len(traces[0].quiet) == 350


def test_nothing_to_find_in_pure_noise():
    rng = np.random.default_rng(9)
    readings = (1000 + rng.normal(0, 4, (2000, 1))).round().astype(np.int64)
    traces = find_touches(np.arange(2000) / RATE_HZ, readings, ("k",), (1,), RATE_HZ)
    assert traces[0].stretches == [] and len(traces[0].touched) == 0


def test_baseline_estimate_follows_drift_and_ignores_touches():
    t = np.arange(2000) / RATE_HZ
    values = 100 + 3.0 * t
    values[800:1000] += 500
    base = estimate_baseline(values, RATE_HZ)
    assert np.max(np.abs(base[100:-100] - (100 + 3.0 * t[100:-100]))) < 10


def _feed_rows(w: CaptureWizard, rows: np.ndarray, t0: float) -> float:
    t = t0
    for i, row in enumerate(rows):
        w.feed(FrameBlock(np.array([t]), np.array([i]), row[None, :].astype(np.int64), i), t)
        t += 1 / RATE_HZ
    return t


def test_a_touch_during_hands_off_measures_again():
    rng = np.random.default_rng(11)
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=0.5)
    rows = 1000 + rng.normal(0, 2, (100, 3))
    rows[40:60, 1] += 150  # someone brushed zone2
    t = _feed_rows(w, rows.round(), 0.0)
    assert w.step.kind == QUIET and w.notice.startswith("zone2 moved during hands off")
    _feed_rows(w, (1000 + rng.normal(0, 2, (100, 3))).round(), t)
    assert w.step.kind == TOUCH
    assert w.keys[1].quiet.max() - w.keys[1].quiet.min() < 30  # the clean second measurement


def test_stray_touches_on_other_keys_are_not_taken_as_their_noise():
    rng = np.random.default_rng(12)
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=1.0)
    t = _feed_rows(w, (1000 + rng.normal(0, 2, (100, 3))).round(), 0.0)
    rows = 1000 + rng.normal(0, 2, (150, 3))
    rows[:, 0] += 200  # zone1 held as asked
    rows[60:90, 2] += 180  # and a stray finger on stop meanwhile
    _feed_rows(w, rows.round(), t)
    stop = w.keys[2]
    assert stop.stray_frames >= 25
    assert stop.untouched.max() < 20  # the stray touch is not in stop's untouched deltas


def balanced(marks: list[Mark]) -> bool:
    """Every start mark has its end before the next start of the same stretch (channel), none left open."""
    open_at: dict[tuple[str, str | None], float] = {}
    for m in marks:
        kind, _, edge = m.kind.rpartition("-")
        key = (kind, m.channel)
        if edge == "start":
            if key in open_at:
                return False
            open_at[key] = m.t_s
        elif edge == "end" and (key not in open_at or m.t_s < open_at.pop(key)):
            return False
    return not open_at


def test_a_restarted_hands_off_step_ends_its_stretch_before_the_touch():
    # The disturbed stretch gets its quiet-end at its last frame clear of the touch (less 0.3 s of
    # approach), so the recording's quiet stretches hold no touch; then the new one starts.
    rng = np.random.default_rng(11)
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=0.5)
    rows = 1000 + rng.normal(0, 2, (100, 3))
    rows[60:80, 1] += 150  # someone brushed zone2 from frame 60 (t = 0.60 s)
    t = _feed_rows(w, rows.round(), 0.0)
    _feed_rows(w, (1000 + rng.normal(0, 2, (100, 3))).round(), t)
    kinds = [(m.kind, m.t_s) for m in w.marks]
    assert [k for k, _ in kinds] == ["quiet-start", "quiet-end", "quiet-start", "quiet-end"]
    assert kinds[0][1] == 0.0 and kinds[1][1] == pytest.approx(0.29)  # frame 29: 0.3 s before frame 60
    assert "zone2 moved" in w.marks[1].text
    assert kinds[2][1] == pytest.approx(1.0) and balanced(w.marks)


def test_closing_mid_step_ends_the_stretch_under_way():
    rng = np.random.default_rng(13)
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=1.0)
    t = _feed_rows(w, (1000 + rng.normal(0, 2, (50, 3))).round(), 0.0)
    w.close()  # half way through hands off
    assert [m.kind for m in w.marks] == ["quiet-start", "quiet-end"] and balanced(w.marks)
    _feed_rows(w, (1000 + rng.normal(0, 2, (100, 3))).round(), t)
    assert len(w.marks) == 2  # closed: no more frames taken

    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=1.0)
    t = _feed_rows(w, (1000 + rng.normal(0, 2, (100, 3))).round(), 0.0)
    rows = 1000 + rng.normal(0, 2, (60, 3))
    rows[:, 0] += 200
    _feed_rows(w, rows.round(), t)  # zone1 held, not long enough yet
    assert w.marks[-1].kind == "touch-start"
    w.close()
    assert w.marks[-1].kind == "touch-end" and w.marks[-1].channel == "zone1" and balanced(w.marks)


def test_a_user_who_brushes_keys_leaves_balanced_marks_whatever_happens():
    # A seeded run with a brush during each hands-off try but the last, lifts too soon and skips.
    for seed in range(6):
        rng = np.random.default_rng(seed)
        w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=0.5, hold_s=0.5, max_attempts=3)
        t = 0.0
        for _ in range(2):  # two disturbed tries
            rows = 1000 + rng.normal(0, 2, (50, 3))
            start = int(rng.integers(5, 40))
            rows[start:start + 8, int(rng.integers(0, 3))] += 120
            t = _feed_rows(w, rows.round(), t)
        t = _feed_rows(w, (1000 + rng.normal(0, 2, (50, 3))).round(), t)
        rows = 1000 + rng.normal(0, 2, (30, 3))
        rows[:25, 0] += 200
        t = _feed_rows(w, rows.round(), t)  # lifted too soon
        w.skip(t)
        if seed % 2:
            w.close()
        assert balanced(w.marks), [(m.kind, m.channel, m.t_s) for m in w.marks]
        assert [m.kind for m in w.marks].count("quiet-start") == 3


def test_choose_keys_reads_numbers_ranges_names_and_sets():
    from processing.capture import choose_keys, key_ranges, steps_for

    names = ("zone1", "zone2", "zone3", "zone4", "stop", "dur0", "dur1", "dur2", "dur3")
    sets = {"zones": (0, 1, 2, 3), "duration": (5, 6, 7, 8)}
    assert choose_keys("3-5", names) == [2, 3, 4]
    assert choose_keys(" 3 - 5 , dur1 ", names) == [2, 3, 4, 6]
    assert choose_keys("zone2-zone4 stop", names) == [1, 2, 3, 4]
    assert choose_keys("9-7", names) == [8, 7, 6]  # as asked: the other way round
    assert choose_keys("Duration, 1, dur0", names, sets) == [5, 6, 7, 8, 0]  # each key once
    assert choose_keys("STOP", names) == [4]
    for bad, says in (("10", "there is no key 10: keys are numbered 1-9"), ("zone9", "no key 'zone9'"),
                      ("3-12", "no key 12"), ("", "type the keys"), ("zones", "key names such as zone1")):
        with pytest.raises(ValueError, match=says):
            choose_keys(bad, names)
    # a key's own name wins, even one that reads as a number or a range
    assert choose_keys("2", ("a", "b", "2")) == [2] and choose_keys("x-1", ("x-1", "x", "1")) == [0]
    assert key_ranges([0, 1, 2, 3, 5, 6, 8], names) == "zone1-zone4, dur0 dur1, dur3"
    for chosen in ([0, 1, 2, 3, 5, 6, 8], [4], list(range(9))):  # what it writes reads back the same
        assert choose_keys(key_ranges(chosen, names), names) == chosen
    assert steps_for(64) == 129 and steps_for(4) == 9


def test_a_capture_of_some_keys_asks_only_for_them():
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=1.0, hold_s=0.5, channels=[2, 0])
    user = User(w, np.random.default_rng(14))
    user.run()
    assert w.done and list(w.keys) == [2, 0] and len(w.steps) == 5
    assert [s.name for s in w.steps[1:]] == ["stop", "stop", "zone1", "zone1"]
    assert all(k.seen for k in w.keys.values()) and balanced(w.marks)


class CouplingUser(User):
    """A user whose finger on zone1 moves zone2 by `cross_counts` (crosstalk), and whose touches carry
    mains hum (50 Hz at 100 frames/s lands near 0 Hz, so 60 Hz: its alias is |60 - 100| = 40 Hz)."""

    cross_counts = 30.0
    hum_counts = 8.0

    def run(self, max_s: float = 120.0) -> None:
        t_s = 0.0
        while not self.w.done and t_s < max_s:
            self.react()
            row = 1000 + self.rng.normal(0, self.noise_counts, len(NAMES))
            if self.pressing is not None:
                k = NAMES.index(self.pressing)
                row[k] += self.touch_counts + self.hum_counts * np.sin(2 * np.pi * 60.0 * t_s)
                if self.pressing == "zone1":
                    row[1] += self.cross_counts
            self.w.feed(FrameBlock(np.array([t_s]), np.array([self.frame]),
                                   row.round().astype(np.int64)[None, :], self.frame), t_s)
            self.frame += 1
            t_s += 1 / RATE_HZ


def test_the_results_carry_crosstalk_and_noise_while_touched():
    # Reference, worked by hand: zone1's touch adds 40 counts to zone2, whose suggested threshold is about
    # half its 200-count touch (100): a share of about 40 / 100 = 40 %, flagged (above 30 %). Such strong
    # coupling rises beyond zone2's noise, yet it is crosstalk, not a stray finger (under half its touch).
    # The hum on a finger: a 8-count sine has RMS 8 / sqrt(2) = 5.7 and aliases from 60 Hz to 40 Hz at
    # 100 frames/s; the untouched noise (2 counts RMS, no hum) stays as it was.
    from processing.capture import summarise
    from processing.settings import ChannelSettings

    CouplingUser.cross_counts = 40.0
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=2.0, hold_s=1.0)
    CouplingUser(w, np.random.default_rng(8)).run()
    assert w.done
    out = {o.name: o for o in summarise(w, lambda c: ChannelSettings())}
    zone2 = out["zone2"]
    worst = zone2.crosstalk[0]
    assert worst.source == 0 and worst.shift_counts == pytest.approx(40, abs=2)
    assert worst.threshold_counts == zone2.after.threshold_counts
    assert worst.share == pytest.approx(40 / zone2.after.threshold_counts) and worst.flagged()
    assert zone2.figures.noise_pp_counts < 20  # crosstalk is not in its noise
    assert all(abs(c.shift_counts) < 3 for c in out["stop"].crosstalk)
    held = zone2.touched_noise
    assert held is not None and held.rms_counts == pytest.approx(np.hypot(8 / np.sqrt(2), 2.0), rel=0.25)
    assert held.peak is not None and held.peak.mains_hz == 60.0
    assert held.peak.freq_hz == pytest.approx(40, abs=1)
    assert zone2.figures.noise_rms_counts == pytest.approx(2.0, rel=0.3)
    assert zone2.basis() == "1 touch (100 frames), noise of 200 frames"
    from tui.render.capture import crosstalk_cell, crosstalk_line, noise_cell
    assert crosstalk_cell(zone2).endswith("!") and noise_cell(zone2).count("/") == 1
    assert "zone1 +40.0" in crosstalk_line(zone2) and "flagged" in crosstalk_line(zone2)


def test_the_results_show_pads_of_one_slider_as_neighbours_not_flagged_crosstalk():
    # The same coupling as above (zone1's touch adds 40 counts to zone2, about 40 % of its threshold), with
    # zone1 and zone2 declared pads of one slider: that is the slider working, shown but not flagged.
    from processing.capture import summarise
    from processing.settings import ChannelSettings
    from processing.slider import SliderSpec
    from tui.render.capture import crosstalk_cell, crosstalk_line

    CouplingUser.cross_counts = 40.0
    w = CaptureWizard(NAMES, (1,), RATE_HZ, quiet_s=2.0, hold_s=1.0)
    CouplingUser(w, np.random.default_rng(8)).run()
    assert w.done
    out = {o.name: o for o in summarise(w, lambda c: ChannelSettings(), sliders=[SliderSpec("pair", (0, 1))])}
    zone2 = out["zone2"]
    pad = next(c for c in zone2.crosstalk if c.source == 0)
    assert pad.shift_counts == pytest.approx(40, abs=2) and pad.slider == "pair" and not pad.flagged()
    assert not crosstalk_cell(zone2).endswith("!")
    line = crosstalk_line(zone2)
    assert "slider neighbours in pair (not crosstalk, not flagged): zone1 +" in line
    assert ", flagged)" not in line and line.endswith("zone1 +40.0 (40%)")
