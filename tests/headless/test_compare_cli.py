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
