"""Crash-safe file replacement: the target always holds either the old or the new content.

Temporary file in the same folder, write, flush, fsync, copy the old file's mode, keep the previous file
as `<name>.bak` (a hard link to the old content, so the target never goes missing), `os.replace`, then
fsync the folder so the rename itself survives a power cut. Temporary names carry the writer's process
id, so the next save removes what a killed writer left behind.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import stat
import tempfile
from pathlib import Path


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
    try:
        os.link(path, tmp)
    except OSError:  # no hard links on this file system: copy instead (still atomic for the .bak)
        shutil.copy2(path, tmp)
    os.replace(tmp, bak)


def _sweep_stale(folder: Path, name: str) -> None:
    """Remove temporary files a crashed writer left behind (their process is gone)."""
    for leftover in folder.glob(f".{name}.*.tmp"):
        parts = leftover.name[len(name) + 2:].split(".")
        pid = int(parts[0]) if parts and parts[0].isdigit() else None
        if pid is None or pid == os.getpid():
            continue
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            with contextlib.suppress(FileNotFoundError):
                leftover.unlink()
        except PermissionError:  # alive, someone else's
            continue


class NotRegularFile(OSError):
    """The target exists and is not a regular file (a device, a pipe, a socket, a folder): replacing
    it with a file would destroy it (`/dev/null` as root), so nothing is written."""

    def __init__(self, path: Path, kind: str) -> None:
        super().__init__(f"{path} is {kind}, not a regular file; padtune replaces only regular files")
        self.strerror = f"it is {kind}, not a regular file; choose a file name"
        self.filename = str(path)


def _kind(mode: int) -> str:
    for test, kind in ((stat.S_ISDIR, "a folder"), (stat.S_ISCHR, "a character device"),
                       (stat.S_ISBLK, "a block device"), (stat.S_ISFIFO, "a pipe (FIFO)"),
                       (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return kind
    return "not a regular file"


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
        raise NotRegularFile(target, _kind(st.st_mode))
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
