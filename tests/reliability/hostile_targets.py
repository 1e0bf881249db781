"""Hostile output targets (issue 13): where padtune is asked to write, something that is not a file it may
write. Judged by `tests/reliability/cases.py`: one `padtune:` line naming the target, exit 2, within the
bound, nothing created, nothing replaced; the few targets that are fine (`-` for export, a stale
temporary, a dead server's link) must work and leave no leftovers.

Targets: character devices (/dev/null, /dev/full), a FIFO, a socket, a folder, `-`, a read-only folder,
dangling links, symlink loops, stale temporaries, through export, tune -o and --report, record,
monitor --record, check --results, lot (--report and the database it reads) and sim --link / --flash.

Devices: unprivileged, the real /dev/null and /dev/full are named (they cannot be replaced without root).
As root a regression could replace them, so each case makes its own twin with mknod (the same major and
minor numbers) in its folder, and a bug would only break the twin. Read-only folders do not stop root: those
cases are left out when running as root (`os.geteuid() == 0`).
"""

from __future__ import annotations

import os
import socket
import stat
from collections.abc import Callable
from pathlib import Path

import tomli_w

from processing.profile import profile_for, profile_to_dict
from tests.reliability.cases import HostileCase

ROOT_USER = os.geteuid() == 0
PROFILE = tomli_w.dumps(profile_to_dict(profile_for(2, names=("valve1", "valve2"))))
# A recording that exists is enough: the target is refused before it is read.
RECORDING = "# padtune recording v1\n"
SIM = "sim://greenhouse"


# -- what stands at the target --------------------------------------------------------------------
def _device(folder: Path, name: str, which: str) -> str:
    """A character device at the target: the real one unprivileged, a twin in the folder as root."""
    minor = {"null": 3, "full": 7}[which]
    if not ROOT_USER:
        return f"/dev/{which}"
    os.mknod(folder / name, stat.S_IFCHR | 0o666, os.makedev(1, minor))
    return name


def _fifo(folder: Path, name: str) -> str:
    os.mkfifo(folder / name)
    return name


def _socket(folder: Path, name: str) -> str:
    with socket.socket(socket.AF_UNIX) as s:
        s.bind(str(folder / name))  # the socket file stays after the socket is closed
    return name


def _folder(folder: Path, name: str) -> str:
    (folder / name).mkdir()
    return name


def _loop(folder: Path, name: str) -> str:
    (folder / name).symlink_to(name)
    return name


def _loop_pair(folder: Path, name: str) -> str:
    (folder / name).symlink_to(f"{name}.other")
    (folder / f"{name}.other").symlink_to(name)
    return name


def _dangling_no_folder(folder: Path, name: str) -> str:
    (folder / name).symlink_to("gone/away/out")
    return name


def _link_to_device(folder: Path, name: str) -> str:
    device = _device(folder, "twin-null", "null")
    (folder / name).symlink_to(device if os.path.isabs(device) else folder / device)
    return name


def _read_only(folder: Path, name: str) -> str:
    (folder / "locked").mkdir()
    (folder / "locked").chmod(0o555)
    return f"locked/{name}"


Target = Callable[[Path, str], str]
SPECIAL: dict[str, Target] = {
    "dev-null": lambda f, n: _device(f, n, "null"),
    "dev-full": lambda f, n: _device(f, n, "full"),
    "fifo": _fifo,
    "socket": _socket,
    "folder": _folder,
    "link-to-device": _link_to_device,
}
# What the one line names for each (the kind of thing found there).
SAYS = {"dev-null": "character device", "dev-full": "character device", "fifo": "FIFO", "socket": "socket",
        "folder": "folder", "link-to-device": "character device"}


# -- the commands ---------------------------------------------------------------------------------
def _inputs(folder: Path) -> None:
    (folder / "p.toml").write_text(PROFILE)
    (folder / "run.csv").write_text(RECORDING)


def _writers() -> dict[str, Callable[[str], list[str]]]:
    return {
        "export-c": lambda t: ["export", "p.toml", "--c-header", t],
        "export-json": lambda t: ["export", "p.toml", "--json", t],
        "tune-o": lambda t: ["tune", "run.csv", "-o", t],
        "tune-report": lambda t: ["tune", "run.csv", "-o", "new.toml", "--report", t],
        "record": lambda t: ["record", SIM, "-o", t, "--duration", "0.2"],
        "record-force": lambda t: ["record", SIM, "-o", t, "--duration", "0.2", "--force"],
        "monitor-record": lambda t: ["monitor", SIM, "--record", t, "--duration", "0.2", "--force"],
        "lot-report": lambda t: ["lot", "none.sqlite", "--report", t],
    }


def _case(name: str, target: Target, argv: Callable[[str], list[str]], says: tuple[str, ...] = (),
          extra_must_not_exist: tuple[str, ...] = ("new.toml",), **kw: object) -> HostileCase:
    def build(folder: Path) -> list[str]:
        _inputs(folder)
        return argv(target(folder, "out"))

    return HostileCase(name, build, says=says, unchanged=("p.toml", "run.csv", "out"),
                       must_not_exist=extra_must_not_exist, **kw)  # type: ignore[arg-type]


# Every kind of target through one atomic writer (export) and the in-place writer (record --force); the
# two kinds that once hung or replaced a device (a FIFO, /dev/full) through every other writer.
FULL_SWEEP = ("export-c", "record-force")
SHORT_SWEEP = ("dev-full", "fifo")


def _special_cases() -> list[HostileCase]:
    cases = []
    for cmd, argv in _writers().items():
        for kind, target in SPECIAL.items():
            if cmd not in FULL_SWEEP and kind not in SHORT_SWEEP:
                continue
            if kind == "folder" and cmd in ("record", "record-force", "monitor-record", "tune-report"):
                says: tuple[str, ...] = ("out", "folder")
            else:
                says = ("out" if kind not in ("dev-null", "dev-full") or ROOT_USER else f"/dev/{kind[4:]}",
                        SAYS[kind])
            cases.append(_case(f"{cmd}:{kind}", target, argv, says))
    return cases


def _dash_cases() -> list[HostileCase]:
    """`-` is standard output for export (exit 0, no file `-`) and refused by name everywhere else."""
    def plain(argv: list[str]) -> Callable[[Path], list[str]]:
        def build(folder: Path) -> list[str]:
            _inputs(folder)
            return argv
        return build

    ok = [HostileCase(f"dash:{cmd}", plain(["export", "p.toml", flag, "-"]), expect_exit=0,
                      must_not_exist=("-",))
          for cmd, flag in (("export-c", "--c-header"), ("export-json", "--json"))]
    refused = {
        "tune-o": (["tune", "run.csv", "-o", "-"], "-o -"),
        "tune-report": (["tune", "run.csv", "-o", "new.toml", "--report", "-"], "--report -"),
        "record": (["record", SIM, "-o", "-", "--duration", "0.2"], "-o -"),
        "monitor-record": (["monitor", SIM, "--record", "-", "--duration", "0.2"], "--record -"),
        "check-results": (["check", SIM, "--profile", "p.toml", "--results", "-"], "--results -"),
        "lot-report": (["lot", "none.sqlite", "--report", "-"], "--report -"),
        "sim-link": (["sim", "greenhouse", "--link", "-", "--duration", "0.2"], "--link -"),
        "sim-flash": (["sim", "greenhouse", "--flash", "-", "--duration", "0.2"], "--flash -"),
    }
    return ok + [HostileCase(f"dash:{cmd}", plain(argv), says=(says,), must_not_exist=("-", "new.toml"))
                 for cmd, (argv, says) in refused.items()]


def _link_cases() -> list[HostileCase]:
    cases = []
    for cmd in ("export-c", "record-force"):
        argv = _writers()[cmd]
        cases.append(_case(f"{cmd}:symlink-loop", _loop, argv, ("out",)))
        cases.append(_case(f"{cmd}:symlink-loop-pair", _loop_pair, argv, ("out",)))
        cases.append(_case(f"{cmd}:dangling-link-no-folder", _dangling_no_folder, argv, ("out",),
                           extra_must_not_exist=("gone", "new.toml")))
    return cases


def _read_only_cases() -> list[HostileCase]:
    if ROOT_USER:  # root writes into a read-only folder: nothing to refuse
        return []
    return [_case(f"{cmd}:read-only-folder", _read_only, _writers()[cmd], ("locked/out",),
                  extra_must_not_exist=("locked/out", "new.toml"))
            for cmd in ("export-c", "export-json", "tune-o", "record", "monitor-record")]


def _results_cases() -> list[HostileCase]:
    """`check --results` and `lot` on a results database that is a device, a FIFO or a folder."""
    cases = []
    for kind in ("dev-null", "fifo"):
        says = ("out" if kind != "dev-null" or ROOT_USER else "/dev/null", SAYS[kind])
        cases.append(_case(f"lot-results:{kind}", SPECIAL[kind], lambda t: ["lot", t], says))
    check = ["check", SIM, "--profile", "p.toml", "--duration", "0.2", "--results"]
    cases.append(_case("check-results:fifo", _fifo, lambda t: [*check, t], ("out", "FIFO")))
    return cases


def _sim_link_cases() -> list[HostileCase]:
    def with_link(make: Callable[[Path], None], extra: tuple[str, ...] = ()) -> Callable[[Path], list[str]]:
        def build(folder: Path) -> list[str]:
            make(folder)
            return ["sim", "greenhouse", "--link", "L", *extra, "--duration", "0.2"]
        return build

    def dead_server_link(folder: Path) -> None:
        (folder / "L").symlink_to("/dev/pts/999999")  # a pty number no server holds: a killed sim's link

    return [
        HostileCase("sim-link:regular-file", with_link(lambda f: (f / "L").write_text("notes")),
                    says=("--link L", "a file"), unchanged=("L",)),
        HostileCase("sim-link:folder", with_link(lambda f: (f / "L").mkdir()), says=("--link L", "a folder")),
        HostileCase("sim-link:symlink-loop", with_link(lambda f: _loop(f, "L")), says=("--link L",)),
        HostileCase("sim-link:foreign-link", with_link(lambda f: (f / "L").symlink_to("p.toml")),
                    says=("--link L", "not to a padtune sim")),
        HostileCase("sim-link:dangling-foreign", with_link(lambda f: (f / "L").symlink_to("nowhere")),
                    says=("--link L", "dangling")),
        HostileCase("sim-link:fifo", with_link(lambda f: _fifo(f, "L")), says=("--link L", "not a link")),
        # A killed server's link is replaced (exit 0) and removed when this one stops.
        HostileCase("sim-link:dead-server-link", with_link(dead_server_link), expect_exit=0,
                    must_not_exist=("L",), time_bound_s=4.0),
    ]


def _never_running_pid() -> int:
    """A process id no process can have (above the kernel's pid_max): a writer that is surely gone."""
    try:
        return int(Path("/proc/sys/kernel/pid_max").read_text()) + 1
    except (OSError, ValueError):
        return 4_194_305  # Linux's largest pid_max (2^22) + 1


STALE_PID = _never_running_pid()
STALE = (f".out.h.{STALE_PID}.bak.tmp", f".out.h.{STALE_PID}.k3x_9abc.tmp")
OTHERS = (f".other.h.{STALE_PID}.bak.tmp", f".out.h.5.{STALE_PID}.bak.tmp")  # other targets' (out.h.5)


def _stale_cases() -> list[HostileCase]:
    """Temporaries a killed save left (`.NAME.PID.bak.tmp`, mkstemp's `.NAME.PID.XXXXXXXX.tmp`, the PID
    gone): the next save of that target removes them (exit 0); other targets' stay byte for byte."""
    def build(folder: Path) -> list[str]:
        _inputs(folder)
        for name in STALE + OTHERS:
            (folder / name).write_text("left by a killed save")
        return ["export", "p.toml", "--c-header", "out.h"]

    return [HostileCase("export:stale-temporaries", build, expect_exit=0, must_not_exist=STALE,
                        unchanged=("p.toml", *OTHERS))]


def cases() -> list[HostileCase]:
    found = (_special_cases() + _dash_cases() + _link_cases() + _read_only_cases() + _results_cases()
             + _sim_link_cases() + _stale_cases())
    names = [c.name for c in found]
    assert len(names) == len(set(names)), "case names must be unique"
    return found
