"""Crash-safe file replacement: the target always holds either the old or the new content.

Temporary file in the same folder, write, flush, fsync, copy the old file's mode, keep the previous file
as `<name>.bak` (a hard link to the old content, so the target never goes missing), `os.replace`, then
fsync the folder so the rename itself survives a power cut. Temporary names carry the writer's process
id, so the next save of the same target removes what a killed writer left behind (a process that is
gone, a zombie, or an id since reused by a younger process), and never a live writer's.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import stat
import tempfile
from pathlib import Path

from protocol.tomlfile import special_kind


def _umask_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _fsync_dir(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _keep_backup(path: Path) -> None:
    """Make `<path>.bak` hold the current content without ever removing `path`."""
    bak = path.with_name(path.name + ".bak")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.bak.tmp")
    with contextlib.suppress(FileNotFoundError):
        tmp.unlink()
    with contextlib.suppress(OSError):
        if os.path.samefile(path, bak):  # a save killed after its backup's rename: it already holds it
            return
    try:
        os.link(path, tmp)
    except OSError:  # no hard links on this file system: copy instead (still atomic for the .bak)
        shutil.copy2(path, tmp)
    os.replace(tmp, bak)
    # POSIX rename of two links to one file does nothing and leaves the source: never leave it behind.
    with contextlib.suppress(FileNotFoundError):
        tmp.unlink()


def _temporary_pid(leftover: str, name: str) -> int | None:
    """The writer's process id if `leftover` is one of this module's temporaries of target `name`
    (`.NAME.PID.XXXXXXXX.tmp` from mkstemp, `.NAME.PID.bak.tmp` from the backup), else None. The name is
    compared as text, never as a pattern: a target called `*` or `p[1].toml` sweeps only its own."""
    prefix = f".{name}."
    if not leftover.startswith(prefix):
        return None
    parts = leftover[len(prefix):].split(".")
    if len(parts) != 3 or parts[2] != "tmp" or not parts[0].isdigit():
        return None  # another target's (`p.toml.5`'s leftovers have one part more)
    token = parts[1]
    if token != "bak" and not (len(token) == 8 and all(c.isalnum() or c == "_" for c in token)):
        return None
    return int(parts[0])


def _boot_epoch_s() -> float | None:
    try:
        with open("/proc/stat", encoding="ascii") as f:
            return next(float(line.split()[1]) for line in f if line.startswith("btime "))
    except (OSError, StopIteration, ValueError, IndexError):
        return None


def _writer_running(pid: int, written_epoch_s: float) -> bool:
    """Whether process `pid` may still be the one writing a temporary last written at `written_epoch_s`.

    Not running: no such process, a number no process can have, a zombie (killed, not yet reaped), or a
    process that started after the file was last written (the id was reused). Anything unsure (no /proc,
    someone else's process) counts as running: a live writer's file is never removed."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (OverflowError, ValueError):  # not a process id at all
        return False
    except PermissionError:  # exists, another user's
        pass
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii", errors="replace") as f:
            fields = f.read().rsplit(")", 1)[1].split()  # after the command name, which may hold spaces
    except OSError:
        return True
    if fields[0] in ("Z", "X"):
        return False
    boot = _boot_epoch_s()
    if boot is None:
        return True
    started_epoch_s = boot + int(fields[19]) / os.sysconf("SC_CLK_TCK")
    return started_epoch_s <= written_epoch_s + 1.0  # 1 s of slack for the clocks' resolution


def _sweep_stale(folder: Path, name: str) -> None:
    """Remove temporaries of this target that a killed writer left behind (its process is gone). Only
    this target's, and never one whose writer may still be running (see `_writer_running`)."""
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return  # the save itself will say what is wrong with the folder
    for entry in entries:
        pid = _temporary_pid(entry.name, name)
        if pid is None or pid == os.getpid():
            continue
        try:
            written = entry.stat(follow_symlinks=False).st_mtime
        except FileNotFoundError:
            continue  # its writer finished meanwhile
        if not _writer_running(pid, written):
            with contextlib.suppress(FileNotFoundError):
                os.unlink(entry.path)


class NotRegularFile(OSError):
    """The target exists and is not a regular file (a device, a pipe, a socket, a folder): replacing
    it with a file would destroy it (`/dev/null` as root), so nothing is written."""

    def __init__(self, path: Path, kind: str) -> None:
        super().__init__(f"{path} is {kind}, not a regular file; padtune replaces only regular files")
        self.strerror = f"it is {kind}, not a regular file; choose a file name"
        self.filename = str(path)


def refuse_non_regular(path: str | os.PathLike[str]) -> None:
    """`NotRegularFile` when `path` (links followed) exists and is not a regular file; else nothing (a
    path that cannot be looked at is left for the open to explain)."""
    try:
        st = os.stat(path)
    except OSError:
        return
    if not stat.S_ISREG(st.st_mode):
        raise NotRegularFile(Path(path), special_kind(st.st_mode))


def open_regular(path: str | os.PathLike[str], flags: int, mode: int = 0o644) -> int:
    """`os.open` for writing a file in place (a recording) that never writes into anything but a regular
    file: a device, FIFO, socket or folder at `path` raises `NotRegularFile` before it is opened, and
    the open itself never waits for a FIFO's reader (O_NONBLOCK, then checked again on the descriptor,
    for a target swapped in between). The descriptor returned is blocking."""
    refuse_non_regular(path)
    fd = os.open(path, flags | os.O_NONBLOCK, mode)
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise NotRegularFile(Path(path), special_kind(st.st_mode))
        os.set_blocking(fd, True)
    except BaseException:
        os.close(fd)
        raise
    return fd


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes, keep_backup: bool = True) -> None:
    """Replace `path` with `data` atomically (OSError propagates; the old file is then untouched).

    A symlink is followed: the file it points to is replaced, and the link stays a link. A target that
    exists and is not a regular file raises `NotRegularFile` before anything is written.
    """
    target = Path(os.path.realpath(path))
    folder = target.parent if str(target.parent) else Path(".")
    try:
        st = target.stat()
        existed = True
    except FileNotFoundError:
        st, existed = None, False
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise NotRegularFile(target, special_kind(st.st_mode))
    mode = st.st_mode & 0o7777 if st is not None else _umask_mode()
    _sweep_stale(folder, target.name)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.chmod(tmp_name, mode)
        if existed and keep_backup:
            _keep_backup(target)
        os.replace(tmp_name, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp_name)
        raise
    _fsync_dir(folder)
