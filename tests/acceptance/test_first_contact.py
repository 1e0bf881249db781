"""Issue 9, items 1-3: a board that prints numbers in any common form, plugged in with no profile and no
info line, read by `padtune monitor PTY --json` as a subprocess over a real pseudo-terminal.

Each board (tests/acceptance/scenarios.py) is quiet for 2.5 s, then touches each key once to teach its
polarity (contract 6: not reported), then once more (reported). Checked per form, each in its own test
so a failure names what is missing: every data line read as a frame, the `hello` of the plain form
(contract 11), text lines kept as notes, the touches and releases on the right key (by name) at the
right frame (window in runs.py: LATE_FRAMES after the finger lands or lifts), nothing at the teaching
touches or at any lift, the learned polarity said once per key, and no baud-rate advice.
"""

from __future__ import annotations

import pytest

from tests.acceptance.runs import check_keys
from tests.acceptance.scenarios import BOARDS, NAMES

pytestmark = pytest.mark.e2e

# The hello each plain form must give (contract 11). `names` only where the board prints names: for bare
# columns the contract's StreamForm carries none, and whether hello then lists chN or nothing is open.
HELLO = {
    "columns": {"form": "columns", "scale": 1, "time_column": False},
    "commas": {"form": "columns", "scale": 1, "time_column": False},
    "plotter_pairs": {"form": "pairs", "scale": 1, "time_column": False,
                      "names": ["zone1", "zone2", "zone3"]},
    "spaced_pairs": {"form": "pairs", "scale": 1, "time_column": False, "names": ["up", "down", "ok"]},
    "equals_pairs": {"form": "pairs", "scale": 1, "time_column": False, "names": ["k1", "k2", "k3"]},
    "brackets": {"form": "brackets", "scale": 1, "time_column": False, "names": ["T0", "T2", "T3"]},
    "fixed6": {"form": "columns", "scale": 1, "time_column": False},
    "decimals": {"form": "columns", "scale": 100, "time_column": False},
    "millis": {"form": "columns", "scale": 1, "time_column": True},
    "millis_pairs": {"form": "pairs", "scale": 1, "time_column": True, "names": ["s1", "s2"]},
    "cr_only": {"form": "columns", "scale": 1, "time_column": False},
    "chatty": {"form": "columns", "scale": 1, "time_column": False},
    "rc_falling": {"form": "columns", "scale": 1, "time_column": False},
    "esp32_72": {"form": "columns", "scale": 1, "time_column": False},
    "big": {"form": "pairs", "scale": 1, "time_column": False, "names": ["s0", "s1"]},
}
FORMS = sorted(HELLO)


def _run(outcome, name):
    o = outcome(name)
    assert o.returncode == 0 and not o.timed_out, o.describe()
    return o


@pytest.mark.scenarios(*FORMS)
@pytest.mark.parametrize("name", FORMS)
def test_every_data_line_is_read_as_a_frame(outcome, name):
    o = _run(outcome, name)
    board = BOARDS[name]
    summary = o.summary
    assert summary["frames"] == o.player.sent == board.frames, o.describe()
    assert summary["garbled"] == 0 and summary["overlong"] == 0, o.describe()
    # The time column is the board's time, never a key: the real keys only (contract 2).
    assert [c["name"] for c in summary["channels"]] == list(NAMES[name]), summary["channels"]
    # A time column that goes back is a board reset (the millis board's watchdog); nothing else resets.
    assert summary["resets"] == (1 if board.reset_at is not None else 0), o.describe()


@pytest.mark.scenarios(*FORMS)
@pytest.mark.parametrize("name", FORMS)
def test_hello_names_the_plain_form(outcome, name):
    o = _run(outcome, name)
    hellos = o.hellos()
    assert hellos, o.describe()
    if BOARDS[name].reset_at is None:
        assert len(hellos) == 1, hellos  # once: the form does not change
    hello = hellos[0]
    for key, want in HELLO[name].items():
        assert hello.get(key) == want, (key, hello)
    assert hello.get("channels") in (len(NAMES[name]), None), hello  # "from what is known, null otherwise"
    assert hello.get("board") is None, hello  # a plain form does not name its board
    first_detection = min((i for i, e in enumerate(o.events) if e["type"] in ("touch", "release")),
                          default=len(o.events))
    assert o.events.index(hello) < first_detection


@pytest.mark.scenarios(*FORMS)
@pytest.mark.parametrize("name", FORMS)
def test_touch_and_release_on_the_right_key_at_the_right_frame(outcome, name):
    """The teaching touches are not reported, nothing at any lift; the delta is in the board's units at
    the form's scale (a decimal board's hundredths: never rounded to whole counts)."""
    o = _run(outcome, name)
    assert not check_keys(o, NAMES[name]), "\n".join(check_keys(o, NAMES[name])) + "\n" + o.describe()
    board = BOARDS[name]
    for touch in o.of("touch"):
        # The reading's noise is within +-noise, and a baseline taken at one noisy frame (after the teaching
        # touch, or at the start) may be off by as much: the delta is within depth +- 2 noise.
        assert board.depth / 3 - board.noise <= touch["delta"] <= board.depth + 2 * board.noise, touch


@pytest.mark.scenarios(*FORMS)
@pytest.mark.parametrize("name", FORMS)
def test_learned_polarity_is_said_once_per_key(outcome, name):
    o = _run(outcome, name)
    board = BOARDS[name]
    for key, label in enumerate(NAMES[name]):
        way = "rise on touch: polarity +" if board.polarity[key] > 0 else "fall on touch: polarity -"
        said = [line for line in o.stderr if f"{label}: counts {way}" in line]
        assert len(said) == 1, (label, way, o.stderr)
        wrong = "fall on touch" if board.polarity[key] > 0 else "rise on touch"
        assert not [line for line in o.stderr if f"{label}: counts {wrong}" in line], o.stderr


@pytest.mark.scenarios(*FORMS)
@pytest.mark.parametrize("name", FORMS)
def test_a_readable_board_gets_no_baud_rate_advice(outcome, name):
    o = _run(outcome, name)
    assert not o.links("baud_suspect") and not o.links("unreadable"), o.describe()
    assert not o.stderr_with("baud"), o.stderr


@pytest.mark.scenarios("chatty")
def test_text_lines_are_board_notes_not_garbage(outcome):
    """A banner at power-up (an ESP32 ROM line, a build date, the sketch's name) and a 'calibrating...'
    between data lines: notes, each kept; no garbled line, and the frames around them all read."""
    o = _run(outcome, "chatty")
    board = BOARDS["chatty"]
    notes = [e["text"] for e in o.of("note")]
    for text in [*board.boot, *board.texts[150]]:
        assert any(text in n for n in notes), (text, notes)
    assert o.summary["garbled"] == 0 and o.summary["frames"] == board.frames, o.describe()


@pytest.mark.scenarios("columns")
def test_a_board_without_info_line_is_asked_once(outcome):
    """Contract 8: no info line 0.5 s after the open, so padtune writes `?` once; a sketch that does not
    answer is fine (it is read all the same)."""
    o = _run(outcome, "columns")
    asks = o.player.asks
    assert len(asks) == 1, o.player.host_lines
    delay_s = asks[0][0] - o.connected_at
    assert 0.3 <= delay_s <= 3.0, delay_s  # 0.5 s after the open; the upper bound allows a loaded machine
