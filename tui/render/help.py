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


def key_display(keys: str) -> str:
    """`ctrl+s,f2` -> `ctrl+s / f2`, with the few symbol names spelt as their symbols."""
    names = {"plus": "+", "minus": "-", "question_mark": "?", "greater_than_sign": ">",
             "less_than_sign": "<", "equals_sign": "=", "space": "space", "full_stop": ".",
             "left_square_bracket": "[", "right_square_bracket": "]"}
    return " / ".join(names.get(k.strip(), k.strip()) for k in keys.split(","))


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
