"""Reading a TOML file the user names (a profile, a board file) without hanging, exhausting memory or leaking.

Owns the hazards of the file itself, before any key is looked at: a path that is not a regular file (a FIFO
blocks the reader until a writer comes, a link to /dev/zero never ends) is refused by what it is before it
is opened; a file larger than the caller's cap is refused with its size; text that is not UTF-8, holds a
NUL byte, nests arrays thousands deep (tomllib recurses: RecursionError) or holds an integer of thousands
of digits (ValueError about `sys.set_int_max_str_digits`) is one `UserError` line in plain words. It lives
in `protocol/` because both `processing` (profiles) and `devices` (board files) read through it.
"""

from __future__ import annotations

import os
import stat
import tomllib
from pathlib import Path
from typing import Any

from protocol.errors import UserError
from protocol.printable import printable

MIB = 1024 * 1024
# What a special file is called in a message: "is a FIFO, not a file".
_KINDS = ((stat.S_ISFIFO, "a FIFO"), (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
          (stat.S_ISSOCK, "a socket"), (stat.S_ISDIR, "a folder"))


def shown_path(path: str | os.PathLike[str]) -> str:
    """A path as a message quotes it: control characters escaped, very long paths cut."""
    return printable(str(path), 200)


def special_kind(mode: int) -> str:
    """What a file that is not a regular one is, in a message's words ("a FIFO", "a folder", ...)."""
    return next((words for test, words in _KINDS if test(mode)), "not a regular file")


def size_words(size_bytes: int) -> str:
    """`5.0 MiB (5242880 bytes)`: a size a reader can compare with the cap at a glance."""
    if size_bytes >= MIB:
        return f"{size_bytes / MIB:.1f} MiB ({size_bytes} bytes)"
    return f"{size_bytes} bytes"


def read_capped(path: Path, what: str, max_bytes: int) -> bytes:
    """The bytes of `path` (a regular file of at most `max_bytes`), or a one-line UserError saying why not.

    The kind is checked by name first (stat follows links: a link to /dev/zero is a character device), so
    a FIFO or a device is never opened; the descriptor is opened non-blocking and checked again (a file
    swapped for a FIFO in between still cannot block), and at most `max_bytes + 1` bytes are read.
    """
    shown = shown_path(path)
    try:
        before = os.stat(path)
    except FileNotFoundError:
        raise UserError(f"{shown}: no such {what} file; check the path") from None
    except OSError as exc:
        raise UserError(f"{shown}: cannot read: {_reason(exc)}") from None
    if not stat.S_ISREG(before.st_mode):
        kind = special_kind(before.st_mode)
        raise UserError(f"{shown}: is {kind}, not a file; give the {what} file itself") from None
    _check_size(shown, what, before.st_size, max_bytes)
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_NOCTTY", 0))
    except OSError as exc:
        raise UserError(f"{shown}: cannot read: {_reason(exc)}") from None
    try:
        now = os.fstat(fd)
        if not stat.S_ISREG(now.st_mode):
            kind = special_kind(now.st_mode)
            raise UserError(f"{shown}: is {kind}, not a file; give the {what} file itself")
        chunks: list[bytes] = []
        total = 0
        while total <= max_bytes:
            chunk = os.read(fd, min(1 * MIB, max_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
    except OSError as exc:
        raise UserError(f"{shown}: cannot read: {_reason(exc)}") from None
    finally:
        os.close(fd)
    _check_size(shown, what, total, max_bytes)  # it grew while being read
    return b"".join(chunks)


def _check_size(shown: str, what: str, size_bytes: int, max_bytes: int) -> None:
    if size_bytes > max_bytes:
        raise UserError(f"{shown}: is {size_words(size_bytes)}; a {what} file is at most "
                        f"{size_words(max_bytes)}: is this the right file?")


def _reason(exc: OSError) -> str:
    if isinstance(exc, PermissionError):
        return "permission denied; check the file's permissions"
    if isinstance(exc, IsADirectoryError):
        return "it is a folder; give the file itself"
    return printable(exc.strerror or type(exc).__name__)


def _line_of(data: bytes, offset: int) -> int:
    return data.count(b"\n", 0, offset) + 1


def decode_text(data: bytes, shown: str, what: str) -> str:
    """UTF-8 text (a byte order mark allowed), or a UserError naming the line of the first bad byte."""
    nul = data.find(b"\0")
    if nul >= 0:
        raise UserError(f"{shown}: holds a NUL byte on line {_line_of(data, nul)}: a binary file, not a "
                        f"{what} (a {what} is TOML text)")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        bad = data[min(exc.start, len(data) - 1)]
        raise UserError(f"{shown}: not UTF-8 text (byte 0x{bad:02x} on line {_line_of(data, exc.start)}); "
                        f"a {what} is TOML text saved as UTF-8") from None


def parse_toml(text: str, shown: str, what: str) -> dict[str, Any]:
    """The TOML document, or one UserError line in plain words for every way tomllib can fail."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{shown}: not valid TOML: {printable(str(exc), 200)}") from None
    except RecursionError:
        raise UserError(f"{shown}: arrays or tables nested too deeply to read (thousands of levels); "
                        f"a {what} nests a few levels at most") from None
    except ValueError:
        # tomllib's only other failure: an integer longer than Python converts (4300 digits by default).
        raise UserError(f"{shown}: holds a number with thousands of digits, too long to read; no {what} "
                        "value is that large") from None


def read_toml(path: str | os.PathLike[str], what: str, max_bytes: int) -> dict[str, Any]:
    """Read and parse the TOML file at `path`: every hazard of the file itself is one UserError line."""
    p = Path(path)
    shown = shown_path(p)
    return parse_toml(decode_text(read_capped(p, what, max_bytes), shown, what), shown, what)
