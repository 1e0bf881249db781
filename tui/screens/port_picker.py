"""The port picker: serial ports found on this machine and the simulated boards, one to choose.

It is its own small App (bare `padtune` runs it first), so choosing needs no board connected yet.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import ClassVar

from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.widgets import Footer, OptionList, Static
from textual.widgets.option_list import Option


@dataclass(frozen=True, slots=True)
class Choice:
    target: str  # a device path or a sim:// URL
    label: str
    simulated: bool


def choices(ports: Sequence[tuple[str, str]], boards: Sequence[str]) -> list[Choice]:
    """Ports first (`(device, description)`), then one `sim://` entry per simulated board."""
    out = [Choice(dev, f"{dev}  {desc or 'serial port'}", False) for dev, desc in ports]
    out += [Choice(f"sim://{name}", f"sim://{name}  simulated board", True) for name in boards]
    return out


class PortPickerApp(App[str | None]):
    """Returns the chosen target, or None when the user leaves without choosing."""

    CSS = """
    #picker-title { padding: 0 1; text-style: bold; color: $accent; }
    #picker-hint { padding: 0 1; color: $text-muted; }
    OptionList { height: 1fr; margin: 0 1; }
    """
    BINDINGS: ClassVar = [
        Binding("escape,q", "leave", "Leave", id="picker.leave", key_display="Esc"),
        Binding("r", "rescan", "Look for ports again", id="picker.rescan"),
    ]

    def __init__(self, scan: Callable[[], list[Choice]]) -> None:
        super().__init__()
        self._scan = scan
        self._choices: list[Choice] = []

    def compose(self) -> ComposeResult:
        yield Static("padtune: choose a board to open", id="picker-title")
        yield Static("↑/↓ choose, Enter opens, r looks again, Esc leaves. Pseudo-terminals are not listed: "
                     "run `padtune watch PATH` for those.", id="picker-hint")
        yield OptionList(id="picker-list")
        yield Footer(compact=True, show_command_palette=False)

    def on_mount(self) -> None:
        self.action_rescan()

    def action_rescan(self) -> None:
        self._choices = self._scan()
        options = self.query_one(OptionList)
        options.clear_options()
        ports = [c for c in self._choices if not c.simulated]
        if not ports:
            hint = "(no serial ports found: plug the board in and press r)"
            options.add_option(Option(hint, disabled=True))
        for c in self._choices:
            options.add_option(Option(c.label, id=c.target))
        options.focus()
        options.highlighted = next((i for i, o in enumerate(options.options) if not o.disabled), None)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.exit(event.option.id)

    def action_leave(self) -> None:
        self.exit(None)


def scan_choices() -> list[Choice]:
    """The serial ports of this machine and the simulated boards, as the picker lists them."""
    from devices.boards import list_boards
    from protocol.ports import list_ports

    ports = [(p.device, p.description or "") for p in list_ports()]
    return choices(ports, list_boards())
