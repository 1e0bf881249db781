"""Session: the glue front ends use (events in, detections and measures out)."""

import numpy as np
import pytest

from processing.detections import GroupChange, Rebaselined, Release, SliderChange, StuckRelease, Touch
from processing.groups import GroupSpec
from processing.profile import Profile, profile_for
from processing.session import Session
from processing.settings import ChannelSettings
from processing.slider import SliderSpec
from protocol.events import BoardChanged, BoardInfo, FaultKind, FrameBlock, LinkFault, Note

NAMES = ("zone1", "zone2", "zone3", "stop")


def info(**kw):
    # A board that states its polarity: these tests are not about learning it (test_first_contact.py is).
    base = dict(t_s=0.0, fields={}, proto=1, board="greenhouse-panel", channels=4, rate_hz=100.0, names=NAMES,
                polarity=(1,), new_session=True)
    base.update(kw)
    return BoardInfo(**base)


def frames(rows, first_index=0, rate_hz=100.0):
    rows = np.asarray(rows, np.int64)
    return FrameBlock((first_index + np.arange(len(rows))) / rate_hz, np.arange(len(rows)), rows, first_index)


def quiet(n, width=4, level=1000, first_index=0, seed=0):
    rng = np.random.default_rng(seed)
    return frames(level + rng.integers(-3, 4, (n, width)), first_index)


def tuned():
    """Default settings given as a profile: these tests are not about provisional ones."""
    return profile_for(4, NAMES)


def test_info_then_frames_detects_and_names():
    s = Session(tuned())
    assert s.handle([info()]) == [] and s.channels == 4 and s.names == NAMES
    out = s.handle([quiet(100)])
    assert sorted(ev.channel for ev in out if isinstance(ev, Rebaselined)) == [0, 1, 2, 3]
    rows = np.full((10, 4), 1000)
    rows[:, 2] += 250
    out = s.handle([frames(rows, 100)])
    assert [type(ev) for ev in out] == [Touch] and out[0].channel == 2 and out[0].index == 102
    row = s.rows()[2]
    assert row.name == "zone3" and row.delta_counts >= 240 and row.state.reported_touched
    assert s.rows()[0].quality.noise is not None


def test_frames_without_info_build_defaults_and_estimate_rate():
    s = Session()
    s.handle([FrameBlock(np.arange(1000) / 50.0, np.arange(1000), np.full((1000, 3), 500, np.int64), 0)])
    assert s.channels == 3 and s.names == ("ch0", "ch1", "ch2")
    assert s.rate_hz == pytest.approx(50.0)


def test_new_session_and_reset_rebaseline_but_notes_do_not():
    s = Session()
    s.handle([info(), quiet(50)])
    assert not s.engine.pending.any()
    s.handle([Note(1.0, "hello"), LinkFault(1.0, FaultKind.GARBLED)])
    assert not s.engine.pending.any()
    s.handle([LinkFault(1.0, FaultKind.RESET)])
    assert s.engine.pending.all()
    s.handle([quiet(5, first_index=50)])
    s.handle([info(t_s=2.0)])
    assert s.engine.pending.all()
    s.handle([quiet(5, first_index=55)])
    s.handle([info(t_s=3.0, proto=None, new_session=False)])  # a plain info reply: no re-baseline
    assert not s.engine.pending.any()


def test_board_changed_rebuilds_for_new_width():
    s = Session()
    s.handle([info(), quiet(20)])
    s.handle([BoardChanged(1.0, 4, 6), quiet(20, width=6, first_index=20)])
    assert s.channels == 6 and s.engine.last_deltas.shape == (20, 6)
    assert any("6 channels" in n for n in s.notices)


def test_polarity_from_info():
    s = Session(tuned())
    s.handle([info(polarity=(-1,)), quiet(20)])
    rows = np.full((5, 4), 1000)
    rows[:, 1] -= 300
    out = s.handle([frames(rows, 20)])
    assert [type(ev) for ev in out] == [Touch] and out[0].channel == 1


def test_profile_settings_groups_and_sliders():
    p = Profile(names=NAMES, defaults=ChannelSettings(threshold_counts=80, touch_debounce_frames=1,
                                                      release_debounce_frames=1),
                groups=(GroupSpec("zones", (0, 1)),), sliders=(SliderSpec("strip", (1, 2, 3)),))
    s = Session(p)
    s.handle([info(), quiet(20)])
    rows = np.full((3, 4), 1000)
    rows[:, 0] += 100
    rows[:, 1] += 200
    out = s.handle([frames(rows, 20)])
    kinds = [type(ev) for ev in out]
    assert kinds.count(Touch) == 2 and GroupChange in kinds and SliderChange in kinds
    assert [ev.channel for ev in out if isinstance(ev, GroupChange)] == [1]
    out = s.handle([quiet(3, first_index=23)])
    assert [ev.channel for ev in out if isinstance(ev, GroupChange)] == [None]
    assert [type(ev) for ev in out].count(Release) == 2


def test_live_edit_goes_to_engine_and_profile():
    s = Session(tuned())
    with pytest.raises(ValueError, match="no board"):
        s.set_channel_settings(0, ChannelSettings())
    s.handle([info(), quiet(20)])
    new = ChannelSettings(threshold_counts=40, hysteresis_counts=5)
    s.set_channel_settings(3, new)
    assert s.profile.settings_for(3) == new and s.engine.settings[3] == new and s.settings(3) == new
    with pytest.raises(ValueError, match="hysteresis"):
        s.set_channel_settings(3, ChannelSettings(threshold_counts=10, hysteresis_counts=10))
    assert s.settings(3) == new  # nothing half-applied
    with pytest.raises(ValueError, match="no channel 9"):
        s.set_channel_settings(9, new)


def test_mismatched_profile_uses_its_defaults_with_a_notice():
    p = Profile(names=("a", "b"), defaults=ChannelSettings(threshold_counts=55))
    s = Session(p)
    s.handle([info(), quiet(10)])
    assert s.channels == 4 and s.settings(3).threshold_counts == 55 and s.names == NAMES
    assert any("profile is for 2 channels" in n for n in s.notices)


def test_profile_for_another_board_id_is_used_with_a_notice():
    p = Profile(names=NAMES, board="seed-tray", defaults=ChannelSettings(threshold_counts=66))
    s = Session(p)
    s.handle([info(), quiet(10)])
    assert s.settings(0).threshold_counts == 66
    assert any("seed-tray" in n and "greenhouse-panel" in n for n in s.notices)


def test_info_without_proto_updates_keys_and_keeps_the_rest():
    # PROTOCOL.md: "Info lines without proto update the session's info key by key." A later rate-only
    # line must not make the session forget the board's polarity and names (nor start a new session).
    s = Session(tuned())
    s.handle([info(polarity=(-1,)), quiet(20)])
    s.handle([BoardInfo(t_s=1.0, fields={"rate": "200"}, rate_hz=200.0)])
    assert not s.engine.pending.any() and s.rate_hz == 200.0 and s.info.names == NAMES
    s.handle([BoardChanged(1.0, 4, 6), quiet(20, width=6, first_index=20)])
    rows = np.full((5, 6), 1000)
    rows[:, 1] -= 300  # polarity -1: a drop is a touch
    out = s.handle([frames(rows, 40)])
    assert [type(ev) for ev in out] == [Touch] and out[0].channel == 1


def test_live_edits_survive_a_rebuild_for_the_same_width():
    # "Loses nothing": a board that briefly sends another width (BoardChanged there and back) or a new
    # polarity rebuilds the engine; the settings edited live come back with the width they were made for.
    p = Profile(names=NAMES, defaults=ChannelSettings(threshold_counts=80))
    s = Session(p)
    s.handle([info(), quiet(20)])
    edited = ChannelSettings(threshold_counts=45, hysteresis_counts=5)
    s.set_channel_settings(3, edited)
    s.handle([BoardChanged(1.0, 4, 6), quiet(10, width=6, first_index=20)])
    assert s.settings(5).threshold_counts == 80
    s.handle([BoardChanged(2.0, 6, 4), quiet(10, first_index=30)])
    assert s.settings(3) == edited and s.engine.settings[3] == edited
    s.handle([info(t_s=3.0, polarity=(-1,)), quiet(10, first_index=40)])  # the board turns polarity round
    assert s.engine.polarity == [-1] * 4 and s.settings(3) == edited


def test_noise_window_starts_again_at_a_rebaseline():
    # Deltas before a re-baseline are measured against the old baseline: mixing them into the window
    # would show the step as noise. Hand-worked: 100 frames at delta +40 (the baseline lagged a rise),
    # re-baseline, then +-1 noise: pp 2 counts from the new frames only, not 41.
    s = Session(tuned())
    s.handle([info(), quiet(20)])
    rows = np.full((100, 4), 1000)
    rows[:, 0] += 40
    s.handle([frames(rows, 20)])
    assert s.measures.noise(0).pp_counts >= 40
    s.rebaseline(0)
    rows = np.full((30, 4), 1040)
    rows[::2, 0] += 1
    rows[1::2, 0] -= 1
    out = s.handle([frames(rows, 120)])
    assert Rebaselined(0, 120, 1.2, False) in out
    noise = s.measures.noise(0)
    # the newest 10 of the 30 (the 0.1 s settle guard at 100 Hz) wait until the frames after them are in
    assert noise.samples == 20 and noise.pp_counts == 2
    assert s.measures.noise(1).samples > 30  # other channels keep their window


def test_noise_after_a_stuck_release_counts_only_frames_after_it():
    # Hand-worked: released at 1000 +- 30 (pp 60), then held at 1300 from row 30 (touch at once), released
    # by the stuck timeout at row 40 (held 10 frames; that frame's delta is still 300, against the old
    # baseline), then 1300 or 1301: the noise is the 29 frames after the stuck release, pp 1, less the
    # settle guard (0.1 s = 10 frames at 100 Hz) after the touch (rows 41-49: released from row 40) and the
    # newest 10 frames, still undecided: rows 50-59, 10 frames.
    p = Profile(names=NAMES, defaults=ChannelSettings(threshold_counts=100, hysteresis_counts=10,
                                                      touch_debounce_frames=1, release_debounce_frames=1,
                                                      baseline_period_frames=256, stuck_timeout_frames=10))
    s = Session(p)
    s.handle([info(), frames(np.full((10, 4), 1000))])
    rows = np.full((70, 4), 1000)
    rows[:30:2, 0] += 30
    rows[1:30:2, 0] -= 30
    rows[30:, 0] = 1300
    rows[41::2, 0] += 1
    out = s.handle([frames(rows, 10)])
    assert [(type(ev), ev.index) for ev in out if ev.channel == 0] == [(Touch, 40), (StuckRelease, 50)]
    noise = s.measures.noise(0)
    assert noise.samples == 10 and noise.pp_counts == 1
    # the same frames from the history, for code that recomputes noise there
    h = s.measures.history
    _, _, d, st = h.last(len(h))
    first = int(s.measures.noise_start_frame[0]) - (h.written - len(h))
    assert first == 10 + 41
    assert d[10 + 50:10 + 60, 0].tolist() == s.measures.released_deltas(0).tolist()
    assert (st[10 + 40:, 0] == 0).all() and (st[10 + 39, 0] != 0)  # released from row 40 on


def test_without_a_profile_the_user_is_told_once_that_settings_are_provisional():
    s = Session()
    s.handle([info(), quiet(20)])
    s.handle([quiet(20, first_index=20)])
    told = [n for n in s.notices if n.startswith("no profile given")]
    assert len(told) == 1 and "provisional" in told[0] and "first 1 s of quiet frames" in told[0]
    given = Session(profile_for(4, NAMES))
    given.handle([info(), quiet(20)])
    assert not [n for n in given.notices if n.startswith("no profile given")]


def test_spectrum_leaves_out_the_settle_guard_after_a_touch():
    # 100 Hz: quiet, a touch of 300 counts for 0.5 s, then 1 s quiet. The spectrum's samples start one
    # settle guard (0.1 s = 10 frames) after the last frame that was not released.
    s = Session(tuned())
    rows = [[1000] * 4] * 100 + [[1300, 1000, 1000, 1000]] * 50 + [[1000] * 4] * 100
    s.handle([info(), frames(np.asarray(rows) + np.random.default_rng(2).integers(-2, 3, (250, 4)))])
    m = s.measures
    _, _, _, states = m.history.last(m.window_frames)
    last_active = int(np.flatnonzero(states[:, 0] != 0)[-1])
    samples = m.spectrum_samples(0)
    assert m.guard_frames == 10
    assert len(samples) == len(states) - (last_active + 1) - m.guard_frames
    assert len(m.spectrum_samples(1)) == len(states)  # an untouched key keeps the whole window
