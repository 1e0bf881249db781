"""The C command parser (devices/firmware/pt_cmd.c) driven through the harness on stdin/stdout, with
input written for it and input that was not: every refusal, all-or-none, line ends of every kind,
overlong lines, binary bytes. The harness runs under AddressSanitizer and UndefinedBehaviorSanitizer.

Reference for the rules: padtune's own `ChannelSettings.problems()` (processing/settings.py), which a
profile is checked with; the board must refuse exactly what a profile would and name the same key (its
reason is its own, short: the key's rule, `must be 1..255`; the host shows it as given). Checksums are
checked with stdlib `binascii.crc_hqx`.
"""

from __future__ import annotations

import binascii
import dataclasses
import os
import re
import subprocess

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.export import export_c_header
from processing.reference import PlainEngine
from processing.settings import SETTING_KEYS, ChannelSettings
from protocol.decoder import Decoder
from protocol.events import BoardInfo, FrameBlock
from tests.firmware import c_build
from tui.demo_profile import demo_profile

DEFAULTS = ChannelSettings()  # the harness starts every channel from the profile defaults
INT32_MIN, INT32_MAX = -(1 << 31), (1 << 31) - 1
# The board's reason for each key: the rule pt_settings_problem() checks (devices/firmware/pt_cmd.c).
RULE = {"threshold_counts": "must be 1..16777216", "hysteresis_counts": "must be 0..threshold_counts-1",
        "touch_debounce_frames": "must be 1..255", "release_debounce_frames": "must be 1..255",
        "baseline_slow_shift": "must be 0..16", "baseline_fast_shift": "must be 0..baseline_slow_shift",
        "baseline_period_frames": "must be a power of two 1..256",
        "stuck_timeout_frames": "must be 0..2147483647",
        "polarity": "must be + or -"}


def refused(ch: str, key: str) -> str:
    return f">no set {ch}: {key}: {RULE[key]}"


def talk(lines: bytes | str, *args: str) -> list[str]:
    """Runs the harness with no frames, feeds `lines`, returns its output lines after the info line,
    each checked for its checksum and returned without it."""
    data = lines.encode("latin-1") if isinstance(lines, str) else lines
    out = c_build.run(c_build.harness(), ["--frames", "0", "--channels", "3", *args], data)
    bodies = []
    for line in out.splitlines():
        body, star, crc = line.rpartition(b"*")
        assert star and int(crc, 16) == binascii.crc_hqx(body, 0xFFFF), line
        bodies.append(body.decode("ascii"))
    assert bodies[0].startswith("! proto=1 ")
    return bodies[1:]


def val_line(ch: int, s: ChannelSettings = DEFAULTS, polarity: str = "+") -> str:
    pairs = " ".join(f"{k}={getattr(s, k)}" for k in SETTING_KEYS)
    return f">val {ch} {pairs} polarity={polarity}"


def test_get_one_and_all_in_the_contracts_words():
    assert talk("get 1\n") == [val_line(1), ">ok get 1"]
    assert talk("get *\n") == [val_line(0), val_line(1), val_line(2), ">ok get *"]
    assert talk("get 002\n") == [val_line(2), ">ok get 2"]


def test_set_answers_the_values_in_force_in_the_order_given_and_get_shows_them():
    answers = talk("set 2 polarity=- threshold_counts=040 hysteresis_counts=9\nget 2\nget 1\n")
    changed = dataclasses.replace(DEFAULTS, threshold_counts=40, hysteresis_counts=9)
    assert answers == [">ok set 2 polarity=- threshold_counts=40 hysteresis_counts=9",
                       val_line(2, changed, "-"), ">ok get 2", val_line(1), ">ok get 1"]


def test_set_all_channels_and_info_follows_polarity():
    answers = talk("set * polarity=- stuck_timeout_frames=2147483647\n?\n")
    assert answers[0] == ">ok set * polarity=- stuck_timeout_frames=2147483647"
    info = next(e for e in Decoder().feed(("\n".join(answers[1:]) + "\n").encode(), 0.0)
                if isinstance(e, BoardInfo))
    assert info.proto is None and info.polarity in ((-1,), (-1, -1, -1))
    assert info.fields["settings"] == "1"


def test_refusals_change_nothing_all_or_none():
    answers = talk("set 0 threshold_counts=50 hysteresis_counts=60\n"
                   "set * hysteresis_counts=20 threshold_counts=30\n"  # fine for all: applied
                   "set * threshold_counts=25\n"                       # hysteresis 20 stays: fine
                   "set 1 threshold_counts=10\n"                        # 20 >= 10: refused
                   "set * baseline_fast_shift=7 baseline_slow_shift=7 touch_debounce_frames=0\n"
                   "get *\n")
    assert answers[0] == refused("0", "hysteresis_counts")
    assert answers[1] == ">ok set * hysteresis_counts=20 threshold_counts=30"
    assert answers[2] == ">ok set * threshold_counts=25"
    assert answers[3] == refused("1", "hysteresis_counts")
    assert answers[4] == refused("*", "touch_debounce_frames") + " (channel 0)"
    now = dataclasses.replace(DEFAULTS, threshold_counts=25, hysteresis_counts=20)
    assert answers[5:] == [val_line(0, now), val_line(1, now), val_line(2, now), ">ok get *"]


@pytest.mark.parametrize(("line", "answer"), [
    ("set 1 threshold_counts=0", refused("1", "threshold_counts")),
    ("set 1 threshold_counts=16777217", refused("1", "threshold_counts")),
    ("set 1 hysteresis_counts=-1", refused("1", "hysteresis_counts")),
    ("set 1 release_debounce_frames=256", refused("1", "release_debounce_frames")),
    ("set 1 touch_debounce_frames=-300", refused("1", "touch_debounce_frames")),
    ("set 1 baseline_slow_shift=17", refused("1", "baseline_slow_shift")),
    ("set 1 baseline_slow_shift=255", refused("1", "baseline_slow_shift")),
    ("set 1 baseline_fast_shift=-1", refused("1", "baseline_fast_shift")),
    ("set 1 baseline_fast_shift=7", refused("1", "baseline_fast_shift")),
    ("set 1 baseline_period_frames=48", refused("1", "baseline_period_frames")),
    ("set 1 baseline_period_frames=512", refused("1", "baseline_period_frames")),
    ("set 1 baseline_period_frames=65792", refused("1", "baseline_period_frames")),  # 256 + 2^16
    ("set 1 stuck_timeout_frames=-5", refused("1", "stuck_timeout_frames")),
    ("set 1 polarity=1", refused("1", "polarity")),
    ("set 1 polarity=+-", refused("1", "polarity")),
    ("set 1 threshold_counts=2147483648", refused("1", "threshold_counts")),
    ("set 1 threshold_counts=4e3", refused("1", "threshold_counts")),
    ("set 1 threshold_counts=", refused("1", "threshold_counts")),
    # two broken values: the one the profile's order checks first is named
    ("set 1 touch_debounce_frames=x polarity=x", refused("1", "touch_debounce_frames")),
    ("set 1 threshold=40", ">no set 1: threshold: unknown setting"),
    ("set 1 threshold_counts", ">no set 1: threshold_counts: not key=value"),
    ("set 1 threshold_counts=40 threshold_counts=50", ">no set 1: threshold_counts: given twice"),
    ("set 1", ">no set 1: nothing to set"),
    ("set", ">no set: which channel?"),
    ("set 3 threshold_counts=40", ">no set 3: no such channel"),
    ("set -1 threshold_counts=40", ">no set -1: no such channel"),
    ("get", ">no get: which channel?"),
    ("get 99999999999", ">no get 99999999999: no such channel"),
    ("get 1 2", ">no get 1: too many words"),
    ("keep now", ">no keep: too many words"),
    ("keep", ">no keep: no storage on this board (start the harness with --keep-file PATH)"),
    ("GET 1", ">no GET: unknown command"),
    ("reboot-into-the-bootloader-now please", ">no reboot-into-the-: unknown command"),
    ("+nokey", ">no +nokey: no such key"),
])
def test_every_refusal_has_its_reason(line, answer):
    assert talk(line + "\n") == [answer]


def test_each_rule_is_refused_for_the_key_the_profile_names():
    """One broken value per rule: the board names the key processing/settings.py finds first."""
    cases = {"threshold_counts": 0, "hysteresis_counts": 100, "touch_debounce_frames": 0,
             "release_debounce_frames": 256, "baseline_slow_shift": 17, "baseline_fast_shift": 7,
             "baseline_period_frames": 48, "stuck_timeout_frames": -5}
    for key, value in cases.items():
        problem = dataclasses.replace(DEFAULTS, **{key: value}).problems()[0]
        assert talk(f"set 0 {key}={value}\n") == [refused("0", problem[0])]


full_settings = st.fixed_dictionaries({
    "threshold_counts": st.one_of(st.integers(-3, 300), st.integers(INT32_MIN, INT32_MAX)),
    "hysteresis_counts": st.one_of(st.integers(-3, 300), st.integers(INT32_MIN, INT32_MAX)),
    "touch_debounce_frames": st.integers(-1, 258),
    "release_debounce_frames": st.integers(-1, 258),
    "baseline_slow_shift": st.integers(-1, 18),
    "baseline_fast_shift": st.integers(-1, 18),
    "baseline_period_frames": st.one_of(st.sampled_from([0, 1, 2, 64, 128, 256, 512]), st.integers(-2, 300)),
    "stuck_timeout_frames": st.one_of(st.integers(-2, 5), st.integers(INT32_MIN, INT32_MAX)),
})


@settings(max_examples=8, deadline=None)
@given(st.lists(full_settings, min_size=1, max_size=60))
def test_random_settings_are_judged_as_a_profile_judges_them(batch):
    """A batch of `set` commands giving all eight keys: each answer is `>ok` exactly when the profile
    rules find no problem, else a refusal naming the key of the profile's first problem."""
    answers = talk("".join("set 1 " + " ".join(f"{k}={v}" for k, v in s.items()) + "\n" for s in batch))
    assert len(answers) == len(batch)
    for s, answer in zip(batch, answers, strict=True):
        problems = ChannelSettings(**s).problems()
        if problems:
            assert answer == refused("1", problems[0][0])
        else:
            assert answer == ">ok set 1 " + " ".join(f"{k}={v}" for k, v in s.items())


def test_line_ends_of_every_kind_and_blank_lines():
    """LF, CR, CRLF, LFCR and blanks between them: each command answered once, blank lines never."""
    answers = talk(b"get 0\rget 1\r\nget 2\n\rkeep\r\r\n\n  \t \n\tget 0  \r\n")
    assert [a for a in answers if not a.startswith(">val")] == [
        ">ok get 0", ">ok get 1", ">ok get 2", ">no keep: no storage on this board (start the harness with "
        "--keep-file PATH)", ">ok get 0"]


def test_an_overlong_line_is_refused_whole_and_the_next_command_works():
    long = b"set 0 " + b"threshold_counts=40 " * 40  # 806 bytes: over the 256-byte line buffer
    answers = talk(long + b"\nget 0\n" + b"x" * 100000 + b"\r\n")
    assert answers == [">no set: line too long", val_line(0), ">ok get 0",
                       ">no xxxxxxxxxxxxxxxx: line too long"]


def test_binary_bytes_are_refused_and_quoted_printably():
    answers = talk(b"get\x00 0\n\xff\xfeset 0 threshold_counts=40\nge\x1bt 1\nget 0\n")
    assert answers[:3] == [">no get?: not ASCII text", ">no ??set: not ASCII text",
                           ">no ge?t: not ASCII text"]
    assert answers[3:] == [val_line(0), ">ok get 0"]


words = st.sampled_from(["get", "set", "keep", "?", "*", "0", "1", "2", "7", "threshold_counts=5",
                         "hysteresis_counts=1", "polarity=+", "polarity=x", "=", "x=", "\x00", "\xff", "\x7f",
                         "baseline_period_frames=3", "a" * 40])
line_ends = st.sampled_from(["\n", "\r", "\r\n", "\n\r"])


@settings(max_examples=10, deadline=None)
@given(st.lists(st.tuples(st.lists(words, max_size=12), st.sampled_from([" ", "\t", "  "]), line_ends),
                min_size=1, max_size=40))
def test_any_line_gets_exactly_one_final_answer(lines):
    """Input nobody wrote for the parser: every non-blank line gets one `>ok`/`>no` (or the info line
    for `?`), after its `>val` lines; nothing crashes (the sanitizers would say)."""
    text = "".join(sep.join(ws) + end for ws, sep, end in lines)
    answers = talk(text)
    finals = [a for a in answers if a.startswith((">ok ", ">no ", "! "))]
    expected = sum(1 for ws, _, _ in lines if ws)
    assert len(finals) == expected
    assert all(a.startswith((">val ", ">ok ", ">no ", "! ")) for a in answers)
    assert all(re.fullmatch(r"[\x20-\x7e]+", a) for a in answers)


def test_keep_survives_a_power_cycle(tmp_path):
    store = tmp_path / "flash.txt"
    first = talk("set 1 threshold_counts=44 polarity=-\nkeep\nset 1 threshold_counts=55\n",
                 "--keep-file", str(store))
    assert first == [">ok set 1 threshold_counts=44 polarity=-", ">ok keep", ">ok set 1 threshold_counts=55"]
    again = talk("get 1\n", "--keep-file", str(store))  # a new process: the board powered up again
    assert again == [val_line(1, dataclasses.replace(DEFAULTS, threshold_counts=44), "-"), ">ok get 1"]


def test_keep_refused_when_storage_fails(tmp_path):
    answers = talk("keep\n", "--keep-file", str(tmp_path / "no-such-folder" / "flash.txt"))
    assert answers == [">no keep: storage cannot be written"]


# ------------------------------------------------------------------ frames: the board's states and readings

FRAME = re.compile(rb"@(\d+)((?: -?\d+)+);([0-3]+)\*([0-9A-F]{4})")


def frames(*args: str, stdin: bytes = b"") -> tuple[list[int], list[list[int]], list[list[int]]]:
    """Runs the harness for its frames; returns sequence numbers, readings and the board's states."""
    out = c_build.run(c_build.harness(), ["--rate", "0", *args], stdin)
    seqs, rows, states = [], [], []
    for line in out.splitlines()[1:]:
        m = FRAME.fullmatch(line)
        assert m, line
        assert int(m[4], 16) == binascii.crc_hqx(line[: line.rindex(b"*")], 0xFFFF)
        seqs.append(int(m[1]))
        rows.append([int(v) for v in m[2].split()])
        states.append([int(d) for d in m[3].decode()])
    return seqs, rows, states


def reference_states(rows: list[list[int]], s: ChannelSettings, polarity: int) -> list[list[int]]:
    """padtune's plain reference detector (processing/reference.py) over the same readings."""
    n, channels = len(rows), len(rows[0])
    engine = PlainEngine(channels, [s] * channels, [polarity] * channels)
    engine.process(FrameBlock(t_s=np.zeros(n), seq=np.arange(n), readings=np.array(rows, np.int64),
                              first_index=0))
    return engine.last_states.tolist()


def test_frames_carry_the_states_padtunes_reference_detector_decides():
    s = dataclasses.replace(DEFAULTS, touch_debounce_frames=2, release_debounce_frames=4,
                            threshold_counts=300, hysteresis_counts=120, baseline_period_frames=4)
    args = ["--frames", "400", "--polarity", "-", "--noise", "150", "--signal", "420", "--touch", "1@40+60",
            "--touch", "2@150+3", "--touch", "0@200+150"]
    keys = ("touch_debounce_frames", "release_debounce_frames", "threshold_counts", "hysteresis_counts",
            "baseline_period_frames")
    sets = [a for k in keys for a in ("--set", f"{k}={getattr(s, k)}")]
    seqs, rows, states = frames(*args, *sets)
    assert seqs == list(range(400))
    assert states == reference_states(rows, s, -1)
    assert {st for row in states for st in row} == {0, 1, 2, 3}  # every state was reached


def test_readings_fed_from_a_file_at_the_32_bit_limits(tmp_path):
    rows = [[INT32_MIN, INT32_MAX, 0, -1]] * 5 + [[INT32_MAX, INT32_MIN, -7, 12]] * 7 + [[-5, 5, 0, 0]] * 3
    feed = tmp_path / "readings.txt"
    feed.write_text("# a comment, then frames\n\n" + "".join(", ".join(map(str, r)) + "\n" for r in rows))
    s = dataclasses.replace(DEFAULTS, touch_debounce_frames=1, release_debounce_frames=1)
    _, got, states = frames("--readings", str(feed), "--set", "touch_debounce_frames=1",
                            "--set", "release_debounce_frames=1")
    assert got == rows
    assert states == reference_states(rows, s, 1)


@pytest.mark.parametrize(("content", "message"), [
    ("1 2 3\n", "readings line 1: 3 numbers, want 4"),
    ("1 2 3 4 5\n", "readings line 1: want 4 whole numbers"),
    ("1 2 x 4\n", "readings line 1: want 4 whole numbers"),
    ("1 2 3 2147483648\n", "readings line 1: want 4 whole numbers"),
])
def test_a_bad_readings_file_is_one_line_and_exit_2(tmp_path, content, message):
    feed = tmp_path / "bad.txt"
    feed.write_text(content)
    done = subprocess.run([str(c_build.harness()), "--rate", "0", "--readings", str(feed)],
                          capture_output=True, text=True, timeout=60, env={**os.environ, **c_build.SAN_ENV},
                          stdin=subprocess.DEVNULL)
    assert done.returncode == 2 and message in done.stderr and len(done.stderr.splitlines()) == 1


def test_deviate_changes_exactly_the_asked_channel_and_frames():
    base = ["--frames", "60", "--touch", "1@10+30"]
    _, rows, honest = frames(*base)
    _, rows2, bent = frames(*base, "--deviate", "1@20+5")
    assert rows == rows2
    differ = [(i, c) for i, (a, b) in enumerate(zip(honest, bent, strict=True))
              for c in range(4) if a[c] != b[c]]
    assert differ == [(i, 1) for i in range(20, 25)]
    assert all(bent[i][1] == honest[i][1] ^ 2 for i in range(20, 25))


# ------------------------------------------------------------------ the porting guide's main loop, run


def readme_example() -> str:
    text = (c_build.FIRMWARE / "README.md").read_text()
    section = text.split("### A main loop for a generic microcontroller", 1)[1]
    return section.split("```c\n", 1)[1].split("```", 1)[0]


def test_the_porting_guides_main_loop_runs_as_a_board(tmp_path):
    """The README's example, compiled as written with an exported profile and host stand-ins for its six
    functions, under the sanitizers: padtune's decoder reads its info line (the profile's names,
    settings=1, states=1), its frames and states, and its answers; `keep` survives a restart."""
    c_build.require_cc()
    profile = demo_profile("greenhouse")
    export_c_header(profile, tmp_path / "profile.h", "greenhouse.toml")
    (tmp_path / "example.c").write_text(readme_example())
    program = tmp_path / "example"
    fw = c_build.FIRMWARE
    subprocess.run([c_build.CC, *c_build.WARN, *c_build.SANITIZE, f"-I{fw}", f"-I{tmp_path}",
                    f"-DEXAMPLE_CHANNELS={profile.channels}", "-DEXAMPLE_FRAMES=80", "-o", str(program),
                    str(tmp_path / "example.c"), str(fw / "harness" / "example_stubs.c"),
                    *(str(fw / f) for f in ("pt_detect.c", "pt_emit.c", "pt_cmd.c"))],
                   check=True, capture_output=True, text=True)

    def board(commands: bytes) -> tuple[list, list[bytes], list[bytes]]:
        done = subprocess.run([str(program)], input=commands, capture_output=True, timeout=60, cwd=tmp_path,
                              env={**os.environ, **c_build.SAN_ENV})
        assert done.returncode == 0 and not done.stderr, done.stderr
        lines = done.stdout.splitlines()
        good = [binascii.crc_hqx(x.rpartition(b"*")[0], 0xFFFF) == int(x[-4:], 16) for x in lines]
        assert all(good)
        answers = [line.rpartition(b"*")[0] for line in lines if line.startswith(b">")]
        return Decoder().feed(lines[0] + b"\n", 0.0), answers, [x for x in lines if x.startswith(b"@")]

    events, answers, frame_lines = board(b"set 2 threshold_counts=300 hysteresis_counts=40\nkeep\nget 2\n")
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.names == profile.names and info.proto == 1
    assert info.rate_hz == profile.rate_hz and info.board == profile.board  # PADTUNE_RATE_MHZ, PADTUNE_BOARD
    assert info.fields["settings"] == "1" and info.fields["states"] == "1"
    assert answers[:2] == [b">ok set 2 threshold_counts=300 hysteresis_counts=40", b">ok keep"]
    assert answers[2].startswith(b">val 2 threshold_counts=300 hysteresis_counts=40 ")
    parsed = [FRAME.fullmatch(x) for x in frame_lines]
    assert [int(m[1]) for m in parsed] == list(range(80))
    states = [int(m[3][2:3]) for m in parsed]  # channel 2, touched by 500 counts from frame 20 to 59
    assert states[:20] == [0] * 20 and states[30:60] == [2] * 30 and states[70:] == [0] * 10
    _, again, _ = board(b"get 2\n")  # powered up again: the kept settings, not the profile's
    assert again[0].startswith(b">val 2 threshold_counts=300 hysteresis_counts=40 ")
