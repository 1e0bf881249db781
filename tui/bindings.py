"""The help screen's rows and the command palette's commands, read from the bindings that are active.

Each key is bound where it acts (the channel table its cursor keys, the live screen its edit, display,
recording and profile keys, the app quit, help and the palette), with an id `section.name` (the
section heads its group in the help screen), a short description for the footer and a `tooltip` with
the full sentence. Textual's `Screen.active_bindings` gathers them along the focused widget's chain;
help and the palette are built from that, so neither can drift from what the keys do.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from textual.app import App
from textual.binding import ActiveBinding, Binding
from textual.dom import DOMNode

# Binding id prefix -> the section it is listed under in the help screen.
SECTIONS = {
    "move": "Move", "edit": "Edit the selected channel", "chan": "Channel and display",
    "rec": "Recording", "prof": "Profile", "demo": "Simulated board (demo)", "app": "App",
}
OTHER = "Other keys"
# Rows the help adds after a binding: what the same keys do on a special field, what a mark means.
NOTES = {
    "edit.down": ("plus,minus", "On the polarity field (the edit bar's last: ← from threshold): + when "
                  "counts rise on touch, - when they fall; Enter, then ?, to learn it again from the next "
                  "touch"),
    "chan.rebase_all": ("≈", "In the table: provisional threshold and hysteresis, from the key's own noise "
                        "(edit it, run the guided capture w, or load a profile). The state reads '~ noise' "
                        "while its quiet second is measured (hands off; the edit bar shows its threshold as "
                        "--), '? learn' until a first touch shows which way its counts move"),
    # The detail panel's zoom keys act only while it shows (LiveScreen.check_action): said here otherwise.
    "chan.spectrum": ("z,Z", "With the detail panel open (d): zoom out to 1 min, 10 min, 1 h and the whole "
                      "session (z), back in (Z)"),
}
# A note left out when the action it stands for is listed itself.
NOTE_UNLESS = {"chan.spectrum": "chan.zoom_out"}


@dataclass(frozen=True, slots=True)
class KeyAction:
    """One binding with all the keys that trigger it, and the node whose action it runs."""

    node: DOMNode
    binding: Binding
    keys: str  # comma-separated, as Textual names them

    @property
    def section(self) -> str:
        """The help section: from the id's prefix (another screen's prefix, capitalised, names its own);
        bindings without an id are Textual's own: the app's, or a widget's ("Other keys")."""
        if self.binding.id:
            prefix = self.binding.id.split(".")[0]
            return SECTIONS.get(prefix, prefix.capitalize())
        return "App" if isinstance(self.node, App) else OTHER

    @property
    def sentence(self) -> str:
        return self.binding.tooltip or self.binding.description


def key_actions(active: Mapping[str, ActiveBinding]) -> list[KeyAction]:
    """The active bindings once per action, their keys together in the order they were declared, in
    the order Textual checks them (the focused widget, the screen, the app). System bindings are left
    out."""
    grouped: dict[tuple[int, str], list[tuple[str, ActiveBinding]]] = {}
    for key, found in active.items():
        b = found.binding
        if b.system or not (b.description or b.tooltip):
            continue
        grouped.setdefault((id(found.node), b.id or b.action), []).append((key, found))
    actions = []
    for entries in grouped.values():
        node, binding = entries[0][1].node, entries[0][1].binding
        order = _declared_keys(node, binding)
        keys = sorted((k for k, _ in entries), key=lambda k: order.index(k) if k in order else len(order))
        actions.append(KeyAction(node, binding, ",".join(keys)))
    return actions


def _declared_keys(node: DOMNode, binding: Binding) -> list[str]:
    """The keys of `binding` as its class declared them (`right,tab`), as Textual names them."""
    for cls in type(node).__mro__:
        for declared in vars(cls).get("BINDINGS", ()):
            if isinstance(declared, Binding) and (declared.id or declared.action) == \
                    (binding.id or binding.action):
                return [b.key for b in Binding.make_bindings([declared])]
    return []


def help_rows(actions: Iterable[KeyAction]) -> list[tuple[str, str, str]]:
    """(section, keys, description) for every action, sections in the order of `SECTIONS`; the demo
    keys 1..0 collapse into one row."""
    rows: list[tuple[str, str, str]] = []
    actions = list(actions)
    listed = {a.binding.id for a in actions}
    for a in sorted(actions, key=_section_order):
        ident = a.binding.id or ""
        if ident.startswith("demo.key"):
            if ident == "demo.key1":
                rows.append((a.section, "1 … 9,0", "Hold / let go of key 1 … 9, or key 10 (0), on the "
                             "simulated board"))
            continue
        rows.append((a.section, a.keys, a.sentence))
        if ident in NOTES and NOTE_UNLESS.get(ident) not in listed:
            rows.append((a.section, *NOTES[ident]))
    return rows


def _section_order(action: KeyAction) -> float:
    """Sections in `SECTIONS` order, another screen's and the other keys just before App."""
    order = list(SECTIONS.values())
    if action.section in order:
        return order.index(action.section)
    return order.index("App") - (0.25 if action.section == OTHER else 0.5)


def palette_entries(actions: Iterable[KeyAction]) -> list[KeyAction]:
    """The actions the command palette lists by name: all but the numbered demo keys and the palette."""
    return [a for a in actions if not (a.binding.id or "").startswith("demo.key")
            and a.binding.action not in ("command_palette", "app.command_palette")]
