"""`padtune replay --engine firmware` as a subprocess: the compiled C library prints the same lines, byte
for byte, as the Python engine, on recordings the suite writes from the simulated boards (touches,
releases, stuck releases, groups, sliders, first contact with its settings and polarity changes, both
polarities, 64 channels); without a compiler it says so in one line and exits 2."""

from __future__ import annotations

from dataclasses import replace

import pytest

from processing.profile import save_profile
from tests.firmware.detect_fixtures import firmware_lib  # noqa: F401
from tests.headless.helpers import json_lines, padtune, sim_capture, write_recording
from tui.demo_profile import demo_profile


@pytest.fixture(scope="module")
def recordings(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fwreplay")
    for board, seconds in (("greenhouse", 22.0), ("pumphouse", 14.0), ("grid64", 3.0)):
        _, data = sim_capture(seconds, board=board, seed=3)
        write_recording(folder / f"{board}.csv", data)
    # Raw captures with a board restarting mid-stream (its info line again: a new session, every channel
    # re-baselined) and another board after it (a new width: the engine is built anew).
    _, gh = sim_capture(6.0, board="greenhouse", seed=4)
    _, ph = sim_capture(6.0, board="pumphouse", seed=4)
    (folder / "restart.raw").write_bytes(gh + gh)
    (folder / "swap.raw").write_bytes(gh + ph + gh)
    demo = demo_profile("greenhouse")
    save_profile(demo, folder / "demo.toml")
    # A stuck timeout of half a second: the long zone2 hold of the script is released by it.
    stuck = replace(demo.defaults, stuck_timeout_frames=30)
    save_profile(replace(demo, defaults=stuck, overrides={}), folder / "stuck.toml")
    return folder


def both(*args: str) -> tuple[str, str]:
    py = padtune("replay", *args, "--engine", "python")
    fw = padtune("replay", *args, "--engine", "firmware")
    assert py.returncode == 0 and fw.returncode == 0, py.stderr + fw.stderr
    assert fw.stderr == py.stderr
    return py.stdout, fw.stdout


def test_greenhouse_with_groups_and_slider_prints_the_same_bytes(firmware_lib, recordings):  # noqa: F811
    py, fw = both(str(recordings / "greenhouse.csv"), "--profile", str(recordings / "demo.toml"), "--json")
    assert fw == py
    types = {e["type"] for e in json_lines(fw)}
    assert {"touch", "release", "group", "slider"} <= types


def test_stuck_releases_print_the_same_bytes(firmware_lib, recordings):  # noqa: F811
    py, fw = both(str(recordings / "greenhouse.csv"), "--profile", str(recordings / "stuck.toml"), "--json")
    assert fw == py
    assert any(e["type"] == "release" and e["stuck"] for e in json_lines(fw)), fw[:2000]


@pytest.mark.parametrize("board", ["greenhouse", "pumphouse", "grid64"])
def test_first_contact_without_a_profile_prints_the_same_bytes(firmware_lib, recordings, board):  # noqa: F811
    """No profile: provisional settings and the learned polarity reach the engine mid-stream (settings
    changes, polarity set, re-baselines); the pump house's counts fall on touch. Status lines read the
    engine's readings, baselines, deltas and states."""
    py, fw = both(str(recordings / f"{board}.csv"), "--json", "--every", "1")
    assert fw == py
    events = json_lines(fw)
    assert any(e["type"] == "status" for e in events)
    if board != "grid64":
        assert any(e["type"] == "touch" for e in events)


@pytest.mark.parametrize("capture", ["restart.raw", "swap.raw"])
def test_restarts_and_board_changes_print_the_same_bytes(firmware_lib, recordings, capture):  # noqa: F811
    py, fw = both(str(recordings / capture), "--json", "--every", "2")
    assert fw == py
    events = json_lines(fw)
    assert any(e["type"] == "touch" for e in events)
    py, fw = both(str(recordings / capture), "--json", "--profile", str(recordings / "demo.toml"))
    assert fw == py


def test_human_lines_are_the_same_too(firmware_lib, recordings):  # noqa: F811
    py, fw = both(str(recordings / "greenhouse.csv"), "--profile", str(recordings / "demo.toml"))
    assert fw == py and "touch" in fw


def test_without_a_compiler_it_says_so_in_one_line_and_exits_2(recordings, tmp_path):
    out = padtune("replay", str(recordings / "greenhouse.csv"), "--engine", "firmware",
                  env={"CC": str(tmp_path / "no-such-cc"), "PADTUNE_CACHE_DIR": str(tmp_path / "cache")})
    assert out.returncode == 2 and out.stdout == ""
    lines = out.stderr.splitlines()
    assert len(lines) == 1 and "C compiler" in lines[0] and "no-such-cc" in lines[0], out.stderr


def test_a_compiler_that_fails_is_one_line_and_exit_2(recordings, tmp_path):
    out = padtune("replay", str(recordings / "greenhouse.csv"), "--engine", "firmware",
                  env={"CC": "false", "PADTUNE_CACHE_DIR": str(tmp_path / "cache")})
    assert out.returncode == 2 and out.stdout == ""
    assert len(out.stderr.splitlines()) == 1 and "could not build" in out.stderr, out.stderr
    assert not list((tmp_path / "cache").rglob("*.so"))  # nothing half-built left behind


def test_an_unwritable_build_cache_is_one_line_and_exit_2(recordings, tmp_path):
    (tmp_path / "file").write_text("not a folder")
    out = padtune("replay", str(recordings / "greenhouse.csv"), "--engine", "firmware",
                  env={"PADTUNE_CACHE_DIR": str(tmp_path / "file")})
    assert out.returncode == 2 and out.stdout == ""
    assert len(out.stderr.splitlines()) == 1 and "PADTUNE_CACHE_DIR" in out.stderr, out.stderr
