"""Decoder fuzz: a million random and mutated lines through the fast decoder and the plain one.

The lines are real protocol lines from simulated boards (three boards, with and without checksums, with
the state field, answers to host commands), mutated one way or another (a byte changed, inserted or
removed, a line cut or spliced with another, a stray CR, a number made huge, a checksum dropped, an
overlong line), mixed with unchanged lines (so sequence numbers and sessions carry on) and lines of random
bytes. The fast decoder (`protocol.decoder.Decoder`) is fed each chunk of lines in random cuts, the plain
reference (`protocol.decoder_plain.PlainDecoder`) whole; figures: exceptions (0), chunks where the two
disagree on events or statistics (0), peak memory after warm-up (bounded), and every non-blank line
accounted for in the statistics: frames + garbled + bad checksums + overlong + width mismatches + notes +
infos + answers = lines fed, for both.
"""

from __future__ import annotations

import copy
import random
import time
from dataclasses import replace

import numpy as np

from devices.simulator import SimBoard
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.events import Event, FrameBlock
from protocol.framing import MAX_LINE_BYTES
from tests.reliability.figures import Figure, at_most, equal, info, peak_rss_mib, reset_peak_rss, rss_mib

FULL_LINES = 1_000_000
QUICK_LINES = 30_000
CHUNK_LINES = 20_000
PEAK_GROWTH_BOUND_MIB = 64.0  # the decoders hold one unfinished line and a bounded hold: far less
ACCOUNTED = ("frames", "garbled", "bad_checksum", "overlong", "width_mismatch", "notes", "infos", "answers")


def real_lines(seed: int) -> list[bytes]:
    """Protocol lines as simulated boards send them (each without its line end)."""
    out: list[bytes] = []
    boards = (("greenhouse", {"states": True}, 40.0), ("greenhouse", {"checksum": False}, 20.0),
              ("pumphouse", {}, 20.0), ("grid64", {}, 0.5))
    for board, kw, seconds in boards:
        sim = SimBoard(board, seed=seed, **kw)
        data = sim.run_for(seconds / 2)
        sim.write(b"get *\nset 1 threshold_counts=40\nset 2 threshold_counts=0\nbogus\n?\n")
        data += sim.run_for(seconds / 2)
        out += [line for line in data.replace(b"\r\n", b"\n").split(b"\n") if line]
    # Plain forms a board without v1 may print (PROTOCOL.md section 6), so their rules are fuzzed too.
    out += [b"%d %d %d" % (1000 + i, 2000 - i, 3000 + i % 7) for i in range(200)]
    out += [b"t=%d zone1:%d zone2:%d" % (i * 10, 500 + i % 9, 600 - i % 5) for i in range(200)]
    return out


class Mutator:
    """Makes one fuzzed line from a real line (seeded: the same seed gives the same lines)."""

    def __init__(self, rng: random.Random, pool: list[bytes]) -> None:
        self.rng = rng
        self.pool = pool
        self.ops = [self.flip, self.insert, self.delete, self.truncate, self.splice, self.stray_end,
                    self.huge_number, self.drop_checksum, self.checksum_digit, self.state_field, self.lead,
                    self.duplicate, self.high_bytes]

    def __call__(self, line: bytes) -> bytes:
        for _ in range(1 + (self.rng.random() < 0.3)):
            line = self.rng.choice(self.ops)(line)
        return line

    def _at(self, line: bytes) -> int:
        return self.rng.randrange(len(line) + 1)

    def flip(self, line: bytes) -> bytes:
        if not line:
            return line
        i = self.rng.randrange(len(line))
        return line[:i] + bytes([line[i] ^ (1 << self.rng.randrange(8))]) + line[i + 1:]

    def insert(self, line: bytes) -> bytes:
        i = self._at(line)
        return line[:i] + self.rng.randbytes(self.rng.randint(1, 4)) + line[i:]

    def delete(self, line: bytes) -> bytes:
        i = self._at(line)
        return line[:i] + line[i + self.rng.randint(1, 6):]

    def truncate(self, line: bytes) -> bytes:
        return line[: self._at(line)]

    def splice(self, line: bytes) -> bytes:
        other = self.rng.choice(self.pool)
        return line[: self._at(line)] + other[self.rng.randrange(len(other) + 1):]

    def stray_end(self, line: bytes) -> bytes:
        i = self._at(line)
        return line[:i] + self.rng.choice([b"\r", b"\n", b"\r\n", b"\n\r", b"\x00"]) + line[i:]

    def huge_number(self, line: bytes) -> bytes:
        spots = [i for i in range(len(line)) if line[i:i + 1] == b" "]
        if not spots:
            return line
        i = self.rng.choice(spots) + 1
        number = self.rng.choice([b"4294967296", b"-2147483649", b"9" * self.rng.randint(11, 5000), b"-0",
                                  b"00000000000000000001", b"1e9", b"0x10"])
        return line[:i] + number + line[i:]

    def drop_checksum(self, line: bytes) -> bytes:
        star = line.rfind(b"*")
        return line[:star] if star >= 0 else line

    def checksum_digit(self, line: bytes) -> bytes:
        star = line.rfind(b"*")
        if star < 0 or star + 1 >= len(line):
            return line + b"*" + self.rng.choice([b"", b"12", b"ZZZZ", b"12345"])
        i = self.rng.randrange(star + 1, len(line))
        return line[:i] + self.rng.choice(b"0123456789ABCDEFabcdef*").to_bytes(1, "big") + line[i + 1:]

    def state_field(self, line: bytes) -> bytes:
        star = line.rfind(b"*")
        body, tail = (line[:star], line[star:]) if star >= 0 else (line, b"")
        if b";" in body:
            return body[: body.rfind(b";")] + b";" + self.rng.choice([b"", b"4", b"0" * 200, b"01x"]) + tail
        return body + b";" + b"0" * self.rng.randint(0, 12) + tail

    def lead(self, line: bytes) -> bytes:
        return self.rng.choice([b"@", b"!", b"#", b">", b">val ", b"@65535 ", b"@99999 ", b" ", b"\t", b",",
                                b"! proto=1 channels=", b"-"]) + line

    def duplicate(self, line: bytes) -> bytes:
        if self.rng.random() < 0.02:
            return line * (MAX_LINE_BYTES // max(len(line), 1) + 2)  # overlong
        return line + b" " + line

    def high_bytes(self, line: bytes) -> bytes:
        i = self._at(line)
        odd = self.rng.choice(["é".encode(), b"\xff\xfe", b"\x1b[2J", b"\x7f", b"\xc3"])
        return line[:i] + odd + line[i:]


def make_chunk(rng: random.Random, pool: list[bytes], mutate: Mutator, start: int,
               count: int) -> tuple[bytes, int]:
    """`count` lines (LF-ended) from the pool's position `start` on: the bytes and the next position."""
    out = []
    pos = start
    for _ in range(count):
        roll = rng.random()
        line = pool[pos % len(pool)]
        pos += 1 if rng.random() > 0.01 else rng.choice([0, 2, 50, -3])  # now and then a repeat or a gap
        if roll < 0.45:
            out.append(line)
        elif roll < 0.88:
            out.append(mutate(line))
        else:
            out.append(rng.randbytes(rng.randint(0, 120)))
    out.append(b"")
    return b"\n".join(out), pos


def lines_in(data: bytes, max_line_bytes: int = MAX_LINE_BYTES) -> int:
    """Lines the decoder must account for, by PROTOCOL.md's framing: LF, CR or CRLF end a line; blank lines
    (spaces and tabs only) are skipped; a line over the limit is one overlong line."""
    framed = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n").split(b"\n")[:-1]
    return sum(1 for line in framed if len(line) > max_line_bytes or line.strip(b" \t"))


def accounted(stats: dict[str, int]) -> int:
    return sum(stats.get(key, 0) for key in ACCOUNTED)


def digest(events: list[Event]) -> tuple[list, list[np.ndarray]]:
    """Events in a form where block boundaries do not matter: other events as tuples, frames as runs of
    one kind (width, with states, with board time) with their arrays joined."""
    shape: list = []
    arrays: list[np.ndarray] = []
    for ev in events:
        if isinstance(ev, FrameBlock):
            kind = ("frames", ev.channels, ev.board_states is not None, ev.board_time is not None)
            parts = [ev.t_s, ev.seq, ev.readings.ravel(), np.arange(len(ev)) + ev.first_index]
            if ev.board_states is not None:
                parts.append(ev.board_states.ravel().astype(np.int64))
            if ev.board_time is not None:
                parts.append(np.asarray(ev.board_time, dtype=np.int64))
            if shape and shape[-1][:4] == kind:
                shape[-1] = (*kind, shape[-1][4] + len(ev))
                arrays[-1] = [np.concatenate([a, b]) for a, b in zip(arrays[-1], parts, strict=True)]
            else:
                shape.append((*kind, len(ev)))
                arrays.append(parts)
        else:
            fields = {name: getattr(ev, name) for name in type(ev).__slots__}
            shape.append((type(ev).__name__, tuple(sorted((k, repr(v)) for k, v in fields.items()))))
    return shape, arrays


def same(a: tuple[list, list], b: tuple[list, list]) -> bool:
    if a[0] != b[0] or len(a[1]) != len(b[1]):
        return False
    return all(len(x) == len(y) and all(np.array_equal(p, q) for p, q in zip(x, y, strict=True))
               for x, y in zip(a[1], b[1], strict=True))


def _shown(item: tuple) -> str:
    if item[0] == "frames":
        return f"{item[4]} frames of {item[1]} channels"
    fields = dict(item[1])
    kind = fields.get("kind", "").split(":")[-1].strip(" '>")
    return f"{item[0]} {kind} {fields.get('detail', '')}".strip()[:120]


def difference(got: list[Event], expected: list[Event]) -> str:
    """The first event where the fast decoder's differ from the plain one's, in words."""
    a, b = digest(got)[0], digest(expected)[0]
    for k, (x, y) in enumerate(zip(a, b, strict=False)):
        if x != y:
            return f"event {k}: fast {_shown(x)} / plain {_shown(y)}"
    return f"{len(a)} events / {len(b)}, or the same events with other frames or statistics"


def resync(plain: PlainDecoder) -> Decoder:
    """A fast decoder in the plain one's state (after a disagreement, so the next chunks start level)."""
    fast = Decoder(plain.max_line_bytes)
    fast.__dict__.update(copy.deepcopy(plain.__dict__))
    fast.last_fallback = ""
    return fast


def cuts(rng: random.Random, size: int) -> list[int]:
    """Random cut points, from single bytes to whole batches."""
    points, at = [], 0
    while at < size:
        at += int(2 ** rng.uniform(0, 19))
        points.append(min(at, size))
    return points


def run(quick: bool) -> list[Figure]:
    total = QUICK_LINES if quick else FULL_LINES
    rng = random.Random(13)
    pool = real_lines(13)
    mutate = Mutator(rng, pool)
    fast, plain = Decoder(), PlainDecoder()
    exceptions, first_exception, disagreements, first_disagreement = 0, "", 0, ""
    fed_lines = made = pos = fast_counted = plain_counted = 0
    peak_base = None
    start = time.perf_counter()
    chunk_no = 0
    while made < total:
        count = min(CHUNK_LINES, total - made)
        data, pos = make_chunk(rng, pool, mutate, pos, count)
        made += count
        fed_lines += lines_in(data)
        t_s = chunk_no * 1.0
        fast_before, plain_before = accounted(fast.stats.as_dict()), accounted(plain.stats.as_dict())
        try:
            expected = plain.feed(data, t_s)
            got: list[Event] = []
            last = 0
            for point in cuts(rng, len(data)):
                got += fast.feed(data[last:point], t_s)
                last = point
        except Exception as exc:  # the figure counts it; a fresh pair of decoders carries on
            exceptions += 1
            first_exception = first_exception or f"chunk {chunk_no}: {type(exc).__name__}: {exc}"
            fast, plain = Decoder(), PlainDecoder()
            chunk_no += 1
            continue
        # What each decoder itself accounted for in this chunk (a resync then copies the plain one's).
        fast_counted += accounted(fast.stats.as_dict()) - fast_before
        plain_counted += accounted(plain.stats.as_dict()) - plain_before
        if not same(digest(got), digest(expected)) or fast.stats.as_dict() != plain.stats.as_dict():
            disagreements += 1
            first_disagreement = first_disagreement or f"chunk {chunk_no}: {difference(got, expected)}"
            fast = resync(plain)  # so one disagreement is counted once, not in every chunk after it
        if chunk_no == 0:  # warm-up done: the decoders and their caches exist
            peak_base = rss_mib() if reset_peak_rss() else None
        chunk_no += 1
    end_t = float(chunk_no)
    fast_before, plain_before = accounted(fast.stats.as_dict()), accounted(plain.stats.as_dict())
    plain_tail, fast_tail = plain.flush_hold(end_t), fast.flush_hold(end_t)
    fast_counted += accounted(fast.stats.as_dict()) - fast_before
    plain_counted += accounted(plain.stats.as_dict()) - plain_before
    if not same(digest(fast_tail), digest(plain_tail)):
        disagreements += 1
        first_disagreement = first_disagreement or f"end: {difference(fast_tail, plain_tail)}"
    seconds = time.perf_counter() - start
    peak_growth = peak_rss_mib() - peak_base if peak_base is not None else float("nan")
    fast_stats = fast.stats.as_dict()
    figures = [
        info("fuzz: lines generated", made, "lines"),
        info("fuzz: non-blank lines fed (after CR/LF framing)", fed_lines, "lines"),
        equal("fuzz: exceptions", exceptions, 0),
        equal("fuzz: chunks where fast != plain (events or stats)", disagreements, 0),
        equal("fuzz: lines unaccounted in fast stats", fed_lines - fast_counted, 0, "lines"),
        equal("fuzz: lines unaccounted in plain stats", fed_lines - plain_counted, 0, "lines"),
        equal("fuzz: scan fallbacks (fast gave up on a batch)", fast_stats.get("scan_fallbacks", 0), 0),
        at_most("fuzz: peak RSS growth after warm-up", round(peak_growth, 1), PEAK_GROWTH_BOUND_MIB, "MiB"),
        info("fuzz: frames / garbled / bad checksum decoded",
             f"{fast_stats['frames']}/{fast_stats['garbled']}/{fast_stats['bad_checksum']}"),
        info("fuzz: time (both decoders and generation)", round(seconds, 1), "s"),
    ]
    if first_exception:
        figures[2] = replace(figures[2], note=f"first: {first_exception}")
    if first_disagreement:
        figures[3] = replace(figures[3], note=f"first: {first_disagreement}")
    return figures
