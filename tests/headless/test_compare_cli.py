"""`padtune diff` and `replay --against` as subprocesses, on profiles and recordings the test writes."""

from __future__ import annotations

import json
from dataclasses import replace

import pytest

from processing.groups import GroupSpec
from processing.profile import load_profile, save_profile
from processing.settings import Limits
from tests.headless.helpers import padtune


@pytest.fixture
def pair(tmp_path):
    """Two saved profiles of the greenhouse names, equal to start with."""
    from processing.profile import profile_for

    base = profile_for(3, ("zone1", "zone2", "stop"), board="greenhouse")
    base = replace(base, limits=Limits(min_snr_pp=5.0))
    save_profile(base, tmp_path / "a.toml")
    return base, tmp_path


def test_diff_of_equal_profiles_exits_0(pair):
    base, folder = pair
    save_profile(base, folder / "b.toml")
    out = padtune("diff", str(folder / "a.toml"), str(folder / "b.toml"))
    assert out.returncode == 0, out.stderr
    assert "are the same" in out.stdout


def test_diff_names_a_setting_a_limit_and_a_group(pair):
    base, folder = pair
    other = base.with_settings(1, replace(base.defaults, threshold_counts=140))
    other = replace(other, limits=Limits(min_snr_pp=8.0), groups=(GroupSpec("zones", (0, 1)),))
    save_profile(other, folder / "b.toml")
    out = padtune("diff", str(folder / "a.toml"), str(folder / "b.toml"))
    assert out.returncode == 1, out.stderr
    assert "channel zone2" in out.stdout and "threshold_counts" in out.stdout and "B 140" in out.stdout
    assert "limits.min_snr_pp" in out.stdout and "group zones: only in B" in out.stdout
    js = json.loads(padtune("diff", str(folder / "a.toml"), str(folder / "b.toml"), "--json").stdout)
    assert js["equal"] is False
    assert {"section": "channel", "item": "zone2", "key": "threshold_counts", "a": 100, "b": 140} \
        in js["differences"]
    assert sum(d["key"] == "limits.min_snr_pp" for d in js["differences"]) == 3
    assert js["unmatched"] == [{"section": "group", "item": "zones", "only_in": "b"}]


def test_diff_of_different_channel_counts_names_the_unmatched(pair):
    from processing.profile import profile_for

    _, folder = pair
    save_profile(profile_for(2, ("zone1", "dur")), folder / "b.toml")
    js = json.loads(padtune("diff", str(folder / "a.toml"), str(folder / "b.toml"), "--json").stdout)
    found = [(u["item"], u["only_in"]) for u in js["unmatched"]]
    assert found == [("zone2", "a"), ("stop", "a"), ("dur", "b")]


def test_diff_of_a_hand_edited_file(pair):
    """A [channel.NAME] table typed by hand under a saved file is that channel's override."""
    _, folder = pair
    text = (folder / "a.toml").read_text()
    (folder / "b.toml").write_text(text + '\n[channel.stop]\nthreshold_counts = 90\n')
    assert load_profile(folder / "b.toml").settings_for(2).threshold_counts == 90
    out = padtune("diff", str(folder / "a.toml"), str(folder / "b.toml"))
    assert out.returncode == 1 and "channel stop" in out.stdout


@pytest.mark.parametrize("which, message", [("missing", "no such profile"),
                                            ("bad", "bad.toml:defaults.thresold")])
def test_diff_of_a_bad_profile_exits_2_with_its_problem_lines(pair, which, message):
    _, folder = pair
    (folder / "bad.toml").write_text("format_version = 1\nchannels = 1\n[defaults]\nthresold_counts = 3\n")
    out = padtune("diff", str(folder / "a.toml"), str(folder / f"{which}.toml"))
    assert out.returncode == 2 and out.stdout == ""
    assert message in out.stderr and "Traceback" not in out.stderr
    assert all(line.startswith("padtune: ") or ":" in line for line in out.stderr.splitlines())


# ---------------------------------------------------------------- replay --against

SECONDS = 22.0  # the greenhouse script through the long zone2 hold


@pytest.fixture(scope="module")
def marked(tmp_path_factory):
    """A simulated greenhouse recording with touch marks on zone1's and stop's touches only, and the
    profile `tune` makes of it."""
    from processing.recording import Mark
    from tests.headless.helpers import sim_capture, write_recording

    folder = tmp_path_factory.mktemp("against")
    _, data = sim_capture(SECONDS, seed=1)
    marks = [Mark(1.9, "touch-start", "zone1"), Mark(2.8, "touch-end", "zone1"),
             Mark(10.9, "touch-start", "stop"), Mark(12.7, "touch-end", "stop")]
    write_recording(folder / "marked.csv", data, marks)
    out = padtune("tune", str(folder / "marked.csv"), "-o", str(folder / "a.toml"), "--partial")
    if out.returncode == 2 and "--partial" in out.stderr:  # a padtune without `tune --partial` yet
        out = padtune("tune", str(folder / "marked.csv"), "-o", str(folder / "a.toml"))
    assert (folder / "a.toml").exists(), out.stderr
    return folder


def _against(folder, b, *extra):
    return padtune("replay", str(folder / "marked.csv"), "--profile", str(folder / "a.toml"),
                   "--against", str(b), *extra)


def _replay(folder, profile):
    from tests.headless.helpers import json_lines

    out = padtune("replay", str(folder / "marked.csv"), "--profile", str(profile), "--json")
    return {c["name"]: c for c in json_lines(out.stdout)[-1]["channels"]}


def test_against_itself_nothing_differs(marked):
    from tests.headless.helpers import json_lines

    out = _against(marked, marked / "a.toml", "--json")
    assert out.returncode == 0, out.stderr
    lines = json_lines(out.stdout)
    assert [e["type"] for e in lines] == ["comparison"]
    final = lines[0]
    assert final["gained"] == final["lost"] == 0 and final["first_difference"] is None
    assert all(c["touches_a"] == c["touches_b"] for c in final["channels"])


def test_a_lower_threshold_on_one_key_gains_touches_there_and_they_are_false(marked, tmp_path):
    """B lowers zone2's threshold under its unmarked touches' signal: each replay on its own is the
    reference for the touches per key; gained = B's touches - A's (nothing is lost on that key)."""
    from tests.headless.helpers import json_lines

    a = load_profile(marked / "a.toml")
    z2 = a.names.index("zone2")
    b = a.with_settings(z2, replace(a.settings_for(z2), threshold_counts=40, hysteresis_counts=10))
    save_profile(b, tmp_path / "b.toml")
    alone_a, alone_b = _replay(marked, marked / "a.toml"), _replay(marked, tmp_path / "b.toml")
    assert alone_b["zone2"]["touches"] > alone_a["zone2"]["touches"]  # the change matters on this recording
    out = _against(marked, tmp_path / "b.toml", "--json")
    assert out.returncode == 0, out.stderr
    lines = json_lines(out.stdout)
    final = lines[-1]
    rows = {c["name"]: c for c in final["channels"]}
    for name, row in rows.items():  # the one pass gives each profile's own replay, key by key
        assert (row["touches_a"], row["touches_b"]) == (alone_a[name]["touches"], alone_b[name]["touches"])
        assert (row["false_a"], row["false_b"]) == (alone_a[name]["false_touches"],
                                                    alone_b[name]["false_touches"])
    z = rows["zone2"]
    assert z["gained"] == z["touches_b"] - z["touches_a"] and z["lost"] == 0
    assert z["false_b"] == z["touches_b"]  # zone2 was never marked: every touch of it is false
    assert all(r["gained"] == r["lost"] == 0 for n, r in rows.items() if n != "zone2")
    gained = [e for e in lines if e["type"] == "gained"]
    assert len(gained) == z["gained"] and {e["channel"] for e in gained} == {"zone2"}
    first = final["first_difference"]
    assert first["key"] == "zone2" and first["index"] == min(e["index"] for e in gained)
    assert first["a"] == "nothing" and first["b"].startswith("touch")
    human = _against(marked, tmp_path / "b.toml")
    assert "first difference at frame" in human.stdout and "false B" in human.stdout
    assert f"gained zone2  (frame {first['index']}" in human.stdout


def test_a_limit_changes_no_detection_and_a_group_does(marked, tmp_path):
    from tests.headless.helpers import json_lines

    a = load_profile(marked / "a.toml")
    save_profile(replace(a, limits=Limits(min_snr_pp=50.0)), tmp_path / "limit.toml")
    final = json_lines(_against(marked, tmp_path / "limit.toml", "--json").stdout)[-1]
    assert final["first_difference"] is None and final["gained"] == final["lost"] == 0
    grouped = replace(a, groups=(GroupSpec("zones", tuple(range(4))),))
    save_profile(grouped, tmp_path / "group.toml")
    final = json_lines(_against(marked, tmp_path / "group.toml", "--json").stdout)[-1]
    assert final["first_difference"]["key"] == "group zones"
    assert final["first_difference"]["a"] == "nothing"


def test_against_with_the_firmware_engine_says_the_same(marked, tmp_path):
    from tests.headless.helpers import json_lines

    a = load_profile(marked / "a.toml")
    z2 = a.names.index("zone2")
    save_profile(a.with_settings(z2, replace(a.settings_for(z2), threshold_counts=40, hysteresis_counts=10)),
                 tmp_path / "b.toml")
    py = _against(marked, tmp_path / "b.toml", "--json")
    fw = _against(marked, tmp_path / "b.toml", "--json", "--engine", "firmware")
    if fw.returncode == 2 and "compiler" in fw.stderr:
        pytest.skip(fw.stderr.strip())
    assert fw.returncode == 0, fw.stderr
    assert json_lines(fw.stdout) == json_lines(py.stdout)


@pytest.mark.parametrize("extra, message", [
    (["--against", "{a}"], "give both profiles"),
    (["--profile", "{a}", "--against", "/nonexistent.toml"], "no such profile"),
    (["--profile", "{a}", "--against", "{a}", "--every", "1"], "leave out --speed and --every"),
    (["--profile", "{a}", "--against", "{bad}"], "bad.toml:channels"),
])
def test_against_usage_errors_exit_2_with_one_line(marked, tmp_path, extra, message):
    (tmp_path / "bad.toml").write_text("format_version = 1\nchannels = 0\n")
    args = [x.format(a=marked / "a.toml", bad=tmp_path / "bad.toml") for x in extra]
    out = padtune("replay", str(marked / "marked.csv"), *args)
    assert out.returncode == 2 and out.stdout == "" and "Traceback" not in out.stderr
    assert message in out.stderr and len(out.stderr.splitlines()) == 1
