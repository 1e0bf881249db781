"""The link strip: where the data comes from, how well it arrives, and what is being kept."""

from __future__ import annotations

from rich.text import Text

from tui.render import Styles, pick
from tui.render.views import LinkView

_STATE_WORDS = {
    "connecting": ("…", "connecting", "warn"),
    "connected": ("●", "connected", "good"),
    "reconnected": ("●", "connected", "good"),
    "disconnected": ("✗", "DISCONNECTED", "bad"),
    "reconnecting": ("↻", "RECONNECTING", "bad"),
    "closed": ("■", "closed", "dim"),
}


def link_strip(view: LinkView, styles: Styles, compact: bool = False, width: int | None = None) -> Text:
    """One line; with `compact`, two: the connection, then the counters, the profile and the recording.

    With `width`, the link's reason for being down is cut to what fits beside the port and rate on
    the first line (the log has it whole), so the line never runs over.
    """
    glyph, word, role = _STATE_WORDS.get(view.state, ("?", view.state, "warn"))
    sep = Text(" │ ", style=pick(styles, "dim"))
    text = Text(no_wrap=True, overflow="ellipsis", end="")
    if view.paused:
        text.append("⏸ DISPLAY PAUSED", pick(styles, "warn"))
        text.append_text(sep)
    if view.silent_s is not None and role == "good":
        glyph, word, role = "●", f"connected, {view.silence} for {view.silent_s} s", "warn"
    text.append(f"{glyph} {word}", pick(styles, role))
    scale = f" │ readings x{view.scale}" if view.scale != 1 else ""
    if view.detail and role == "bad":
        rest = len(f" │ {view.port} {view.baud} Bd │ {view.fps:.0f} fps{scale}") + 3
        room = 40 if width is None else min(40, width - text.cell_len - rest)
        if room >= 8:
            detail = view.detail if len(view.detail) <= room else view.detail[:room - 1] + "…"
            text.append(f" ({detail})", pick(styles, role))
    text.append_text(sep)
    text.append(view.port, pick(styles, "name"))
    text.append(f" {view.baud} Bd")
    if view.board and not compact:
        text.append(f" {view.board}", pick(styles, "dim"))
    text.append_text(sep)
    text.append(f"{view.fps:.0f} fps")
    if scale:  # the board prints decimals: what is shown is the printed value times the scale
        text.append_text(sep)
        text.append(f"readings x{view.scale}", pick(styles, "name"))
    text.append("\n" if compact else " ")
    _counters(text, view, styles, compact)
    text.append_text(sep)
    # The profile before the recording: at 80 cells a long recording name is what gets cut, never
    # the unsaved mark.
    text.append("profile ")
    text.append(view.profile_name, pick(styles, "name"))
    if view.unsaved:
        text.append(" *unsaved", pick(styles, "warn"))
    text.append_text(sep)
    if view.recording:
        text.append("⏺ REC ", pick(styles, "bad"))
        text.append(view.recording if not compact else view.recording.rsplit("/", 1)[-1])
    elif view.recording_error:
        text.append("✗ REC FAILED", pick(styles, "bad"))
        text.append(f" ({_why(view.recording_error)})", pick(styles, "bad"))
    else:
        text.append("rec off", pick(styles, "dim"))
    return text


_SHORT_CAUSES = {"No space left on device": "disk full", "Disk quota exceeded": "over quota",
                 "Read-only file system": "read-only disk", "Input/output error": "disk error"}


def _why(error: str) -> str:
    """The cause in a failed recording's message (`... failed (No space left on device); ...`)."""
    start, end = error.find("("), error.find(")")
    reason = error[start + 1:end] if 0 <= start < end else error
    reason = _SHORT_CAUSES.get(reason, reason)  # the log and the notification keep the whole message
    return reason if len(reason) <= 30 else reason[:29] + "…"


def _counters(text: Text, view: LinkView, styles: Styles, compact: bool) -> None:
    """Every counter when there is room; in the compact strip only those above zero (or a word that
    says there were none), so the profile and the recording keep their room at 80 cells."""
    counters = [("lost", view.lost), ("garbled", view.garbled), ("bad checksum", view.bad_checksum),
                ("resets", view.resets)]
    if view.overflow:
        counters.append(("overflow", view.overflow))
    if compact:
        counters = [(name, count) for name, count in counters if count]
        if not counters:
            text.append("no link errors", pick(styles, "dim"))
            return
    for i, (name, count) in enumerate(counters):
        text.append(f"{' ' if i else ''}{name} ")
        text.append(str(count), pick(styles, "warn" if count else "dim"))
