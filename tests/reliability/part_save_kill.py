"""kill -9 during profile saves: the file is always the old profile or the new one, never broken, and
the next save leaves no temporaries behind.

Each trial forks a process (a real child process of its own, with its own pid) that saves two profiles
by turns through `processing.profile.save_profile` (the atomic save of `processing.atomic`), and kills
it with SIGKILL at a random moment: spread over a few saves' time, so every step of a save (the
temporary written, fsynced, the backup link, the rename, the folder fsync) is hit. Then: the profile
must be byte for byte one of the two and load; its `.bak` too when there is one; the temporaries left
by the kill are counted; the next save (by another process, as a user's next run) must leave none.
"""

from __future__ import annotations

import os
import random
import signal
import tempfile
import time
from dataclasses import replace
from pathlib import Path

from processing.profile import ChannelSettings, load_profile, profile_for, save_profile
from tests.reliability.figures import Figure, equal, info, with_note

FULL_TRIALS = 300
QUICK_TRIALS = 25
NAME = "panel.toml"


def _profiles():
    names = tuple(f"k{i:02d}" for i in range(64))
    old = profile_for(64, names, board="grid64", rate_hz=1000.0)
    new = replace(old, defaults=ChannelSettings(threshold_counts=77, hysteresis_counts=9))
    return old, new


def _saver(path: Path, ready_w: int, old, new) -> None:
    """The child: say it started, then save by turns until killed. Never returns."""
    try:
        os.write(ready_w, b"r")
        while True:
            save_profile(new, path)
            save_profile(old, path)
    finally:
        os._exit(0)


def _calibrate(folder: Path, old, new) -> float:
    path = folder / "calibrate.toml"
    start = time.perf_counter()
    for k in range(10):
        save_profile(new if k % 2 else old, path)
    seconds = (time.perf_counter() - start) / 10
    for leftover in folder.iterdir():
        leftover.unlink()
    return seconds


def _others(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name not in (NAME, NAME + ".bak"))


def _dead_pid() -> int:
    """The pid of a process that has ended and been reaped (what a killed saver's pid is afterwards)."""
    pid = os.fork()
    if pid == 0:
        os._exit(0)
    os.waitpid(pid, 0)
    return pid


def staged_kill_points(folder: Path) -> dict[str, list[str]]:
    """Each state a kill can leave between the steps of a save (processing/atomic.py), made on purpose,
    then the next save: {kill point: the temporaries still there after it} (all lists should be empty)."""
    old, new = _profiles()
    left: dict[str, list[str]] = {}
    steps = ("after the temporary is written", "after the backup's hard link",
             "after the backup's rename, before the final rename")
    for k, step in enumerate(steps):
        case = folder / f"point{k}"
        case.mkdir()
        path = case / NAME
        save_profile(old, path)
        save_profile(old, path)  # a .bak too, as after any second save
        dead = _dead_pid()
        if k in (0, 2):  # the new content's temporary, written and fsynced, not yet renamed
            (case / f".{NAME}.{dead}.x1y2z3w4.tmp").write_bytes(b"new content")
        if k == 1:  # the hard link made, not yet renamed over .bak
            os.link(path, case / f".{NAME}.{dead}.bak.tmp")
        if k == 2:  # the link renamed over .bak: NAME and NAME.bak are one file now
            os.unlink(case / (NAME + ".bak"))
            os.link(path, case / (NAME + ".bak"))
        save_profile(new, path)
        left[step] = sorted(p.name for p in case.iterdir() if p.name not in (NAME, NAME + ".bak"))
    return left


def run(quick: bool) -> list[Figure]:
    trials = QUICK_TRIALS if quick else FULL_TRIALS
    rng = random.Random(9)
    old, new = _profiles()
    broken, bak_broken, unloadable, after_next, seen_old, seen_new = 0, 0, 0, 0, 0, 0
    left_by_kill: dict[str, int] = {}
    first_problem = ""
    with tempfile.TemporaryDirectory(prefix="padtune-savekill-") as tmp:
        folder = Path(tmp)
        save_s = _calibrate(folder, old, new)
        path = folder / NAME
        save_profile(old, path)
        old_bytes, new_bytes = path.read_bytes(), None
        save_profile(new, path)
        new_bytes = path.read_bytes()
        save_profile(old, path)
        for trial in range(trials):
            ready_r, ready_w = os.pipe()
            pid = os.fork()
            if pid == 0:
                os.close(ready_r)
                _saver(path, ready_w, old, new)
            os.close(ready_w)
            os.read(ready_r, 1)
            os.close(ready_r)
            time.sleep(rng.uniform(0, 4 * save_s))
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)  # reaped, as a shell reaps a killed command
            data = path.read_bytes() if path.exists() else b"<missing>"
            if data == old_bytes:
                seen_old += 1
            elif data == new_bytes:
                seen_new += 1
            else:
                broken += 1
                first_problem = first_problem or f"trial {trial}: {NAME} is {len(data)} bytes, neither"
            try:
                load_profile(path)
            except Exception as exc:  # counted: the figure says how many would not load
                unloadable += 1
                first_problem = first_problem or f"trial {trial}: load_profile: {exc}"
            bak = path.with_name(NAME + ".bak")
            if bak.exists() and bak.read_bytes() not in (old_bytes, new_bytes):
                bak_broken += 1
                first_problem = first_problem or f"trial {trial}: {bak.name} is neither profile"
            for name in _others(folder):
                kind = ".bak.tmp" if name.endswith(".bak.tmp") else ".tmp" if name.endswith(".tmp") else name
                left_by_kill[kind] = left_by_kill.get(kind, 0) + 1
            save_profile(old if trial % 2 else new, path)  # the user's next save, from another process
            left = _others(folder)
            if left:
                after_next += len(left)
                first_problem = first_problem or f"trial {trial}: after the next save: {', '.join(left)}"
                for name in left:
                    (folder / name).unlink()  # each trial counts its own leftovers
    with tempfile.TemporaryDirectory(prefix="padtune-savekill-staged-") as tmp:
        staged = staged_kill_points(Path(tmp))
    staged_bad = {step: names for step, names in staged.items() if names}
    left_text = ", ".join(f"{n} {k}" for k, n in sorted(left_by_kill.items())) or "none"
    figures = [
        info("save kill: trials", trials),
        equal("save kill: profile neither old nor new", broken, 0),
        equal("save kill: profile that does not load", unloadable, 0),
        equal("save kill: .bak neither old nor new", bak_broken, 0),
        equal("save kill: temporaries left after the next save", after_next, 0, "files"),
        info("save kill: temporaries left by the kills", left_text),
        Figure("save kill: staged kill points leaving temporaries after the next save", len(staged_bad), "",
               "= 0", not staged_bad, note="; ".join(f"{step}: {', '.join(names)}"
                                                     for step, names in staged_bad.items())),
        info("save kill: found old / new", f"{seen_old}/{seen_new}"),
        info("save kill: one save takes", round(save_s * 1e3, 2), "ms"),
    ]
    return with_note(figures, first_problem)
