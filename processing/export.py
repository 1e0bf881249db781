"""Profile export for firmware: a C header (one struct initialiser per channel, groups, sliders) and JSON.

Both files are written atomically (no half-written header ever reaches a firmware build).
"""

from __future__ import annotations

import datetime as dt
import json
import os
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


def c_header_text(profile: Profile, source: str, now: dt.datetime | None = None) -> str:
    """The header's text. `source` names the profile file in the comment."""
    board = profile.board or "unnamed board"
    lines = [
        "/* padtune profile export: generated, do not edit; change the profile and export again.",
        f" * Profile: {_c_comment(source)} (board: {_c_comment(board)}), exported {_stamp(now)}.",
        f" * Detection algorithm version {ALGORITHM_VERSION} (padtune processing/ALGORITHM.md). */",
        "#ifndef PADTUNE_PROFILE_H",
        "#define PADTUNE_PROFILE_H",
        "",
        "#include <stdint.h>",
        "",
        f"#define PADTUNE_PROFILE_FORMAT {FORMAT_VERSION}",
        f"#define PADTUNE_ALGORITHM_VERSION {ALGORITHM_VERSION}",
        f"#define PADTUNE_FRAC_BITS {FRAC_BITS}",
        f"#define PADTUNE_CHANNELS {profile.channels}",
        f"#define PADTUNE_GROUPS {len(profile.groups)}",
        f"#define PADTUNE_SLIDERS {len(profile.sliders)}",
        "",
        "typedef struct {",
        "    const char *name;",
        "    int8_t polarity;",
        *[f"    int32_t {key};" for key in SETTING_KEYS],
        "} padtune_channel_t;",
        "",
        "static const padtune_channel_t padtune_channels[PADTUNE_CHANNELS] = {",
    ]
    for c in range(profile.channels):
        s = asdict(profile.settings_for(c))
        fields = ", ".join(f".{k} = {s[k]}" for k in SETTING_KEYS)
        head = f'.name = "{profile.names[c]}", .polarity = {_polarity(profile, c)}'
        lines.append(f"    /* {c} */ {{ {head}, {fields} }},")
    lines.append("};")
    lines += _c_lists(profile)
    lines += ["", "#endif /* PADTUNE_PROFILE_H */", ""]
    return "\n".join(lines)


def _c_lists(profile: Profile) -> list[str]:
    out: list[str] = []
    if profile.groups:
        out += ["", "typedef struct { const char *name; const uint16_t *members; uint16_t count; "
                "int32_t switch_margin_counts; } padtune_group_t;", ""]
        for i, g in enumerate(profile.groups):
            members = ", ".join(str(m) for m in g.members)
            out.append(f"static const uint16_t padtune_group{i}_members[] = {{ {members} }}; /* {g.name} */")
        out.append("static const padtune_group_t padtune_groups[PADTUNE_GROUPS] = {")
        for i, g in enumerate(profile.groups):
            row = f'"{g.name}", padtune_group{i}_members, {len(g.members)}, {g.switch_margin_counts}'
            out.append(f"    {{ {row} }},")
        out.append("};")
    if profile.sliders:
        out += ["", "typedef struct { const char *name; const uint16_t *pads; uint16_t count; uint8_t wheel; "
                "int32_t resolution; } padtune_slider_t;", ""]
        for i, s in enumerate(profile.sliders):
            pads = ", ".join(str(p) for p in s.pads)
            out.append(f"static const uint16_t padtune_slider{i}_pads[] = {{ {pads} }}; /* {s.name} */")
        out.append("static const padtune_slider_t padtune_sliders[PADTUNE_SLIDERS] = {")
        for i, s in enumerate(profile.sliders):
            row = f'"{s.name}", padtune_slider{i}_pads, {len(s.pads)}, {int(s.wheel)}, {s.resolution}'
            out.append(f"    {{ {row} }},")
        out.append("};")
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
        "channels": [{"index": c, "name": names[c], "polarity": _polarity(profile, c),
                      **asdict(profile.settings_for(c))} for c in range(profile.channels)],
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


def export_json(profile: Profile, path: str | os.PathLike[str], source: str = "",
                now: dt.datetime | None = None) -> None:
    doc = json_document(profile, source or "(unsaved profile)", now)
    text = json.dumps(doc, indent=2, allow_nan=False) + "\n"  # strict JSON: limits are finite (validated)
    atomic_write_bytes(path, text.encode("utf-8"), keep_backup=False)
