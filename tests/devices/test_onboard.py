"""Simulated boards that send their own key states (PROTOCOL.md section 3) from the C firmware library.

The states a simulated board sends are checked against `processing.reference.PlainEngine` (padtune's
plain reference detector, Python) run on the readings decoded from the same bytes: the sim's on-board
detector is the C library, so this is the C library and the reference agreeing through the wire. The
`deviate` fault shifts one key's state one step from its time on, and nothing else.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from devices.faults import FaultPlan
from devices.onboard import DetectorSettings
from devices.protocol_sim import board_from_url
from devices.simulator import SimBoard
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from protocol.decoder import Decoder
from protocol.errors import UserError
from protocol.events import BoardInfo, FrameBlock


def _decode(data: bytes) -> tuple[list, np.ndarray, np.ndarray]:
    events = Decoder().feed(data, 0.0)
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    assert all(b.board_states is not None for b in blocks)
    states = np.concatenate([b.board_states for b in blocks])
    return events, np.concatenate([b.readings for b in blocks]), states


def _touched_run(board: SimBoard) -> bytes:
    """A second hands off, a firm touch on the first key for a second, a second to let go."""
    data = board.run_for(1.0)
    board.press(0, True, 3.0)
    data += board.run_for(1.0)
    board.press(0, False)
    return data + board.run_for(1.0)


def _reference_states(readings: np.ndarray, board: SimBoard) -> np.ndarray:
    """PlainEngine with the settings the board holds (section 7's settings in force, or the defaults
    on a board that does not take the commands)."""
    channels = readings.shape[1]
    if board.settings is None:
        settings, polarity = [ChannelSettings()] * channels, [board.spec.method.polarity] * channels
    else:
        held = board.settings.live  # (a board now narrower held the factory's on the others before)
        live = [held[c] if c < len(held) else board.settings.factory for c in range(channels)]
        settings = [ChannelSettings(**{k: v for k, v in s.items() if k != "polarity"}) for s in live]
        polarity = [s["polarity"] for s in live]
    engine = PlainEngine(channels, settings, polarity)
    engine.process(FrameBlock(np.zeros(len(readings)), np.arange(len(readings)), readings, 0))
    return engine.last_states


def test_the_boards_detector_starts_from_the_default_profile_settings():
    assert DetectorSettings()._asdict() == dataclasses.asdict(ChannelSettings())


@pytest.mark.parametrize("name", ["greenhouse", "pumphouse"])
def test_a_board_sends_the_states_of_the_c_library_which_match_the_reference_detector(name):
    board = SimBoard(name, seed=3, states=True)
    events, readings, states = _decode(_touched_run(board))
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.fields["states"] == "1"
    assert (states == 2).any() and (states == 0).any()  # a touch and its release, or this proves little
    assert np.array_equal(states, _reference_states(readings, board))


def test_a_board_without_settings_commands_runs_the_default_settings():
    board = SimBoard("greenhouse", seed=3, states=True, settings=False)
    _, readings, states = _decode(_touched_run(board))
    assert (states == 2).any()
    assert np.array_equal(states, _reference_states(readings, board))


def test_a_set_command_changes_what_the_boards_detector_runs_from_the_next_frame():
    board = SimBoard("greenhouse", seed=3, states=True)
    data = board.run_for(1.0)
    board.write(b"set 0 threshold_counts=5000 hysteresis_counts=10\n")  # no touch can reach that
    board.press(0, True, 3.0)
    data += board.run_for(1.0)
    board.press(0, False)
    board.write(b"set 0 threshold_counts=30 hysteresis_counts=8\n")  # the factory's again
    data += board.run_for(1.0)
    board.press(0, True, 3.0)
    data += board.run_for(1.0)
    _, _, states = _decode(data)
    rate = int(board.spec.rate_hz)
    assert not (states[rate:2 * rate, 0] == 2).any()  # held a second, never touched at 5000
    assert (states[3 * rate:, 0] == 2).any()  # touched again once the threshold came back down
    assert board.onboard is not None and board.onboard.sync(board.settings.live) is None


def test_without_states_a_board_sends_none():
    events = Decoder().feed(SimBoard("greenhouse", seed=3).run_for(1.0), 0.0)
    assert all(e.board_states is None for e in events if isinstance(e, FrameBlock))
    assert "states" not in next(e for e in events if isinstance(e, BoardInfo)).fields


def test_deviate_shifts_one_keys_state_one_step_from_its_time_on():
    plan = FaultPlan.parse(["deviate:zone1@1.5"])
    board = SimBoard("greenhouse", seed=3, faults=plan)  # the fault alone turns the states on
    _, readings, states = _decode(_touched_run(board))
    expected = _reference_states(readings, board)
    start = int(np.ceil(1.5 * board.spec.rate_hz))
    assert np.array_equal(states[:start], expected[:start])
    assert np.array_equal(states[start:, 0], (expected[start:, 0] + 1) % 4)
    assert np.array_equal(states[:, 1:], expected[:, 1:])


def test_a_restarted_board_starts_its_detector_afresh_and_a_new_width_too():
    board = SimBoard("greenhouse", seed=3, states=True, faults=FaultPlan.parse(["reset@1", "width:4@2"]))
    data = board.run_for(0.5)
    board.press(0, True, 3.0)  # held across the restart: a detector that went on would still say touched
    data += board.run_for(2.5)
    events = Decoder().feed(data, 0.0)
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    assert {b.board_states.shape[1] for b in blocks} == {9, 4}
    rate = int(board.spec.rate_hz)
    nine = [b for b in blocks if b.channels == 9]
    readings, states = (np.concatenate([getattr(b, k) for b in nine]) for k in ("readings", "board_states"))
    # From the restart on, the board's detector takes its baselines afresh, as a reference started there.
    assert (states[rate - 5:rate, 0] == 2).all()  # touched up to the restart
    assert np.array_equal(states[rate:], _reference_states(readings[rate:], board))
    assert (states[rate:, 0] == 0).all()  # ... and released after it, the touch being its new baseline


def test_url_option_and_fault_mistakes_are_one_line():
    board, _, _ = board_from_url("sim://greenhouse?states=1")
    assert board.onboard is not None
    with pytest.raises(UserError, match="states"):
        board_from_url("sim://greenhouse?states=maybe")
    with pytest.raises(UserError, match="name the pad"):
        FaultPlan.parse(["deviate"])
    with pytest.raises(UserError, match="no pad 'zone9'"):
        SimBoard("greenhouse", faults=FaultPlan.parse(["deviate:zone9"]))
