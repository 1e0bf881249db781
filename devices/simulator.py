"""A simulated board that speaks protocol v1: seeded, paced by a clock, with faults on request.

`SimBoard` owns time, sequence numbers, link faults and the host's commands; the readings come from
`devices.model.BoardModel` and the bytes from `protocol.encoder` (the one implementation of the wire
format). Frames are generated in numpy blocks, so a 64-channel board at 1 kHz costs little.

With `states=True` (or a `deviate` fault) the board also sends its own key states with every frame (the
state field, PROTOCOL.md section 3), from its on-board detector: the C firmware library
(`devices.onboard`), fed the same readings.

Host commands (one per line, see devices/README.md): `?` sends the info line again; `+NAME` presses
the key NAME (or a channel number), `+NAME=0.7` presses it lightly; `-NAME` releases it; `-*` releases all.
With `settings=True` (the default) the board also takes section 7's `get`, `set` and `keep`
(`devices.board_settings`) and says `settings=1` in its info line.
"""

from __future__ import annotations

import math
import numbers
import re
import time
from collections.abc import Callable

import numpy as np

from devices.board_settings import BoardSettings, Flash
from devices.boards import MAX_LINE_BYTES, frame_line_bytes, load_board
from devices.faults import FaultPlan, Injected
from devices.model import BoardModel, UnitFaults
from devices.onboard import OnBoardDetector
from devices.spec import MAX_RANDOM_PER_MIN, BoardSpec
from devices.touches import Contact, TouchPlan
from protocol import encoder
from protocol.commands import MAX_WORD_CHARS, parse_command, split_words
from protocol.errors import UserError

SEQ_MODULO = 65536
MAX_SEED = 2**63 - 1
MAX_NOTE_CHARS = 400  # well inside protocol v1's 1024-byte line with its prefix and checksum
MAX_ECHO_CHARS = 40  # how much of a bad host command an error note quotes back
MAX_BLOCK_FRAMES = 4096  # bounds memory when a slow reader asks for a long stretch at once
_JUNK = bytes(range(0x80, 0x100))
MAX_COMMAND_BYTES = 256  # a host line's bytes a board holds (the C parser's buffer, pt_cmd.c)
_LINE_END = re.compile(rb"[\r\n]")
_NOT_TEXT = re.compile(rb"[^\t\x20-\x7e]")  # what makes a line "not ASCII text" (pt_cmd.c)


class SimBoard:
    """One simulated board. Sim time runs at `speed` times the clock from construction (or `restart`)."""

    def __init__(self, spec: BoardSpec | str, seed: int = 0, speed: float = 1.0,
                 faults: FaultPlan | None = None, clock: Callable[[], float] = time.monotonic,
                 checksum: bool = True, script: bool = True, random_per_min: float | None = None,
                 settings: bool = True, flash: Flash | None = None, states: bool = False) -> None:
        self.spec = load_board(spec) if isinstance(spec, str) else spec
        _check_run_options(seed, speed, random_per_min)
        self.seed, self.speed, self.clock, self.checksum = seed, speed, clock, checksum
        self.faults = faults or FaultPlan()
        self.touches = TouchPlan(self.spec, seed, script=script, random_per_min=random_per_min)
        self.model = BoardModel(self.spec, seed, self.touches, self._unit_faults())
        for pad, from_s in self.faults.stuck_keys:
            ch = self.channel(pad)
            self.touches.presses.append(Contact("finger", (pad,), (ch,), from_s, math.inf, 1.0, "stuck"))
        self.injected = Injected()
        self._link_rng = np.random.default_rng([seed, 0x11A4])
        self._until_s = 0.0  # latest sim time asked for
        self._next_frame = 0  # index of the next frame to measure; its time is index / rate_hz
        self._seq = 0
        self._width = self.spec.channels
        self._pending = bytearray()
        self._commands = bytearray()  # the host line being received (at most MAX_COMMAND_BYTES)
        self._overlong = False  # it was longer: the rest is discarded up to its line end
        for _, width in self.faults.width_changes:
            if frame_line_bytes(width, self.spec.method.max_count) > MAX_LINE_BYTES:
                raise UserError(f"fault width:{width}: frames that wide would not fit in one protocol line; "
                                "use a smaller width")
        self._events = self._timeline()
        # Section 7: settings in force and kept (None: a board that does not take the commands).
        self.settings: BoardSettings | None = None
        if settings:
            self.settings = BoardSettings(self._width, self.spec.method.polarity, flash)
        self.onboard = self._onboard() if states or self.faults.deviating else None
        self._t0 = clock()
        self._emit_boot()

    # --- set-up -----------------------------------------------------------------------------------
    def channel(self, name_or_index: str | int) -> int:
        names = self.spec.names
        if isinstance(name_or_index, int) or (isinstance(name_or_index, str) and name_or_index.isdigit()):
            index = int(name_or_index)
            if 0 <= index < len(names):
                return index
            raise UserError(f"channel {index} does not exist; {self.spec.name} has 0..{len(names) - 1}")
        if name_or_index in names:
            return names.index(name_or_index)
        raise UserError(f"{self.spec.name} has no pad {_clip(name_or_index)!r}; pads: {', '.join(names)}")

    def _unit_faults(self) -> UnitFaults:
        f = self.faults
        return UnitFaults({self.channel(p) for p in f.open_pads}, {self.channel(p) for p in f.shorted_pads},
                          {self.channel(p): k for p, k in f.noisy_pads})

    def _onboard(self) -> OnBoardDetector:
        """The board's own detector (the C library: a UserError in one line when it cannot be built)."""
        rate = self.spec.rate_hz
        deviate = {self.channel(pad): math.ceil(from_s * rate) for pad, from_s in self.faults.deviating}
        live = self.settings.live if self.settings is not None else None
        return OnBoardDetector(self._width, self.spec.method.polarity, deviate, live)

    def _live(self) -> list[dict[str, int]] | None:
        """The settings in force on a board that takes section 7's commands (None: the defaults)."""
        return self.settings.live if self.settings is not None else None

    def _timeline(self) -> list[tuple[int, str, float]]:
        """Stream events as (frame index, kind, value), in frame order."""
        rate = self.spec.rate_hz
        events = [(math.ceil(t * rate), "reset", 0.0) for t in self.faults.resets_at_s]
        events += [(math.ceil(t * rate), "width", float(w)) for t, w in self.faults.width_changes]
        events += [(math.ceil(t * rate), "stall", s) for t, s in self.faults.stalls]
        return sorted(events)

    def restart_clock(self) -> None:
        """Make sim time 'now' continue from where generation stands (e.g. when a reader connects)."""
        self._t0 = self.clock() - self._next_frame / self.spec.rate_hz / self.speed

    # --- what the board says ----------------------------------------------------------------------
    def info_fields(self, announce: bool = True) -> dict[str, object]:
        """The info line's keys; `announce` adds `proto`, which starts a new session on the host.

        An answer to `?` leaves `proto` out (PROTOCOL.md, "Host to board"): asking must not re-baseline.
        """
        names = self.spec.names[: self._width]
        names += tuple(f"ch{i}" for i in range(len(names), self._width))
        lead: dict[str, object] = {"proto": 1} if announce else {}
        fields: dict[str, object] = {
            **lead, "board": self.spec.name, "channels": self._width, "rate": f"{self.spec.rate_hz:g}",
            "names": ",".join(names), "method": self.spec.method.kind,
            "polarity": "+" if self.spec.method.polarity > 0 else "-", "fw": self.spec.fw,
            "serial": self.serial}
        if self.settings is not None:
            fields["settings"] = 1  # takes PROTOCOL.md section 7's commands
        if self.onboard is not None:
            fields["states"] = 1  # the frames carry the state field (PROTOCOL.md section 3)
        return fields

    @property
    def serial(self) -> str:
        """The unit's serial number, one per seed (a production station tells units apart by it):
        the board's name and the seed, `greenhouse-0007`."""
        return f"{self.spec.name}-{self.seed:04d}"

    def info_line(self, announce: bool = True) -> bytes:
        return encoder.encode_info(self.info_fields(announce), checksum=self.checksum)

    def _note(self, text: str) -> None:
        # A board file or a host's command may say anything: one ASCII line that fits the protocol.
        plain = " ".join(text.encode("ascii", "replace").decode("ascii").split())
        if len(plain) > MAX_NOTE_CHARS:
            plain = plain[: MAX_NOTE_CHARS - 3] + "..."
        self._pending += encoder.encode_note(plain, checksum=self.checksum)
        self.injected.notes += 1

    def _emit_info(self, announce: bool = True) -> None:
        self._pending += self.info_line(announce)
        self.injected.infos += 1

    def announce(self) -> None:
        """Send the info line with `proto`, as a board does when a host connects to it while running."""
        self._emit_info(announce=True)

    def _emit_boot(self) -> None:
        self._note(f"{self.spec.name} simulated board, seed {self.seed}: {self.spec.description}")
        self._emit_info()

    # --- time -------------------------------------------------------------------------------------
    @property
    def sim_time_s(self) -> float:
        """Sim time of the clock now (frames up to here are due)."""
        return (self.clock() - self._t0) * self.speed

    @property
    def generated_s(self) -> float:
        return self._next_frame / self.spec.rate_hz

    def seconds_to_next_frame(self) -> float:
        """Clock seconds until the next frame is due (0 if overdue)."""
        return max(0.0, (self._next_frame / self.spec.rate_hz - self.sim_time_s) / self.speed)

    def read_due(self) -> bytes:
        """Every byte the board has sent by now (per the clock), consumed."""
        self.generate_until(self.sim_time_s)
        return self.take()

    def take(self) -> bytes:
        out = bytes(self._pending)
        self._pending.clear()
        self.injected.bytes_out += len(out)
        return out

    def run_for(self, seconds: float) -> bytes:
        """Generate the next `seconds` of sim time at once, ignoring the clock (tests, benchmarks)."""
        self.generate_until(self._until_s + seconds)
        return self.take()

    def skip_until(self, sim_t_s: float) -> int:
        """Let frames up to sim_t_s go by unsent, as when the host's input buffer overflows.

        The board measured them (sequence numbers advance), so the host sees them as lost. Returns how
        many were skipped; they are counted in `injected.extra["overrun"]`.
        """
        self._until_s = max(self._until_s, sim_t_s)
        last = math.floor(sim_t_s * self.spec.rate_hz + 1e-9)
        skipped = 0
        while self._next_frame <= last:
            if self._events and self._events[0][0] <= self._next_frame:
                self._apply(self._events.pop(0))
                continue
            stop = min(last + 1, self._events[0][0]) if self._events else last + 1
            n = stop - self._next_frame
            if self.onboard is not None:  # the board measured them: its own detector saw them
                self._board_states(self._width_readings(self._next_frame, n), self._next_frame)
            self._next_frame, self._seq = stop, (self._seq + n) % SEQ_MODULO
            self.injected.frames_made += n
            skipped += n
        if skipped:
            self.injected.extra["overrun"] = self.injected.extra.get("overrun", 0) + skipped
        return skipped

    def generate_until(self, sim_t_s: float) -> None:
        """Measure and queue every frame whose time is <= sim_t_s."""
        self._until_s = max(self._until_s, sim_t_s)
        last = math.floor(sim_t_s * self.spec.rate_hz + 1e-9)
        while self._next_frame <= last:
            stop = min(last + 1, self._next_frame + MAX_BLOCK_FRAMES)
            if self._events and self._events[0][0] <= self._next_frame:
                self._apply(self._events.pop(0))
                continue
            if self._events:
                stop = min(stop, self._events[0][0])
            self._frames(self._next_frame, stop - self._next_frame)

    def _apply(self, event: tuple[int, str, float]) -> None:
        frame, kind, value = event
        if kind == "reset":
            # A watchdog restart: the firmware prints its banner and counts from 0 again. It does not
            # resend the info line unless asked, so the host sees the sequence jump back (a reset).
            self.injected.resets += 1
            self._seq = 0
            if self.settings is not None:
                self.settings.power_up()  # RAM is lost: the kept settings (or the factory's) again
            if self.onboard is not None:
                self.onboard.restart(settings=self._live())
            self._note(f"{self.spec.name} restarted (watchdog), fw {self.spec.fw}")
        elif kind == "width":
            self.injected.width_changes += 1
            self._width = int(value)
            if self.settings is not None:
                self.settings.resize(self._width)
            if self.onboard is not None:
                self.onboard.restart(self._width, self._live())
        else:  # a stall: the board measures and sends nothing for a while
            self.injected.stalls += 1
            skipped = round(value * self.spec.rate_hz)
            self.injected.stalled_s += skipped / self.spec.rate_hz
            self._next_frame = max(self._next_frame, frame + skipped)

    def _width_readings(self, first: int, n: int) -> np.ndarray:
        readings = self.model.readings(first, n)
        if self._width != readings.shape[1]:
            readings = _rewidth(readings, self._width)
        return readings

    def _board_states(self, readings: np.ndarray, first: int) -> np.ndarray | None:
        return self.onboard.states(readings, first) if self.onboard is not None else None

    def _frames(self, first: int, n: int) -> None:
        readings = self._width_readings(first, n)
        states = self._board_states(readings, first)
        self._next_frame = first + n
        self.injected.frames_made += n
        seq0 = self._seq
        self._seq = (self._seq + n) % SEQ_MODULO
        if not self.faults.link_faults:
            self._pending += encoder.encode_frames(readings, seq0, self.checksum, states)
            self.injected.frames_sent += n
            return
        self._faulty_frames(readings, seq0, states)

    def _faulty_frames(self, readings: np.ndarray, seq0: int, states: np.ndarray | None = None) -> None:
        f = self.faults
        draws = self._link_rng.random((len(readings), 4))  # one row per frame: drop, garble, junk, pick
        lines = encoder.encode_frames(readings, seq0, self.checksum, states).split(b"\n")[:-1]
        for line, (u_drop, u_garble, u_junk, pick) in zip(lines, draws, strict=True):
            if u_drop < f.drop_rate:
                self.injected.dropped += 1
                continue
            if u_garble < f.garble_rate:
                line = _garble(line, pick, self.checksum)
                self.injected.garbled += 1
            self._pending += line + b"\n"
            self.injected.frames_sent += 1
            if u_junk < f.junk_rate:
                n = 8 + int(pick * 24)
                self._pending += b"~" + bytes(_JUNK[int(pick * 97 + i * 31) % len(_JUNK)] for i in range(n))
                self._pending += b"\n"
                self.injected.junk += 1

    # --- the host side ----------------------------------------------------------------------------
    def write(self, data: bytes) -> int:
        """Bytes from the host, read as the C board's parser reads them (devices/firmware/pt_cmd.c):
        a line ends at LF or CR (so CRLF ends one line and an empty one, which gets no answer); at
        most MAX_COMMAND_BYTES of a line are held, the rest of an overlong line is discarded up to its
        end and the line is answered once as too long; a line with bytes that are not printable
        ASCII (tabs and spaces aside) is answered as not ASCII text. Nothing a host sends raises."""
        start = 0
        for end in _LINE_END.finditer(data):
            self._hold(data[start:end.start()])
            self._end_of_line()
            start = end.end()
        self._hold(data[start:])
        return len(data)

    def _hold(self, chunk: bytes) -> None:
        room = MAX_COMMAND_BYTES - len(self._commands)
        self._commands += chunk[:room]  # bounded: the rest of an overlong line is never kept
        if len(chunk) > room:
            self._overlong = True

    def _end_of_line(self) -> None:
        line = bytes(self._commands)
        overlong = self._overlong
        self._commands.clear()
        self._overlong = False
        if overlong:
            self._refuse(line.decode("latin-1"), "line too long")
        elif _NOT_TEXT.search(line):
            self._refuse(line.decode("latin-1"), "not ASCII text")
        else:
            self.command(line.decode("ascii"))

    def _refuse(self, line: str, reason: str) -> None:
        """A line the board cannot read: `>no WORD: reason` (WORD its first word, `?` when none), or a
        note from a board without section 7's commands."""
        words = split_words(line)
        shown = _shown_word(words[0]) if words else "?"
        if self.settings is not None:
            self._pending += encoder.encode_answer(f">no {shown}: {reason}", self.checksum)
            self.injected.extra["answers"] = self.injected.extra.get("answers", 0) + 1
        else:
            self._note(f"error: a host line starting {shown!r}: {reason}")

    def command(self, text: str) -> None:
        """One host line (no line end). Only ASCII spaces and tabs separate words."""
        if not text.isascii() or _NOT_TEXT.search(text.encode("ascii")):
            self._refuse(text, "not ASCII text")
            return
        text = text.strip(" \t")
        if not text:
            return
        if text == "?":
            self._emit_info(announce=False)
            return
        word = split_words(text)[0]
        if self.settings is not None and word in ("get", "set", "keep"):
            command = parse_command(text)
            assert command is not None
            for line in self.settings.answer(command):
                self._pending += encoder.encode_answer(line, checksum=self.checksum)
            if self.onboard is not None:
                self.onboard.sync(self.settings.live)  # a `set` takes effect on the next frame
            self.injected.extra["answers"] = self.injected.extra.get("answers", 0) + 1
            return
        if text in ("script off", "script on"):
            # The demo's guided capture asks the panel to keep still: no scripted or random touches.
            now = max(self.generated_s, min(self.sim_time_s, self.generated_s + 1.0 / self.spec.rate_hz))
            if text == "script off":
                self.touches.pause_automatic(now)
            else:
                self.touches.resume_automatic(now)
            self._note(f"scripted and random touches {'paused' if self.touches.paused else 'resumed'}")
            return
        if text[0] in "+-" and len(text) > 1:
            target, _, amount = text[1:].partition("=")
            try:
                if target == "*" and text[0] == "-":
                    for name in self.touches.held():
                        self.press(name, False)
                    return
                strength = float(amount) if amount else 1.0
                if not 0.0 < strength <= 3.0:
                    raise UserError("strength must be above 0 and at most 3")
                self.press(target, text[0] == "+", strength)
            except (UserError, ValueError) as exc:
                self._note(f"error: {_clip(text)!r}: {exc}")
            return
        if self.settings is not None:  # section 7: every command gets one final answer
            shown = _shown_word(word)
            self._pending += encoder.encode_answer(f">no {shown}: unknown command", self.checksum)
            return
        self._note(f"error: unknown command {_clip(text)!r}; commands: ?, +PAD, +PAD=STRENGTH, -PAD, "
                   "-* (lift all), script off, script on")

    def power_cycle(self) -> None:
        """Switch the board off and on: settings in force are lost (the kept ones come back), the
        sequence starts at 0 and the board greets and announces itself again."""
        self._seq = 0
        self._width = self.spec.channels
        if self.settings is not None:
            self.settings.resize(self._width)
            self.settings.power_up()
        self._emit_boot()

    def press(self, channel: str | int, pressed: bool = True, strength: float = 1.0) -> None:
        """Put a finger on a pad (or lift it) from the next frame on."""
        ch = self.channel(channel)
        now = max(self.generated_s, min(self.sim_time_s, self.generated_s + 1.0 / self.spec.rate_hz))
        if pressed:
            self.touches.press(ch, now, strength)
        else:
            self.touches.release(ch, now)

    def held(self) -> list[str]:
        return self.touches.held()

    def scripted_touches(self, until_s: float | None = None) -> list[Contact]:
        """Ground truth: every contact (script, random, presses, stuck keys) started before `until_s`.

        Defaults to the time generated so far.
        """
        return self.touches.truth(self.generated_s if until_s is None else until_s)


def _shown_word(word: str) -> str:
    """A word of the host's as an answer quotes it: at most MAX_WORD_CHARS, each character that is
    not printable ASCII as `?` (as pt_cmd.c does)."""
    return "".join(c if "!" <= c <= "~" else "?" for c in word[:MAX_WORD_CHARS])


def _clip(text: str) -> str:
    return text if len(text) <= MAX_ECHO_CHARS else text[: MAX_ECHO_CHARS - 3] + "..."


def _check_run_options(seed: int, speed: float, random_per_min: float | None) -> None:
    """One-line UserErrors for run options a user typed (CLI flags, sim:// URL options)."""
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or not 0 <= seed <= MAX_SEED:
        raise UserError(f"seed {seed!r} is out of range; use a whole number from 0 to {MAX_SEED}")
    if not 0.001 <= speed <= 1000:  # also refuses nan
        raise UserError(f"speed {speed:g} is out of range; use a factor from 0.001 to 1000")
    if random_per_min is not None and not 0.0 <= random_per_min <= MAX_RANDOM_PER_MIN:
        raise UserError(f"random touches {random_per_min:g} per minute is out of range; use 0 to "
                        f"{MAX_RANDOM_PER_MIN:g}")


def _rewidth(readings: np.ndarray, width: int) -> np.ndarray:
    """A board reconfigured to `width` channels: fewer drop off the end, extra ones repeat the last."""
    ch = readings.shape[1]
    if width <= ch:
        return readings[:, :width]
    extra = np.repeat(readings[:, -1:], width - ch, axis=1)
    return np.concatenate([readings, extra], axis=1)


def _garble(line: bytes, pick: float, checksum: bool) -> bytes:
    """Change one byte of the payload (never the LF, never the checksum suffix) to another digit."""
    end = line.rfind(b"*") if checksum and b"*" in line else len(line)
    if end <= 1:
        return line
    pos = 1 + int(pick * (end - 1)) % (end - 1)
    old = line[pos]
    new = ord("0") + (old - ord("0") + 1 + int(pick * 1000) % 9) % 10 if 48 <= old <= 57 else ord("5")
    return line[:pos] + bytes([new]) + line[pos + 1:]
