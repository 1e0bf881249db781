"""Issue 9, items 6 and 7: what padtune says about a board it cannot read, a silent or stalling board, a
flood of one repeated frame, an invalid name, and a line of 512 channels of 32-bit values.

Where the contract quotes no wording, messages are matched loosely (a word or the quoted line), and each
such place says so.
"""

from __future__ import annotations

import pytest

from tests.acceptance.runs import check_keys
from tests.acceptance.scenarios import BOARDS, NAMES

pytestmark = pytest.mark.e2e


def _run(outcome, name):
    o = outcome(name)
    assert o.returncode == 0 and not o.timed_out, o.describe()
    return o


def _no_baud_advice(o) -> None:
    assert not o.links("baud_suspect"), o.describe()
    assert not o.stderr_with("baud"), o.stderr


@pytest.mark.scenarios("silent")
def test_a_board_that_sends_nothing_is_reported_once(outcome):
    """Contract 9: no bytes for 2 s after opening: one `silent` link event and one stderr line. Contract
    8: it was asked `?` once (silence is fine). Wording open: the stderr line is found as the one line
    besides any profile notice, and must carry a word of silence."""
    o = _run(outcome, "silent")
    assert len(o.links("silent")) == 1, o.describe()
    lines = [x for x in o.stderr if "profile" not in x]
    assert len(lines) == 1 and lines[0].startswith("padtune: "), o.stderr
    assert any(w in lines[0].lower() for w in ("silent", "nothing", "no data", "no bytes", "quiet")), lines
    assert len(o.player.asks) == 1, o.player.host_lines
    _no_baud_advice(o)


@pytest.mark.scenarios("stall")
def test_a_board_that_stalls_after_data_is_reported_as_stalled(outcome):
    """1 s of frames, 2.6 s of nothing, then frames again: one `silent` event whose detail says stalled
    (contract 9), after the first frames; every frame before and after read."""
    o = _run(outcome, "stall")
    silent = o.links("silent")
    assert len(silent) == 1 and "stall" in silent[0]["detail"].lower(), o.describe()
    assert silent[0]["t"] - o.links("connected")[0]["t"] >= 1.0 + 2.0 - 0.2  # after 1 s of data + 2 s
    assert o.summary["frames"] == BOARDS["stall"].frames == o.player.sent
    assert len(o.stderr_with("stall")) == 1, o.stderr  # wording open: one line with "stall" in it


@pytest.mark.scenarios("unreadable")
def test_a_readable_stream_in_no_known_form_gets_one_message_not_baud_advice(outcome):
    """Only `Sensor reading is high` lines: one `unreadable` event quoting the first line and naming where
    the forms are written down (PROTOCOL.md), one stderr line; no baud-rate advice. The lines are human
    text, so they are kept as notes (contract 2) and not counted as garbage."""
    o = _run(outcome, "unreadable")
    unreadable = o.links("unreadable")
    assert len(unreadable) == 1, o.describe()
    assert "Sensor reading is high" in unreadable[0]["detail"] and "PROTOCOL.md" in unreadable[0]["detail"]
    assert len(o.stderr_with("Sensor reading is high")) == 1, o.stderr
    _no_baud_advice(o)
    assert any(e["text"] == "Sensor reading is high" for e in o.of("note")), o.describe()
    assert o.summary["garbled"] == 0


@pytest.mark.scenarios("arrows")
def test_printable_lines_of_another_tools_form_get_the_same_message(outcome):
    """`>touch0:1234` (a plotter's own form, not one padtune reads): garbled lines, all printable: the
    `unreadable` message quotes the first one; no baud-rate advice."""
    o = _run(outcome, "arrows")
    unreadable = o.links("unreadable")
    assert len(unreadable) == 1 and ">touch0:" in unreadable[0]["detail"], o.describe()
    assert "PROTOCOL.md" in unreadable[0]["detail"]
    assert len(o.stderr_with(">touch0:")) == 1, o.stderr
    _no_baud_advice(o)


@pytest.mark.scenarios("slow")
def test_a_slow_sketch_is_not_called_unreadable(outcome):
    """`delay(500)` in loop(): 2 lines a second. The decoder holds the first 8 data lines of a plain form
    (contract 2), which takes 3.5 s here, longer than the 2 s after which a stream with no frame is called
    unreadable (contract 9). The contract does not say how the two meet; a user whose board is read fine
    must not be told it cannot be: lines held as data are not unreadable. Every line is read."""
    o = _run(outcome, "slow")
    assert not o.links("unreadable") and not o.stderr_with("PROTOCOL.md"), o.describe()
    _no_baud_advice(o)
    assert o.summary["frames"] == BOARDS["slow"].frames == o.player.sent, o.describe()
    assert o.hellos() and o.hellos()[0].get("form") == "columns", o.hellos()


@pytest.mark.scenarios("binary")
def test_high_bit_noise_still_gets_the_baud_rate_advice(outcome):
    """The other side of the same rule (contract 9): bytes that are mostly high-bit or non-printable do
    say the baud rate is wrong. Keeps the tests above from passing on a diagnosis that was removed."""
    o = _run(outcome, "binary")
    assert o.links("baud_suspect"), o.describe()


@pytest.mark.scenarios("flood")
def test_a_flood_of_one_repeated_frame_is_counted_at_a_bounded_rate(outcome):
    """20,000 copies of `@42 1000 1020 990*CRC` (a stuck send loop): delivered, not resets (no
    re-baseline), reported as `repeated` at the 1st repeat and at powers of two (contract 3): a handful
    of events and stderr lines, not one per line."""
    o = _run(outcome, "flood")
    summary = o.summary
    assert summary["frames"] == BOARDS["flood"].frames == o.player.sent, o.describe()
    assert summary["resets"] == 0 and not o.links("reset"), o.describe()
    repeated = o.links("repeated")
    assert 1 <= len(repeated) <= 20, o.describe()
    assert sum(e["count"] for e in repeated) <= BOARDS["flood"].frames - 1
    assert len(o.of("link")) < 40 and len(o.stderr) < 40, o.describe()
    assert not o.player.asks  # its info line came at once: nothing to ask


@pytest.mark.scenarios("invalid_name")
def test_one_invalid_name_falls_back_alone_and_is_reported(outcome):
    """`names=zone1,zo$ne2,zone3`: one notice with the name and its fallback (contract 4 quotes the shape:
    `names: 'zone 2' (channel 1) is not a valid name (...): using ch1`); zone1 and zone3 keep their
    names, channel 1 is ch1, and each key's touch is reported under that name."""
    o = _run(outcome, "invalid_name")
    said = o.stderr_with("zo$ne2")
    assert len(said) == 1 and "ch1" in said[0] and "channel 1" in said[0], o.stderr
    problems = check_keys(o, NAMES["invalid_name"])
    assert not problems, "\n".join(problems) + "\n" + o.describe()
    assert not o.player.asks


@pytest.mark.scenarios("wide512")
def test_512_channels_of_32_bit_values_fit_in_one_line(outcome):
    """Contract 5: lines up to 8192 bytes; 512 channels of 11-character values (about 6.1 KB a line with
    `@seq` and a checksum): every frame read, none overlong, and a touch on k300 at its frame."""
    o = _run(outcome, "wide512")
    summary = o.summary
    assert summary["overlong"] == 0 and summary["garbled"] == 0 and summary["bad_checksum"] == 0, o.describe()
    assert summary["frames"] == BOARDS["wide512"].frames == o.player.sent
    assert len(summary["channels"]) == 512
    problems = check_keys(o, BOARDS["wide512"].keys)
    assert not problems, "\n".join(problems)
