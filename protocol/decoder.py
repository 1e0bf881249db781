"""The incremental decoder of protocol v1: bytes in, typed events and running statistics out.

Pure (no I/O, no clock): `feed(chunk, t_s)` takes bytes of any size with the host time they arrived
and returns the events they completed, in stream order; frames come in `FrameBlock`s. Lines are
taken in batches: `protocol.fastscan` checks and converts the frames of a batch in bulk, and every
line it does not vouch for (info, notes, faults, the first frame of a width) goes through the same
per-line rules as the plain reference decoder, so both give the same events and statistics.
"""

from __future__ import annotations

import numpy as np

from protocol.decoder_plain import PlainDecoder
from protocol.events import Event
from protocol.fastscan import Scan, ScanMismatch, scan
from protocol.framing import MAX_LINE_BYTES
from protocol.smallbatch import decode_lines

BATCH_BYTES = 1 << 18  # bounds the scan's temporary arrays (about 10 bytes per input byte)
SCAN_MIN_BYTES = 10_000  # below this smallbatch's regex way beats the fixed cost of a scan


class Decoder(PlainDecoder):
    """Feed bytes, get events. `stats`, `info` (the session's merged info) and `channels` are live.

    The same state and rules as `PlainDecoder`; only `feed` differs, taking frames in bulk.
    """

    def __init__(self, max_line_bytes: int = MAX_LINE_BYTES) -> None:
        super().__init__(max_line_bytes)
        self.last_fallback = ""  # why the bulk scan last gave up on a batch (it should never)

    def feed(self, data: bytes | bytearray | memoryview, t_s: float) -> list[Event]:
        rules = self._rules
        rules.begin(t_s)
        rules.stats.bytes_in += len(data)
        complete, overlong = self._framer.push(bytes(data))
        pos, size = 0, len(complete)
        while pos < size:
            end = complete.rfind(b"\n", pos, pos + BATCH_BYTES)
            if end < 0:  # one line longer than a batch: it is overlong, take it alone
                end = complete.find(b"\n", pos + BATCH_BYTES)
            self._batch(complete[pos : end + 1] if pos or end + 1 < size else complete)
            pos = end + 1
        if overlong:
            rules.overlong()
        return rules.take_events()

    def _batch(self, buf: bytes) -> None:
        rules = self._rules
        if len(buf) < SCAN_MIN_BYTES:
            decode_lines(buf[:-1].split(b"\n"), rules)
            return
        try:
            result = scan(buf, self.max_line_bytes)
        except ScanMismatch as exc:
            # A disagreement between the bulk checks and the numbers found is a bug in fastscan;
            # the per-line rules still decode the batch correctly. Count it so it is seen.
            rules.stats.extra["scan_fallbacks"] = rules.stats.extra.get("scan_fallbacks", 0) + 1
            self.last_fallback = str(exc)
            for line in buf[:-1].split(b"\n"):
                rules.line(line)
            return
        self._runs(result)

    def _runs(self, sc: Scan) -> None:
        rules = self._rules
        ok, width, checked = sc.frame_ok, sc.width, sc.checked
        n = len(ok)
        stated = sc.semi >= 0 if sc.semi is not None else np.zeros(n, dtype=bool)
        key = np.where(ok, width * 4 + sc.sequenced * 2 + stated, -1)
        changes = np.flatnonzero(key[1:] != key[:-1]) + 1
        unchecked_at = np.flatnonzero(ok & ~checked)
        checked_at = np.flatnonzero(ok & checked)
        ok_list, width_list, sequenced = ok.tolist(), width.tolist(), sc.sequenced
        i = 0
        while i < n:
            # Plain (unsequenced) frames go in bulk only once their form is known to be v1 columns;
            # while a plain form's first lines are held, every line keeps its place in the hold.
            if not ok_list[i] or rules.channels != width_list[i] or rules.holding or \
                    not (sequenced[i] or rules.bulk_plain):
                rules.line(sc.line(i))
                i += 1
                continue
            j = _next(changes, i + 1, n)
            first_checked = _next(checked_at, i, n)
            if rules.strict:
                j = min(j, _next(unchecked_at, i, n))
            elif first_checked < j:
                j = min(j, _next(unchecked_at, first_checked, n))
            if j == i:  # an unchecksummed frame after checksummed ones: the rules drop it
                rules.line(sc.line(i))
                i += 1
                continue
            self._accept(sc, i, j, first_checked < j)
            i = j

    def _accept(self, sc: Scan, i: int, j: int, any_checked: bool) -> None:
        sequenced = bool(sc.sequenced[i])
        per_line = int(sc.width[i]) + sequenced
        start = int(sc.offset[i])
        block = sc.numbers[start : start + (j - i) * per_line].reshape(j - i, per_line)
        # Copies, so a queued block never keeps the whole batch's number array alive.
        if sequenced:
            seq = block[:, 0].copy()
            readings = block[:, 1:].copy()
        else:
            seq = np.full(j - i, -1, dtype=np.int64)
            readings = block.copy()
        states = None
        if sc.semi is not None and sc.semi[i] >= 0:  # the run's frames all carry a state field
            width = int(sc.width[i])
            at = sc.semi[i:j, None] + 1 + np.arange(width)
            states = (np.frombuffer(sc.buf, dtype=np.uint8)[at] - 0x30).astype(np.int8)
        self._rules.accept_run(seq, readings, any_checked, states)


def _next(positions: np.ndarray, at: int, default: int) -> int:
    """The first entry of the sorted `positions` that is >= at, else `default`."""
    k = int(np.searchsorted(positions, at))
    return int(positions[k]) if k < len(positions) else default
