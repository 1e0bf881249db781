"""The help text, built from the app's key bindings (so it cannot drift from them), and the cautions."""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from rich.table import Table
from rich.text import Text

SAFETY_CAUTIONS: tuple[str, ...] = (
    "Boards may be mains-powered. Never connect this computer's USB port to a board whose low-voltage "
    "side is not isolated from the mains: use a USB isolator or an isolated serial adapter, or power the "
    "board from an isolated bench supply while tuning.",
    "Touch keys are not safety controls. A stop key on a touch panel does not replace a mechanical "
    "emergency stop, a disconnect or an interlock where one is required.",
    "Defer to local electrical codes, the appliance safety standards that apply to your product, and "
    "licensed practice. padtune helps you tune sensing; it does not make a product safe.",
)


# Textual's key names -> what is printed on the key (or the symbol typed).
_KEY_LABELS = {
    "plus": "+", "minus": "-", "question_mark": "?", "greater_than_sign": ">", "less_than_sign": "<",
    "equals_sign": "=", "full_stop": ".", "comma": ",", "slash": "/", "left_square_bracket": "[",
    "right_square_bracket": "]", "space": "Space", "enter": "Enter", "escape": "Esc", "tab": "Tab",
    "backspace": "Backspace", "delete": "Del", "insert": "Ins", "home": "Home", "end": "End",
    "pageup": "PgUp", "pagedown": "PgDn", "up": "↑", "down": "↓", "left": "←", "right": "→",
}
_MODIFIERS = {"ctrl": "Ctrl", "shift": "Shift", "alt": "Alt", "meta": "Meta", "super": "Super"}


def key_label(key: str) -> str:
    """One Textual key name as a user reads it: `pagedown` -> `PgDn`, `shift+tab` -> `Shift+Tab`."""
    *mods, name = key.strip().split("+") if key.strip() != "+" else ["+"]
    if name in _KEY_LABELS:
        label = _KEY_LABELS[name]
    elif len(name) == 1:
        label = name.upper() if mods else name  # Ctrl+S is the key; a bare S is a capital
    elif name[:1] == "f" and name[1:].isdigit():
        label = name.upper()
    else:
        label = name.replace("_", " ").title()
    return "+".join([*(_MODIFIERS.get(m, m.title()) for m in mods), label])


def key_display(keys: str) -> str:
    """`ctrl+s,pagedown` -> `Ctrl+S / PgDn`: every key of a binding, as the user reads it."""
    return " / ".join(key_label(k) for k in keys.split(","))


def help_tables(rows: Iterable[tuple[str, str, str]]) -> list[Table]:
    """One table per section from `(section, keys, description)` rows, in the order first seen."""
    sections: dict[str, list[tuple[str, str]]] = {}
    for section, keys, description in rows:
        sections.setdefault(section, []).append((keys, description))
    tables = []
    for section, entries in sections.items():
        table = Table(title=section, title_justify="left", title_style="bold underline", show_header=False,
                      box=None, pad_edge=False, expand=False)
        table.add_column("keys", no_wrap=True, min_width=18, max_width=18)
        table.add_column("what it does")
        for keys, description in entries:
            table.add_row(key_display(keys), description)
        tables.append(table)
    return tables


def cautions_text(lines: Sequence[str] = SAFETY_CAUTIONS) -> Text:
    text = Text()
    text.append("Safety\n", style="bold")
    for line in lines:
        text.append(f"• {line}\n")
    return text
