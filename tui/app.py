"""The live tuning screen: the Textual app that shows every channel and edits settings from the keyboard.

A screen timer is the only place data comes in: it polls the `LiveSource` (which drains the link
thread's queue and feeds the session) twice a screen frame and redraws inside `batch_update` once a
frame (about 20 Hz), or at once after a detection (`tui/pacing.py`). The reader thread never waits for
the screen, and a slow frame only makes the timer skip a tick. Every key is a
binding with an id and a description; the help screen and the command palette are built from them.
"""

from __future__ import annotations

import gc
import time
from collections import deque
from collections.abc import Callable, Iterable
from dataclasses import replace
from typing import Any, ClassVar

from rich.text import Text
from textual.app import App, ComposeResult, SystemCommand
from textual.containers import Horizontal
from textual.reactive import reactive
from textual.screen import ModalScreen, Screen
from textual.widgets import Footer, Static

from processing.detections import Rebaselined
from protocol.errors import UserError
from protocol.events import BoardChanged, LinkFault
from tui.app_edits import EditActions, PressActions
from tui.app_files import FileActions
from tui.bindings import _COVERED_OFF, _PRESS_THROUGH, BINDINGS, help_rows
from tui.describe import describe_detection, describe_event
from tui.edits import EditHistory
from tui.fields import EDIT_FIELDS
from tui.headless.notices import NoticeGate
from tui.pacing import FramePacer
from tui.render.help import key_display
from tui.render.settings import edit_bar
from tui.render.views import LinkView
from tui.screens.confirm import ConfirmScreen
from tui.screens.help import HelpScreen
from tui.source import LiveSource, Tick
from tui.widgets.channel_table import ChannelTable
from tui.widgets.detail_panel import DetailPanel, Spectrum
from tui.widgets.event_log import EventLog
from tui.widgets.groups_panel import GroupsPanel
from tui.widgets.link_strip import LinkStrip

# Sparkline buckets handed to the table; it shrinks them to the width it has (48 cells at most).
SPARK_POINTS = 48
SPECTRUM_EVERY_S = 1.0
DETAIL_EVERY_S = 0.5
# The screen timer polls the source this many times per screen frame and draws a frame once per frame
# period, or at the first poll that brings a detection (tui/pacing.py): a touch waits for about half a
# period, not up to a whole one (50 ms at 20 Hz). The second poll costs about half a percent of a core
# at 16 channels / 100 Hz on a quiet machine (more on a loaded one); 1 saves that and adds some 20 ms
# to the 95th percentile of the touch-to-screen latency (`make bench` prints both).
POLLS_PER_FRAME = 2

class PadtuneApp(EditActions, PressActions, FileActions, App[int]):
    """The live screen over one `LiveSource`. `ui_hz=0` disables the timer (tests call `refresh_now`)."""

    CSS_PATH = "app.tcss"
    TITLE = "padtune"
    BINDINGS: ClassVar = BINDINGS
    ENABLE_COMMAND_PALETTE = True

    field_index: reactive[int] = reactive(0)
    paused: reactive[bool] = reactive(False)
    detail: reactive[bool] = reactive(False)
    spectrum: reactive[bool] = reactive(False)

    def __init__(self, source: LiveSource, *, ui_hz: float = 20.0, demo: bool = False,
                 clock: Callable[[], float] = time.monotonic) -> None:
        super().__init__()
        self.source = source
        self.ui_hz = ui_hz
        self.demo = demo
        self.clock = clock
        self.history = EditHistory()
        self.held: set[int] = set()
        self.recent: dict[int, deque[str]] = {}
        self.frames_drawn = 0
        self._tick_count = 0
        self._pacer = FramePacer(ui_hz or 1.0, POLLS_PER_FRAME)
        self._t0_s = clock()
        self._edit_bar_key: tuple[object, ...] | None = None
        self._table: ChannelTable | None = None
        self._widgets: dict[tuple[object, object], Any] = {}
        self._spectrum_cache: tuple[int, float, Spectrum | None] | None = None
        self._gate = NoticeGate()  # link faults and notices: one log line a second per kind, counted

    # -- layout -----------------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield LinkStrip(id="link")
        yield ChannelTable(id="table")
        yield Static("", id="edit-bar")
        yield DetailPanel(id="detail")
        with Horizontal(id="lower"):
            yield GroupsPanel(id="groups")
            yield EventLog(id="log")
        yield Footer(compact=True, show_command_palette=False)

    def on_mount(self) -> None:
        self._table = self._main(ChannelTable)
        self._main("#detail").display = False
        self._apply_size_classes()
        if self.ui_hz > 0:
            self.set_interval(1.0 / (self.ui_hz * POLLS_PER_FRAME), self._screen_timer, name="screen-timer")
        self.refresh_now()
        # Everything alive now (modules, the widgets, their styles: some 70,000 objects) lives as long as
        # the screen: set aside from the collector, whose full passes over them stalled every thread for
        # 30-40 ms a few times a minute (a touch shown that late). Given back at unmount.
        gc.freeze()

    def on_resize(self) -> None:
        self._apply_size_classes()

    def _apply_size_classes(self) -> None:
        self.set_class(self.size.height >= 34, "-tall")
        self.set_class(self.size.width >= 110, "-wide")

    # -- the screen timer -------------------------------------------------------------------------
    def refresh_now(self) -> None:
        """Drain the source, log what happened, and redraw (unless the display is paused)."""
        if self._poll() is not None:
            self._show()

    def _screen_timer(self) -> None:
        """Polls POLLS_PER_FRAME times a frame period; draws when the pacer says (see tui/pacing.py)."""
        tick = self._poll()
        # Wall time, as the timer's own: the injectable `clock` is the data's (tests move it by hand).
        if tick is not None and self._pacer.after_poll(time.monotonic(), bool(tick.detections)):
            self._show()

    def _poll(self) -> Tick | None:
        """Drain the source and log what it brought; None when there is nothing to draw on (yet)."""
        if self._table is None or not self._table.is_attached:
            return None  # not mounted yet, or shutting down: the widgets are gone
        try:
            tick = self.source.poll()
        except UserError as exc:
            self.notify(str(exc), severity="error")
            return None
        self._log_tick(tick)
        for problem in tick.errors:  # a recording that could not be written (a full disk): say why
            self._log(f"✗ {problem}")
            self.notify(problem, severity="error", timeout=10)
        return tick

    def _show(self) -> None:
        """One screen frame: the link strip, and the rows unless the display is paused."""
        assert self._table is not None
        self._tick_count += 1
        with self.batch_update():
            view = self._link_view()
            self._main(LinkStrip).show(view)
            # Rows that stopped updating look it: the board is away or silent.
            stale = view.state in ("disconnected", "reconnecting") or view.silent_s is not None
            self._table.set_class(stale, "-stale")
            if not self.paused:
                self._draw()

    def _since_start(self, t_s: float) -> float:
        return max(0.0, t_s - self._t0_s)

    def _log_tick(self, tick: Tick) -> None:
        log = self._main(EventLog)
        names = self.source.channel_names()
        now = self.clock()
        for ev in tick.events:
            line = describe_event(ev)
            if line is not None and isinstance(ev, LinkFault):  # a flood of one fault: a few lines
                for text in self._gate.add(line.plain, now, kind=f"link {ev.kind.value}"):
                    log.add(self._since_start(ev.t_s), Text(text))
            elif line is not None:
                log.add(self._since_start(ev.t_s), line)
            if isinstance(ev, BoardChanged) and self.history.can_undo:
                # Edits were for channels that no longer line up: they cannot be undone on this board.
                self.history.clear()
                log.add(self._since_start(ev.t_s), Text("ⓘ the board changed: the edit history was cleared"))
        rebased = [d for d in tick.detections if isinstance(d, Rebaselined)]
        if rebased:  # a new session re-baselines every channel at once: one line, not one per channel
            which = sorted({d.channel for d in rebased})
            what = "all channels" if len(which) == len(names) > 1 else " ".join(names[c] for c in which)
            for text in self._gate.add(f"~ re-baselined {what}", now):  # a board resetting every line
                log.add(self._since_start(rebased[0].t_s), Text(text))
        for det in tick.detections:
            line = None if isinstance(det, Rebaselined) else describe_detection(det, names)
            if line is None:
                continue
            t_s = self._since_start(getattr(det, "t_s", 0.0))
            log.add(t_s, line)
            channel = getattr(det, "channel", None)
            if isinstance(channel, int):
                self.recent.setdefault(channel, deque(maxlen=8)).append(f"{t_s:7.2f} {line.plain}")
        notices = getattr(self.source, "notices", None)
        while notices:
            for text in self._gate.add(f"ⓘ {notices.popleft()}", now):
                self._log(text)
        for text in self._gate.due(now):
            self._log(text)

    def _link_view(self) -> LinkView:
        view = self.source.link_view()
        if self.paused != view.paused:
            view = replace(view, paused=self.paused)
        return view

    def _draw(self) -> None:
        table = self._main(ChannelTable)
        table.show(self.source.channel_views(SPARK_POINTS))
        self._main(GroupsPanel).show(self.source.group_views(), self.source.slider_views())
        self._draw_edit_bar()
        # The plot is plotext (pure Python, tens of ms a build): twice a second is live enough for it.
        every = max(1, round(self.ui_hz * DETAIL_EVERY_S))
        if self.detail and (self.ui_hz == 0 or self._tick_count % every == 1):
            self._draw_detail()
        self.frames_drawn += 1

    def _draw_edit_bar(self) -> None:
        bar = self._main("#edit-bar", Static)
        names = self.source.channel_names()
        if not names:
            bar.update(Text("waiting for the board to send its first frames…", no_wrap=True))
            return
        ch = self.cursor
        styles = self._main(ChannelTable).styles_map()
        width = bar.size.width or max(20, self.size.width - 2)  # before its first layout: the screen's
        position = f"{ch + 1}/{len(names)}" if len(names) > 1 else ""
        polarity, status = self.source.polarity(ch), self._status_word(ch)
        key = (names[ch], self.source.settings(ch), self.field_key, width, position, polarity, status)
        if key != self._edit_bar_key:  # an unchanged bar costs no layout pass
            self._edit_bar_key = key
            bar.update(edit_bar(names[ch], key[1], self.field_key, styles, width, position, polarity, status))

    def _status_word(self, channel: int) -> str:
        """What the edit bar says after the name when the settings are not tuned (yet)."""
        provisional, phase = self.source.first_contact(channel)
        if phase == "measuring" and provisional:
            return "measuring noise"
        return "provisional" if provisional else ""

    def _draw_detail(self) -> None:
        names = self.source.channel_names()
        if not names:
            return
        ch = self.cursor
        spectrum = self._spectrum_for(ch) if self.spectrum else None
        self._main(DetailPanel).show(
            names[ch], self.source.series(ch), spectrum, self.source.settings(ch), self.field_key,
            list(self.recent.get(ch, ())), self.source.rate_hz, self.source.polarity(ch),
            self._status_word(ch),
        )

    def _spectrum_for(self, ch: int) -> Spectrum | None:
        """The noise spectrum, recomputed at most once a second (it covers seconds of frames anyway)."""
        now = self.clock()
        cached = self._spectrum_cache
        if cached is not None and cached[0] == ch and now - cached[1] < SPECTRUM_EVERY_S:
            return cached[2]
        spectrum = self.source.spectrum(ch)
        self._spectrum_cache = (ch, now, spectrum)
        return spectrum

    def _main(self, selector: str | type, expect_type: type | None = None) -> Any:
        """A widget of the live screen, whichever screen (help, a prompt, the capture) is on top.

        Found once and kept: the screen timer asks for the same few widgets twenty times a second.
        """
        key = (selector, expect_type)
        found = self._widgets.get(key)
        if found is not None and found.is_attached:
            return found
        found = self._query_main(selector, expect_type)
        self._widgets[key] = found
        return found

    def _query_main(self, selector: str | type, expect_type: type | None) -> Any:
        screen = self.screen_stack[0] if self.screen_stack else self.screen
        if expect_type is None:
            return screen.query_one(selector)
        return screen.query_one(selector, expect_type)

    # -- state helpers ----------------------------------------------------------------------------
    @property
    def cursor(self) -> int:
        return self._main(ChannelTable).cursor

    @property
    def field_key(self) -> str:
        return EDIT_FIELDS[self.field_index].key

    def validate_field_index(self, value: int) -> int:
        return value % len(EDIT_FIELDS)

    def watch_field_index(self) -> None:
        self._redraw_soon()

    def watch_detail(self, shown: bool) -> None:
        self.set_class(shown, "-detail")
        self._main("#detail").display = shown
        self._main("#lower").display = not shown
        self._redraw_soon()

    def watch_spectrum(self) -> None:
        self._redraw_soon()

    def watch_paused(self, paused: bool) -> None:
        self._main(ChannelTable).set_class(paused, "-paused")
        self._main(LinkStrip).show(self._link_view())

    def _redraw_soon(self) -> None:
        if self.is_mounted and self.source.channel_names():
            self._draw_edit_bar()
            if self.detail:
                self._draw_detail()

    def refresh_now_if_idle(self) -> None:
        """Show the effect of an action at once (the timer would, within a frame; tests run without it)."""
        self._main(LinkStrip).show(self._link_view())
        if self.ui_hz == 0:
            self.refresh_now()

    def _log(self, line: str) -> None:
        self._main(EventLog).add(self._since_start(self.clock()), Text(line))

    def _has_channels(self) -> bool:
        if self.source.channel_names():
            return True
        self.notify("No channels yet: waiting for the board's first frames.", severity="warning")
        return False

    # -- moving -----------------------------------------------------------------------------------
    def action_cursor(self, rows: int) -> None:
        table = self._main(ChannelTable)
        table.cursor = table.validate_cursor(table.cursor + rows)
        self._redraw_soon()

    def action_cursor_page(self, pages: int) -> None:
        self.action_cursor(pages * self._main(ChannelTable).page_rows)

    def action_cursor_to(self, row: int) -> None:
        table = self._main(ChannelTable)
        table.cursor = table.validate_cursor(row if row >= 0 else table.rows - 1)
        self._redraw_soon()

    def action_field(self, step: int) -> None:
        self.field_index += step

    # -- channel and display ----------------------------------------------------------------------
    def action_rebaseline(self, every: bool) -> None:
        if not self._has_channels():
            return
        # The engine takes the next frame as the baseline and reports it; the log shows that event.
        self.source.rebaseline(None if every else self.cursor)

    def action_toggle_detail(self) -> None:
        self.detail = not self.detail

    def action_toggle_spectrum(self) -> None:
        self.spectrum = not self.spectrum
        if self.spectrum and not self.detail:
            self.detail = True

    def action_toggle_pause(self) -> None:
        self.paused = not self.paused

    # -- the rest ---------------------------------------------------------------------------------
    def action_wizard(self) -> None:
        try:
            from tui.screens import capture
        except ImportError:
            self.notify("The guided capture is not available in this build.", severity="warning")
            return
        opener = getattr(capture, "open_capture", None)
        if opener is None:
            self.notify("The guided capture is not available in this build.", severity="warning")
            return
        opener(self)

    def action_help(self) -> None:
        self.push_screen(HelpScreen(help_rows()))

    def _unless_unsaved(self, question: str, then: Callable[[], None]) -> None:
        if not self.source.unsaved():
            then()
            return
        self.push_screen(ConfirmScreen(question), lambda yes: then() if yes else None)

    async def action_quit(self) -> None:
        self._unless_unsaved("There are unsaved edits. Quit without saving them?", self.exit)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """Keys of the live screen do nothing while another screen (help, a prompt, the capture) is on top."""
        covered = bool(self.screen_stack) and self.screen is not self.screen_stack[0]
        name = action.split("(")[0]
        if covered and name in _PRESS_THROUGH and not isinstance(self.screen, ModalScreen):
            return True
        return not (covered and name in _COVERED_OFF)

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        seen = set()
        for b in BINDINGS:
            if b.action in seen or (b.id or "").startswith("demo.key"):
                continue
            seen.add(b.action)
            yield SystemCommand(b.tooltip or b.description, f"key: {key_display(b.key)}",
                                lambda action=b.action: self.run_action(action))
        yield SystemCommand("Change the colour theme", "light, dark and others", self.action_change_theme)

    def on_unmount(self) -> None:
        gc.unfreeze()
        self.source.close()
