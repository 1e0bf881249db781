"""`padtune export` run as a user would: a subprocess, exit codes and one-line errors."""

import json
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


def test_bad_profile_exits_2_with_one_line(tmp_path):
    bad = GOOD.replace("threshold_counts = 120", "thresold_counts = 120")
    bad = bad.replace('"zone1", "zone2"]\n[[slider]]', '"zone1", "zone7"]\n[[slider]]')
    (tmp_path / "panel.toml").write_text(bad)
    out = padtune("export", "panel.toml", "--json", "panel.json", cwd=tmp_path)
    assert out.returncode == 2 and out.stdout == ""
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in out.stderr
    assert "panel.toml:defaults.thresold_counts: unknown key; did you mean 'threshold_counts'?" in lines[0]
    assert "group[0].members: unknown channel 'zone7'" in lines[0]
    assert not (tmp_path / "panel.json").exists()


def test_missing_profile_and_output_required(tmp_path):
    out = padtune("export", "nope.toml", "--json", "x.json", cwd=tmp_path)
    assert out.returncode == 2 and "no such profile file" in out.stderr
    out = padtune("export", "nope.toml", cwd=tmp_path)
    assert out.returncode == 2 and "--c-header" in out.stderr
    (tmp_path / "p.toml").write_text(GOOD)
    out = padtune("export", "p.toml", "--json", "p.toml", cwd=tmp_path)
    assert out.returncode == 2 and "refusing to overwrite" in out.stderr
