"""Every plain form end to end (issue 9): a board on a pseudo-terminal prints what quick sketches print
(pairs, brackets, padded columns, a millis() column, decimals, CR-only and CRLF line ends, text lines),
`padtune monitor PORT --json --profile P` runs as a subprocess, and the touch and release come out on
the right key at the right frame, with a `hello` that says how the stream was read.

The profile gives threshold, hysteresis and polarity (counts fall on touch), so these tests do not
depend on learned polarity or provisional thresholds. Frame indices count frames from the first one
decoded; with `touch_debounce_frames` = 3 the touch is reported on the third frame over the threshold,
the release on the third frame back under the release level (checked against
`processing.reference.PlainEngine` in `test_the_expected_frames_are_the_detectors`).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from dataclasses import replace

import numpy as np
import pytest

from processing.profile import profile_for, save_profile
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from protocol.encoder import encode_frames, encode_info
from protocol.events import FrameBlock
from tests.headless.helpers import ROOT, json_lines
from tests.headless.test_live_commands import WAIT_S, LineWatcher, _holds_open
from tests.protocol.ptyboard import PtyBoard

pytestmark = pytest.mark.e2e

FRAMES = 400
TOUCH = (200, 300)  # frames [200, 300) of the second key are touched
DROP_COUNTS = 300  # counts fall on touch (an RC oscillator's count does)
SETTINGS = ChannelSettings(threshold_counts=120, hysteresis_counts=30)
TOUCH_AT, RELEASE_AT = TOUCH[0] + 2, TOUCH[1] + 2  # the third frame over / back under
NOISE = np.array([0, 2, -1, 3, -2, 1, -3, 0, 2, -2, 1, -1])  # small, never rising 7 times in a row


def readings() -> np.ndarray:
    """Two keys: a baseline with a little noise; the second key touched over TOUCH."""
    r = np.empty((FRAMES, 2), dtype=np.int64)
    r[:, 0] = 1200 + NOISE[np.arange(FRAMES) % len(NOISE)]
    r[:, 1] = 1500 + NOISE[(np.arange(FRAMES) + 5) % len(NOISE)]
    r[TOUCH[0] : TOUCH[1], 1] -= DROP_COUNTS
    return r


def lines(form: str, r: np.ndarray) -> bytes:
    """What a sketch printing `form` sends for the readings `r` (in counts; decimals are counts/100)."""
    out = []
    for k, (a, b) in enumerate(r.tolist()):
        if k % 97 == 50:
            out.append(b"Status: running, all keys calibrated\r\n")  # a text line between data lines
        if form == "pairs":
            out.append(b"zone1:%d, zone2:%d\n" % (a, b))
        elif form == "pairs-cr":
            out.append(b"zone1=%d zone2=%d\r" % (a, b))
        elif form == "brackets":
            out.append(b"T0:[ %4d] T1:[ %4d] \r\n" % (a, b))
        elif form == "padded":
            out.append(b"%6d%6d\r\n" % (a, b))
        elif form == "millis":
            out.append(b"%d %d %d\n" % (31_000 + 10 * k + k % 3, a, b))
        elif form == "decimals":  # a board printing floats: 12.00 is 1200 at scale 100
            out.append(b"t:%d zone1:%.2f zone2:%.1f\r" % (5_000 + 20 * k, a / 100, b / 100))
    return b"Touch board ready\r\n" + b"".join(out)


CASES = {
    # form: (names, what the hello says: form, scale, time_column)
    "pairs": (("zone1", "zone2"), ("pairs", 1, False)),
    "pairs-cr": (("zone1", "zone2"), ("pairs", 1, False)),
    "brackets": (("T0", "T1"), ("brackets", 1, False)),
    "padded": (("left", "right"), ("columns", 1, False)),
    "millis": (("left", "right"), ("columns", 1, True)),
    "decimals": (("zone1", "zone2"), ("pairs", 100, True)),
}


def test_the_expected_frames_are_the_detectors():
    """The frames the tests expect, from the reference engine on the same readings (in counts)."""
    engine = PlainEngine(2, [SETTINGS, SETTINGS], [-1, -1])
    r = readings()
    found = engine.process(FrameBlock(np.arange(FRAMES) / 100.0, np.full(FRAMES, -1), r, 0))
    kinds = [(type(d).__name__, d.channel, d.index) for d in found]
    expected = [("Touch", 1, TOUCH_AT), ("Release", 1, RELEASE_AT)]
    assert [k for k in kinds if k[0] in ("Touch", "Release")] == expected


def monitor(tmp_path, profile, data: bytes) -> list[dict]:
    """`padtune monitor PTY --json --profile P` while a board sends `data`; its JSON events once the
    release came and SIGTERM ended it."""
    save_profile(profile, tmp_path / "p.toml")
    board = PtyBoard(tmp_path)
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "monitor", str(board.path), "--json",
                             "--profile", str(tmp_path / "p.toml")], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env={**os.environ, "NO_COLOR": "1"})
    watcher = LineWatcher(proc)
    try:
        tty_path = os.path.realpath(board.path)
        deadline = time.monotonic() + WAIT_S
        while not _holds_open(proc.pid, tty_path):  # bytes sent before the open would be flushed
            assert proc.poll() is None and time.monotonic() < deadline, "monitor never opened the port"
            time.sleep(0.02)
        time.sleep(0.2)  # pyserial resets the input buffer at the end of its open
        board.send(data)
        watcher.wait_text('"type":"release"')
        proc.send_signal(signal.SIGTERM)
        proc.wait(WAIT_S)
        out, err = watcher.finish(), proc.stderr.read()
    finally:
        if proc.poll() is None:
            proc.kill()
        board.close()
    assert proc.returncode == 0, err
    return json_lines(out)


@pytest.mark.parametrize("form", list(CASES))
def test_monitor_reads_a_plain_form_and_finds_the_touch_on_the_right_key_and_frame(tmp_path, form):
    names, (kind, scale, timed) = CASES[form]
    # The decimals board prints counts / 100, read at scale 100: the readings are the counts again.
    profile = replace(profile_for(2, names, polarity=(-1, -1)), defaults=SETTINGS)
    events = monitor(tmp_path, profile, lines(form, readings()))
    (hello,) = [e for e in events if e["type"] == "hello"]
    assert (hello["form"], hello["scale"], hello["time_column"], hello["channels"]) == (kind, scale, timed, 2)
    assert hello["names"] == (list(names) if kind != "columns" else [])
    touches = [(e["type"], e["channel"], e["index"]) for e in events if e["type"] in ("touch", "release")]
    assert touches == [("touch", names[1], TOUCH_AT), ("release", names[1], RELEASE_AT)]
    notes = [e["text"] for e in events if e["type"] == "note"]
    assert notes[0] == "Touch board ready" and "Status: running, all keys calibrated" in notes
    garbled = [e for e in events if e["type"] == "link" and e["event"] in ("garbled", "width_mismatch")]
    assert garbled == []


def test_512_channels_of_32_bit_values_fit_a_line(tmp_path):
    """Issue 9: `channels` may be 512, and 512 values of -2147483648 now fit one line (8192 bytes), with
    `@seq` and a checksum: the old 1024-byte limit dropped every such frame."""
    wide = np.full((FRAMES, 512), -(2**31), dtype=np.int64)
    wide[:, :2] = readings()
    names = ("zone1", "zone2", *(f"ch{c}" for c in range(2, 512)))
    info = encode_info({"proto": 1, "board": "grid", "channels": 512})
    data = info + encode_frames(wide, first_seq=0, checksum=True)
    assert max(len(line) for line in data.split(b"\n")) > 6000
    profile = replace(profile_for(512, names, polarity=(-1,) * 512), defaults=SETTINGS)
    events = monitor(tmp_path, profile, data)
    (hello,) = [e for e in events if e["type"] == "hello"]
    assert hello["form"] == "v1" and hello["channels"] == 512
    touches = [(e["type"], e["channel"], e["index"]) for e in events if e["type"] in ("touch", "release")]
    assert touches == [("touch", "zone2", TOUCH_AT), ("release", "zone2", RELEASE_AT)]
    assert not [e for e in events if e["type"] == "link" and e["event"] in ("overlong", "garbled")]
