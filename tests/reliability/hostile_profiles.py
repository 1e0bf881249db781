"""The hostile profiles and board files corpus (issue 13): what a tester hands padtune where it reads a TOML.

Each kind of hostile file goes through one or more of the commands that read a profile (`export`,
`replay --profile`, `replay --against`, `tune --profile`, `check --profile`, `diff`, `watch --profile`,
`push`) or a board file (`sim BOARD.toml`, `estimate --board`), judged by `tests/reliability/cases.py`:
exit 2, one `padtune:` line, no control characters, no Python internals, within the bound, no output
written, the hostile file and the good profile byte for byte as they were. `watch` must fail before the
screen starts (a screen that started would never end here: the judge kills it and calls it a hang).
"""

from __future__ import annotations

import os
import random
import socket
from collections.abc import Callable
from pathlib import Path

from tests.reliability.cases import HostileCase

MIB = 1024 * 1024
PROFILE_CAP_BYTES = 2 * MIB  # processing.profile.MAX_PROFILE_BYTES, written out: the message states it
BOARD_CAP_BYTES = 1 * MIB  # devices.boards.MAX_BOARD_BYTES
HEAD = 'format_version = 1\nchannels = 2\nnames = ["a", "b"]\n'
GOOD = HEAD + "[defaults]\nthreshold_counts = 120\nhysteresis_counts = 20\n"
BOARD = """[board]
name = "mini"
rate_hz = 50
[method]
kind = "charge_share"
sample_pf = 20
[overlay]
material = "acrylic"
thickness_mm = 2
[pad_defaults]
width_mm = 10
height_mm = 10
[[pad]]
name = "a"
[[pad]]
name = "b"
x_mm = 15
"""
HOSTILE = "hostile.toml"

# A hazard writes the hostile file (or special file) at `folder / HOSTILE`.
Make = Callable[[Path], None]


def text(body: str) -> Make:
    return lambda folder: (folder / HOSTILE).write_text(body, encoding="utf-8")


def raw(body: bytes) -> Make:
    return lambda folder: (folder / HOSTILE).write_bytes(body)


def _fifo(folder: Path) -> None:
    os.mkfifo(folder / HOSTILE)


def _link(target: str) -> Make:
    return lambda folder: (folder / HOSTILE).symlink_to(target)


def _folder(folder: Path) -> None:
    (folder / HOSTILE).mkdir()


def _socket(folder: Path) -> None:
    with socket.socket(socket.AF_UNIX) as s:
        s.bind(str(folder / HOSTILE))  # the entry stays after the socket closes


def _loop(folder: Path) -> None:
    (folder / HOSTILE).symlink_to("loop.toml")
    (folder / "loop.toml").symlink_to(HOSTILE)


def _sparse(size_bytes: int) -> Make:
    def make(folder: Path) -> None:
        with open(folder / HOSTILE, "wb") as f:
            f.truncate(size_bytes)  # no disk used: the size alone must refuse it
    return make


def _binary(folder: Path) -> None:
    (folder / HOSTILE).write_bytes(random.Random(13).randbytes(4096))


def _names(n: int) -> str:
    return "[" + ", ".join(f'"k{i}"' for i in range(n)) + "]"


def _write_capture(folder: Path) -> None:
    """A short raw capture (two channels a, b at 100 Hz, one touch on a) for replay and tune."""
    import numpy as np

    from protocol.encoder import encode_frames, encode_info

    readings = np.full((300, 2), 1000, dtype=np.int64)
    readings[100:150, 0] += 400
    info = encode_info({"proto": 1, "board": "bench", "channels": 2, "rate": 100, "names": "a,b"})
    (folder / "cap.raw").write_bytes(info + encode_frames(readings))


# Each command: its arguments with the hostile file at P, and the outputs it must not write.
COMMANDS: dict[str, tuple[list[str], tuple[str, ...]]] = {
    "export": (["export", "P", "--json", "out.json"], ("out.json",)),
    "export-h": (["export", "P", "--c-header", "out.h"], ("out.h",)),
    "replay": (["replay", "cap.raw", "--profile", "P"], ()),
    "against": (["replay", "cap.raw", "--profile", "good.toml", "--against", "P"], ()),
    "tune": (["tune", "cap.raw", "--profile", "P", "-o", "tuned.toml", "--partial"], ("tuned.toml",)),
    "check": (["check", "sim://greenhouse", "--profile", "P"], ()),
    "diff": (["diff", "good.toml", "P"], ()),
    "watch": (["watch", "sim://greenhouse", "--profile", "P"], ()),
    "push": (["push", "P", "sim://greenhouse"], ()),
    "sim": (["sim", "P", "--duration", "1"], ()),
    "estimate": (["estimate", "--board", "P"], ()),
}
PROFILE_COMMANDS = ("export", "replay", "tune", "check", "diff", "watch", "against", "export-h", "push")


def _case(kind: str, command: str, make: Make, says: tuple[str, ...] = (), path: str = HOSTILE,
          time_bound_s: float = 2.0) -> HostileCase:
    args, outputs = COMMANDS[command]

    def build(folder: Path) -> list[str]:
        (folder / "good.toml").write_text(GOOD)
        if "cap.raw" in args:
            _write_capture(folder)
        make(folder)
        return [path if a == "P" else a for a in args]

    return HostileCase(name=f"{kind}-via-{command}", build=build, must_not_exist=outputs,
                       unchanged=(HOSTILE, "good.toml"), says=says, time_bound_s=time_bound_s)


# kind -> (make, what the line must say); profile hazards.
PROFILE_KINDS: dict[str, tuple[Make, tuple[str, ...]]] = {
    # the file itself
    "fifo": (_fifo, ("is a FIFO, not a file",)),
    "link-to-dev-zero": (_link("/dev/zero"), ("is a character device, not a file",)),
    "folder": (_folder, ("is a folder",)),
    "unix-socket": (_socket, ("is a socket, not a file",)),
    "dangling-link": (_link("nowhere.toml"), ("no such profile file",)),
    "link-loop": (_loop, ("cannot read",)),
    "over-the-cap": (text(GOOD + "#" * PROFILE_CAP_BYTES + "\n"),
                     ("a profile file is at most 2.0 MiB (2097152 bytes)",)),
    "sparse-16-mib": (_sparse(16 * MIB), ("is 16.0 MiB (16777216 bytes)", "at most 2.0 MiB")),
    # encoding
    "invalid-utf8": (raw(HEAD.encode() + b'board = "caf\xe9"\n'), ("not UTF-8 text (byte 0xe9 on line 4)",)),
    "nul-byte": (raw(HEAD.encode() + b"\0\n"), ("holds a NUL byte on line 4",)),
    "binary-file": (_binary, ("a binary file, not a profile",)),
    "utf16-text": (raw(GOOD.encode("utf-16")), ("holds a NUL byte",)),
    "empty-file": (text(""), ("format_version: missing", "channels: missing")),
    "json-not-toml": (text('{"format_version": 1, "channels": 2}\n'), ("not valid TOML",)),
    "raw-esc-in-string": (raw(HEAD.encode() + b'board = "a\x1b[2Jb"\n'), ("not valid TOML",)),
    # what tomllib cannot hold
    "arrays-5000-deep": (text(HEAD + "x = " + "[" * 5000 + "]" * 5000 + "\n"), ("nested too deeply",)),
    "inline-tables-5000-deep": (text(HEAD + "x = " + "{a = " * 5000 + "1" + "}" * 5000 + "\n"),
                                ("nested too deeply",)),
    "integer-5000-digits": (text(HEAD + "rate_hz = " + "9" * 5000 + "\n"), ("thousands of digits",)),
    "duplicate-table": (text(HEAD + "[channel.a]\nthreshold_counts = 5\n[channel.a]\nthreshold_counts = 6\n"),
                        ("not valid TOML",)),
    # floods: linear time, one line with a count
    "20000-unknown-channel-tables": (
        text(f"format_version = 1\nchannels = 1024\nnames = {_names(1024)}\n"
             + "".join(f"[channel.zz{i}]\nthreshold_counts = 5\n" for i in range(20000))),
        ("20000 [channel.NAME] tables name no channel", "'zz0', 'zz1', 'zz2' and 19997 more")),
    "20000-unknown-top-keys": (text(HEAD + "".join(f"k{i} = 1\n" for i in range(20000))),
                               ("20000 unknown keys in all",)),
    "20000-unknown-setting-keys": (text(HEAD + "[defaults]\n" + "".join(f"k{i} = 1\n" for i in range(20000))),
                                   ("defaults: 20000 unknown keys in all",)),
    "50000-unknown-group-members": (
        text(HEAD + '[[group]]\nname = "g"\nmembers = ['
             + ", ".join(f'"m{i}"' for i in range(50000)) + "]\n"),
        ("50000 entries in all are not channel names",)),
    "10000-groups-one-name": (text(HEAD + '[[group]]\nname = "g"\nmembers = ["a", "b"]\n' * 10000),
                              ("'g' is already the name of group[0]", "more problems")),
    "10000-sliders-one-name": (text(HEAD + '[[slider]]\nname = "s"\npads = ["a", "b"]\n' * 10000),
                               ("'s' is already the name of slider[0]",)),
    "1024-invalid-names": (text("format_version = 1\nchannels = 1024\nnames = ["
                                + ", ".join(['"k k"'] * 1024) + "]\n"),
                           ("is not a valid name", "more problems")),
    # control characters in keys and names: escaped
    "esc-in-top-key": (text(HEAD + '"\\u001b[31mred" = 1\n'), ("\\x1b[31mred: unknown key",)),
    "nul-in-setting-key": (text(HEAD + '[defaults]\n"\\u0000x" = 1\n'), ("defaults.\\x00x: unknown key",)),
    "newline-in-limit-key": (text(HEAD + '[limits]\n"new\\nline" = 1\n'),
                             ("limits.new\\nline: unknown key",)),
    "esc-in-channel-table": (text(HEAD + '[channel."\\u001b]0;title\\u0007"]\n'),
                             ("no channel named '\\x1b]0;title\\x07'",)),
    "esc-in-names": (text(HEAD.replace('["a", "b"]', '["\\u001b[2J", "b"]')),
                     ("'\\x1b[2J' is not a valid name",)),
    "csi-in-group-name": (text(HEAD + '[[group]]\nname = "\\u009bX"\nmembers = ["a", "b"]\n'), ("\\x9bX",)),
    "esc-in-group-member": (text(HEAD + '[[group]]\nname = "g"\nmembers = ["a", "\\u001bb"]\n'),
                            ("unknown channel '\\x1bb'",)),
    "esc-in-board-id": (text(HEAD + 'board = "\\u001b[2J"\n'), ("board: must be one line", "\\x1b[2J")),
    "board-id-1-mb": (text(HEAD + 'board = "' + "b" * MIB + '"\n'), ("board: must be one line",)),
    # wrong types and values
    "channels-zero": (text("format_version = 1\nchannels = 0\n"), ("channels: must be a channel count",)),
    "channels-4000-digits": (text("format_version = 1\nchannels = " + "9" * 4000 + "\n"),
                             ("not a number of 4000 digits",)),
    "format-version-newer": (text("format_version = 2\nchannels = 2\n"), ("newer than this padtune reads",)),
    "threshold-negative": (text(HEAD + "[defaults]\nthreshold_counts = -1\n"),
                           ("defaults.threshold_counts: must be between 1 and",)),
    "threshold-nan": (text(HEAD + "[defaults]\nthreshold_counts = nan\n"),
                      ("must be a whole number, not nan",)),
    "threshold-1-mb-string": (text(HEAD + '[defaults]\nthreshold_counts = "' + "x" * MIB + '"\n'),
                              ("must be a whole number, not 'xxx",)),
    "hysteresis-above-threshold": (text(HEAD + "[channel.a]\nthreshold_counts = 10\n"
                                        "hysteresis_counts = 10\n"),
                                   ("channel.a.hysteresis_counts: 10 must be below the threshold",)),
    "period-not-power-of-two": (text(HEAD + "[defaults]\nbaseline_period_frames = 3\n"),
                                ("must be a power of two",)),
    "limit-4000-digits": (text(HEAD + "[limits]\nbaseline_min_counts = " + "9" * 4000 + "\n"),
                          ("a number of 4000 digits is far out of range",)),
    "limit-infinite": (text(HEAD + "[limits]\nmax_noise_pp_counts = inf\n"), ("must be a positive number",)),
    "rate-400-digits": (text(HEAD + "rate_hz = " + "9" * 400 + "\n"),
                        ("rate_hz: must be a positive number",)),
    "polarity-zero": (text(HEAD + "polarity = [1, 0]\n"), ("polarity: must be a list of 2 values",)),
    "names-repeated": (text(HEAD.replace('["a", "b"]', '["a", "a"]')), ("duplicate names: a",)),
    "names-count-mismatch": (text(HEAD.replace('["a", "b"]', '["a"]')), ("lists 1 names but channels = 2",)),
    "group-of-one": (text(HEAD + '[[group]]\nname = "g"\nmembers = ["a"]\n'),
                     ("needs at least two members",)),
    "wheel-of-two": (text(HEAD + '[[slider]]\nname = "s"\npads = ["a", "b"]\nwheel = true\n'),
                     ("a wheel needs at least 3 pads",)),
    "channel-not-a-table": (text(HEAD + "[channel]\na = 3\n"), ("channel.a: must be a table of settings",)),
}

# Board files (sim, estimate).
BOARD_KINDS: dict[str, tuple[Make, tuple[str, ...]]] = {
    "board-fifo": (_fifo, ("is a FIFO, not a file",)),
    "board-link-to-dev-zero": (_link("/dev/zero"), ("is a character device, not a file",)),
    "board-over-the-cap": (text(BOARD + "#" * BOARD_CAP_BYTES + "\n"),
                           ("a board file is at most 1.0 MiB (1048576 bytes)",)),
    "board-arrays-5000-deep": (text(BOARD + "x = " + "[" * 5000 + "]" * 5000 + "\n"), ("nested too deeply",)),
    "board-integer-5000-digits": (text(BOARD.replace("rate_hz = 50", "rate_hz = " + "9" * 5000)),
                                  ("thousands of digits",)),
    "board-rate-400-digits": (text(BOARD.replace("rate_hz = 50", "rate_hz = " + "9" * 400)),
                              ("board.rate_hz: must be a number",)),
    "board-esc-in-description": (text(BOARD.replace("rate_hz = 50",
                                                    'rate_hz = 50\ndescription = "\\u001b[2J"')),
                                 ("board.description: must be one line",)),
    "board-esc-in-key": (text(BOARD + '[finger]\n"\\u001b[31m" = 1\n'), ("finger.\\x1b[31m: unknown key",)),
    "board-5000-pads": (text(BOARD + "".join(f'[[pad]]\nname = "p{i}"\n' for i in range(5000))),
                        ("5002 pads; a simulated board has at most 256",)),
    "board-invalid-utf8": (raw(BOARD.encode() + b"# \xff\n"), ("not UTF-8 text",)),
}

# The file hazards through every command that reads a profile; the rest through one each, in turn.
EVERY_COMMAND = ("fifo",)
SOME_COMMANDS = {"link-to-dev-zero": ("export", "watch"), "over-the-cap": ("tune", "check"),
                 "arrays-5000-deep": ("replay", "watch"), "integer-5000-digits": ("export", "diff"),
                 "esc-in-top-key": ("check", "watch")}


def cases() -> list[HostileCase]:
    out: list[HostileCase] = []
    turn = 0
    for kind, (make, says) in PROFILE_KINDS.items():
        if kind in EVERY_COMMAND:
            commands: tuple[str, ...] = PROFILE_COMMANDS
        elif kind in SOME_COMMANDS:
            commands = SOME_COMMANDS[kind]
        else:
            commands = (PROFILE_COMMANDS[turn % len(PROFILE_COMMANDS)],)
            turn += 1
        out.extend(_case(kind, command, make, says) for command in commands)
    for i, (kind, (make, says)) in enumerate(BOARD_KINDS.items()):
        out.append(_case(kind, ("sim", "estimate")[i % 2], make, says))
    out.append(_case("control-codes-in-the-path", "export", lambda folder: None, ("\\x1b[2J",),
                     path="\x1b[2Jmissing.toml"))
    return out


def kinds() -> int:
    """How many kinds of hostile file the corpus holds (cases are kinds through one or more commands)."""
    return len(PROFILE_KINDS) + len(BOARD_KINDS) + 1
