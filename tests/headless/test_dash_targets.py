"""Issue 13: `-` as a file name made a file named `-`. Now `export` writes to standard output (its one
file), every other writer refuses `-` by name, and each `--help` says which."""

from __future__ import annotations

import os
import re
import subprocess
import sys

import pytest

from processing.profile import profile_for, save_profile
from tests.headless.helpers import ROOT, padtune

pytestmark = pytest.mark.e2e


def run_in(folder, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "tui.cli", *args], cwd=folder, capture_output=True,
                          env={**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1"}, timeout=120)


@pytest.mark.parametrize(("flag", "name"), [("--c-header", "out.h"), ("--json", "out.json")])
def test_export_dash_writes_exactly_the_file_to_standard_output(tmp_path, flag, name):
    save_profile(profile_for(3, names=("inlet", "outlet", "drain")), tmp_path / "p.toml")
    to_file = run_in(tmp_path, "export", "p.toml", flag, name)
    to_stdout = run_in(tmp_path, "export", "p.toml", flag, "-")
    assert to_file.returncode == 0 and to_stdout.returncode == 0, to_stdout.stderr
    assert not (tmp_path / "-").exists() and to_stdout.stderr == b""

    def undated(text: bytes) -> list[bytes]:  # the export's own time stamp differs between runs
        return [re.sub(rb"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", b"T", line) for line in text.splitlines()]

    assert undated(to_stdout.stdout) == undated((tmp_path / name).read_bytes())


def test_export_dash_to_a_full_disk_is_one_line_and_exit_2(tmp_path):
    save_profile(profile_for(2, names=("a", "b")), tmp_path / "p.toml")
    with open("/dev/full", "wb") as full:
        done = subprocess.run([sys.executable, "-m", "tui.cli", "export", "p.toml", "--json", "-"],
                              cwd=tmp_path, stdout=full, stderr=subprocess.PIPE, timeout=120,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert done.returncode == 2
    said = "padtune: cannot write the export to standard output: No space left on device"
    assert done.stderr.decode().splitlines() == [said]


@pytest.mark.parametrize(("command", "says"), [
    (["export"], "`-` writes to standard output"),
    (["record"], "`-` is refused"),
    (["monitor"], "`-` is refused"),
    (["tune"], "`-` is refused"),
    (["check"], "`-` is refused"),
    (["lot"], "`-` is refused"),
    (["sim"], "`-` is refused"),
])
def test_each_help_says_where_dash_works(command, says):
    out = padtune(*command, "--help")
    assert out.returncode == 0 and says in " ".join(out.stdout.split()), out.stdout
