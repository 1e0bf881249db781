"""The exported header gives the firmware its info line: the board's name and frame rate
(`PADTUNE_BOARD`, `PADTUNE_RATE_MHZ`) next to the channel names, so a board built from a profile
introduces itself as the board the profile was tuned on. Checked end to end: the header compiled with
the emitter into a program whose info line padtune's own decoder reads back."""

from __future__ import annotations

import subprocess
from dataclasses import replace
from pathlib import Path

from processing.export import c_header_text, export_c_header
from protocol.decoder import Decoder
from protocol.events import BoardInfo
from tests.firmware.detect_fixtures import FIRMWARE, STRICT, needs_cc
from tui.demo_profile import demo_profile

MAIN = r"""
#include <stdio.h>
#include "pt_emit.h"
#include "profile.h"

static void put(void *ctx, char c) { (void)ctx; putchar((unsigned char)c); }

int main(void)
{
    pt_emit_t e;
    pt_info_t info = {0};
    info.board = PADTUNE_BOARD;
    info.channels = PADTUNE_CHANNELS;
    info.rate_mhz = PADTUNE_RATE_MHZ;
    info.names = padtune_channel_names;
    info.settings = 1;
    pt_emit_init(&e, put, NULL, 1);
    pt_emit_info(&e, &info, 1);
    return 0;
}
"""


def _profile(board: str, rate_hz: float | None):
    return replace(demo_profile("greenhouse"), board=board, rate_hz=rate_hz)


@needs_cc
def test_a_board_built_from_the_export_names_itself_and_its_rate(tmp_path: Path) -> None:
    export_c_header(_profile("greenhouse-panel", 62.5), tmp_path / "profile.h", "greenhouse.toml")
    (tmp_path / "main.c").write_text(MAIN)
    subprocess.run(["cc", *STRICT, f"-I{FIRMWARE}", f"-I{tmp_path}", str(FIRMWARE / "pt_emit.c"),
                    str(tmp_path / "main.c"), "-o", str(tmp_path / "m")], check=True, timeout=120)
    line = subprocess.run([str(tmp_path / "m")], capture_output=True, check=True, timeout=30).stdout
    info = next(e for e in Decoder().feed(line, 0.0) if isinstance(e, BoardInfo))
    assert info.board == "greenhouse-panel" and info.rate_hz == 62.5 and info.channels == 9
    assert info.names == demo_profile("greenhouse").names and info.fields["settings"] == "1"


def test_a_name_the_info_line_cannot_carry_is_made_one_word_and_an_unknown_rate_is_zero() -> None:
    text = c_header_text(_profile("greenhouse panel", None), "p.toml")  # a space: not one word
    assert '#define PADTUNE_BOARD "greenhouse-panel"' in text and "#define PADTUNE_RATE_MHZ 0u" in text
    text = c_header_text(_profile("gh.2", 1000.0), "p.toml")
    assert '#define PADTUNE_BOARD "gh.2"' in text and "#define PADTUNE_RATE_MHZ 1000000u" in text
    assert '#define PADTUNE_BOARD "board"' in c_header_text(_profile('"*/', None), "p.toml")


@needs_cc
def test_a_profile_without_groups_or_sliders_declares_one_state_slot_each(tmp_path: Path) -> None:
    # C99 has no empty arrays: `pt_group_state_t gs[PADTUNE_GROUPS]` with no groups fails -pedantic.
    plain = replace(demo_profile("greenhouse"), groups=(), sliders=())
    export_c_header(plain, tmp_path / "profile.h", "p.toml")
    (tmp_path / "main.c").write_text(
        '#include "pt_groups.h"\n#include "profile.h"\n'
        "static pt_group_state_t gs[PADTUNE_GROUP_SLOTS];\n"
        "static pt_slider_state_t ss[PADTUNE_SLIDER_SLOTS];\n"
        "int main(void) { pt_groups_init(gs, PADTUNE_GROUPS); pt_sliders_init(ss, PADTUNE_SLIDERS); "
        "return (int)(sizeof gs / sizeof gs[0]) - 1; }\n")
    subprocess.run(["cc", *STRICT, f"-I{FIRMWARE}", f"-I{tmp_path}", str(FIRMWARE / "pt_groups.c"),
                    str(FIRMWARE / "pt_detect.c"), str(tmp_path / "main.c"), "-o", str(tmp_path / "m")],
                   check=True, timeout=120)
    assert subprocess.run([str(tmp_path / "m")], timeout=30).returncode == 0
