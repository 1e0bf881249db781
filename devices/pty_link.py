"""The stable path of `padtune sim --link PATH`: a symlink to the pseudo-terminal a simulated board is
served on, made in one step, judged stale when the server that made it is gone, removed when it stops.

A link left by a server killed with -9 still points at its pty's number; that number is free, or taken
again by some other program: either way the link is stale and may be replaced. A link to a pty whose
holder was started with `--link` (read from /proc: the process holding the master side) is another
server's and is left alone, as are files, folders and links to anything else.
"""

from __future__ import annotations

import contextlib
import os

from devices.pty_server import PtyServer
from protocol.errors import UserError


def make_link(server: PtyServer, link: str) -> None:
    """The stable symlink of --link; a path that cannot be made is a one-line mistake.

    A link left by a `padtune sim` that was killed (kill -9 leaves it: its pty is gone) is replaced;
    so is one that points at this server's own new pty (the number was free again). A regular file, a
    folder, or a link to anything else that exists (a live pty: another server is using the path) is
    refused by name and left as it is.
    """
    try:
        refuse = link_refusal(link, server.path)
    except OSError as exc:
        refuse = f"--link {link}: cannot look at it ({exc.strerror}); pick another path"
    if refuse is not None:
        server.close()
        raise UserError(refuse)
    tmp = os.path.join(os.path.dirname(link) or ".", f".{os.path.basename(link)}.{os.getpid()}.tmp")
    try:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        os.symlink(server.path, tmp)
        os.replace(tmp, link)  # over a stale link in one step: the path never points nowhere twice
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        server.close()
        raise UserError(f"--link {link}: cannot make the link ({exc.strerror}); pick a path in a folder "
                        "you can write") from None


def link_refusal(link: str, own_pty: str) -> str | None:
    """Why `link` may not be replaced by --link, or None when it is free or a stale link."""
    if not os.path.lexists(link):
        return None
    if not os.path.islink(link):
        kind = "a folder" if os.path.isdir(link) else "a file" if os.path.isfile(link) else "not a link"
        return f"--link {link} already exists and is {kind}, not a link; pick another path or remove it"
    target = os.readlink(link)
    if not os.path.isabs(target):
        target = os.path.join(os.path.dirname(link), target)
    pty = target.startswith("/dev/pts/")
    if pty and (not os.path.exists(target) or target == own_pty):
        return None  # its pty went with its killed server (or is this server's, the number free again)
    if pty and served_by_a_linking_sim(target) is False:
        return None  # the number was taken again by a program that serves no link: the link is stale
    if pty:
        return (f"--link {link} points to {target}, a pseudo-terminal in use (another padtune sim?); stop "
                "that server or pick another path")
    what = "nothing (a dangling link)" if not os.path.lexists(target) else target
    return f"--link {link} is a link to {what}, not to a padtune sim; pick another path or remove it"


def served_by_a_linking_sim(pty: str) -> bool | None:
    """Whether the process holding the master of `/dev/pts/N` was started with `--link` (a server that
    may own the link), False when its holder(s) were not, None when that cannot be told (no /proc, or
    another user's processes): then the link counts as live and is left alone."""
    number = pty.rsplit("/", 1)[-1]
    holders: list[str] = []
    try:
        pids = [p for p in os.listdir("/proc") if p.isdigit()]
    except OSError:
        return None
    for pid in pids:
        try:
            fds = os.listdir(f"/proc/{pid}/fd")
        except OSError:
            continue  # gone, or not ours to look at
        for fd in fds:
            try:
                if not os.readlink(f"/proc/{pid}/fd/{fd}").endswith("ptmx"):
                    continue
                with open(f"/proc/{pid}/fdinfo/{fd}", encoding="ascii") as f:
                    if f"tty-index:\t{number}\n" in f.read():
                        holders.append(pid)
            except OSError:
                continue
    if not holders:
        return None
    for pid in holders:
        try:
            with open(f"/proc/{pid}/cmdline", "rb") as f:
                if b"\0--link\0" in f.read():
                    return True
        except OSError:
            return None
    return False


def remove_link(link: str, own_pty: str) -> None:
    """Remove --link if it still points to this server's pty (the user may have removed or reused it)."""
    with contextlib.suppress(OSError):
        if os.readlink(link) == own_pty:
            os.unlink(link)
