"""Hostile profile files (issue 13): each hazard is one plain ProfileError line, no hang, no Python words.

References: which characters are unprintable is Python's `str.isprintable` (stdlib); the limits tomllib
hits (RecursionError on deep nesting, ValueError past `sys.get_int_max_str_digits()` digits) are CPython's
documented behaviour, checked here by provoking them on tomllib directly before padtune is asked.
Sizes are byte counts of files written here.
"""

from __future__ import annotations

import difflib
import os
import subprocess
import sys
import textwrap
import threading
import tomllib
from dataclasses import replace
from pathlib import Path

import pytest

from processing.groups import GroupSpec
from processing.profile import (
    HINTED,
    MAX_PROFILE_BYTES,
    SHOWN_PROBLEMS,
    ProfileError,
    load_profile,
    profile_for,
    save_profile,
)
from processing.settings import ChannelSettings, Limits

ROOT = Path(__file__).resolve().parents[2]
HEAD = 'format_version = 1\nchannels = 2\nnames = ["a", "b"]\n'


def refused(path: Path) -> str:
    with pytest.raises(ProfileError) as info:
        load_profile(path)
    message = str(info.value)
    assert "\n" not in message and message.isprintable(), message
    for word in ("Traceback", "Error", "set_int_max_str_digits", "Exceeds the limit", "[Errno"):
        assert word not in message, message
    return message


def write(tmp_path: Path, data: str | bytes, name: str = "p.toml") -> Path:
    path = tmp_path / name
    path.write_bytes(data.encode() if isinstance(data, str) else data)
    return path


def test_the_largest_profile_padtune_writes_is_far_below_the_cap(tmp_path):
    # 1024 channels (the most a profile holds), every setting and limit of its own, a group per pair.
    names = tuple(f"key_{c:04d}_with_a_long_name_x"[:32] for c in range(1024))
    p = replace(profile_for(1024, names, board="b" * 60, polarity=(1,) * 1024, rate_hz=1000.0),
                limits=Limits(12.5, 2.25, 7.5, 900, 1400),
                groups=tuple(GroupSpec(f"g{i}", (2 * i, 2 * i + 1), 1000) for i in range(512)))
    for c in range(1024):
        p = p.with_settings(c, ChannelSettings(100000 + c, 12345, 200, 201, 15, 14, 128, 123456789))
        p = p.with_limits(c, Limits(123.456789, 12.3456789, 99.87654321, 1234567 + c, 9234567 + c))
        p = p.with_measured(c, False)
    save_profile(p, tmp_path / "big.toml")
    size = (tmp_path / "big.toml").stat().st_size
    assert size * 3 < MAX_PROFILE_BYTES, size  # 563 KiB when written: the cap is 2 MiB
    assert load_profile(tmp_path / "big.toml") == p


def test_a_fifo_is_refused_by_name_without_blocking(tmp_path):
    fifo = tmp_path / "p.toml"
    os.mkfifo(fifo)
    outcome: list[str] = []

    def load() -> None:
        try:
            load_profile(fifo)
        except ProfileError as exc:
            outcome.append(str(exc))

    reader = threading.Thread(target=load, daemon=True)  # a blocked open must not hang the suite
    reader.start()
    reader.join(10)
    if reader.is_alive():
        os.close(os.open(fifo, os.O_WRONLY | os.O_NONBLOCK))  # let the blocked open go
        pytest.fail("load_profile blocked opening a FIFO")
    assert outcome and "p.toml: is a FIFO, not a file" in outcome[0]


def test_a_link_to_dev_zero_is_refused_unread(tmp_path):
    link = tmp_path / "p.toml"
    link.symlink_to("/dev/zero")
    # In a child with 1 GiB of address space: reading /dev/zero to the end would die there, not here.
    code = textwrap.dedent(f"""
        import resource, sys
        resource.setrlimit(resource.RLIMIT_AS, (1 << 30, 1 << 30))
        from processing.profile import ProfileError, load_profile
        try:
            load_profile({str(link)!r})
        except ProfileError as exc:
            print(exc)
    """)
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60,
                         cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert run.returncode == 0, run.stderr[-500:]
    assert "p.toml: is a character device, not a file" in run.stdout


@pytest.mark.parametrize("what", ["folder", "socket"])
def test_other_special_files_are_named(tmp_path, what):
    path = tmp_path / "p.toml"
    if what == "folder":
        path.mkdir()
        assert "is a folder, not a file" in refused(path)
    else:
        import socket

        with socket.socket(socket.AF_UNIX) as s:
            s.bind(str(path))
            assert "is a socket, not a file" in refused(path)


def test_a_file_over_the_cap_is_refused_with_both_sizes(tmp_path):
    path = write(tmp_path, HEAD + "#" * MAX_PROFILE_BYTES + "\n")
    size = path.stat().st_size
    message = refused(path)
    assert f"({size} bytes)" in message and f"at most 2.0 MiB ({MAX_PROFILE_BYTES} bytes)" in message
    # At the cap exactly it is read (and judged by its keys).
    path.write_bytes((HEAD + "#" * MAX_PROFILE_BYTES)[:MAX_PROFILE_BYTES].encode())
    assert load_profile(path).names == ("a", "b")


def test_deep_nesting_is_one_line_not_a_recursion_error(tmp_path):
    text = HEAD + "x = " + "[" * 5000 + "]" * 5000 + "\n"
    with pytest.raises(RecursionError):  # the hazard, on tomllib itself
        tomllib.loads(text)
    assert "nested too deeply" in refused(write(tmp_path, text))


def test_an_integer_of_5000_digits_is_one_line_without_python_words(tmp_path):
    text = "format_version = 1\nchannels = " + "9" * 5000 + "\n"
    with pytest.raises(ValueError, match="set_int_max_str_digits"):  # the hazard, on tomllib itself
        tomllib.loads(text)
    assert "a number with thousands of digits" in refused(write(tmp_path, text))


def test_large_numbers_that_parse_are_refused_by_their_size(tmp_path):
    digits = "9" * 4000  # under CPython's 4300-digit limit: tomllib reads it
    assert "a number of 4000 digits is far out of range" in refused(
        write(tmp_path, HEAD + f"[defaults]\nthreshold_counts = {digits}\n"))
    assert "limits.baseline_min_counts: a number of 4000 digits" in refused(
        write(tmp_path, HEAD + f"[limits]\nbaseline_min_counts = {digits}\n"))
    # float() of it raises OverflowError: was a traceback.
    assert "rate_hz: must be a positive number, not a number of 400 digits" in refused(
        write(tmp_path, HEAD + "rate_hz = " + "9" * 400 + "\n"))


def test_invalid_utf8_nul_and_binary_say_which_line(tmp_path):
    assert "not UTF-8 text (byte 0xff on line 3)" in refused(
        write(tmp_path, b'format_version = 1\nchannels = 2\nnames = ["a\xff", "b"]\n'))
    assert "holds a NUL byte on line 2" in refused(write(tmp_path, b"format_version = 1\nchannels = 2\0\n"))
    binary = bytes(range(256)) * 8  # every byte value: what a binary file holds
    assert "a binary file, not a profile" in refused(write(tmp_path, binary))
    assert "holds a NUL byte" in refused(write(tmp_path, HEAD.encode("utf-16")))


def test_control_characters_in_keys_and_names_are_escaped(tmp_path):
    text = (HEAD + '"\\u001b[31mred" = 1\nboard = "\\u001b[2J"\n[defaults]\n"\\u0000nul" = 1\n'
            '[channel."\\u001b]0;title\\u0007"]\n[limits]\n"new\\nline" = 1\n'
            '[[group]]\nname = "\\u009bX"\nmembers = ["a", "\\u001bb"]\n')
    message = refused(write(tmp_path, text))
    for shown in ("\\x1b[31mred", "\\x1b[2J", "\\x00nul", "\\x1b]0;title\\x07", "new\\nline", "\\x9bX"):
        assert shown in message, (shown, message)


def test_many_problems_are_one_line_with_a_count(tmp_path):
    text = HEAD + "[defaults]\n" + "".join(f"k{i} = 1\n" for i in range(50)) + \
        "[limits]\n" + "".join(f"l{i} = 1\n" for i in range(50))
    with pytest.raises(ProfileError) as info:
        load_profile(write(tmp_path, text))
    message = str(info.value)
    assert len(info.value.problems) == 2 * (HINTED + 1)  # a hint each for a few, then one count per table
    assert "50 unknown keys in all" in message and message.count(" | ") <= SHOWN_PROBLEMS


def test_twenty_thousand_unknown_channel_tables_search_a_few_spellings(tmp_path, monkeypatch):
    names = [f"key{c}" for c in range(1024)]
    text = f"format_version = 1\nchannels = 1024\nnames = {names!r}\n".replace("'", '"') + \
        "".join(f"[channel.zz{i}]\nthreshold_counts = 5\n" for i in range(20000))
    searches = []
    real = difflib.get_close_matches
    monkeypatch.setattr(difflib, "get_close_matches", lambda *a, **k: searches.append(a) or real(*a, **k))
    message = refused(write(tmp_path, text))
    # Each search compares one name with every channel name: 20,000 of them took minutes.
    assert len(searches) <= HINTED
    assert "20000 [channel.NAME] tables name no channel" in message
    assert "'zz0', 'zz1', 'zz2' and 19997 more" in message


def test_a_flood_of_unknown_group_members_searches_a_few(tmp_path, monkeypatch):
    members = ", ".join(f'"m{i}"' for i in range(50000))
    text = HEAD + f'[[group]]\nname = "g"\nmembers = [{members}]\n'
    searches = []
    real = difflib.get_close_matches
    monkeypatch.setattr(difflib, "get_close_matches", lambda *a, **k: searches.append(a) or real(*a, **k))
    message = refused(write(tmp_path, text))
    assert len(searches) <= HINTED and "50000 entries in all are not channel names" in message


def test_wrong_types_and_values_everywhere_are_one_line_each(tmp_path):
    cases = {
        "format_version = 1\nchannels = 1979-05-27T07:32:00Z": "channels: must be a channel count",
        "format_version = 1\nchannels = -5": "channels: must be a channel count from 1 to 1024, not -5",
        'format_version = 1\nchannels = "2"': "not '2'",
        "format_version = 1.5\nchannels = 2": "format_version: must be the whole number 1, not 1.5",
        "format_version = 1\n[channels]\nx = 1": "channels: must be a channel count",
        HEAD + "polarity = [1, 0]": "polarity: must be a list of 2 values, each 1 or -1",
        HEAD + "[defaults]\nthreshold_counts = nan": "threshold_counts: must be a whole number, not nan",
        HEAD + "[limits]\nmax_noise_pp_counts = -inf": "max_noise_pp_counts: must be a positive number",
        HEAD + '[[slider]]\nname = "s"\npads = ["a", "b"]\nwheel = "yes"': "wheel: must be true or false",
        HEAD + "group = 5": "group: must be an array of tables",
    }
    for text, says in cases.items():
        assert says in refused(write(tmp_path, text + "\n"))
    long_value = "x" * 1_000_000
    message = refused(write(tmp_path, HEAD + f'[defaults]\nthreshold_counts = "{long_value}"\n'))
    assert len(message) < 1000 and "must be a whole number" in message


def test_the_board_id_is_one_printable_line_and_is_saved_so(tmp_path):
    assert "board: must be one line of at most 200 printable characters" in refused(
        write(tmp_path, HEAD + 'board = "\\u001b[2J"\n'))
    # A board that names itself with control codes still gets a profile that loads again.
    save_profile(profile_for(2, ("a", "b"), board="panel\x1b[2J"), tmp_path / "saved.toml")
    assert load_profile(tmp_path / "saved.toml").board == "panel\\x1b[2J"
