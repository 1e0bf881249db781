"""Every board and run the acceptance tests use, by name (tests ask for them by name; see conftest.py).

Timelines, at 100 frames a second unless said: the panel is quiet for the first 250 frames (2.5 s;
contract 7 asks for at least 2 s, and provisional thresholds need 1.0 s of quiet frames); a board whose
keys must learn their polarity gets one teaching touch per key (contract 6: not reported), then, at
least 1.4 s after its teaching touch, one touch that must be reported. Touch depths are 12 to 30 times
the bounded noise's peak-to-peak (contract 7 promises detection from 10 times).
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from tests.acceptance import boards as f
from tests.acceptance.boards import RAMP_FRAMES, Board, Touch
from tests.acceptance.runs import Scenario

QUIET = 250


def learning_script(keys: int) -> tuple[tuple[Touch, ...], int]:
    """One teaching touch per key (frames 250, 290, ...), then one real touch per key (420, 460, ...);
    returns the touches and the frames to print (a second of quiet after the last lift)."""
    teach = tuple(Touch(k, QUIET + 40 * k, 20) for k in range(keys))
    real = tuple(Touch(k, 420 + 40 * k, 25) for k in range(keys))
    return teach + real, 420 + 40 * (keys - 1) + 25 + RAMP_FRAMES + 100


def known_script(keys: int, start: int = QUIET) -> tuple[tuple[Touch, ...], int]:
    """One touch per key (frames 250, 300, ...): for keys whose polarity is known (no teaching touch)."""
    touches = tuple(Touch(k, start + 50 * k, 25) for k in range(keys))
    return touches, start + 50 * (keys - 1) + 25 + RAMP_FRAMES + 100


def plain(name: str, line, keys=("a", "b", "c"), polarity=(1, 1, 1), idle=(1234, 1250, 1198), depth=120,
          noise=4, learn: bool = True, **kw) -> Board:
    touches, frames = learning_script(len(keys)) if learn else known_script(len(keys))
    return Board(name=name, keys=tuple(keys), idle=tuple(idle), polarity=tuple(polarity), depth=depth,
                 noise=noise, line=line, touches=touches, frames=frames, **kw)


def _with_reset(board: Board) -> Board:
    """A watchdog reset a second before the end (after every touch): millis() starts again near 0 and
    the sketch prints its banner again (contract 2: a time column going back is a board reset)."""
    at = board.frames - 60
    return replace(board, reset_at=at, texts={at: ("Touch keys v0.3 ready",)})


def chs(n: int) -> tuple[str, ...]:
    return tuple(f"ch{k}" for k in range(n))


def _profile(folder: Path) -> Path:
    """A profile written by hand, as a user would: polarity -1 and settings for the RC board."""
    path = folder / "rc-falling.toml"
    path.write_text('format_version = 1\nchannels = 3\nnames = ["ch0", "ch1", "ch2"]\n'
                    "polarity = [-1, -1, -1]\n\n[defaults]\nthreshold_counts = 150\nhysteresis_counts = 40\n")
    return path


RC_IDLE = (4612, 4580, 4633, 4598)  # an RC oscillator counted over a gate: a touch lowers the count

BOARDS = {
    "columns": plain("columns", f.columns),
    "commas": plain("commas", f.commas, polarity=(-1, -1, -1), eol=b"\r\n"),
    "plotter_pairs": plain("plotter_pairs", f.plotter_pairs, keys=("zone1", "zone2", "zone3"), eol=b"\r\n"),
    "spaced_pairs": plain("spaced_pairs", f.spaced_pairs, keys=("up", "down", "ok"), polarity=(-1, -1, -1)),
    "equals_pairs": plain("equals_pairs", f.equals_pairs, keys=("k1", "k2", "k3"), eol=b"\r\n"),
    "brackets": plain("brackets", f.brackets, keys=("T0", "T2", "T3"), polarity=(-1, -1, -1)),
    "fixed6": plain("fixed6", f.fixed6),
    "decimals": plain("decimals", f.decimals, idle=(123450, 125025, 119800), depth=1500, noise=40,
                      eol=b"\r\n"),
    "millis": _with_reset(plain("millis", f.millis_columns)),
    "millis_pairs": plain("millis_pairs", f.millis_pairs, keys=("s1", "s2"), polarity=(1, 1),
                          idle=(2210, 2305), eol=b"\r\n"),
    "cr_only": plain("cr_only", f.columns, eol=b"\r"),
    "chatty": plain("chatty", f.commas, eol=b"\r\n",
                    # What an ESP32-S3 prints at reset (its ROM's lines, from memory), then the sketch's.
                    boot=("ESP-ROM:esp32s3-20210327", "Build:Mar 27 2021",
                          "rst:0x1 (POWERON),boot:0x8 (SPI_FAST_FLASH_BOOT)", "Touch keypad demo v0.3",
                          "Calibrating 3 pads..."),
                    texts={150: ("calibrating...", "done, baseline 1234 1250 1198")}),
    "rc_falling": plain("rc_falling", f.tabs, keys=("p1", "p2", "p3", "p4"), polarity=(-1,) * 4,
                        idle=RC_IDLE, depth=400, noise=6, eol=b"\r\n"),
    "esp32_72": plain("esp32_72", f.one_value, keys=("T0",), polarity=(-1,), idle=(72,), depth=58, noise=2,
                      eol=b"\r\n"),
    "big": plain("big", f.equals_blanks, keys=("s0", "s1"), polarity=(1, 1), idle=(30012, 30480),
                 depth=3000, noise=100),
    "running": Board(
        name="running", keys=("left", "mid", "right"), idle=(2048, 2101, 1987), polarity=(-1, -1, -1),
        depth=150, noise=5, line=f.sequenced, eol=b"\r\n", running=True,
        # Touches count from the frame at which the board got `?`: at least 2 s of quiet after it.
        touches=tuple(Touch(k, 200 + 50 * k, 25) for k in range(3)), frames=200 + 100 + 25 + 100,
        boot=(f.crc_line("! proto=1 board=lab3 channels=3 rate=100 names=left,mid,right polarity=- fw=1.0"),),
        answer=f.crc_line("! board=lab3 channels=3 rate=100 names=left,mid,right polarity=- fw=1.0")),
    "silent": Board(name="silent", keys=(), idle=(), polarity=(), depth=0, noise=0, line=f.columns, frames=0),
    "stall": Board(name="stall", keys=("a", "b"), idle=(1000, 1010), polarity=(1, 1), depth=0, noise=3,
                   line=f.columns, frames=250, stall=(100, 2.6)),
    "flood": Board(name="flood", keys=("a", "b", "c"), idle=(0, 0, 0), polarity=(1, 1, 1), depth=0, noise=0,
                   line=f.stuck_frame, frames=20_000, rate_hz=10_000.0, eol=b"\r\n",
                   boot=("! proto=1 board=loop3 channels=3 rate=1000 names=a,b,c polarity=+",)),
    "unreadable": Board(name="unreadable", keys=("x",), idle=(0,), polarity=(1,), depth=0, noise=0,
                        line=f.sentence, frames=1000, rate_hz=20.0, eol=b"\r\n"),
    "arrows": Board(name="arrows", keys=("x",), idle=(1234,), polarity=(1,), depth=0, noise=3,
                    line=f.arrow_pairs, frames=1000, rate_hz=50.0),
    "binary": Board(name="binary", keys=(), idle=(), polarity=(), depth=0, noise=0, line=f.columns,
                    frames=1000, rate_hz=50.0, binary=True),
    "invalid_name": plain("invalid_name", f.plain_after_info, keys=("zone1", "zo$ne2", "zone3"), learn=False,
                          boot=("! proto=1 board=zoneboard channels=3 rate=100 names=zone1,zo$ne2,zone3 "
                                "polarity=+",)),
    "wide512": Board(
        name="wide512", keys=tuple(f"k{k:03d}" for k in range(512)),
        idle=tuple(-2147480000 + 3 * k for k in range(512)), polarity=(1,) * 512, depth=1500, noise=50,
        line=f.sequenced, eol=b"\r\n", rate_hz=50.0, touches=(Touch(300, 125, 20),), frames=200,
        boot=("! proto=1 board=wall channels=512 rate=50 polarity=+ names="
              + ",".join(f"k{k:03d}" for k in range(512)),)),
    # loop() { print the counts; delay(500); }: two lines a second, so the first 8 lines take 3.5 s.
    "slow": Board(name="slow", keys=("a", "b"), idle=(1234, 1250), polarity=(1, 1), depth=0, noise=4,
                  line=f.columns, frames=12, rate_hz=2.0),
    "mixed_polarity": plain("mixed_polarity", f.columns, polarity=(1, -1, 1), learn=False),
    "rc_known": plain("rc_known", f.tabs, keys=("p1", "p2", "p3"), polarity=(-1,) * 3, idle=RC_IDLE[:3],
                      depth=400, noise=6, eol=b"\r\n", learn=False),
}

_SHORT = 3.5  # s: past the 2 s of a first diagnosis (contract 9), with room for a slow start

SCENARIOS = {s.name: s for s in [
    *(Scenario(name, BOARDS[name]) for name in (
        "columns", "commas", "plotter_pairs", "spaced_pairs", "equals_pairs", "brackets", "fixed6",
        "decimals", "millis", "millis_pairs", "cr_only", "chatty", "esp32_72", "big")),
    Scenario("rc_falling", BOARDS["rc_falling"], args=("--every", "0.5")),
    Scenario("running", BOARDS["running"], learns=False),
    Scenario("silent", BOARDS["silent"], duration_s=_SHORT),
    Scenario("stall", BOARDS["stall"]),
    Scenario("flood", BOARDS["flood"], learns=False),
    Scenario("slow", BOARDS["slow"]),
    Scenario("unreadable", BOARDS["unreadable"], duration_s=_SHORT),
    Scenario("arrows", BOARDS["arrows"], duration_s=_SHORT),
    Scenario("binary", BOARDS["binary"], duration_s=_SHORT),
    Scenario("invalid_name", BOARDS["invalid_name"], learns=False),
    Scenario("wide512", BOARDS["wide512"], learns=False),
    Scenario("socket", BOARDS["plotter_pairs"], wire="socket", args=("--baud", "9600")),
    Scenario("socket_binary", BOARDS["binary"], wire="socket", duration_s=_SHORT),
    Scenario("rfc2217", BOARDS["commas"], wire="rfc2217"),
    Scenario("polarity_cli", BOARDS["rc_falling"], args=("--polarity", "-"), learns=False),
    Scenario("polarity_list", BOARDS["mixed_polarity"], args=("--polarity", "+,-,+"), learns=False),
    Scenario("profile_polarity", BOARDS["rc_known"], profile=_profile, learns=False, args=("--every", "1")),
    # The shipped simulated boards, no profile (issue 9, item 3). Durations cover their scripts' keys.
    Scenario("sim_greenhouse", wire="none", url="sim://greenhouse?speed=2&seed=3&backlog_s=60",
             duration_s=10.0, learns=False),
    Scenario("sim_pumphouse", wire="none", url="sim://pumphouse?speed=2&seed=3&backlog_s=60",
             duration_s=8.0, learns=False),
    # Random touches only; seed 34's first one starts at 3.0 s (SimBoard truth; test_sims checks it).
    Scenario("sim_grid64", wire="none", url="sim://grid64?seed=34&backlog_s=60", duration_s=6.5,
             learns=False),
]}

# What padtune should call each board's keys: printed names (pairs, brackets, info lines), else chN.
NAMES = {
    "columns": chs(3), "commas": chs(3), "plotter_pairs": ("zone1", "zone2", "zone3"),
    "spaced_pairs": ("up", "down", "ok"), "equals_pairs": ("k1", "k2", "k3"), "brackets": ("T0", "T2", "T3"),
    "fixed6": chs(3), "decimals": chs(3), "millis": chs(3), "millis_pairs": ("s1", "s2"),
    "cr_only": chs(3), "chatty": chs(3), "rc_falling": chs(4), "esp32_72": chs(1), "big": ("s0", "s1"),
    "running": ("left", "mid", "right"), "invalid_name": ("zone1", "ch1", "zone3"),
    "socket": ("zone1", "zone2", "zone3"), "rfc2217": chs(3), "polarity_cli": chs(4),
    "polarity_list": chs(3), "profile_polarity": chs(3),
}
