"""The padtune app: the live screen over one `LiveSource`, and the keys that work everywhere.

The app keeps only global keys (help, quit, the command palette); everything else belongs to the
screen on top (`tui.screens.live.LiveScreen`, a dialog, the guided capture) and its widgets, by
Textual's own rules: a screen pushed on top covers the keys of the one below. Help and the palette are
built from the bindings active on the screen they are opened from (`tui.bindings`), next to Textual's
own system commands. Notices never pile up: one shows at a time, a repeat counts instead of stacking.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable
from functools import partial
from typing import ClassVar
from weakref import WeakKeyDictionary

from textual import events
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.notifications import Notify, SeverityLevel
from textual.screen import Screen

from tui.bindings import help_rows, key_actions, palette_entries
from tui.render.help import key_display
from tui.screens.help import HelpScreen
from tui.screens.live import LiveScreen
from tui.screens.prompt import PromptScreen
from tui.source import LiveSource


class PadtuneApp(App[int]):
    """`ui_hz=0` turns the live screen's timer off (tests call `refresh_now`)."""

    CSS_PATH = "app.tcss"
    TITLE = "padtune"
    BINDINGS: ClassVar = [
        Binding("question_mark,f1", "help", "help", id="app.help", key_display="?",
                tooltip="Help: the keys of this screen and the safety cautions"),
        Binding("q", "quit", "quit", id="app.quit", tooltip="Quit (asks when edits are unsaved)"),
        # Ctrl+Q quits from anywhere, a dialog too (Textual's own default): still asking first.
        Binding("ctrl+q", "quit", "quit", id="app.quit", show=False, priority=True,
                tooltip="Quit (asks when edits are unsaved)"),
        Binding("ctrl+p", "command_palette", "palette", id="app.palette", show=False, priority=True,
                tooltip="Command palette: every action by name"),
    ]

    def __init__(self, source: LiveSource, *, ui_hz: float = 20.0, demo: bool = False,
                 clock: Callable[[], float] = time.monotonic) -> None:
        super().__init__()
        self.source, self.demo, self.clock = source, demo, clock
        self.live = LiveScreen(source, ui_hz=ui_hz, clock=clock)
        self._notice: tuple[tuple[str, str, str], int, float] | None = None  # the one showing
        # The screen each key was sent to, until it comes back to be bound (or is dropped: weak keys).
        self._key_routes: WeakKeyDictionary[events.Key, Screen[object]] = WeakKeyDictionary()

    def get_default_screen(self) -> Screen[None]:
        return self.live

    # -- global keys ------------------------------------------------------------------------------
    def action_help(self) -> None:
        self.push_screen(HelpScreen(help_rows(key_actions(self.screen.active_bindings))))

    async def action_quit(self) -> None:
        self.live.request_quit()

    def get_system_commands(self, screen: Screen[object]) -> Iterable[SystemCommand]:
        """Textual's own commands (theme, keys, screenshot, quit), then every action of the screen the
        palette was opened on, by the sentence the help uses, with its keys."""
        yield from super().get_system_commands(screen)
        for a in palette_entries(key_actions(screen.active_bindings)):
            if a.binding.action in ("quit", "help"):
                continue  # Textual's own Quit runs ours (it asks first); help is on ? and F1
            yield SystemCommand(a.sentence, f"key: {key_display(a.keys)}",
                                partial(self.run_action, a.binding.action, a.node))

    # -- keys typed for a dialog that opened on their way -----------------------------------------
    async def on_event(self, event: events.Event) -> None:
        if isinstance(event, events.Key) and not event.is_forwarded:
            self._key_routes[event] = self.screen
        await super().on_event(event)

    def on_key(self, event: events.Key) -> None:
        """Runs before Textual looks the key's binding up. Keys come back here to be bound after they
        went through the focused widget; one typed right after the key that opened a prompt went the
        way of the screen below, and would be looked up in the prompt's bindings and lost: it is the
        prompt's text (`Enter 5 0 Enter` sets 50 however fast it is typed)."""
        routed = self._key_routes.pop(event, None)
        top = self.screen
        if routed is not None and routed is not top and isinstance(top, PromptScreen):
            event.prevent_default()  # not looked up in the bindings: typed into the prompt instead
            top.take_key(event.key, event.character)

    # -- notices ----------------------------------------------------------------------------------
    def notify(self, message: str, *, title: str = "", severity: SeverityLevel = "information",
               timeout: float | None = None, markup: bool = True) -> None:
        """One notice at a time, so they never cover the table and the edit bar: a new one replaces
        the one showing, and the same one again counts (`Nothing to undo. (×4)`)."""
        timeout = self.NOTIFICATION_TIMEOUT if timeout is None else timeout
        now = time.monotonic()  # notices live in wall time, whatever clock the data runs on
        key = (message, title, severity)
        count = 1
        if self._notice is not None and self._notice[0] == key and now < self._notice[2]:
            count = self._notice[1] + 1
        self._notice = (key, count, now + timeout)
        shown = f"{message} (×{count})" if count > 1 else message
        super().notify(shown, title=title, severity=severity, timeout=timeout, markup=markup)

    def on_notify(self, event: Notify) -> None:
        """A notice is shown when its message is handled (Textual's own handler runs after this one):
        those before it go then, so a burst of them leaves only the last."""
        self.clear_notifications()

    # -- for tests and benchmarks (the live screen owns these) ------------------------------------
    def refresh_now(self) -> None:
        """What the live screen's timer does once: poll the source and redraw."""
        self.live.refresh_now()

    @property
    def frames_drawn(self) -> int:
        return self.live.frames_drawn

    @property
    def detail(self) -> bool:
        return self.live.detail

    @detail.setter
    def detail(self, shown: bool) -> None:
        self.live.detail = shown

    def on_unmount(self) -> None:
        self.source.close()
