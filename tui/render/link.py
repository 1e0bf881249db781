"""The link strip: where the data comes from, how well it arrives, and what is being kept.

Every line is fitted to the width it is given: the state, baud rate, frame rate, link errors, the twin
check (when the board sends its own key states), the unsaved mark and the recording state always stay
whole; the names (port, board, profile, recording file) give way, cut in the middle (a by-id path's end
says which adapter, a `sim://` URL's start which board), and a down link's reason is cut at its end
(the log has it whole).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from rich.text import Text

from tui.render import Styles, pick
from tui.render.views import LinkView
from tui.words import ELLIPSIS, middle, plural

_STATE_WORDS = {
    "connecting": ("…", "connecting", "warn"),
    "connected": ("●", "connected", "good"),
    "reconnected": ("●", "connected", "good"),
    "disconnected": ("✗", "DISCONNECTED", "bad"),
    "reconnecting": ("↻", "RECONNECTING", "bad"),
    "closed": ("■", "closed", "dim"),
}
NAME_MIN_CELLS = 12  # names are cut to this first (the head and the tail still tell it apart) ...
LAST_RESORT_CELLS = 4  # ... and further only when the whole parts would not fit otherwise
REASON_MIN_CELLS = 10  # a down link's reason cut shorter than this says nothing: left out instead
REASON_MAX_CELLS = 40
SEP = " │ "


@dataclass(slots=True)
class _Part:
    """One run of the strip: `least` > 0 marks a name that may be cut down to that many cells
    (`tail`: cut at its end instead of its middle; `optional`: left out when it cannot get `least`)."""

    text: str
    role: str | None = None
    least: int = 0
    tail: bool = False
    optional: bool = False
    around: tuple[str, str] = ("", "")  # stays with the text: brackets around a reason

    def __len__(self) -> int:
        return len(self.around[0]) + len(self.text) + len(self.around[1])

    def cut(self, cells: int) -> None:
        if self.tail:
            self.text = self.text if len(self.text) <= cells else self.text[:cells - 1] + ELLIPSIS
        else:
            self.text = middle(self.text, cells)


def fit(parts: list[_Part], width: int | None) -> list[_Part]:
    """Cut the names of one line until it fits `width` (the longest name first, never below its
    `least`); optional parts that still do not fit are left out. Whole parts are never touched."""
    if width is None:
        return parts
    parts = [p for p in parts if p.text]

    def over() -> int:
        return sum(len(p) for p in parts) - width

    def shrink(floor: Callable[[_Part], int]) -> None:
        while over() > 0:
            names = [p for p in parts if p.least and len(p.text) > floor(p)]
            if not names:
                return
            longest = max(names, key=lambda p: len(p.text))
            others = [len(p.text) for p in names if p is not longest]
            # down to the next longest name (they then shrink together), its floor, or just enough
            target = max(floor(longest), len(longest.text) - over(), max(others, default=0))
            longest.cut(target if target < len(longest.text) else len(longest.text) - 1)

    shrink(lambda p: p.least)
    if over() > 0:
        parts = [p for p in parts if not p.optional]
    shrink(lambda p: min(p.least, LAST_RESORT_CELLS))
    return parts


def _text(parts: list[_Part], styles: Styles, text: Text | None = None) -> Text:
    text = text if text is not None else Text(no_wrap=True, overflow="ellipsis", end="")
    for p in parts:
        text.append(p.around[0] + p.text + p.around[1], pick(styles, p.role) if p.role else None)
    return text


def link_strip(view: LinkView, styles: Styles, compact: bool = False, width: int | None = None) -> Text:
    """One line; with `compact`, two: the connection, then the counters, the profile and the recording.
    With `width`, each line is fitted to it (see the module's docstring)."""
    first = _connection(view, compact)
    second = _keeping(view, compact)
    if compact:
        text = _text(fit(first, width), styles)
        text.append("\n")
        return _text(fit(second, width), styles, text)
    return _text(fit([*first, _Part(" "), *second], width), styles)


def _connection(view: LinkView, compact: bool) -> list[_Part]:
    glyph, word, role = _STATE_WORDS.get(view.state, ("?", view.state, "warn"))
    parts: list[_Part] = []
    if view.paused:
        parts += [_Part("⏸ DISPLAY PAUSED", "warn"), _Part(SEP, "dim")]
    if view.silent_s is not None and role == "good":
        glyph, word, role = "●", f"connected, {view.silence} for {view.silent_s} s", "warn"
    parts.append(_Part(f"{glyph} {word}", role))
    if view.detail and role == "bad":
        reason = view.detail[:REASON_MAX_CELLS - 1] + ELLIPSIS if len(view.detail) > REASON_MAX_CELLS \
            else view.detail
        parts.append(_Part(reason, role, REASON_MIN_CELLS, tail=True, optional=True, around=(" (", ")")))
    parts += [_Part(SEP, "dim"), _Part(view.port, "name", NAME_MIN_CELLS), _Part(f" {view.baud} Bd")]
    if view.board and not compact:
        parts += [_Part(" "), _Part(view.board, "dim", NAME_MIN_CELLS)]
    parts += [_Part(SEP, "dim"), _Part(f"{view.fps:.0f} fps")]
    if view.scale != 1:  # the board prints decimals: what is shown is the printed value times the scale
        parts += [_Part(SEP, "dim"), _Part(f"readings x{view.scale}", "name")]
    return parts


def _keeping(view: LinkView, compact: bool) -> list[_Part]:
    parts = _counters(view, compact)
    if view.twin is not None:  # the board sends its own key states: does it agree with padtune?
        parts.append(_Part(SEP, "dim"))
        parts.append(_Part(f"twin ≠ {plural(view.twin, 'frame')}", "bad") if view.twin
                     else _Part("twin agrees", "good"))
    # The profile before the recording; both names give way before the unsaved mark or the state.
    parts += [_Part(SEP, "dim"), _Part("profile "), _Part(view.profile_name, "name", NAME_MIN_CELLS)]
    if view.unsaved:
        parts.append(_Part(" *unsaved", "warn"))
    if view.saving:
        parts.append(_Part(" saving…", "dim"))
    parts.append(_Part(SEP, "dim"))
    if view.recording:
        name = view.recording.rsplit("/", 1)[-1] if compact else view.recording
        parts += [_Part("⏺ REC ", "bad"), _Part(name, None, NAME_MIN_CELLS)]
    elif view.recording_error:
        parts += [_Part("✗ REC FAILED", "bad"), _Part(f" ({_why(view.recording_error)})", "bad")]
    else:
        parts.append(_Part("rec off", "dim"))
    return parts


_SHORT_CAUSES = {"No space left on device": "disk full", "Disk quota exceeded": "over quota",
                 "Read-only file system": "read-only disk", "Input/output error": "disk error"}


def _why(error: str) -> str:
    """The cause in a failed recording's message (`... failed (No space left on device); ...`)."""
    start, end = error.find("("), error.find(")")
    reason = error[start + 1:end] if 0 <= start < end else error
    reason = _SHORT_CAUSES.get(reason, reason)  # the log and the notification keep the whole message
    return reason if len(reason) <= 30 else reason[:29] + ELLIPSIS


def _counters(view: LinkView, compact: bool) -> list[_Part]:
    """Every counter when there is room; in the compact strip only those above zero (or a word that
    says there were none), so the profile and the recording keep their room at 80 cells."""
    counters = [("lost", view.lost), ("garbled", view.garbled), ("bad checksum", view.bad_checksum),
                ("resets", view.resets)]
    if view.overflow:
        counters.append(("overflow", view.overflow))
    if compact:
        counters = [(name, count) for name, count in counters if count]
        if not counters:
            return [_Part("no link errors", "dim")]
    parts: list[_Part] = []
    for i, (name, count) in enumerate(counters):
        parts += [_Part(f"{' ' if i else ''}{name} "), _Part(str(count), "warn" if count else "dim")]
    return parts
