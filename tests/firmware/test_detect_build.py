"""Building the C library: the exported profile header and the library compile together (and refuse to
when their types disagree), two processes building at once both get a whole library, and the binding's
structs match the library's."""

from __future__ import annotations

import ctypes
import os
import re
import shutil
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from processing.export import export_c_header
from processing.settings import ChannelSettings
from tests.firmware.detect_fixtures import FIRMWARE, ROOT, STRICT, firmware_lib, needs_cc  # noqa: F401
from tui.demo_profile import demo_profile

MAIN = r"""
#include <stdio.h>
#include "pt_detect.h"
#include "pt_groups.h"
#include "profile.h"

int main(void)
{
    static pt_settings_t live[PADTUNE_CHANNELS];  /* the RAM copy a board taking `set` keeps */
    static pt_chan_t chans[PADTUNE_CHANNELS];
    static pt_group_state_t gs[PADTUNE_GROUPS];
    static pt_slider_state_t ss[PADTUNE_SLIDERS];
    static pt_event_t ev[PADTUNE_CHANNELS + PADTUNE_GROUPS + PADTUNE_SLIDERS];
    int32_t r[PADTUNE_CHANNELS];
    pt_detector_t det;
    int f, c;
    size_t i, n;
    memcpy(live, padtune_settings, sizeof live);
    pt_detect_init(&det, live, chans, PADTUNE_CHANNELS);
    pt_groups_init(gs, PADTUNE_GROUPS);
    pt_sliders_init(ss, PADTUNE_SLIDERS);
    for (f = 0; f < 40; f++) {
        for (c = 0; c < PADTUNE_CHANNELS; c++)
            r[c] = 1000;
        if (f >= 10 && f < 30)
            r[1] = 1100;  /* zone2 held for 20 frames */
        n = pt_detect_frame(&det, r, ev);
        n += pt_groups_frame(&det, padtune_groups, gs, PADTUNE_GROUPS, ev + n);
        n += pt_sliders_frame(&det, padtune_sliders, ss, PADTUNE_SLIDERS, ev + n);
        for (i = 0; i < n; i++)
            if (ev[i].kind != PT_EV_REBASELINED)
                printf("%d %d %s %u\n", f, ev[i].kind,
                       ev[i].kind == PT_EV_GROUP ? padtune_group_names[ev[i].source]
                                                 : padtune_channel_names[ev[i].source],
                       (unsigned)ev[i].value);
    }
    return 0;
}
"""


def compile_main(folder: Path, include: Path) -> subprocess.CompletedProcess:
    (folder / "main.c").write_text("#include <string.h>\n" + MAIN)
    sources = [str(include / "pt_detect.c"), str(include / "pt_groups.c"), str(folder / "main.c")]
    return subprocess.run(
        ["cc", *STRICT, f"-I{include}", f"-I{folder}", *sources, "-o", str(folder / "m")],
        capture_output=True,
        text=True,
        timeout=120,
    )


@needs_cc
def test_exported_header_configures_the_library(tmp_path):
    export_c_header(demo_profile("greenhouse"), tmp_path / "profile.h", "greenhouse.toml")
    built = compile_main(tmp_path, FIRMWARE)
    assert built.returncode == 0, built.stderr
    lines = subprocess.run(
        [str(tmp_path / "m")], capture_output=True, text=True, check=True
    ).stdout.splitlines()
    # The demo's debounce is 2 frames each way (tui/demo_profile.py): touch on the 2nd frame held, release
    # on the 2nd frame let go; the group "zones" follows zone2 both ways.
    assert lines == ["11 1 zone2 0", "11 5 zones 1", "31 2 zone2 0", f"31 5 zones {0xFFFF}"]


@needs_cc
@pytest.mark.parametrize("change", ["field", "version"])
def test_a_header_and_library_that_disagree_do_not_compile(tmp_path, change):
    lib = tmp_path / "lib"
    shutil.copytree(FIRMWARE, lib, ignore=shutil.ignore_patterns("*.py", "__pycache__", "binding", "harness"))
    types = (lib / "pt_types.h").read_text()
    if change == "field":
        types = types.replace("int32_t threshold_counts;", "int32_t threshold;")
    else:
        types = types.replace("#define PT_TYPES_VERSION 1", "#define PT_TYPES_VERSION 2")
    (lib / "pt_types.h").write_text(types)
    (lib / "pt_detect.c").write_text(
        (lib / "pt_detect.c").read_text().replace("threshold_counts", "threshold")
    )
    export_c_header(demo_profile("greenhouse"), tmp_path / "profile.h", "greenhouse.toml")
    built = compile_main(tmp_path, lib)
    assert built.returncode != 0
    expected = "threshold_counts" if change == "field" else "exported for pt_types.h version 1"
    assert expected in built.stderr


@needs_cc
def test_two_processes_building_at_once_both_load_a_whole_library(tmp_path):
    env = {**os.environ, "PADTUNE_CACHE_DIR": str(tmp_path)}
    code = "from devices.firmware import clib; print(clib.library_path()); clib.load()"
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", code],
            cwd=ROOT,
            env=env,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for _ in range(3)
    ]
    outs = [p.communicate(timeout=300) for p in procs]
    assert all(p.returncode == 0 for p in procs), [err for _, err in outs]
    assert len({out.strip() for out, _ in outs}) == 1
    built = sorted(p.name for p in (tmp_path / "firmware").iterdir())
    assert len(built) == 1 and built[0].endswith(".so"), built  # no temporary file left


def test_binding_structs_match_the_library_and_a_channel_costs_20_bytes(firmware_lib):  # noqa: F811
    from devices.firmware import clib

    lib = clib.load()
    sizes = (ctypes.c_uint32 * len(clib.MIRRORED))()
    lib.pt_batch_sizes(sizes)
    assert list(sizes) == [ctypes.sizeof(s) for s in clib.MIRRORED]
    assert ctypes.sizeof(clib.PtChan) == 20 and ctypes.sizeof(clib.PtSettings) == 20


def test_library_refuses_settings_a_profile_refuses(firmware_lib):  # noqa: F811
    from devices.firmware import clib

    det = clib.FirmwareDetector([ChannelSettings()], [1])
    bad = [
        {"threshold_counts": 0},
        {"hysteresis_counts": 100},
        {"baseline_fast_shift": 7},
        {"baseline_period_frames": 48},
        {"baseline_slow_shift": 17, "baseline_fast_shift": 0},
    ]
    keys = [
        "threshold_counts",
        "hysteresis_counts",
        "baseline_fast_shift",
        "baseline_period_frames",
        "baseline_slow_shift",
    ]
    for fields, key in zip(bad, keys, strict=True):
        s = replace(ChannelSettings(), **fields)  # a dataclass: replace() does not run its check
        assert s.problems()[0][0] == key  # the profile's own rule names the same key first
        with pytest.raises(ValueError, match=key):
            det.set_settings(0, s)
    assert det.run([[5]]) and det.states == [0]  # refused changes left the channel as it was


def test_firmware_size_without_the_cross_compiler_prints_the_install_command(tmp_path):
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir()
    (bin_dir / "python3").symlink_to(sys.executable)
    out = subprocess.run(
        [str(bin_dir / "python3"), str(FIRMWARE / "size.py")],
        capture_output=True,
        text=True,
        env={**os.environ, "PATH": str(bin_dir)},
        timeout=60,
    )
    assert out.returncode == 2
    assert out.stdout.strip().endswith("apt-get install gcc-arm-none-eabi libnewlib-arm-none-eabi")
    assert len(out.stdout.splitlines()) == 1


@pytest.mark.skipif(shutil.which("arm-none-eabi-gcc") is None, reason="no arm-none-eabi-gcc here")
def test_firmware_size_reports_every_part_and_the_ram_per_channel():
    out = subprocess.run(
        [sys.executable, str(FIRMWARE / "size.py")], capture_output=True, text=True, timeout=300
    )
    assert out.returncode == 0, out.stdout + out.stderr
    assert "detector (pt_detect.c)" in out.stdout and "groups and sliders (pt_groups.c)" in out.stdout
    assert "RAM per channel: 20 B of detector state (pt_chan_t), within the 24 B goal" in out.stdout
    rows = {line[:46].strip(): line[46:].split() for line in out.stdout.splitlines()}
    flash, ram = (int(v) for v in rows["detector (pt_detect.c)"][:2])
    assert flash > 0 and ram == 0  # no static RAM: every byte of state is the caller's
    # the goal's figure is the three parts' own bytes plus every library helper they pull in, no less
    label = "detector + emitter + command parser together"
    together = rows[label] if label in rows else next(v for k, v in rows.items() if k.startswith(label))
    helpers = int(re.search(r"\((\d+) B of them\)", " ".join(together))[1])
    parts = sum(int(rows[f"{name} ({file})"][0]) for name, file in
                (("detector", "pt_detect.c"), ("emitter", "pt_emit.c"), ("command parser", "pt_cmd.c")))
    assert int(together[0]) == parts + helpers


@needs_cc
def test_the_readmes_example_compiles_against_an_exported_header(tmp_path):
    text = (FIRMWARE / "README.md").read_text()
    section = text.split("## The detector", 1)[1]
    example = section.split("```c\n", 1)[1].split("```", 1)[0]
    export_c_header(demo_profile("greenhouse"), tmp_path / "profile.h", "greenhouse.toml")
    (tmp_path / "example.c").write_text(example)
    built = subprocess.run(
        [
            "cc",
            *STRICT,
            f"-I{FIRMWARE}",
            f"-I{tmp_path}",
            "-c",
            str(tmp_path / "example.c"),
            "-o",
            str(tmp_path / "e.o"),
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert built.returncode == 0, built.stderr


def test_binding_settings_are_the_profile_keys_with_the_same_defaults():
    from dataclasses import asdict

    from devices.firmware import clib
    from processing.settings import SETTING_KEYS

    assert clib.SETTING_KEYS == SETTING_KEYS
    assert clib.Settings()._asdict() == asdict(ChannelSettings())


@needs_cc
def test_detector_sources_are_clean_under_the_stricter_warnings_firmware_builds_use(tmp_path):
    extra = [
        "-Wconversion",
        "-Wsign-conversion",
        "-Wshadow",
        "-Wcast-qual",
        "-Wstrict-prototypes",
        "-Wmissing-prototypes",
    ]
    for name in ("pt_detect.c", "pt_groups.c"):
        built = subprocess.run(
            ["cc", *STRICT, *extra, "-c", str(FIRMWARE / name), "-o", str(tmp_path / "x.o")],
            capture_output=True,
            text=True,
            timeout=120,
        )
        assert built.returncode == 0, built.stderr


def test_the_stack_column_is_the_deepest_chain_through_every_file():
    # A hand-worked graph: a (16) calls b (40) and c (8); b calls d (100, in another file) and a function
    # pointer; c calls d too. The deepest call of a: 16 + 40 + 100 = 156, through a callback.
    sys.path.insert(0, str(FIRMWARE))
    try:
        import size
    finally:
        sys.path.remove(str(FIRMWARE))
    frames = {"a": 16, "b": 40, "c": 8, "d": 100}
    calls = {"a": {"b", "c"}, "b": {"d", size.INDIRECT}, "c": {"d"}}
    assert size.deepest_stack(frames, calls, "a") == (156, True)
    assert size.deepest_stack(frames, calls, "c") == (108, False)
    with pytest.raises(ValueError, match="calls itself"):
        size.deepest_stack(frames, {"a": {"b"}, "b": {"a"}}, "a")


def test_the_parsers_stack_includes_the_emitter_it_calls():
    out = subprocess.run([sys.executable, str(FIRMWARE / "size.py")], capture_output=True, text=True,
                         timeout=300)
    if out.returncode == 2:
        pytest.skip("no cross compiler here")
    rows = {line[:46].strip(): line[46:].split() for line in out.stdout.splitlines()}
    parser = int(rows["command parser (pt_cmd.c)"][2].removesuffix("+cb"))
    emitter = int(rows["emitter (pt_emit.c)"][2].removesuffix("+cb"))
    assert parser > emitter and rows["command parser (pt_cmd.c)"][2].endswith("+cb")
