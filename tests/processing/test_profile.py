"""The profile: round trip, atomic save with .bak and mode, every validation error, export."""
# ruff: noqa: E501 (the table of edits and messages reads best one case a line)

import json
import os
import pathlib
import stat
import subprocess
import sys
import textwrap
from dataclasses import replace

import pytest

from processing.export import c_header_text, export_c_header, export_json
from processing.groups import GroupSpec
from processing.profile import (
    Profile,
    ProfileError,
    load_profile,
    profile_for,
    profile_from_dict,
    save_profile,
)
from processing.settings import ChannelSettings, Limits
from processing.slider import SliderSpec
from protocol.errors import UserError

NAMES = ("zone1", "zone2", "zone3", "zone4", "stop", "dur0", "dur1", "dur2")


def greenhouse() -> Profile:
    p = Profile(names=NAMES, board="greenhouse-panel", defaults=ChannelSettings(threshold_counts=120),
                groups=(GroupSpec("zones", (0, 1, 2, 3), 5),), sliders=(SliderSpec("duration", (5, 6, 7), False, 60),),
                limits=Limits(max_noise_pp_counts=25.0, min_snr_pp=5.0, baseline_min_counts=500,
                              baseline_max_counts=60000), polarity=(1,) * 8, rate_hz=100.0)
    return p.with_settings(4, ChannelSettings(threshold_counts=200, touch_debounce_frames=5, stuck_timeout_frames=0))


GOOD = textwrap.dedent("""\
    format_version = 1
    board = "greenhouse-panel"
    channels = 3
    names = ["zone1", "zone2", "stop"]
    [defaults]
    threshold_counts = 120
    [channel.stop]
    threshold_counts = 200
    [[group]]
    name = "zones"
    members = ["zone1", "zone2"]
    [[slider]]
    name = "strip"
    pads = ["zone1", "zone2", "stop"]
    wheel = true
    [limits]
    min_snr_pp = 5.0
    """)


def write(tmp_path, text, name="p.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def problems(tmp_path, text):
    with pytest.raises(ProfileError) as info:
        load_profile(write(tmp_path, text))
    assert isinstance(info.value, UserError)
    for line in info.value.problems:
        assert line.startswith(str(tmp_path / "p.toml")), line
    assert "\n" not in str(info.value)  # one line for the terminal, problems joined by " | "
    return "\n".join(info.value.problems)


def test_round_trip(tmp_path):
    p = greenhouse()
    save_profile(p, tmp_path / "g.toml")
    assert load_profile(tmp_path / "g.toml") == p
    text = (tmp_path / "g.toml").read_text()
    assert "[channel.stop]" in text and "threshold_counts = 200" in text and "zone1" in text


def test_good_file_loads(tmp_path):
    p = load_profile(write(tmp_path, GOOD))
    assert p.settings_for(2).threshold_counts == 200 and p.settings_for(0).threshold_counts == 120
    assert p.groups[0].members == (0, 1) and p.sliders[0].wheel and p.limits.min_snr_pp == 5.0


def test_save_keeps_previous_as_bak_and_the_mode(tmp_path):
    path = tmp_path / "g.toml"
    first = profile_for(2, ("a", "b"))
    save_profile(first, path)
    os.chmod(path, 0o640)
    second = first.with_settings(0, ChannelSettings(threshold_counts=300))
    save_profile(second, path)
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert load_profile(path) == second
    assert load_profile(tmp_path / "g.toml.bak") == first
    assert sorted(q.name for q in tmp_path.iterdir()) == ["g.toml", "g.toml.bak"]  # no temp files left


def test_save_refuses_invalid_and_unwritable(tmp_path):
    bad = Profile(names=("a", "b"), groups=(GroupSpec("g", (0,)),))
    with pytest.raises(ProfileError, match="at least two members"):
        save_profile(bad, tmp_path / "x.toml")
    assert not (tmp_path / "x.toml").exists()
    with pytest.raises(ProfileError, match="cannot save"):
        save_profile(profile_for(1), tmp_path / "missing-folder" / "x.toml")


WRITER = textwrap.dedent("""\
    import sys
    from processing.profile import profile_for, save_profile
    from processing.settings import ChannelSettings
    names = tuple(f"k{i}" for i in range(512))
    a = profile_for(512, names)
    b = a
    for c in range(512):
        b = b.with_settings(c, ChannelSettings(threshold_counts=200 + c, stuck_timeout_frames=c))
    print("ready", flush=True)
    k = 0
    while True:
        save_profile(a if k % 2 else b, sys.argv[1])
        k += 1
    """)


def test_killed_writer_leaves_old_or_new_never_broken(tmp_path):
    path = tmp_path / "big.toml"
    a = profile_for(512, tuple(f"k{i}" for i in range(512)))
    b = a
    for c in range(512):
        b = b.with_settings(c, ChannelSettings(threshold_counts=200 + c, stuck_timeout_frames=c))
    save_profile(a, path)
    for delay_s in (0.05, 0.11, 0.17, 0.23, 0.31, 0.37, 0.43, 0.5):
        proc = subprocess.Popen([sys.executable, "-c", WRITER, str(path)], stdout=subprocess.PIPE, text=True,
                                cwd=os.path.dirname(os.path.dirname(os.path.dirname(__file__))))
        assert proc.stdout.readline().strip() == "ready"
        try:
            proc.wait(timeout=delay_s)
        except subprocess.TimeoutExpired:
            proc.kill()  # SIGKILL: no cleanup handlers run, as in a crash
        proc.wait()
        proc.stdout.close()
        assert load_profile(path) in (a, b)
    save_profile(a, path)  # the next save sweeps temporary files the killed writers left
    assert sorted(q.name for q in tmp_path.iterdir()) == ["big.toml", "big.toml.bak"]


@pytest.mark.parametrize(("edit", "expected"), [
    (("threshold_counts = 120", "thresold_counts = 120"), "defaults.thresold_counts: unknown key; did you mean 'threshold_counts'?"),
    (("board =", "bord ="), ":bord: unknown key; did you mean 'board'?"),
    (("format_version = 1", "format_version = 2"), "format_version: 2 is newer than this padtune reads"),
    (("format_version = 1", "format_version = 0"), "format_version: must be 1"),
    (("format_version = 1", "format_version = \"1\""), "format_version: must be the whole number 1"),
    (("channels = 3", "channels = 4"), "names: lists 3 names but channels = 4"),
    (("channels = 3", "channels = 0"), "channels: must be a channel count from 1 to 1024"),
    (('"zone2", "stop"]', '"zone1", "stop"]'), "names: duplicate names: zone1"),
    (('"stop"]', '"st op"]'), "names: 'st op' is not a valid name"),
    (("[channel.stop]", "[channel.stpo]"), "channel.stpo: no channel named 'stpo'; did you mean 'stop'?"),
    (("threshold_counts = 200", "hysteresis_counts = 200"), "channel.stop.hysteresis_counts: 200 must be below the threshold (120)"),
    (("threshold_counts = 200", "touch_debounce_frames = -1"), "channel.stop.touch_debounce_frames: must be between 1"),
    (("threshold_counts = 200", "release_debounce_frames = 0"), "release_debounce_frames: must be between 1"),
    (("threshold_counts = 200", "threshold_counts = 0"), "channel.stop.threshold_counts: must be between 1"),
    (("threshold_counts = 200", "threshold_counts = 2.5"), "channel.stop.threshold_counts: must be a whole number"),
    (("threshold_counts = 200", "baseline_slow_shift = 17"), "baseline_slow_shift: must be between 0 and 16"),
    (("threshold_counts = 200", "baseline_fast_shift = 9"), "baseline_fast_shift: 9 is slower than baseline_slow_shift (6)"),
    (("threshold_counts = 200", "baseline_period_frames = 12"), "baseline_period_frames: must be a power of two"),
    (("threshold_counts = 200", "stuck_timeout_frames = -5"), "stuck_timeout_frames: must be 0 (never)"),
    (('members = ["zone1", "zone2"]', 'members = ["zone1", "zone_2"]'), "group[0].members: unknown channel 'zone_2'; did you mean 'zone2'?"),
    (('members = ["zone1", "zone2"]', 'members = "zone1"'), "group[0].members: must be a non-empty list of channel names"),
    (('members = ["zone1", "zone2"]', 'members = ["zone1"]'), "group[0].members: an exclusive group needs at least two members"),
    (('members = ["zone1", "zone2"]', 'members = ["zone1", "zone1"]'), "group[0].members: lists a channel twice"),
    (('name = "zones"', 'name = "zones"\nswitch_margin_counts = -1'), "group[0].switch_margin_counts: must be a whole number from 0 to 16777216"),
    (('name = "zones"', 'name = "zones"\nswitch_margin_counts = 4294967296'), "group[0].switch_margin_counts: must be a whole number from 0 to 16777216"),  # the header's int32_t
    (('name = "zones"', 'name = "zones"\nmembrs = []'), "group[0].membrs: unknown key; did you mean 'members'?"),
    (('pads = ["zone1", "zone2", "stop"]', 'pads = ["zone1", "zone2"]'), "slider[0].pads: a wheel needs at least 3 pads"),
    (("wheel = true", "wheel = 1"), "slider[0].wheel: must be true or false"),
    (("wheel = true", "wheel = true\nresolution = 1"), "slider[0].resolution: must be a whole number from 2 to 65535"),
    (("min_snr_pp = 5.0", "min_snr_pp = -1"), "limits.min_snr_pp: must be a positive number"),
    (("min_snr_pp = 5.0", "min_snr = 5.0"), "limits.min_snr: unknown key; did you mean 'min_snr_pp'?"),
    (("min_snr_pp = 5.0", "baseline_min_counts = 900\nbaseline_max_counts = 100"), "limits.baseline_max_counts: 100 must be above baseline_min_counts (900)"),
    (("channels = 3", "channels = 3\npolarity = [1, 0, 1]"), "polarity: must be a list of 3 values, each 1 or -1"),
    (("channels = 3", "channels = 3\nrate_hz = -100"), "rate_hz: must be a positive number"),
    (("channels = 3", "channels = 3\nrate_hz = nan"), "rate_hz: must be a positive number, not nan"),  # crashed the session
    (("channels = 3", "channels = 3\nrate_hz = inf"), "rate_hz: must be a positive number, not inf"),
    (("channels = 3", "channels = 3\npolarity = [1.0, 1, -1]"), "polarity: must be a list of 3 values, each 1 or -1"),
    (("min_snr_pp = 5.0", "max_noise_pp_counts = inf"), "limits.max_noise_pp_counts: must be a positive number, not inf"),
    (("min_snr_pp = 5.0", "min_snr_pp = nan"), "limits.min_snr_pp: must be a positive number, not nan"),
    (("", "[[group]]\nname = 5\nmembers = [1, 2]\n"), "group[1].members: 1 is not a channel name (names are strings in quotes)"),
    (("[[group]]\nname = \"zones\"", "[[group]]"), "group[0].name: missing; give it a name"),
    (("format_version = 1\n", ""), "format_version: missing; add format_version = 1"),
    (("channels = 3\n", ""), "channels: missing; add the channel count"),
    (('names = ["zone1", "zone2", "stop"]', 'names = ["zone1", 2, "stop"]'), "names: must be a list of channel names (strings)"),
    (('board = "greenhouse-panel"', "board = 7"), "board: must be a string"),
    (("format_version = 1", "xyzzy = 1\nformat_version = 1"), "xyzzy: unknown key"),
    (('pads = ["zone1", "zone2", "stop"]\nwheel = true', 'pads = ["zone1"]\nwheel = false'), "slider[0].pads: a slider needs at least 2 pads"),
    (('pads = ["zone1", "zone2", "stop"]', 'pads = ["zone1", "zone2", "pump"]'), "slider[0].pads: unknown channel 'pump'"),
    (("threshold_counts = 200", "hysteresis_counts = -1"), "channel.stop.hysteresis_counts: must not be negative (-1)"),
    (("min_snr_pp = 5.0", "baseline_min_counts = 5.5"), "limits.baseline_min_counts: must be a whole number, not 5.5"),
])
def test_every_validation_error(tmp_path, edit, expected):
    old, new = edit
    assert old in GOOD
    text = GOOD.replace(old, new, 1) if old else GOOD + new
    assert expected in problems(tmp_path, text)


def test_wrong_table_shapes():
    from processing.profile import profile_from_dict
    raw = {"format_version": 1, "channels": 2, "names": ["a", "b"], "group": 3, "slider": {"x": 1},
           "channel": [], "limits": 7, "defaults": 5}
    profile, found = profile_from_dict(raw)
    keys = {key for key, _ in found}
    assert profile is None and {"limits", "defaults"} <= keys
    raw["defaults"] = {}
    profile, found = profile_from_dict(raw)
    assert profile is None and {"group", "slider", "channel", "limits"} <= {key for key, _ in found}
    raw.update(group=[1], slider=["x"], limits={})
    assert ("group[0]", "must be a table") in profile_from_dict(raw)[1]
    assert ("slider[0]", "must be a table") in profile_from_dict(raw)[1]


def test_duplicate_group_and_slider_names(tmp_path):
    text = GOOD + '[[group]]\nname = "zones"\nmembers = ["zone2", "stop"]\n'
    assert "group[1].name: 'zones' is already the name of group[0]" in problems(tmp_path, text)
    text = GOOD + '[[slider]]\nname = "strip"\npads = ["zone2", "stop"]\n'
    assert "slider[1].name: 'strip' is already the name of slider[0]" in problems(tmp_path, text)


def test_several_problems_all_reported_one_line_each(tmp_path):
    text = GOOD.replace("threshold_counts = 120", "thresold_counts = 120").replace("min_snr_pp", "min_snr")
    lines = problems(tmp_path, text).splitlines()
    assert len(lines) == 2


def test_unreadable_files(tmp_path):
    with pytest.raises(ProfileError, match="no such profile file"):
        load_profile(tmp_path / "nope.toml")
    assert "not valid TOML" in problems(tmp_path, "channels = = 3\n")
    (tmp_path / "p.toml").write_bytes(b"\xff\xfe")
    with pytest.raises(ProfileError, match="not UTF-8"):
        load_profile(tmp_path / "p.toml")
    assert len(problems(tmp_path, "channels = = 3\n").splitlines()) == 1


def test_c_header_compiles_and_names_the_profile(tmp_path):
    import datetime as dt
    import shutil
    text = c_header_text(greenhouse(), "greenhouse.toml", dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.UTC))
    assert "Profile: greenhouse.toml (board: greenhouse-panel), exported 2026-01-02T03:04:05Z" in text
    assert text.count(".threshold_counts = ") == 8 and ".threshold_counts = 200" in text
    assert "#define PADTUNE_PROFILE_FORMAT 1" in text and "padtune_group0_members[] = { 0, 1, 2, 3 }" in text
    export_c_header(greenhouse(), tmp_path / "p.h", "greenhouse.toml")
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        pytest.skip("no C compiler here to check the header compiles")
    main = tmp_path / "main.c"
    main.write_text('#include "p.h"\nint main(void) { return padtune_settings[4].threshold_counts == 200 '
                    '&& padtune_groups[0].count == 4 && padtune_sliders[0].resolution == 60 ? 0 : 1; }\n')
    firmware = pathlib.Path(__file__).resolve().parents[2] / "devices" / "firmware"  # pt_types.h
    subprocess.run([cc, "-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", f"-I{firmware}", "-o",
                    str(tmp_path / "m"), str(main)], check=True, cwd=tmp_path)
    assert subprocess.run([str(tmp_path / "m")]).returncode == 0


def test_c_header_comment_survives_any_board_id(tmp_path):
    # A board id is free text in the profile; in the header's comment a "/*" would trip -Wcomment (an
    # error under -Werror), a "*/" would end the comment early and a newline would split the line.
    import shutil
    nasty = replace(greenhouse(), board="gh/*x*/\n#error y\tz")
    text = c_header_text(nasty, "a*/b.toml")
    head = text.split("#ifndef", 1)[0]
    assert "\n#error" not in head and head.count("\n") == 3
    assert head.count("/*") == 1 and head.count("*/") == 1 and "\t" not in head
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        pytest.skip("no C compiler here to check the header compiles")
    (tmp_path / "p.h").write_text(text)
    (tmp_path / "main.c").write_text('#include "p.h"\nint main(void) { return padtune_settings[0].polarity - 1; }\n')
    firmware = pathlib.Path(__file__).resolve().parents[2] / "devices" / "firmware"  # pt_types.h
    subprocess.run([cc, "-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", f"-I{firmware}", "-o",
                    str(tmp_path / "m"), str(tmp_path / "main.c")], check=True, cwd=tmp_path)


def test_json_export(tmp_path):
    export_json(greenhouse(), tmp_path / "p.json", "greenhouse.toml")
    doc = json.loads((tmp_path / "p.json").read_text())
    assert doc["format_version"] == 1 and doc["profile"] == "greenhouse.toml"
    assert doc["channels"][4]["threshold_counts"] == 200 and doc["channels"][0]["threshold_counts"] == 120
    assert doc["groups"][0]["member_names"] == ["zone1", "zone2", "zone3", "zone4"]
    assert doc["sliders"][0]["pads"] == [5, 6, 7] and doc["limits"]["min_snr_pp"] == 5.0


def test_readme_example_profile_loads(tmp_path):
    readme = (pathlib.Path(__file__).resolve().parents[2] / "README.md").read_text()
    section = readme.split("## Profile file", 1)[1]
    example = section.split("```toml\n", 1)[1].split("```", 1)[0]
    p = load_profile(write(tmp_path, example))
    assert p.channels == 6 and p.settings_for(4).threshold_counts == 160 and p.groups[0].name == "zones"
    assert p.limits.min_snr_pp == 5.0 and p.sliders[0].pads == (1, 2, 5)


def test_save_through_a_symlink_keeps_the_link(tmp_path):
    # A profile kept elsewhere and linked in: saving writes the real file (and its .bak beside it),
    # the link stays a link.
    (tmp_path / "real").mkdir()
    real, link = tmp_path / "real" / "p.toml", tmp_path / "p.toml"
    first = profile_for(2, ("a", "b"))
    save_profile(first, real)
    link.symlink_to(real)
    second = first.with_settings(1, ChannelSettings(threshold_counts=321))
    save_profile(second, link)
    assert link.is_symlink() and load_profile(real) == second and load_profile(link) == second
    assert load_profile(tmp_path / "real" / "p.toml.bak") == first


def test_profile_saved_by_a_windows_editor_loads(tmp_path):
    # Notepad and friends may start the file with a UTF-8 byte order mark and end lines with CR LF.
    path = tmp_path / "p.toml"
    path.write_bytes(b"\xef\xbb\xbf" + GOOD.replace("\n", "\r\n").encode("utf-8"))
    assert load_profile(path) == load_profile(write(tmp_path, GOOD, "q.toml"))


def test_a_board_file_given_as_a_profile_is_named_for_what_it_is() -> None:
    # A board file (devices/boards) read as a profile: one short line saying what it is, not a list of
    # every table a profile does not know.
    board = pathlib.Path(__file__).resolve().parents[2] / "devices" / "boards" / "greenhouse.toml"
    with pytest.raises(ProfileError) as caught:
        load_profile(board)
    message = str(caught.value)
    assert "this is a board file" in message and "padtune sim" in message
    assert "known keys" not in message and message.count(" | ") == 0


def test_unknown_keys_name_the_known_ones_once() -> None:
    raw = {"format_version": 1, "channels": 1, "names": ["a"], "xyzzy": 1, "plugh": 2, "fromat_version": 3}
    _, problems = profile_from_dict(raw)
    text = " | ".join(f"{w}: {m}" for w, m in problems)
    assert text.count("known keys here") == 1 and "plugh: unknown key; known keys here: format_version" in text
    assert "fromat_version: unknown key; did you mean 'format_version'?" in text
