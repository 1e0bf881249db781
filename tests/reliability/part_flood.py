"""Garbage flood and a silent board: `padtune monitor --json` on a pseudo-terminal.

Flood: 100,000 lines of random bytes (no line ends inside) as fast as the pty takes them, then an info
line and a few frames as a marker; when the marker's `hello` is out, SIGTERM, and the summary's counts
(frames, lost, garbled, bad checksums, overlong, resets) must equal what `protocol.decoder.Decoder`
counts on the very same bytes: a line dropped because the consumer fell behind must still be counted.
Every stderr line must start `padtune:` (no bare logging line), and the wrong-baud warning (the bytes
are mostly not text) must be one of them.

Silent: a pty that never sends a byte; monitor must report the silence (a `silent` link event and a
`padtune:` line on stderr) within its run.
"""

from __future__ import annotations

import contextlib
import json
import random
import signal
import subprocess
import tempfile
import threading
from pathlib import Path

from protocol.decoder import Decoder
from tests.acceptance.boards import crc_line
from tests.protocol.ptyboard import PtyBoard
from tests.reliability.figures import Figure, equal, info, with_note
from tests.reliability.procs import WAIT_S, padtune_argv, padtune_env, wait_for

FULL_LINES = 100_000
QUICK_LINES = 5_000
COUNTED = ("frames", "lost", "garbled", "bad_checksum", "overlong", "resets")
SILENT_RUN_S = 3.5
BAUD_WAIT_S = 6.0
MARKER_TRIES = 10
MARKER_WAIT_S = 5.0  # the link calls a board silent after 2 s without a byte


class Monitor:
    """`padtune monitor PATH --json` with its stdout lines and stderr lines collected as they come."""

    def __init__(self, port: Path, *extra: str) -> None:
        self.out: list[str] = []
        self.err: list[str] = []
        self.proc = subprocess.Popen(padtune_argv("monitor", str(port), "--json", *extra), env=padtune_env(),
                                     stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                     text=True, errors="replace")
        self._readers = [threading.Thread(target=self._read, args=(s, d), daemon=True)
                         for s, d in ((self.proc.stdout, self.out), (self.proc.stderr, self.err))]
        for reader in self._readers:
            reader.start()

    @staticmethod
    def _read(stream, into: list[str]) -> None:
        for line in stream:
            into.append(line.rstrip("\n"))

    def events(self) -> list[dict]:
        out = []
        for line in list(self.out):
            try:
                out.append(json.loads(line))
            except ValueError:
                out.append({"type": "unreadable", "line": line})
        return out

    def saw(self, **want: object) -> bool:
        return any(all(e.get(k) == v for k, v in want.items()) for e in self.events())

    def stop(self, sig: int = signal.SIGTERM) -> int:
        if self.proc.poll() is None:
            self.proc.send_signal(sig)
        try:
            code = self.proc.wait(WAIT_S)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            code = self.proc.wait()
        for reader in self._readers:
            reader.join(WAIT_S)
        return code

    def summary(self) -> dict | None:
        return next((e for e in reversed(self.events()) if e.get("type") == "summary"), None)


def garbage(count: int, rng: random.Random) -> bytes:
    alphabet = bytes(b for b in range(256) if b not in (10, 13))
    return b"".join(bytes(rng.choices(alphabet, k=rng.randint(8, 70))) + b"\n" for _ in range(count))


MARKER = (crc_line("! proto=1 board=flood channels=2 rate=100 names=a,b") + "\n"
          + "".join(crc_line(f"@{k} 1000 2000") + "\n" for k in range(5))).encode()


def flood(lines: int) -> list[Figure]:
    rng = random.Random(77)
    sent = bytearray()
    problems: list[str] = []
    with tempfile.TemporaryDirectory(prefix="padtune-flood-") as tmp:
        pty = PtyBoard(Path(tmp))
        mon = Monitor(pty.path)

        def send(data: bytes) -> None:
            for at in range(0, len(data), 1 << 16):
                pty.send(data[at:at + (1 << 16)])
            sent.extend(data)

        try:
            if not wait_for(lambda: mon.saw(type="link", event="connected"), proc=mon.proc):
                problems.append(f"monitor never connected: {' / '.join(mon.err)[:200]}")
            else:
                send(garbage(lines, rng))
                # The marker says monitor has read everything before it. It is sent again while it does
                # not come out (an event dropped in the flood may be the marker itself); every byte sent
                # is in the decoder's count below.
                for _ in range(MARKER_TRIES):
                    send(MARKER)
                    if wait_for(lambda: mon.saw(type="hello", board="flood"), MARKER_WAIT_S, mon.proc):
                        break
                else:
                    problems.append(f"the marker's info line never came out ({MARKER_TRIES} sent)")
                # The wrong-baud verdict is due 2 s after the opening: give it that, and room.
                wait_for(lambda: mon.saw(type="link", event="baud_suspect"), BAUD_WAIT_S, mon.proc)
        finally:
            code = mon.stop()
            pty.close()
    expected = Decoder()
    expected.feed(bytes(sent), 0.0)
    want = {key: getattr(expected.stats, key) for key in COUNTED}
    summary = mon.summary() or {}
    got = {key: summary.get(key) for key in COUNTED}
    differ = [f"{k} {got[k]} (decoder {want[k]})" for k in COUNTED if got[k] != want[k]]
    if differ:
        problems.append("summary differs: " + ", ".join(differ))
    bare = [line for line in mon.err if not line.startswith("padtune:")]
    if bare:
        problems.append(f"stderr line without 'padtune:': {bare[0][:120]!r}")
    baud = [line for line in mon.err if line.startswith("padtune:") and "baud" in line]
    baud_json = mon.saw(type="link", event="baud_suspect")
    figures = [
        info("flood: garbage lines sent", lines, "lines"),
        equal("flood: summary counts that differ from the decoder's", len(differ), 0),
        info("flood: garbled, summary / decoder", f"{got['garbled']}/{want['garbled']}"),
        equal("flood: stderr lines without 'padtune:'", len(bare), 0),
        equal("flood: wrong-baud link event (JSON)", "yes" if baud_json else "no", "yes"),
        equal("flood: wrong-baud warning on stderr (padtune: line)", "yes" if baud else "no", "yes"),
        equal("flood: monitor exit code after SIGTERM", code, 0),
    ]
    return with_note(figures, "; ".join(problems))


def silent() -> list[Figure]:
    with tempfile.TemporaryDirectory(prefix="padtune-silent-") as tmp:
        pty = PtyBoard(Path(tmp))
        mon = Monitor(pty.path, "--duration", str(SILENT_RUN_S))
        with contextlib.suppress(subprocess.TimeoutExpired):  # stopped below either way
            mon.proc.wait(WAIT_S)
        code = mon.stop()
        pty.close()
    said = [line for line in mon.err if "silent" in line.lower() or "never spoke" in line]
    figures = [
        equal("silent: silent link event (JSON)",
              "yes" if mon.saw(type="link", event="silent") else "no", "yes"),
        equal("silent: silence said on stderr (padtune: line)",
              "yes" if any(line.startswith("padtune:") for line in said) else "no", "yes"),
        equal("silent: monitor exit code", code, 0),
        equal("silent: frames in the summary", (mon.summary() or {}).get("frames"), 0),
    ]
    return with_note(figures, "stderr: " + " / ".join(mon.err)[:300] if not said else "")


def run(quick: bool) -> list[Figure]:
    return flood(QUICK_LINES if quick else FULL_LINES) + silent()
