"""Profile export for firmware: a C header (the firmware library's own types from devices/firmware/pt_types.h
filled in: settings per channel, groups, sliders) and JSON.

Both files are written atomically (no half-written header ever reaches a firmware build).
"""

from __future__ import annotations

import datetime as dt
import json
import os
import re
from dataclasses import asdict
from typing import Any

from processing.atomic import atomic_write_bytes
from processing.fixed import FRAC_BITS
from processing.profile import FORMAT_VERSION, Profile
from processing.settings import SETTING_KEYS

ALGORITHM_VERSION = 1


def _stamp(now: dt.datetime | None) -> str:
    return (now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%dT%H:%M:%SZ")


def _c_comment(text: str) -> str:
    """Free text made safe inside a one-line C block comment (no comment marks, no control characters)."""
    flat = "".join(ch if ch.isprintable() else " " for ch in text)
    return flat.replace("*/", "* /").replace("/*", "/ *")


def _polarity(profile: Profile, channel: int) -> int:
    return profile.polarity[channel] if profile.polarity else 1


# The version of devices/firmware/pt_types.h the header is written for: its struct and field names are
# what the header fills in, so a header and a library that disagree do not compile together.
PT_TYPES_VERSION = 1


def c_header_text(profile: Profile, source: str, now: dt.datetime | None = None) -> str:
    """The header's text. `source` names the profile file in the comment.

    It fills the firmware library's own types (`pt_settings_t`, `pt_group_t`, `pt_slider_t` from
    devices/firmware/pt_types.h) with designated initialisers, so a renamed or missing field stops the
    firmware build, and it refuses another PT_TYPES_VERSION with #error."""
    board = profile.board or "unnamed board"
    names = profile.names
    lines = [
        "/* padtune profile export: generated, do not edit; change the profile and export again.",
        f" * Profile: {_c_comment(source)} (board: {_c_comment(board)}), exported {_stamp(now)}.",
        f" * Detection algorithm version {ALGORITHM_VERSION} (processing/ALGORITHM.md), padtune firmware "
        "library types (devices/firmware/pt_types.h). Include it in one .c file. */",
        "#ifndef PADTUNE_PROFILE_H",
        "#define PADTUNE_PROFILE_H",
        "",
        "#include <stdint.h>",
        "",
        '#include "pt_types.h"',
        "",
        f"#if !defined(PT_TYPES_VERSION) || PT_TYPES_VERSION != {PT_TYPES_VERSION}",
        f'#error "exported for pt_types.h version {PT_TYPES_VERSION}: use the padtune firmware library '
        'of the padtune that exported it"',
        "#endif",
        f"#if PT_ALGORITHM_VERSION != {ALGORITHM_VERSION} || PT_FRAC_BITS != {FRAC_BITS}",
        f'#error "exported for detection algorithm version {ALGORITHM_VERSION} with {FRAC_BITS} fractional '
        'bits"',
        "#endif",
        "",
        f"#define PADTUNE_PROFILE_FORMAT {FORMAT_VERSION}",
        f"#define PADTUNE_ALGORITHM_VERSION {ALGORITHM_VERSION}",
        f"#define PADTUNE_FRAC_BITS {FRAC_BITS}",
        f"#define PADTUNE_CHANNELS {profile.channels}",
        f"#define PADTUNE_GROUPS {len(profile.groups)}",
        f"#define PADTUNE_SLIDERS {len(profile.sliders)}",
        *_board_defines(profile),
        "",
        "/* Per channel, in flash. A board that takes live `set` commands copies this table to RAM at start",
        " * and gives the detector the copy (pt_detect_init). */",
        "static const pt_settings_t padtune_settings[PADTUNE_CHANNELS] = {",
    ]
    for c in range(profile.channels):
        s = asdict(profile.settings_for(c))
        fields = ", ".join(f".{k} = {s[k]}" for k in SETTING_KEYS)
        lines.append(f"    /* {c} {names[c]} */ {{ {fields}, .polarity = {_polarity(profile, c)} }},")
    lines.append("};")
    quoted = ", ".join(f'"{n}"' for n in names)
    lines += ["", f"static const char *const padtune_channel_names[PADTUNE_CHANNELS] = {{ {quoted} }};"]
    lines += _c_lists(profile)
    lines += ["", "#endif /* PADTUNE_PROFILE_H */", ""]
    return "\n".join(lines)


# What pt_info_t's `board` may hold (the info line's word: no spaces, no quotes to escape).
_BOARD_WORD = re.compile(r"[A-Za-z0-9_.-]{1,32}")
_NOT_WORD = re.compile(r"[^A-Za-z0-9_.-]+")


def _board_defines(profile: Profile) -> list[str]:
    """The board's name and frame rate for the firmware's info line (pt_info_t's `board` and
    `rate_mhz`), and array sizes that are never zero for the groups' and sliders' state (C99 has no
    empty arrays: a board without groups declares PADTUNE_GROUP_SLOTS of them, 1)."""
    word = profile.board if _BOARD_WORD.fullmatch(profile.board) else \
        (_NOT_WORD.sub("-", profile.board).strip("-")[:32] or "board")
    note = "" if word == profile.board else " /* the profile's board id made one info-line word */"
    out = [f'#define PADTUNE_BOARD "{word}"{note}']
    rate = profile.rate_hz
    if rate is not None and 0 < rate < 4_294_967:  # millihertz in 32 bits
        out.append(f"#define PADTUNE_RATE_MHZ {round(rate * 1000)}u /* frames per second x 1000 */")
    else:
        out.append("#define PADTUNE_RATE_MHZ 0u /* rate unknown when saved: the info line leaves it out */")
    out += ["#define PADTUNE_GROUP_SLOTS (PADTUNE_GROUPS > 0 ? PADTUNE_GROUPS : 1)",
            "#define PADTUNE_SLIDER_SLOTS (PADTUNE_SLIDERS > 0 ? PADTUNE_SLIDERS : 1)"]
    return out


def _c_lists(profile: Profile) -> list[str]:
    """Groups and sliders as pt_group_t / pt_slider_t tables (a null pointer when there are none: C99
    has no empty arrays, and pt_groups_frame with a count of 0 never reads the table)."""
    out: list[str] = [""]
    if profile.groups:
        for i, g in enumerate(profile.groups):
            members = ", ".join(str(m) for m in g.members)
            out.append(f"static const uint16_t padtune_group{i}_members[] = {{ {members} }}; /* {g.name} */")
        out.append("static const pt_group_t padtune_groups[PADTUNE_GROUPS] = {")
        for i, g in enumerate(profile.groups):
            out.append(f"    {{ .members = padtune_group{i}_members, .count = {len(g.members)}, "
                       f".switch_margin_counts = {g.switch_margin_counts} }},")
        out.append("};")
        quoted = ", ".join(f'"{g.name}"' for g in profile.groups)
        out.append(f"static const char *const padtune_group_names[PADTUNE_GROUPS] = {{ {quoted} }};")
    else:
        out += ["#define padtune_groups ((const pt_group_t *)0)",
                "#define padtune_group_names ((const char *const *)0)"]
    out.append("")
    if profile.sliders:
        for i, s in enumerate(profile.sliders):
            pads = ", ".join(str(p) for p in s.pads)
            out.append(f"static const uint16_t padtune_slider{i}_pads[] = {{ {pads} }}; /* {s.name} */")
        out.append("static const pt_slider_t padtune_sliders[PADTUNE_SLIDERS] = {")
        for i, s in enumerate(profile.sliders):
            out.append(f"    {{ .pads = padtune_slider{i}_pads, .count = {len(s.pads)}, "
                       f".resolution = {s.resolution}, .wheel = {int(s.wheel)} }},")
        out.append("};")
        quoted = ", ".join(f'"{s.name}"' for s in profile.sliders)
        out.append(f"static const char *const padtune_slider_names[PADTUNE_SLIDERS] = {{ {quoted} }};")
    else:
        out += ["#define padtune_sliders ((const pt_slider_t *)0)",
                "#define padtune_slider_names ((const char *const *)0)"]
    return out


def json_document(profile: Profile, source: str, now: dt.datetime | None = None) -> dict[str, Any]:
    names = profile.names
    return {
        "format_version": FORMAT_VERSION,
        "algorithm_version": ALGORITHM_VERSION,
        "frac_bits": FRAC_BITS,
        "profile": source,
        "exported_at": _stamp(now),
        "board": profile.board,
        "rate_hz": profile.rate_hz,
        # Each channel's own limits ([channel.NAME.limits] over [limits]) and whether its settings were
        # measured (`measured = false` in the profile: written by `tune --partial` from defaults).
        "channels": [{"index": c, "name": names[c], "polarity": _polarity(profile, c),
                      **asdict(profile.settings_for(c)), "limits": asdict(profile.limits_for(c)),
                      "measured": c not in profile.unmeasured()} for c in range(profile.channels)],
        "groups": [{"name": g.name, "members": list(g.members), "member_names": [names[m] for m in g.members],
                    "switch_margin_counts": g.switch_margin_counts} for g in profile.groups],
        "sliders": [{"name": s.name, "pads": list(s.pads), "pad_names": [names[p] for p in s.pads],
                     "wheel": s.wheel, "resolution": s.resolution} for s in profile.sliders],
        "limits": asdict(profile.limits),
    }


def export_c_header(profile: Profile, path: str | os.PathLike[str], source: str = "",
                    now: dt.datetime | None = None) -> None:
    text = c_header_text(profile, source or "(unsaved profile)", now)
    atomic_write_bytes(path, text.encode("utf-8"), keep_backup=False)


def json_text(profile: Profile, source: str, now: dt.datetime | None = None) -> str:
    doc = json_document(profile, source or "(unsaved profile)", now)
    return json.dumps(doc, indent=2, allow_nan=False) + "\n"  # strict JSON: limits are finite (validated)


def export_json(profile: Profile, path: str | os.PathLike[str], source: str = "",
                now: dt.datetime | None = None) -> None:
    atomic_write_bytes(path, json_text(profile, source, now).encode("utf-8"), keep_backup=False)
