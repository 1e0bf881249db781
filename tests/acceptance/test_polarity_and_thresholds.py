"""Issue 9, items 2-4 as the issue's failures show them: counts that fall on touch with no info line, a
board at 72 counts whose touch reads 14, a board at 30000..33000, polarity set on the command line or in
a profile, and a board already running when the port opens that must be asked `?`.
"""

from __future__ import annotations

import pytest

from tests.acceptance.runs import check_keys
from tests.acceptance.scenarios import NAMES

pytestmark = pytest.mark.e2e


def _run(outcome, name):
    o = outcome(name)
    assert o.returncode == 0 and not o.timed_out, o.describe()
    return o


def _keys_ok(o, name):
    problems = check_keys(o, NAMES[name])
    assert not problems, "\n".join(problems) + "\n" + o.describe()


@pytest.mark.scenarios("rc_falling")
def test_falling_counts_are_learned_reported_at_the_touch_and_never_at_the_lift(outcome):
    """An RC oscillator's count falls on touch; no info line, no profile. Today the touch came at the
    lift and never let go. Now: the first touch per key teaches `-` (said once, not reported), the next
    one is reported on landing and released on lifting."""
    o = _run(outcome, "rc_falling")
    _keys_ok(o, "rc_falling")
    for label in NAMES["rc_falling"]:
        assert len([x for x in o.stderr if f"{label}: counts fall on touch: polarity -" in x]) == 1, o.stderr


@pytest.mark.scenarios("rc_falling")
def test_status_rows_show_learning_then_the_learned_polarity_and_provisional_thresholds(outcome):
    """Contract 7: `status` rows carry `polarity` (null while learning) and `provisional` (true without a
    profile). The board starts its frames at `connected`; its first teaching touch is 2.5 s later."""
    o = _run(outcome, "rc_falling")
    connected_t = o.links("connected")[0]["t"]
    rows = [e for e in o.of("status") if e["channels"]]
    early = [e for e in rows if e["t"] - connected_t < 2.3]  # the board cannot be early, only late
    assert early and rows, o.describe()
    for ch in early[0]["channels"]:
        assert ch.get("polarity", "missing") is None, ch
    for ch in rows[-1]["channels"]:
        assert ch.get("polarity") == "-" and ch.get("provisional") is True, ch


@pytest.mark.scenarios("esp32_72")
def test_a_board_idling_at_72_whose_touch_reads_14_is_detected(outcome):
    """Default threshold 100 never fired on it; provisional thresholds from its noise (pp 4) must."""
    o = _run(outcome, "esp32_72")
    _keys_ok(o, "esp32_72")
    assert [x for x in o.stderr if "ch0: counts fall on touch: polarity -" in x], o.stderr


@pytest.mark.scenarios("big")
def test_a_board_at_30000_counts_is_detected_without_false_touches(outcome):
    o = _run(outcome, "big")
    _keys_ok(o, "big")


@pytest.mark.scenarios("polarity_cli")
def test_polarity_on_the_command_line_skips_learning(outcome):
    """`--polarity -`: no teaching touch, the very first touch of each key is reported, nothing said."""
    o = _run(outcome, "polarity_cli")
    _keys_ok(o, "polarity_cli")
    assert not o.stderr_with("counts fall on touch") and not o.stderr_with("counts rise on touch"), o.stderr


@pytest.mark.scenarios("polarity_list")
def test_a_polarity_list_sets_each_key(outcome):
    """`--polarity +,-,+` on a board whose middle key falls: all three first touches reported."""
    o = _run(outcome, "polarity_list")
    _keys_ok(o, "polarity_list")
    assert not o.stderr_with("on touch: polarity"), o.stderr


@pytest.mark.scenarios("profile_polarity")
def test_a_profiles_polarity_and_settings_are_used(outcome):
    """A hand-written profile with `polarity = [-1, -1, -1]` and a threshold: no learning, first touches
    reported, and the status rows say the settings are not provisional."""
    o = _run(outcome, "profile_polarity")
    _keys_ok(o, "profile_polarity")
    assert not o.stderr_with("on touch: polarity"), o.stderr
    rows = [e for e in o.of("status") if e["channels"]]
    assert rows, o.describe()
    for ch in rows[-1]["channels"]:
        assert ch.get("provisional") is False and ch.get("polarity") == "-", ch


@pytest.mark.scenarios("running")
def test_a_board_already_running_is_asked_and_its_answer_applied(outcome):
    """Its `! proto=1 ...` line went by before the port opened. padtune writes `?` once, 0.5 s after the
    open; the board answers with an info line without proto naming its keys and polarity `-`: the names
    are used at once and the keys detect the right way from the first touch (no learning)."""
    o = _run(outcome, "running")
    asks = o.player.asks
    assert len(asks) == 1, f"the board heard {o.player.host_lines}; {o.describe()}"
    assert 0.3 <= asks[0][0] - o.connected_at <= 3.0
    hello = [h for h in o.hellos() if h.get("names") == ["left", "mid", "right"]]
    assert hello and hello[-1].get("polarity") == ["-"], o.hellos()
    _keys_ok(o, "running")
    assert not o.stderr_with("on touch: polarity"), o.stderr
