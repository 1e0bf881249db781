"""The twin check (processing.twin) alone and in the session: the board's states against padtune's.

The board's states in the session tests come from `processing.reference.PlainEngine` (the plain
reference detector, the one the C library is proven bit-exact against), fed the same readings: a
faithful board agrees with padtune's fast engine on every frame; a board made to deviate is reported.
The session hands the reports out with its detections, in frame order (`TwinMismatch`).
The reporting rule is the contract's (ISSUE11-CONTRACT.md, "Events and output"): the first at once,
then at counts that are powers of two, and at once again after a second of agreement.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.detections import KeyState
from processing.profile import profile_for
from processing.reference import PlainEngine
from processing.session import Session
from processing.settings import ChannelSettings
from processing.twin import TwinCheck, TwinMismatch
from protocol.events import BoardChanged, BoardInfo, FaultKind, FrameBlock, LinkFault

RATE_HZ = 100.0
R, C, T = int(KeyState.RELEASED), int(KeyState.CONFIRMING), int(KeyState.TOUCHED)


def _compare(check: TwinCheck, board: np.ndarray, padtune: np.ndarray, first: int = 0, mask=None):
    t_s = np.arange(first, first + len(board)) / RATE_HZ
    return check.compare(board.astype(np.int8), padtune.astype(np.int8), first, t_s, RATE_HZ, mask)


def test_agreement_reports_nothing_and_counts_nothing():
    check = TwinCheck()
    states = np.random.default_rng(1).integers(0, 4, size=(500, 3))
    assert _compare(check, states, states) == []
    assert check.count == 0 and check.compared == 500 and check.active


def test_the_first_disagreement_is_reported_at_once_with_key_frame_and_both_states():
    check = TwinCheck()
    padtune = np.zeros((50, 3), dtype=np.int8)
    board = padtune.copy()
    board[17, 1] = T
    board[17, 2] = C  # two keys in one frame: one disagreeing frame, the first key named
    (report,) = _compare(check, board, padtune, first=1000)
    assert (report.channel, report.index, report.count, report.first) == (1, 1017, 1, True)
    assert report.board_state == KeyState.TOUCHED and report.padtune_state == KeyState.RELEASED
    assert report.t_s == 1017 / RATE_HZ
    assert "zone2 at frame 1017: board touched, padtune released" in report.describe("zone2")
    assert report.describe("zone2") == "twin disagrees: zone2 at frame 1017: board touched, padtune released"


def test_a_lasting_disagreement_is_reported_at_powers_of_two_only():
    check = TwinCheck()
    padtune = np.zeros((1000, 2), dtype=np.int8)
    board = padtune.copy()
    board[:, 0] = T  # 1000 disagreeing frames in a row
    reports = _compare(check, board, padtune)
    assert [r.count for r in reports] == [1, 2, 4, 8, 16, 32, 64, 128, 256, 512]
    assert [r.first for r in reports] == [True] + [False] * 9
    assert [r.index for r in reports] == [0, 1, 3, 7, 15, 31, 63, 127, 255, 511]
    assert check.count == 1000


def test_a_second_of_agreement_rearms_the_first_report():
    check = TwinCheck()
    n = 400
    padtune = np.zeros((n, 1), dtype=np.int8)
    board = padtune.copy()
    board[0:3, 0] = T  # counts 1, 2, 3: reports at 1 and 2
    board[3 + 99, 0] = T  # after 99 agreeing frames (less than a second at 100 Hz): count 4, a power
    board[103 + 100 + 1, 0] = T  # after 100 agreeing frames: a first again, count 5
    board[205 + 50, 0] = T  # 49 agreeing frames later: count 6, neither
    reports = _compare(check, board, padtune)
    assert [(r.index, r.count, r.first) for r in reports] == [(0, 1, True), (1, 2, False), (102, 4, False),
                                                              (204, 5, True)]
    assert reports[1].describe("k") == \
        "twin: 2 frames disagree; latest k at frame 1: board touched, padtune released"
    assert reports[3].describe("k").endswith("padtune released (5 frames so far)")


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 2**32), st.lists(st.integers(1, 300), min_size=1, max_size=12))
def test_reports_do_not_depend_on_how_the_frames_come_in_blocks(seed, sizes):
    rng = np.random.default_rng(seed)
    n = sum(sizes)
    padtune = rng.integers(0, 4, size=(n, 3))
    board = padtune.copy()
    bursts = rng.random(n) < 0.02  # stretches of disagreement
    for start in np.flatnonzero(bursts):
        board[start : start + int(rng.integers(1, 40)), int(rng.integers(0, 3))] ^= 1
    whole = _compare(TwinCheck(), board, padtune)
    check, cut, at = TwinCheck(), [], 0
    for size in sizes:
        cut += _compare(check, board[at : at + size], padtune[at : at + size], first=at)
        at += size
    assert cut == whole
    # Written out by hand: reports where the count is a power of two or the gap is a second or more.
    rows = np.flatnonzero((board != padtune).any(axis=1))
    expected = [int(r) for k, r in enumerate(rows)
                if k == 0 or (k + 1) & k == 0 or r - rows[k - 1] - 1 >= RATE_HZ]
    assert [r.index for r in whole] == expected


def test_keys_outside_the_mask_are_not_compared():
    check = TwinCheck()
    padtune = np.zeros((20, 2), dtype=np.int8)
    board = padtune.copy()
    board[:, 1] = T
    assert _compare(check, board, padtune, mask=np.array([True, False])) == []
    assert check.count == 0


def test_rearm_keeps_the_count_and_reset_forgets_it():
    check = TwinCheck()
    padtune = np.zeros((3, 1), dtype=np.int8)
    board = np.full((3, 1), T, dtype=np.int8)
    _compare(check, board, padtune)
    check.rearm()
    (report,) = _compare(check, board[:1], padtune[:1], first=3)
    assert report.first and report.count == 4
    check.reset()
    assert check.count == 0 and not check.active
    (report,) = _compare(check, board[:1], padtune[:1], first=4)
    assert report.first and report.count == 1


# -- in the session: the board's states from the reference detector ---------------------------------
SETTINGS = ChannelSettings(threshold_counts=40, hysteresis_counts=10, touch_debounce_frames=2,
                           release_debounce_frames=2, baseline_period_frames=16)


def _readings(frames: int, channels: int, seed: int = 3) -> np.ndarray:
    """Quiet readings with touches on every key now and then (counts rise on touch, polarity +)."""
    rng = np.random.default_rng(seed)
    out = 1000 + rng.integers(-4, 5, size=(frames, channels))
    for ch in range(channels):
        for start in range(40 + 30 * ch, frames - 60, 150):
            out[start : start + 25 + ch, ch] += 80
    return out.astype(np.int64)


def _board_states(readings: np.ndarray) -> np.ndarray:
    channels = readings.shape[1]
    engine = PlainEngine(channels, [SETTINGS] * channels, [1] * channels)
    block = FrameBlock(np.zeros(len(readings)), np.arange(len(readings)), readings, 0)
    engine.process(block)
    return engine.last_states.astype(np.int8)


def _reports(found) -> list[TwinMismatch]:
    return [d for d in found if isinstance(d, TwinMismatch)]


def _session(channels: int) -> Session:
    profile = profile_for(channels, tuple(f"zone{i + 1}" for i in range(channels)))
    return Session(replace(profile, defaults=SETTINGS), polarity=(1,))


def _blocks(readings: np.ndarray, states: np.ndarray | None, first: int = 0, size: int = 37):
    for a in range(0, len(readings), size):
        b = min(a + size, len(readings))
        yield FrameBlock(np.arange(first + a, first + b) / RATE_HZ, np.arange(first + a, first + b) % 65536,
                         readings[a:b], first + a, None, None if states is None else states[a:b])


INFO = BoardInfo(0.0, {"proto": "1", "channels": "3", "rate": "100"}, proto=1, channels=3, rate_hz=100.0,
                 new_session=True)


def test_a_faithful_board_agrees_with_padtune_on_every_frame():
    readings = _readings(1200, 3)
    states = _board_states(readings)
    assert (states == T).any()  # the stream has touches, or agreeing would prove little
    session = _session(3)
    found = session.handle([INFO, *_blocks(readings, states)])
    assert session.twin.compared == 1200 and session.twin.count == 0 and not _reports(found)


def test_frames_without_states_are_not_compared():
    session = _session(3)
    found = session.handle([INFO, *_blocks(_readings(300, 3), None)])
    assert not session.twin.active and not _reports(found)


def test_a_deviating_board_is_reported_with_its_key_and_frame_among_the_detections():
    readings = _readings(1200, 3)
    states = _board_states(readings)
    states[500:520, 2] = T  # the board says zone3 is touched where padtune sees it released
    assert (_board_states(readings)[500:520, 2] == R).all()
    session = _session(3)
    found = session.handle([INFO, *_blocks(readings, states)])
    reports = _reports(found)
    first = reports[0]
    assert (first.channel, first.index, first.first, first.count) == (2, 500, True, 1)
    assert first.board_state == KeyState.TOUCHED and first.padtune_state == KeyState.RELEASED
    assert [r.count for r in reports] == [1, 2, 4, 8, 16]
    assert session.twin.count == 20
    assert [d.index for d in found] == sorted(d.index for d in found)  # in frame order with touches


def test_a_new_channel_count_starts_the_count_afresh():
    readings = _readings(600, 3)
    states = _board_states(readings)
    states[100:110, 0] = T
    session = _session(3)
    session.handle([INFO, *_blocks(readings, states)])
    assert session.twin.count == 10
    wide = _readings(400, 4, seed=9)
    wide_states = _board_states(wide)
    wide_states[50, 3] = T
    last = _reports(session.handle([BoardChanged(6.0, 3, 4), *_blocks(wide, wide_states, first=600)]))[-1]
    assert (last.channel, last.index, last.count, last.first) == (3, 650, 1, True)
    assert session.twin.count == 1


def test_a_board_restart_rearms_the_first_report():
    readings = _readings(400, 3)
    states = _board_states(readings)
    states[180:183, 1] = T  # counts 1..3: reported at 1 and 2
    session = _session(3)
    found = session.handle([INFO, *_blocks(readings[:200], states[:200])])
    assert [r.count for r in _reports(found)] == [1, 2]
    # The board restarts: padtune takes its baselines again, as the board does (so the board's states
    # for the frames after it come from a fresh reference detector too).
    after = _readings(200, 3, seed=4)
    after_states = _board_states(after)
    after_states[10, 0] = T  # 27 frames after the last disagreement: within a second, yet a first
    found = session.handle([LinkFault(2.0, FaultKind.RESET), *_blocks(after, after_states, first=200)])
    last = _reports(found)[-1]
    assert (last.channel, last.index, last.count, last.first) == (0, 210, 4, True)


def test_without_a_profile_nothing_is_compared_and_the_user_is_told_why():
    """Provisional settings are padtune's guess from the noise, not the board's: no comparison."""
    readings = _readings(400, 3)
    session = Session(polarity=(1,))
    found = session.handle([INFO, *_blocks(readings, np.full((400, 3), T, dtype=np.int8))])
    assert not _reports(found) and not session.twin.active
    told = [n for n in session.notices if "its own key states" in n]
    assert len(told) == 1 and "load the profile the firmware was built with" in told[0]


def test_an_edit_on_padtunes_side_rearms_the_first_report():
    """A settings edit changes padtune's detector under the board: the next disagreement is news."""
    readings = _readings(300, 3)
    states = _board_states(readings)
    states[100:103, 0] = T
    states[130, 0] = T  # 27 frames later: within a second of the last one
    session = _session(3)
    session.handle([INFO, *_blocks(readings[:120], states[:120])])
    session.set_channel_settings(2, replace(SETTINGS, threshold_counts=41))
    found = _reports(session.handle(list(_blocks(readings[120:], states[120:], first=120))))
    assert [(r.index, r.count, r.first) for r in found] == [(130, 4, True)]
