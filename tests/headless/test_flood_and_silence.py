"""Issue 13: `padtune monitor` under a flood of garbage, on a silent board, and logging lines.

A user's view: `monitor` as a subprocess on a real pseudo-terminal (pyserial opens it as a board), the
JSON summary on stdout compared with the statistics of padtune's own decoder fed the same bytes in one
piece (its counts do not depend on how the bytes are cut: tests/protocol/test_decoder_properties.py).
"""

from __future__ import annotations

import random
import subprocess
import sys

import pytest

from protocol.decoder import Decoder
from tests.headless.helpers import ROOT, padtune
from tests.headless.test_link_commands import Monitor, links
from tests.protocol.ptyboard import PtyBoard

pytestmark = pytest.mark.e2e
LINES = 100_000


def _flood() -> bytes:
    """100,000 lines of high-bit garbage (a board at the wrong baud rate), every 50th one a readable v1
    frame and the next a comment: 2,000 frames and 2,000 notes among 96,000 garbled lines."""
    rnd = random.Random(13)
    out = bytearray()
    for i in range(LINES):
        if i % 50 == 48:
            out += b"@%d 100 200\n" % (i // 50)
        elif i % 50 == 49:
            out += b"# still here %d\n" % i
        else:
            out += bytes(rnd.randrange(0x80, 0x100) for _ in range(20)) + b"\n"
    return bytes(out)


@pytest.fixture(scope="module")
def flood(tmp_path_factory):
    data = _flood()
    pty = PtyBoard(tmp_path_factory.mktemp("garbage"))
    mon = Monitor(str(pty.path))
    try:
        mon.wait_text('"event":"connected"')
        pty.send(data)
        mon.wait_text(f"stalled: nothing for 2 s after {len(data)} bytes")
        events = mon.finish()
    finally:
        pty.close()
    decoder = Decoder()
    decoder.feed(data, 0.0)
    return decoder.stats, events, mon.err


def test_the_summary_of_a_garbage_flood_equals_the_decoders_statistics(flood):
    """Before: 14,092 of 100,000 garbled lines in the summary (events past the bounded queue were
    dropped without a marker). Every line is now in a count: garbled, frames (+ frames dropped behind an
    overflow marker), notes (+ events dropped behind a `dropped` marker)."""
    stats, events, _ = flood
    summary = events[-1]
    assert stats.garbled == 96_000 and stats.frames == 2_000 and stats.notes == 2_000  # the flood's make-up
    assert summary["garbled"] == stats.garbled, summary
    assert summary["frames"] + summary["overflow"] == stats.frames, summary
    assert summary["notes"] + summary["dropped"] == stats.notes, summary
    told = sum(e["count"] for e in links(events, "garbled"))
    assert told == stats.garbled  # the JSON link events carry the same counts as the summary


def test_the_baud_warning_survives_the_flood_with_the_prefix_and_no_line_is_bare(flood):
    _, events, err = flood
    assert len(links(events, "baud_suspect")) == 1
    lines = err.splitlines()
    assert any("baud rate 115200 is probably wrong" in line for line in lines), lines
    assert lines and all(line.startswith("padtune: ") for line in lines), lines
    assert all(line.isprintable() for line in lines)


def test_a_silent_board_is_reported_as_silence_with_its_length(tmp_path):
    """Port open, not a byte in 1 s (shorter than the link's 2 s silence report): before, exit 0 with
    `frames 0` and nothing said."""
    pty = PtyBoard(tmp_path)
    try:
        out = padtune("monitor", str(pty.path), "--json", "--duration", "1")
        text = padtune("monitor", str(pty.path), "--duration", "1")
    finally:
        pty.close()
    assert out.returncode == 0, out.stderr
    summary = [line for line in out.stdout.splitlines() if '"summary"' in line][-1]
    assert '"silent_s":1.0' in summary and '"frames":0' in summary
    said = f"padtune: {pty.path} sent nothing in 1.0 s (the port is open, no bytes came): check that the "
    assert out.stderr.splitlines() == [said + "board is powered and running and that this is its port"]
    assert "nothing received: silent for 1.0 s" in text.stdout


def test_a_logged_error_reaches_stderr_as_one_prefixed_escaped_line(tmp_path):
    """A thread's bug is logged with a traceback (protocol.link, tui.recorder); with padtune's handler it
    is one `padtune:` line, control characters escaped, and the traceback only under PADTUNE_DEBUG."""
    script = ("import logging, tui.loglines as l; l.install(); l.install()\n"
              "try:\n    raise ValueError('bad \\x1b[31m line')\n"
              "except ValueError:\n    logging.getLogger('padtune.link').exception('reader failed')\n"
              "logging.getLogger('padtune.link').info('an INFO line stays quiet')\n")
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True, text=True,
                          timeout=60)
    assert done.stderr.splitlines() == ["padtune: reader failed (ValueError: bad \\x1b[31m line; set "
                                        "PADTUNE_DEBUG=1 for the details)"], done.stderr

