"""`padtune export` run as a user would: a subprocess, exit codes and one-line errors."""

import json
import os
import pathlib
import shutil
import subprocess
import sys

import pytest

from tests.processing.test_profile import GOOD

pytestmark = pytest.mark.e2e


def padtune(*args, cwd):
    return subprocess.run([sys.executable, "-m", "tui.cli", *args], capture_output=True, text=True, cwd=cwd,
                          timeout=60)


def test_export_header_and_json(tmp_path):
    (tmp_path / "panel.toml").write_text(GOOD)
    out = padtune("export", "panel.toml", "--c-header", "panel.h", cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    assert "Profile: panel.toml" in (tmp_path / "panel.h").read_text()
    out = padtune("export", "panel.toml", "--json", "panel.json", cwd=tmp_path)
    assert out.returncode == 0
    assert json.loads((tmp_path / "panel.json").read_text())["channels"][2]["name"] == "stop"


def test_bad_profile_exits_2_one_line_naming_every_problem(tmp_path):
    bad = GOOD.replace("threshold_counts = 120", "thresold_counts = 120")
    bad = bad.replace('"zone1", "zone2"]\n[[slider]]', '"zone1", "zone7"]\n[[slider]]')
    (tmp_path / "panel.toml").write_text(bad)
    out = padtune("export", "panel.toml", "--json", "panel.json", cwd=tmp_path)
    assert out.returncode == 2 and out.stdout == "" and "Traceback" not in out.stderr
    # One line (issue 13: nothing a file holds may add lines to stderr), the problems joined by " | ".
    assert out.stderr.splitlines() == [
        "padtune: panel.toml:defaults.thresold_counts: unknown key; did you mean 'threshold_counts'? | "
        "panel.toml:group[0].members: unknown channel 'zone7'; did you mean 'zone2'?",
    ]
    assert not (tmp_path / "panel.json").exists()


BAD_FILES = [
    # (file text, a piece of each problem expected, in order)
    (GOOD.replace("[defaults]", "[defualts]"), ["defualts: unknown key; did you mean 'defaults'?"]),
    (GOOD.replace("channels = 3", 'channels = "3"').replace("= 120", "= 1.5"),
     ["channels: must be a channel count from 1 to 1024, not '3'",
      "defaults.threshold_counts: must be a whole number, not 1.5"]),
    (GOOD.replace("threshold_counts = 120", "threshold_counts = 120\nhysteresis_counts = 120"),
     ["defaults.hysteresis_counts: 120 must be below the threshold (120)"]),
    (GOOD.replace('"zone1", "zone2"]\n[[slider]]', '"zone1", "pump"]\n[[slider]]'),
     ["group[0].members: unknown channel 'pump'"]),
    ("board = greenhouse\n", ["not valid TOML"]),
    ("", ["format_version: missing; add format_version = 1", "channels: missing; add the channel count"]),
]


@pytest.mark.parametrize(("text", "pieces"), BAD_FILES,
                         ids=["misspelt", "types", "hysteresis", "group", "not-toml", "empty"])
def test_bad_files_each_problem_named_on_one_line(tmp_path, text, pieces):
    (tmp_path / "bad.toml").write_text(text)
    out = padtune("export", "bad.toml", "--json", "out.json", cwd=tmp_path)
    assert out.returncode == 2 and "Traceback" not in out.stderr and out.stdout == ""
    assert len(out.stderr.splitlines()) == 1
    lines = out.stderr.removeprefix("padtune: ").rstrip("\n").split(" | ")
    assert len(lines) == len(pieces)
    for line, piece in zip(lines, pieces, strict=True):
        assert line.startswith("bad.toml") and piece in line, (line, piece)
    assert sorted(q.name for q in tmp_path.iterdir()) == ["bad.toml"]  # nothing written, no temp file


def test_unusable_paths_give_one_line(tmp_path):
    (tmp_path / "folder.toml").mkdir()
    out = padtune("export", "folder.toml", "--json", "out.json", cwd=tmp_path)
    assert out.returncode == 2
    assert out.stderr.strip() == "padtune: folder.toml: is a folder, not a file; give the profile file itself"
    (tmp_path / "p.toml").write_text(GOOD)
    out = padtune("export", "p.toml", "--json", "no-such-folder/out.json", cwd=tmp_path)
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert "no-such-folder/out.json: cannot write: the folder no-such-folder does not exist" in out.stderr
    out = padtune("export", "p.toml", "--c-header", "folder.toml", cwd=tmp_path)
    assert out.returncode == 2 and "folder.toml: cannot write: it is a folder" in out.stderr
    assert sorted(q.name for q in tmp_path.iterdir()) == ["folder.toml", "p.toml"]
    assert list((tmp_path / "folder.toml").iterdir()) == []


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0 or shutil.which("setpriv") is None,
                    reason="needs root and setpriv to run the CLI as another user")
def test_unreadable_profile_as_another_user(tmp_path):
    # As root every file is readable, so run the CLI as 'nobody' (uid 65534) on a mode-000 file.
    tmp_path.chmod(0o777)
    (tmp_path / "p.toml").write_text(GOOD)
    (tmp_path / "p.toml").chmod(0)
    root = pathlib.Path(__file__).resolve().parents[2]
    as_nobody = ["setpriv", "--reuid=65534", "--regid=65534", "--clear-groups"]
    env = {**os.environ, "PYTHONPATH": str(root)}
    probe = subprocess.run([*as_nobody, sys.executable, "-c", "import tui.cli"], capture_output=True,
                           text=True, cwd=tmp_path, timeout=60, env=env)
    if probe.returncode != 0:  # e.g. a checkout inside a mode-0700 folder (CI's fresh clone)
        pytest.skip(f"nobody cannot import padtune from {root}: {probe.stderr.strip()[-200:]}")
    cmd = [*as_nobody, sys.executable, "-m", "tui.cli", "export", "p.toml", "--json", "out.json"]
    out = subprocess.run(cmd, capture_output=True, text=True, cwd=tmp_path, timeout=60, env=env)
    if "Permission denied" in out.stderr and "p.toml" not in out.stderr:
        pytest.skip(f"nobody cannot run the interpreter here: {out.stderr.strip()}")
    assert out.returncode == 2 and "Traceback" not in out.stderr, out.stderr
    want = "padtune: p.toml: cannot read: permission denied; check the file's permissions"
    assert out.stderr.strip() == want
    assert not (tmp_path / "out.json").exists()


def test_missing_profile_and_output_required(tmp_path):
    out = padtune("export", "nope.toml", "--json", "x.json", cwd=tmp_path)
    assert out.returncode == 2 and "no such profile file" in out.stderr
    out = padtune("export", "nope.toml", cwd=tmp_path)
    assert out.returncode == 2 and "--c-header" in out.stderr
    (tmp_path / "p.toml").write_text(GOOD)
    out = padtune("export", "p.toml", "--json", "p.toml", cwd=tmp_path)
    assert out.returncode == 2 and "refusing to overwrite" in out.stderr


def test_json_carries_each_channels_own_limits_and_an_unmeasured_key_is_warned_about(tmp_path):
    from dataclasses import replace

    from processing.profile import load_profile, save_profile

    (tmp_path / "panel.toml").write_text(GOOD)
    base = load_profile(tmp_path / "panel.toml")
    own = replace(base.limits_for(2), baseline_min_counts=1500, baseline_max_counts=1800)
    save_profile(base.with_limits(2, own).with_measured(1, False), tmp_path / "p.toml")
    out = padtune("export", "p.toml", "--json", "p.json", cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    channels = json.loads((tmp_path / "p.json").read_text())["channels"]
    assert channels[2]["limits"]["baseline_min_counts"] == 1500  # its own band, not [limits]'
    assert channels[0]["limits"] == json.loads((tmp_path / "p.json").read_text())["limits"]
    assert [c["measured"] for c in channels[:3]] == [True, False, True]
    name = channels[1]["name"]
    assert out.stderr.count("\n") == 1 and f"{name} marked measured = false" in out.stderr
    out = padtune("export", "p.toml", "--c-header", "p.h", cwd=tmp_path)
    assert out.returncode == 0 and "measured = false" in out.stderr
