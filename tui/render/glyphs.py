"""How states and verdicts read: every one has a glyph and a word, so nothing depends on colour."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Label:
    glyph: str
    word: str
    role: str


# Keys are lower-case state names as the engine reports them; several spellings map to one label
# so the screen does not care which synonym the engine settles on.
_STATES: dict[str, Label] = {
    "idle": Label("·", "idle", "idle"),
    "released": Label("·", "idle", "idle"),
    "untouched": Label("·", "idle", "idle"),
    "confirming": Label("◐", "onset", "pending"),
    "releasing": Label("◑", "leave", "touched"),
    "touch_pending": Label("◐", "onset", "pending"),
    "pending_touch": Label("◐", "onset", "pending"),
    "pending": Label("◐", "onset", "pending"),
    "debounce": Label("◐", "onset", "pending"),
    "touched": Label("●", "TOUCH", "touched"),
    "touch": Label("●", "TOUCH", "touched"),
    "release_pending": Label("◑", "leave", "pending"),
    "pending_release": Label("◑", "leave", "pending"),
    "stuck": Label("!", "STUCK", "stuck"),
    "calibrating": Label("~", "settle", "dim"),
    "settling": Label("~", "settle", "dim"),
    "warmup": Label("~", "settle", "dim"),
    "disabled": Label("-", "off", "dim"),
    # before a channel may report a touch (processing.startup): its quiet second, then its direction
    "measuring": Label("~", "noise", "dim"),
    "learning": Label("?", "learn", "pending"),
}

_VERDICTS: dict[str, Label] = {
    "good": Label("✓", "good", "good"),
    "ok": Label("✓", "good", "good"),
    "pass": Label("✓", "good", "good"),
    "solid": Label("✓", "solid", "good"),
    "marginal": Label("~", "margin", "warn"),
    "weak": Label("✗", "weak", "bad"),
    "unmeasured": Label("?", "n/a", "dim"),
    "poor": Label("✗", "poor", "bad"),
    "bad": Label("✗", "poor", "bad"),
    "fail": Label("✗", "poor", "bad"),
}

UNKNOWN_VERDICT = Label("?", "n/a", "dim")


def state_label(state: object) -> Label:
    """The label of an engine state (enum or string); an unknown name is shown as its own word."""
    found = _STATES.get(state) if type(state) is str else None  # the screen's case: a known lower-case name
    if found is not None:
        return found
    key = str(getattr(state, "name", state)).lower()
    found = _STATES.get(key)
    if found is not None:
        return found
    return Label("?", key[:6] or "?", "dim")


def verdict_label(verdict: object | None) -> Label:
    if verdict is None:
        return UNKNOWN_VERDICT
    found = _VERDICTS.get(verdict) if type(verdict) is str else None
    if found is not None:
        return found
    key = str(getattr(verdict, "name", verdict)).lower()
    return _VERDICTS.get(key, Label("?", key[:5], "dim"))
