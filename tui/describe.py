"""Event log lines for detection and link events; pure, shared with the headless output."""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text

from processing.detections import (
    DetectionEvent,
    GroupChange,
    Rebaselined,
    Release,
    SliderChange,
    StuckRelease,
    Touch,
)
from processing.twin import TwinMismatch
from protocol.events import BoardChanged, BoardInfo, Event, FaultKind, LinkFault, LinkStatus, Note
from tui.words import plural


def _name(names: Sequence[str], channel: int | None) -> str:
    if channel is None:
        return "none"
    return names[channel] if 0 <= channel < len(names) else f"ch{channel}"


def describe_detection(det: DetectionEvent | TwinMismatch, names: Sequence[str]) -> Text | None:
    """One line for a detection event (or a twin check's report); slider moves are not logged (only
    touch and release)."""
    if isinstance(det, Touch):
        return Text(f"● {_name(names, det.channel)} touch (delta {det.delta_counts})")
    if isinstance(det, StuckRelease):
        return Text(f"! {_name(names, det.channel)} held {det.held_s:.1f} s: released as stuck, re-baselined")
    if isinstance(det, Release):
        return Text(f"· {_name(names, det.channel)} release after {det.held_s:.2f} s")
    if isinstance(det, Rebaselined):
        return Text(f"~ {_name(names, det.channel)} re-baselined")
    if isinstance(det, GroupChange):
        if det.channel is None:
            return Text(f"group {det.group}: none touched")
        return Text(f"group {det.group}: {_name(names, det.channel)} wins")
    if isinstance(det, SliderChange):
        if det.position is None:
            return Text(f"slider {det.slider} released")
        return None
    if isinstance(det, TwinMismatch):
        return Text(f"≠ {det.describe(_name(names, det.channel))}")
    return None


def describe_event(ev: Event) -> Text | None:
    if isinstance(ev, Note):
        return Text(f"# board: {ev.text}")
    if isinstance(ev, LinkFault):
        detail = f" ({ev.detail})" if ev.detail else ""
        if ev.kind == FaultKind.SILENT:  # its count is seconds, which the detail says
            return Text(f"⚠ link: silent{detail}")
        return Text(f"⚠ link: {ev.kind.value} ×{ev.count}{detail}")
    if isinstance(ev, LinkStatus):
        detail = f": {ev.detail}" if ev.detail else ""
        return Text(f"⇄ link {ev.state.value} {ev.port}{detail}")
    if isinstance(ev, BoardChanged):
        return Text(f"⚠ board changed: {ev.old_channels} → {ev.channels} channels")
    if isinstance(ev, BoardInfo):
        parts = [f"board {ev.board or '?'}"]
        if ev.channels:
            parts.append(plural(ev.channels, "channel"))
        if ev.rate_hz:
            parts.append(f"{ev.rate_hz:g} Hz")
        if ev.fw:
            parts.append(f"fw {ev.fw}")
        return Text("ⓘ " + ", ".join(parts))
    return None
