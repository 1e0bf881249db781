"""The twin check as a user meets it: `padtune monitor` as a subprocess on simulated boards that send
their own key states (from the C library), over `sim://` and over a pseudo-terminal served by
`padtune sim`; a board told to deviate is reported as the contract says, a faithful one never is."""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from dataclasses import replace

import pytest

from devices.board_settings import SIM_FACTORY
from processing.profile import profile_for, save_profile
from processing.settings import ChannelSettings
from tests.headless.helpers import ROOT, json_lines, padtune
from tests.headless.test_link_commands import WAIT_S, Monitor

pytestmark = pytest.mark.e2e

NAMES = ("zone1", "zone2", "zone3", "zone4", "stop", "dur0", "dur1", "dur2", "dur3")
RATE_HZ = 60  # greenhouse.toml


@pytest.fixture(scope="module")
def profile(tmp_path_factory):
    """The profile the simulated firmware runs: its factory settings on every key (a board that takes
    section 7's commands runs the settings it holds; `padtune pull` would read the same)."""
    path = tmp_path_factory.mktemp("twin") / "greenhouse.toml"
    factory = ChannelSettings(**{k: v for k, v in SIM_FACTORY.items() if k != "polarity"})
    save_profile(replace(profile_for(len(NAMES), NAMES, "greenhouse"), defaults=factory), path)
    return str(path)


def _twins(events: list[dict]) -> list[dict]:
    return [e for e in events if e["type"] == "twin_mismatch"]


def _check_deviation(events: list[dict], from_index: int) -> None:
    twins = _twins(events)
    assert twins, events[-3:]
    first = twins[0]
    assert first == {"type": "twin_mismatch", "t": first["t"], "channel": "zone2", "index": from_index,
                     "board_state": "confirming", "padtune_state": "released", "count": 1,
                     "seq": from_index}  # the board's own count: it numbered its frames from 0 too
    counts = [e["count"] for e in twins]
    # After the first: at most one report per power of two (a key off on every frame is never re-armed).
    assert counts == [1 << k for k in range(len(counts))]
    assert len(twins) <= 12


def test_a_deviating_board_is_reported_as_twin_mismatch_events(profile):
    out = padtune("monitor", "sim://greenhouse?speed=4&seed=2&fault=deviate:zone2@1", "--json",
                  "--profile", profile, "--duration", "2.5")
    assert out.returncode == 0, out.stderr
    events = json_lines(out.stdout)
    _check_deviation(events, from_index=RATE_HZ)
    summary = events[-1]
    assert summary["type"] == "summary" and summary["twin_mismatches"] == summary["twin_compared"] - RATE_HZ
    hello = next(e for e in events if e["type"] == "hello")
    assert hello["fields"]["states"] == "1"


def test_a_faithful_board_is_never_reported_and_the_readable_output_says_so(profile):
    out = padtune("monitor", "sim://greenhouse?speed=4&seed=2&states=1", "--profile", profile,
                  "--duration", "2")
    assert out.returncode == 0, out.stderr
    assert " twin " not in out.stdout
    assert "twin check: 0 of" in out.stdout and "frames with the board's states disagreed" in out.stdout


def test_without_the_boards_profile_nothing_is_compared_and_stderr_says_why():
    out = padtune("monitor", "sim://greenhouse?speed=4&fault=deviate:zone2", "--json", "--duration", "1.5")
    assert out.returncode == 0, out.stderr
    assert not _twins(json_lines(out.stdout))
    assert "load the profile the firmware was built with" in out.stderr


def test_a_deviating_board_on_a_pseudo_terminal(tmp_path, profile):
    link = tmp_path / "board"
    sim = subprocess.Popen([sys.executable, "-m", "tui.cli", "sim", "greenhouse", "--seed", "2", "--speed",
                            "4", "--no-script", "--fault", "deviate:zone2@1", "--link", str(link)],
                           cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert sim.stdout is not None and sim.stdout.readline().strip().startswith("/dev/")
        deadline = time.monotonic() + WAIT_S
        while not link.exists():
            assert time.monotonic() < deadline, "padtune sim made no link"
            time.sleep(0.02)
        mon = Monitor(str(link), "--profile", profile)
        try:
            mon.wait_text('"count":4')
        finally:
            events = mon.finish()
    finally:
        sim.send_signal(signal.SIGINT)
        sim.communicate(timeout=WAIT_S)
    twins = _twins(events)
    # The board ran before the monitor opened the pty: padtune's first frame is not the board's, so the
    # first report's index is the first frame at or after 1 s of board time that padtune saw, or later.
    # No scripted touches: padtune, joining mid-stream, takes its baselines from its first frame, and at a
    # touch's edges a few counts of baseline apart can put the two a frame apart (README: the twin check).
    assert twins[0]["channel"] == "zone2" and twins[0]["count"] == 1
    assert [e["count"] for e in twins][:3] == [1, 2, 4]
    assert twins[0]["board_state"] == "confirming" and twins[0]["padtune_state"] == "released"


def test_the_readable_line_and_the_json_event_say_the_same():
    """Both writers, fed one report: every field of the contract's event, and the words for people."""
    import io

    from tui.headless.output import make_output

    text, lines = io.StringIO(), io.StringIO()
    for out in (make_output(False, text), make_output(True, lines)):
        out.twin_mismatch(1.5, "zone2", 90, "touched", "released", 4)
        out.close()
    event = {"type": "twin_mismatch", "t": 1.5, "channel": "zone2", "index": 90, "board_state": "touched",
             "padtune_state": "released", "count": 4}
    assert json_lines(lines.getvalue()) == [event]
    assert " ".join(text.getvalue().split()) == \
        "1.500 s twin zone2 board touched, padtune released (frame 90; 4 disagreeing frames so far)"


def test_a_board_with_states_but_no_c_compiler_is_one_line_and_exit_2():
    """The simulated board's detector is the C library: without a compiler it cannot run, and says so."""
    out = padtune("monitor", "sim://greenhouse?states=1", "--json", "--duration", "1",
                  env={"CC": "/nonexistent/cc", "PADTUNE_CACHE_DIR": "/nonexistent/cache"})
    assert out.returncode == 2 and out.stdout == ""
    (line,) = out.stderr.splitlines()
    assert line.startswith("padtune: ") and "C compiler" in line and "install one" in line
