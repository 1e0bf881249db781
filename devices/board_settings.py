"""A simulated board's settings and its side of the host commands (PROTOCOL.md section 7).

`BoardSettings` holds what a board that takes `settings=1` holds: the settings in force per channel
(its RAM copy), the kept copy (its non-volatile memory, `Flash`), and the answers to `get`, `set` and
`keep`. A `set` is checked whole against `protocol.commands.settings_problems` (the profile's rules)
and applied all or none. `Flash` lives in the board object (it survives `SimBoard.restart()`, the
board's watchdog reset and power cycle) and, given a path, in a small JSON file, so a kept setting
also survives the simulator process (a later `sim://...?flash=PATH` board starts from it).
"""

from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path

from protocol import commands as wire
from protocol.commands import Command, CommandError

FLASH_FORMAT = 1
# What a simulated board runs before anything was set or kept: a first guess of about half a typical
# touch on the bundled boards, the same as `padtune demo`'s starting profile (tui/demo_profile.py; a
# test keeps the two equal), so the demo starts with the board and the screen agreeing.
SIM_FACTORY: dict[str, int] = {**wire.DEFAULTS, "threshold_counts": 30, "hysteresis_counts": 8,
                               "touch_debounce_frames": 2, "release_debounce_frames": 2}
MAX_FLASH_BYTES = 1 << 20


class FlashError(Exception):
    """The kept settings could not be stored (the reason is one line)."""


class Flash:
    """Non-volatile memory for kept settings: in the object, and in `path` when one is given."""

    def __init__(self, path: str | os.PathLike[str] | None = None) -> None:
        self.path = Path(path) if path is not None else None
        self.kept: list[dict[str, int]] | None = None
        self.writes = 0
        if self.path is not None:
            self.kept = _read_flash(self.path)

    def store(self, settings: list[dict[str, int]]) -> None:
        copy = [dict(s) for s in settings]
        if self.path is not None:
            _write_flash(self.path, copy)
        self.kept = copy
        self.writes += 1


def _read_flash(path: Path) -> list[dict[str, int]] | None:
    """The kept settings in `path`, or None when it does not exist yet or is not one of ours."""
    try:
        if not path.is_file() or path.stat().st_size > MAX_FLASH_BYTES:
            return None
        doc = json.loads(path.read_text("utf-8"))
    except (OSError, ValueError):
        return None  # an unreadable flash image reads as erased, as a board's would
    if not isinstance(doc, dict) or doc.get("format") != FLASH_FORMAT:
        return None
    if not isinstance(doc.get("channels"), list):
        return None
    out: list[dict[str, int]] = []
    for item in doc["channels"]:
        if not isinstance(item, dict) or set(item) != set(wire.WIRE_KEYS):
            return None
        values = {k: item[k] for k in wire.WIRE_KEYS}
        if wire.settings_problems(values) or values[wire.POLARITY_KEY] not in (1, -1):
            return None
        out.append(values)
    return out


def _write_flash(path: Path, settings: list[dict[str, int]]) -> None:
    """Atomic: a temporary file in the same folder, fsync, rename. Never replaces a device file."""
    if path.exists() and not path.is_file():
        raise FlashError(f"flash image {path} is not a regular file")
    data = json.dumps({"format": FLASH_FORMAT, "channels": settings}).encode("utf-8")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or Path("."))
        try:
            with os.fdopen(fd, "wb") as f:
                f.write(data)
                f.flush()
                os.fsync(f.fileno())
            os.replace(tmp, path)
        except BaseException:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
            raise
    except OSError as exc:
        raise FlashError(f"flash write failed: {exc.strerror or exc}") from None


class BoardSettings:
    """Per-channel settings in force, their kept copy, and the answers to section 7's commands."""

    def __init__(self, channels: int, polarity: int, flash: Flash | None = None) -> None:
        self.flash = flash or Flash()
        self.factory = {**SIM_FACTORY, wire.POLARITY_KEY: 1 if polarity >= 0 else -1}
        self.live: list[dict[str, int]] = []
        self.resize(channels)
        self.power_up()

    def resize(self, channels: int) -> None:
        """A board reconfigured to `channels` channels: new ones start from the factory settings."""
        self.live = self.live[:channels] + [dict(self.factory) for _ in range(channels - len(self.live))]

    @property
    def channels(self) -> int:
        return len(self.live)

    def power_up(self) -> None:
        """What a (re)starting board does: the kept settings where there are some, else the factory's."""
        kept = self.flash.kept or []
        self.live = [dict(kept[c]) if c < len(kept) else dict(self.factory) for c in range(self.channels)]

    # -- commands ---------------------------------------------------------------------------------
    def answer(self, command: Command) -> list[str]:
        """The answer lines (no line ends) for `get`, `set`, `keep` or an unknown word."""
        if command.word == "get":
            return self._get(command)
        if command.word == "set":
            return self._set(command)
        if command.word == "keep":
            if command.args:
                return [wire.no_line("keep", "takes no arguments")]
            try:
                self.flash.store(self.live)
            except FlashError as exc:
                return [wire.no_line("keep", str(exc))]
            return [wire.ok_line("keep")]
        return [wire.no_line(command.word[: wire.MAX_WORD_CHARS], "unknown command")]

    def _channels(self, command: Command) -> range:
        if not command.args:
            raise CommandError("channel: missing (a channel number or *)")
        which = wire.check_channel(command.args[0], self.channels)
        return range(self.channels) if which is None else range(which, which + 1)

    def _get(self, command: Command) -> list[str]:
        try:
            chosen = self._channels(command)
            if len(command.args) > 1:
                raise CommandError("takes one channel (a number or *)")
        except CommandError as exc:
            return [wire.no_line(command.subject, str(exc))]
        return [*(wire.val_line(c, self.live[c]) for c in chosen), wire.ok_line(command.subject)]

    def _set(self, command: Command) -> list[str]:
        try:
            chosen = self._channels(command)
            values = wire.parse_pairs(command.args[1:])
            if not values:
                raise CommandError("no key=value pairs")
            for c in chosen:  # every channel is checked before any changes: all or none
                problems = wire.settings_problems({**self.live[c], **values})
                if problems:
                    key, reason = problems[0]
                    raise CommandError(f"{key}: {reason}")
        except CommandError as exc:
            return [wire.no_line(command.subject, str(exc))]
        for c in chosen:
            self.live[c].update(values)
        return [wire.ok_line(command.subject, wire.format_pairs(values, list(values)))]
