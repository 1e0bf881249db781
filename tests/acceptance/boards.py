"""Boards as real firmware and quick sketches print them: the numbers, and the lines they print.

A `Board` is pure: `values(frame)` gives every key's reading at a data line (seeded bounded noise around
an idle level, plus the touches of its script), `lines(frame)` the exact bytes the firmware prints
before and as that data line. Nothing here does I/O: `tests/acceptance/wire.py` plays a board on a
pseudo-terminal, a TCP socket or behind an RFC 2217 server.

Frame numbers count data lines only, from 0 (text lines, info lines and answers are not frames), which is
how the contract numbers frames (`index` in `monitor --json`). Each form's line function is written the way
a firmware author writes it; the C or Arduino code it stands for is beside it.

Noise is bounded (a uniform integer in -noise..+noise, so its peak-to-peak is at most 2 * noise in every
stretch) so that "a touch of ten times the noise peak-to-peak" means the same at any length of run; real
noise is closer to Gaussian, but a test about thresholds needs a bound it can state.
"""

from __future__ import annotations

import binascii
import random
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

RAMP_FRAMES = 3  # a finger lands and lifts over 3 frames (30 ms at 100 Hz; tens of ms: from memory)


@dataclass(frozen=True)
class Touch:
    """A finger on `key`: it starts landing at data line `start`, is fully down from `start + RAMP - 1`,
    starts lifting at `start + length` and is gone at `start + length + RAMP - 1`."""

    key: int
    start: int
    length: int = 25

    @property
    def end(self) -> int:
        """First frame of the lift."""
        return self.start + self.length

    def level(self, frame: int) -> float:
        """How far down the finger is at `frame`: 0 (away) .. 1 (pressed)."""
        if frame < self.start or frame >= self.end + RAMP_FRAMES - 1:
            return 0.0
        if frame < self.start + RAMP_FRAMES - 1:
            return (frame - self.start + 1) / RAMP_FRAMES
        if frame < self.end:
            return 1.0
        return 1.0 - (frame - self.end + 1) / RAMP_FRAMES


LineFn = Callable[["Board", int, Sequence[int]], str]


@dataclass(frozen=True)
class Board:
    """What one board prints. `depth` and `noise` are in the board's printed units (hundredths for a
    board printing two decimals). `polarity[k]` is the physical direction of key k's counts on touch."""

    name: str
    keys: tuple[str, ...]
    idle: tuple[int, ...]
    polarity: tuple[int, ...]
    depth: int
    noise: int
    line: LineFn
    touches: tuple[Touch, ...] = ()
    frames: int = 600
    rate_hz: float = 100.0
    eol: bytes = b"\n"
    boot: tuple[str, ...] = ()  # printed at power-up, before the first frame (banner, info line)
    texts: Mapping[int, tuple[str, ...]] = field(default_factory=dict)  # printed before data line k
    answer: str | None = None  # printed when the host writes "?"
    running: bool = False  # already printing when the port opens; touches count from the "?"
    stall: tuple[int, float] | None = None  # (k, s): nothing for s seconds before data line k
    seed: int = 1
    boot_ms: int = 8123  # millis() at the first frame, for boards printing a time column
    reset_at: int | None = None  # a watchdog reset before this data line: millis() starts again
    binary: bool = False  # prints seeded bytes mostly above 0x7F (a wrong baud rate), not `line`

    def values(self, frame: int) -> list[int]:
        rng = random.Random(self.seed * 1_000_003 + frame)  # per frame: any frame, any order, same values
        out = []
        for k, idle in enumerate(self.idle):
            level = sum(t.level(frame) for t in self.touches if t.key == k)
            touch = round(self.polarity[k] * self.depth * level)
            out.append(idle + rng.randint(-self.noise, self.noise) + touch)
        return out

    def millis(self, frame: int) -> int:
        """A steadily rising millisecond clock, 1 ms of jitter now and then (a busy loop() runs late)."""
        jitter = 1 if random.Random(self.seed + 7 * frame).random() < 0.2 else 0
        if self.reset_at is not None and frame >= self.reset_at:
            return 3 + round((frame - self.reset_at) * 1000 / self.rate_hz) + jitter
        return self.boot_ms + round(frame * 1000 / self.rate_hz) + jitter

    def data_line(self, frame: int) -> bytes:
        if self.binary:  # what 115200 baud reads of a board sending at another rate: high-bit noise
            rng = random.Random(self.seed * 7919 + frame)
            return bytes(rng.choice((rng.randint(0x80, 0xFF), rng.randint(0x80, 0xFF), 0x00, 0x3F))
                         for _ in range(24)) + self.eol
        return self.line(self, frame, self.values(frame)).encode("ascii") + self.eol

    def lines(self, frame: int) -> bytes:
        """Everything printed for data line `frame`: text lines due before it, then the line itself."""
        text = b"".join(t.encode("ascii") + self.eol for t in self.texts.get(frame, ()))
        return text + self.data_line(frame)

    def boot_bytes(self) -> bytes:
        return b"".join(t.encode("ascii") + self.eol for t in self.boot)

    def answer_bytes(self) -> bytes:
        return b"" if self.answer is None else self.answer.encode("ascii") + self.eol


def crc_line(body: str) -> str:
    """A line with the protocol's checksum: CRC-16/CCITT-FALSE of the body (PROTOCOL.md section 2), from
    the standard library's binascii.crc_hqx with init 0xFFFF (independent of padtune's protocol/crc.py)."""
    return f"{body}*{binascii.crc_hqx(body.encode('ascii'), 0xFFFF):04X}"


# --- the forms, as firmware prints them --------------------------------------------------------------

def columns(b: Board, f: int, v: Sequence[int]) -> str:
    # for (int k = 0; k < N; k++) printf("%d ", count[k]); printf("\n");
    return "".join(f"{x:d} " for x in v)


def commas(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) { Serial.print(count[k]); if (k < N - 1) Serial.print(","); } Serial.println();
    return ",".join(str(x) for x in v)


def tabs(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) { Serial.print(count[k]); Serial.print('\t'); } Serial.println();
    return "".join(f"{x}\t" for x in v)


def plotter_pairs(b: Board, f: int, v: Sequence[int]) -> str:
    # Serial.print("zone1:"); Serial.print(a); Serial.print(","); ... Serial.println(c);
    return ",".join(f"{name}:{x}" for name, x in zip(b.keys, v, strict=True))


def spaced_pairs(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) printf("%s:%d ", name[k], count[k]); printf("\n");
    return "".join(f"{name}:{x:d} " for name, x in zip(b.keys, v, strict=True))


def equals_pairs(b: Board, f: int, v: Sequence[int]) -> str:
    # printf("k1=%d, k2=%d, k3=%d\r\n", ...);
    return ", ".join(f"{name}={x}" for name, x in zip(b.keys, v, strict=True))


def equals_blanks(b: Board, f: int, v: Sequence[int]) -> str:
    # printf("s0=%ld s1=%ld\n", ...);
    return " ".join(f"{name}={x}" for name, x in zip(b.keys, v, strict=True))


def brackets(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) printf("T%d:[%5d] ", pad[k], touch_read(pad[k])); printf("\n");
    return "".join(f"{name}:[{x:5d}] " for name, x in zip(b.keys, v, strict=True))


def fixed6(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) printf("%6d", count[k]); printf("\n");
    return "".join(f"{x:6d}" for x in v)


def decimals(b: Board, f: int, v: Sequence[int]) -> str:
    # for (k) { Serial.print(filtered[k], 2); Serial.print('\t'); } Serial.println();   (v in hundredths)
    return "".join(f"{x // 100:d}.{x % 100:02d}\t" for x in v)


def millis_columns(b: Board, f: int, v: Sequence[int]) -> str:
    # printf("%lu %d %d %d\n", millis(), c[0], c[1], c[2]);
    return f"{b.millis(f):d} " + " ".join(f"{x:d}" for x in v)


def millis_pairs(b: Board, f: int, v: Sequence[int]) -> str:
    # Serial.print("time:"); Serial.print(millis()); Serial.print(",s1:"); Serial.print(a); ...
    return f"time:{b.millis(f)}," + ",".join(f"{n}:{x}" for n, x in zip(b.keys, v, strict=True))


def one_value(b: Board, f: int, v: Sequence[int]) -> str:
    # Serial.println(touchRead(T0));
    return f"{v[0]:d}"


def sequenced(b: Board, f: int, v: Sequence[int]) -> str:
    # n = snprintf(buf, sizeof buf, "@%u", seq++); for (k) n += snprintf(buf + n, .., " %ld", c[k]);
    # printf("%s*%04X\r\n", buf, crc16(buf, n));
    return crc_line(f"@{f % 65536} " + " ".join(str(x) for x in v))


def plain_after_info(b: Board, f: int, v: Sequence[int]) -> str:
    # printf("%d %d %d\n", ...) after a proper info line at boot
    return " ".join(str(x) for x in v)


def stuck_frame(b: Board, f: int, v: Sequence[int]) -> str:
    # a bug: the send loop keeps printing the same buffer, sequence number and all
    return crc_line("@42 1000 1020 990")


def sentence(b: Board, f: int, v: Sequence[int]) -> str:
    # if (reading > limit) Serial.println("Sensor reading is high");
    return "Sensor reading is high"


def arrow_pairs(b: Board, f: int, v: Sequence[int]) -> str:
    # printf(">touch0:%d\n", c[0]);   a plotter's own line form, not one padtune reads
    return f">touch0:{v[0]}"
