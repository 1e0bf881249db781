"""Detector test vectors: a plain text format, the reference run that writes their expectations, and the
same run through the C library's Python binding.

A vector (`tests/vectors/*.vec`) is the input of one board's library instance and what it must report:

    channels 3
    settings C POL T H N M SLOW FAST P X    one per channel: polarity (+/-) and the 8 settings in
                                            processing.settings.SETTING_KEYS order
    group MARGIN M0 M1 ...                  an exclusive group (switch margin, members)
    slider WHEEL RES P0 P1 ...              a slider (WHEEL 0) or wheel (1), resolution, pads
    frame R0 R1 ...                         one frame of readings
    rebaseline C | rebaseline *             re-baseline one channel or all before the next frame
    set C POL T H N M SLOW FAST P X         change a channel's settings live (polarity unchanged)
    polarity C POL                          set a channel's polarity (it re-baselines)
    = ...                                   the expected output, in order (below)

Expected lines: `= F touch C DELTA`, `= F release C HELD DELTA`, `= F stuck C HELD DELTA`,
`= F rebaselined C WAS` (F the 0-based frame), `= F group G CHANNEL|none`, `= F slider S POS|none`, then
`= end frames F hash H` (FNV-1a 64 over every frame's delta, 8 bytes little-endian two's complement, and
state byte per channel) and `= end baseline_fp B0 B1 ...`. The expectations come from
`processing.reference.PlainEngine` with `processing.groups.ExclusiveGroup` and `processing.slider.Slider`
(`reference_lines`); `tests/vectors/generate.py` writes the checked-in files. The C program
`tests/firmware/vector_runner.c` prints the same lines from the same input.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from processing.detections import GroupChange, Rebaselined, Release, SliderChange, StuckRelease, Touch
from processing.groups import ExclusiveGroup, GroupSpec
from processing.reference import PlainEngine
from processing.settings import SETTING_KEYS, ChannelSettings
from processing.slider import Slider, SliderSpec
from protocol.events import FrameBlock

HERE = Path(__file__).resolve().parent
FNV_OFFSET, FNV_PRIME, MASK64 = 0xCBF29CE484222325, 0x100000001B3, (1 << 64) - 1

Op = tuple  # ("frame", [r...]) | ("rebaseline", c | None) | ("set", c, ChannelSettings) | ("polarity", c, p)


@dataclass
class Scenario:
    settings: list[ChannelSettings]
    polarity: list[int]
    groups: list[GroupSpec] = field(default_factory=list)
    sliders: list[SliderSpec] = field(default_factory=list)
    ops: list[Op] = field(default_factory=list)
    comment: str = ""

    @property
    def channels(self) -> int:
        return len(self.settings)


def _sign(p: int) -> str:
    return "+" if p > 0 else "-"


def _settings_words(s: ChannelSettings) -> str:
    return " ".join(str(getattr(s, k)) for k in SETTING_KEYS)


def input_lines(scn: Scenario) -> list[str]:
    out = [f"# {line}" for line in scn.comment.splitlines()]
    out.append(f"channels {scn.channels}")
    for c, (s, p) in enumerate(zip(scn.settings, scn.polarity, strict=True)):
        out.append(f"settings {c} {_sign(p)} {_settings_words(s)}")
    out += [f"group {g.switch_margin_counts} {' '.join(map(str, g.members))}" for g in scn.groups]
    out += [f"slider {int(s.wheel)} {s.resolution} {' '.join(map(str, s.pads))}" for s in scn.sliders]
    for op in scn.ops:
        if op[0] == "frame":
            out.append("frame " + " ".join(map(str, op[1])))
        elif op[0] == "rebaseline":
            out.append(f"rebaseline {'*' if op[1] is None else op[1]}")
        elif op[0] == "set":
            out.append(f"set {op[1]} + {_settings_words(op[2])}")
        else:
            out.append(f"polarity {op[1]} {_sign(op[2])}")
    return out


def parse(lines: Iterable[str]) -> tuple[Scenario, list[str]]:
    """A vector's scenario and its expected lines."""
    scn = Scenario([], [])
    expected: list[str] = []
    pending: dict[int, tuple[int, ChannelSettings]] = {}
    for raw in lines:
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if line.startswith("="):
            expected.append(line)
            continue
        word, *rest = line.split()
        if word == "channels":
            continue
        if word in ("settings", "set"):
            c, pol = int(rest[0]), 1 if rest[1] == "+" else -1
            s = ChannelSettings(**dict(zip(SETTING_KEYS, map(int, rest[2:]), strict=True)))
            if word == "settings":
                pending[c] = (pol, s)
            else:
                scn.ops.append(("set", c, s))
        elif word == "group":
            scn.groups.append(GroupSpec(f"g{len(scn.groups)}", tuple(map(int, rest[1:])), int(rest[0])))
        elif word == "slider":
            scn.sliders.append(
                SliderSpec(f"s{len(scn.sliders)}", tuple(map(int, rest[2:])), rest[0] == "1", int(rest[1]))
            )
        elif word == "frame":
            scn.ops.append(("frame", [int(v) for v in rest]))
        elif word == "rebaseline":
            scn.ops.append(("rebaseline", None if rest[0] == "*" else int(rest[0])))
        elif word == "polarity":
            scn.ops.append(("polarity", int(rest[0]), 1 if rest[1] == "+" else -1))
        else:
            raise ValueError(f"unknown vector line: {line!r}")
    scn.settings = [pending[c][1] for c in sorted(pending)]
    scn.polarity = [pending[c][0] for c in sorted(pending)]
    return scn, expected


def fnv_frames(h: int, deltas: np.ndarray, states: np.ndarray) -> int:
    """Fold frames (rows) of deltas and states into an FNV-1a 64 hash, as vector_runner.c does."""
    rows = np.concatenate(
        [
            deltas.astype("<i8").view(np.uint8).reshape(len(deltas), -1, 8),
            states.astype(np.uint8).reshape(len(states), -1, 1),
        ],
        axis=2,
    )
    for byte in rows.reshape(-1).tolist():
        h = ((h ^ byte) * FNV_PRIME) & MASK64
    return h


def _blocks(scn: Scenario) -> Iterable[tuple[str, object]]:
    """Runs of consecutive frames as one ('block', array) item; other ops as they are."""
    run: list[list[int]] = []
    for op in scn.ops:
        if op[0] == "frame":
            run.append(op[1])
            continue
        if run:
            yield "block", np.array(run, np.int64)
            run = []
        yield op[0], op
    if run:
        yield "block", np.array(run, np.int64)


def _line(ev: object, frame: int) -> str:
    if isinstance(ev, Touch):
        return f"= {frame} touch {ev.channel} {ev.delta_counts}"
    if isinstance(ev, Release):
        return f"= {frame} release {ev.channel} {ev.held_frames} {ev.delta_counts}"
    if isinstance(ev, StuckRelease):
        return f"= {frame} stuck {ev.channel} {ev.held_frames} {ev.delta_counts}"
    if isinstance(ev, Rebaselined):
        return f"= {frame} rebaselined {ev.channel} {int(ev.was_touched)}"
    if isinstance(ev, GroupChange):
        return f"= {frame} group {ev.group[1:]} {'none' if ev.channel is None else ev.channel}"
    assert isinstance(ev, SliderChange)
    return f"= {frame} slider {ev.slider[1:]} {'none' if ev.position is None else ev.position}"


def reference_lines(scn: Scenario) -> list[str]:
    """What the library must print for `scn`, from padtune's Python reference (PlainEngine, groups, sliders:
    the order of processing.session.Session._run)."""
    eng = PlainEngine(scn.channels, scn.settings, scn.polarity)
    trackers = [*(ExclusiveGroup(g) for g in scn.groups), *(Slider(s) for s in scn.sliders)]
    out: list[str] = []
    frame, h = 0, FNV_OFFSET
    for kind, item in _blocks(scn):
        if kind == "block":
            r = item
            block = FrameBlock(
                np.arange(frame, frame + len(r), dtype=np.float64), np.arange(len(r)), r, frame
            )
            found = list(eng.process(block))
            for t in trackers:
                found.extend(t.update(frame, block.t_s, eng.last_deltas, eng.last_states))
            found.sort(key=lambda e: e.index)
            out += [_line(ev, ev.index) for ev in found]
            h = fnv_frames(h, eng.last_deltas, eng.last_states)
            frame += len(r)
        elif kind == "rebaseline":
            eng.rebaseline(item[1])
        elif kind == "set":
            eng.set_settings(item[1], item[2])
        else:
            eng.set_polarity(item[1], item[2])
    return [
        *out,
        f"= end frames {frame} hash {h:016x}",
        "= end baseline_fp " + " ".join(map(str, eng.baselines_fp)),
    ]


def firmware_lines(scn: Scenario) -> list[str]:
    """The same run through the compiled C library (devices.firmware.clib), printed the same way."""
    from devices.firmware import clib

    det = clib.FirmwareDetector(
        scn.settings,
        scn.polarity,
        [(g.members, g.switch_margin_counts) for g in scn.groups],
        [(s.pads, s.wheel, s.resolution) for s in scn.sliders],
    )
    out: list[str] = []
    frame, h = 0, FNV_OFFSET
    for kind, item in _blocks(scn):
        if kind == "block":
            for ev in det.run(item):
                out.append(_raw_line(ev, frame + ev.row))
            h = fnv_frames(h, det.last_deltas, det.last_states)
            frame += len(item)
        elif kind == "rebaseline":
            det.rebaseline(item[1])
        elif kind == "set":
            det.set_settings(item[1], item[2])
        else:
            det.set_polarity(item[1], item[2])
    return [
        *out,
        f"= end frames {frame} hash {h:016x}",
        "= end baseline_fp " + " ".join(map(str, det.baselines_fp)),
    ]


def _raw_line(ev: object, frame: int) -> str:
    from devices.firmware import clib

    none = lambda v: "none" if v is None else v  # noqa: E731
    k = ev.kind
    if k == clib.TOUCH:
        return f"= {frame} touch {ev.source} {ev.delta_counts}"
    if k == clib.RELEASE:
        return f"= {frame} release {ev.source} {ev.held_frames} {ev.delta_counts}"
    if k == clib.STUCK:
        return f"= {frame} stuck {ev.source} {ev.held_frames} {ev.delta_counts}"
    if k == clib.REBASELINED:
        return f"= {frame} rebaselined {ev.source} {ev.value}"
    if k == clib.GROUP:
        return f"= {frame} group {ev.source} {none(ev.value)}"
    return f"= {frame} slider {ev.source} {none(ev.value)}"


def vector_text(scn: Scenario) -> str:
    return "\n".join([*input_lines(scn), *reference_lines(scn)]) + "\n"


def vector_files() -> list[Path]:
    return sorted(HERE.glob("*.vec"))


def polarity_list(values: Sequence[int]) -> list[int]:
    return [1 if v > 0 else -1 for v in values]
