"""The live screen: every channel of a running session, and the keys that tune it.

It composes the link strip, the channel table, the edit bar, the detail panel, the groups panel and the
event log, and owns the keys that act on them; the table owns its cursor keys and says which channel
is selected with a `ChannelTable.Highlighted` message. Data flows down: a timer is the only place it
comes in, polling the `LiveSource` twice a screen frame and handing each widget its snapshot inside one
`batch_update` once a frame (about 20 Hz), or at once after a detection (tui/pacing.py); the link's
reader thread never waits for the screen, and a slow frame only makes the timer skip a tick. Edits go
through an `Editor` (tui/editor.py), whose results become log lines and notices. The keys that read and
write files (recording, profile, export) and quitting with unsaved edits are `FileActions`
(tui/screens/live_files.py), which the screen inherits; their bindings are here with the others.
"""

from __future__ import annotations

import gc
import time
from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.notifications import SeverityLevel
from textual.reactive import reactive
from textual.screen import Screen
from textual.widgets import Footer

from processing.measure import ChannelQuality
from processing.settings import ChannelSettings
from processing.tuning import measured_marks
from protocol.errors import UserError
from protocol.events import BoardChanged
from protocol.printable import printable
from tui.editor import Editor, EditResult, Outcome
from tui.fields import EDIT_FIELDS, FROM_NOISE, NO_RATE, POLARITY_KEY, TIME_KEYS, field, polarity_word
from tui.files import FileQueue
from tui.log_feed import LogFeed
from tui.pacing import FramePacer
from tui.render.views import LinkView, LongView, Spectrum
from tui.screens.board_diff import BoardDiffScreen
from tui.screens.live_files import FileActions
from tui.screens.prompt import PromptScreen
from tui.source import LiveSource, Tick
from tui.widgets.channel_table import ChannelTable
from tui.widgets.detail_panel import ZOOM_KEYS, DetailPanel
from tui.widgets.edit_bar import EditBar, EditBarView
from tui.widgets.event_log import EventLog
from tui.widgets.groups_panel import GroupsPanel
from tui.widgets.kept_lines import keep_lines
from tui.widgets.link_strip import LinkStrip
from tui.words import plural

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
TAP_S = 0.4  # how long `t` holds the simulated key

B = Binding
BINDINGS: list[Binding] = [
    B("right,tab", "field(1)", "Next setting to edit", id="move.field_next", show=False),
    B("left,shift+tab", "field(-1)", "Previous setting to edit", id="move.field_prev", show=False),
    B("plus,equals_sign", "step(1, False)", "Raise the setting (fine step)", id="edit.up", key_display="+",
      show=False),
    B("minus", "step(-1, False)", "Lower the setting (fine step)", id="edit.down", key_display="-",
      show=False),
    B("right_square_bracket", "step(1, True)", "Raise the setting (coarse step)", id="edit.up_coarse",
      show=False),
    B("left_square_bracket", "step(-1, True)", "Lower the setting (coarse step)", id="edit.down_coarse",
      show=False),
    B("enter,e", "type_value", "Type a value for the setting (debounce, baseline period and stuck timeout "
      "in frames or as a time: 40ms, 0.04s, made whole frames at the board's rate)", id="edit.type",
      key_display="⏎", show=False),
    B("a", "apply_all", "Copy this channel's settings to all channels", id="edit.all", show=False),
    B("g", "apply_group", "Copy this channel's settings to its group", id="edit.group", show=False),
    B("u", "undo", "Undo the last edit", id="edit.undo", show=False),
    B("U,ctrl+y", "redo", "Redo", id="edit.redo", show=False),
    B("b", "rebaseline(False)", "Re-baseline the selected channel", id="chan.rebase", show=False),
    B("B", "rebaseline(True)", "Re-baseline all channels", id="chan.rebase_all", show=False),
    B("d", "toggle_detail", "detail", id="chan.detail", tooltip="Detail panel: plot, settings, events"),
    B("f", "toggle_spectrum", "Noise spectrum in the detail panel", id="chan.spectrum", show=False),
    # The detail panel's zoom (its levels and words are the panel's: tui/widgets/detail_panel.py); in the
    # footer while the panel shows (`check_action`), since the table keeps the focus.
    *[B(key, f"zoom({step})", word, id=bid, tooltip=sentence, show=step > 0, key_display="z/Z" if step > 0
        else None) for key, step, word, sentence, bid in ZOOM_KEYS],
    B("space", "toggle_pause", "pause", id="chan.pause", key_display="Space",
      tooltip="Pause / resume the display (detection keeps running)"),
    B("r", "toggle_recording", "record", id="rec.toggle", tooltip="Start / stop recording to a CSV file"),
    B("m", "mark", "Mark this moment in the recording", id="rec.mark", show=False),
    B("s,ctrl+s", "save", "save", id="prof.save", tooltip="Save the profile"),
    B("S", "save_as", "Save the profile as another file", id="prof.save_as", show=False),
    B("o", "load", "Load another profile", id="prof.load", show=False),
    B("x", "export", "Export for firmware (C header or JSON)", id="prof.export", show=False),
    B("t", "tap", "Tap the selected key on the simulated board", id="demo.tap", show=False),
    B("p", "hold", "Hold / let go of the selected key on the simulated board", id="demo.hold", show=False),
    *[B(str(n % 10), f"hold_number({n - 1})", f"Hold / let go of key {n} on the simulated board",
        id=f"demo.key{n}", show=False) for n in range(1, 11)],
    B("w", "wizard", "Guided capture: measure noise and touches, suggest settings", id="app.wizard",
      show=False),
]


class LiveScreen(FileActions, Screen[None]):
    """The live view of one `LiveSource`. `ui_hz=0` turns the timer off (tests call `refresh_now`). Its
    recording, profile, export and quit actions are `FileActions`' (tui/screens/live_files.py)."""

    BINDINGS: ClassVar = BINDINGS
    AUTO_FOCUS = "ChannelTable"
    HORIZONTAL_BREAKPOINTS: ClassVar = [(0, "-narrow"), (110, "-wide")]
    VERTICAL_BREAKPOINTS: ClassVar = [(0, "-short"), (34, "-tall")]

    field_index: reactive[int] = reactive(0)
    paused: reactive[bool] = reactive(False)
    detail: reactive[bool] = reactive(False)
    spectrum: reactive[bool] = reactive(False)

    def __init__(self, source: LiveSource, *, ui_hz: float = 20.0,
                 clock: Callable[[], float] = time.monotonic) -> None:
        super().__init__(id="live")
        self.source, self.ui_hz, self.clock = source, ui_hz, clock
        self.editor = Editor(source)
        self.feed = LogFeed(clock)
        self.files = FileQueue()  # written by FileActions' thread workers
        self.held: set[int] = set()  # simulated keys held down from the keyboard
        self.frames_drawn = 0
        self._ticks = 0  # screen frames drawn or skipped while paused
        self._pacer = FramePacer(ui_hz or 1.0, POLLS_PER_FRAME)
        self._spectrum_cache: tuple[int, float, Spectrum | None] | None = None
        self._state = "new"  # "mounted" once its widgets are styled and can draw, then "closed"
        self.link_strip = LinkStrip(id="link")
        self.table = ChannelTable(id="table")
        self.edit_bar = EditBar(id="edit-bar")
        self.detail_panel = DetailPanel(id="detail")
        self.groups = GroupsPanel(id="groups")
        self.log_view = EventLog(id="log")
        self.lower = Horizontal(self.groups, self.log_view, id="lower")
        # Drawn again whenever the table changes (every frame), though they rarely change themselves.
        for quiet in (self, self.link_strip, self.edit_bar, self.lower):
            keep_lines(quiet)

    # -- layout -----------------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield self.link_strip
        yield self.table
        yield self.edit_bar
        yield self.detail_panel
        yield self.lower
        yield keep_lines(Footer(compact=True, show_command_palette=False))

    def on_mount(self) -> None:
        self._state = "mounted"
        self.detail_panel.display = False
        if self.ui_hz > 0:
            self.set_interval(1.0 / (self.ui_hz * POLLS_PER_FRAME), self._screen_timer, name="screen-timer")
        self.refresh_now()
        # Everything alive now (modules, the widgets, their styles: some 70,000 objects) lives as long as
        # the screen: set aside from the collector, whose full passes over them stalled every thread for
        # 30-40 ms a few times a minute (a touch shown that late). Given back at unmount.
        gc.freeze()

    def on_unmount(self) -> None:
        self._state = "closed"
        gc.unfreeze()

    # -- the screen timer -------------------------------------------------------------------------
    def refresh_now(self) -> None:
        """Poll the source, log what happened, and redraw (unless the display is paused). Before the
        screen is mounted it only polls and logs (the log keeps its lines): it draws once mounted."""
        if self._poll() is not None and self._state == "mounted":
            self._show()

    def _screen_timer(self) -> None:
        """Polls POLLS_PER_FRAME times a frame period; draws when the pacer says (see tui/pacing.py)."""
        tick = self._poll()
        # Wall time, as the timer's own: the injectable `clock` is the data's (tests move it by hand).
        if (tick is not None and self._state == "mounted"
                and self._pacer.after_poll(time.monotonic(), bool(tick.detections))):
            self._show()

    def _poll(self) -> Tick | None:
        """Poll the source and log what it brought; None when there is nothing to draw on."""
        if self._state == "closed":
            return None  # shutting down: the widgets are gone
        try:
            tick = self.source.poll()
        except UserError as exc:
            self.say(str(exc), severity="error")
            return None
        self._log_tick(tick)
        return tick

    def _show(self) -> None:
        """One screen frame: the link strip, and the rows unless the display is paused."""
        self._ticks += 1
        with self.app.batch_update():
            view = self._link_view()
            self.link_strip.show(view)
            # Rows that stopped updating look it: the board is away or silent.
            stale = view.state in ("disconnected", "reconnecting") or view.silent_s is not None
            self.table.set_class(stale, "-stale")
            if not self.paused:
                self._draw()

    def _log_tick(self, tick: Tick) -> None:
        names = self.source.channel_names()
        for t_s, line in self.feed.lines(tick.events, tick.detections, names, self.source.notices):
            self.log_view.add(t_s, line)
        if any(isinstance(ev, BoardChanged) for ev in tick.events) and self.editor.forget():
            # Edits were for channels that no longer line up: they cannot be undone on this board.
            self._log("ⓘ the board changed: the edit history was cleared")
        for problem in tick.errors:  # a recording that could not be written (a full disk): say why
            self._log(f"✗ {problem}")
            self.say(problem, severity="error", timeout=10)
        self._board_tick(tick)

    # -- settings travel (a board that says settings=1; tui/board_sync.py) ------------------------
    def _board_tick(self, tick: Tick) -> None:
        for line in tick.board_lines:
            self._log(line)
        refusals = tick.board_refusals
        if refusals:  # one notice a poll, however many channels a copy to all sent
            more = f" (and {plural(len(refusals) - 1, 'more')})" if len(refusals) > 1 else ""
            self.app.bell()
            self.say(refusals[0].lstrip("✗ ") + more, severity="warning")
        if tick.board_diff and not isinstance(self.app.screen, BoardDiffScreen):
            board = self.source.link_view().board or "The board"
            path = self.source.profile_path()
            dialog = BoardDiffScreen(board, path.name if path else "the profile", tick.board_diff)
            self.app.push_screen(dialog, self._board_choice)

    def _board_choice(self, choice: str | None) -> None:
        if choice == "board":
            self.source.take_board_settings()  # type: ignore[attr-defined]
            self._log("⇄ took the board's settings (save the profile to keep them)")
        elif choice == "profile":
            self.source.send_profile_settings()  # type: ignore[attr-defined]
            self._log("⇄ sending the profile's settings to the board")
        else:
            self._log("ⓘ the board and the profile still differ; edits are sent as you make them")
        self._after_change()

    def _link_view(self) -> LinkView:
        view = self.source.link_view()
        saving = self.files.busy
        if self.paused != view.paused or saving != view.saving:
            view = replace(view, paused=self.paused, saving=saving)
        return view

    def _draw(self) -> None:
        self.table.show(self.source.channel_views(SPARK_POINTS))
        self.groups.show(self.source.group_views(), self.source.slider_views())
        self._show_channel(detail=False)
        # The plot is plotext (pure Python, tens of ms a build): twice a second is live enough for it.
        every = max(1, round(self.ui_hz * DETAIL_EVERY_S))
        if self.detail and (self.ui_hz == 0 or self._ticks % every == 1):
            self._draw_detail()
        self.frames_drawn += 1

    def _show_channel(self, detail: bool = True) -> None:
        """The edit bar (and the detail panel, if open) for the selected channel."""
        names = self.source.channel_names()
        if not names:
            self.edit_bar.view = None
            return
        ch = self.cursor
        status, pending = self._status(ch)
        board_status = getattr(self.source, "board_status", None)
        self.edit_bar.view = EditBarView(names[ch], self.source.settings(ch), self.field_key,
                                         f"{ch + 1}/{len(names)}" if len(names) > 1 else "",
                                         self.source.polarity(ch), status, pending,
                                         board_status(ch) if board_status is not None else (),
                                         self._time_rate_hz())
        if detail and self.detail:
            self._draw_detail()

    def _status(self, channel: int) -> tuple[str, frozenset[str]]:
        """What the edit bar says after the name when the settings are not tuned (yet), and which
        settings are not in force yet: a key measuring its noise gets them from it."""
        provisional, phase = self.source.first_contact(channel)
        if phase == "measuring" and provisional:
            return "measuring noise", FROM_NOISE
        return ("provisional" if provisional else ""), frozenset()

    def _draw_detail(self) -> None:
        names = self.source.channel_names()
        if not names:
            return
        ch = self.cursor
        spectrum = self._spectrum_for(ch) if self.spectrum else None
        status, pending = self._status(ch)
        self.detail_panel.show(
            names[ch], self.source.series(ch), spectrum, self.source.settings(ch), self.field_key,
            list(self.feed.recent.get(ch, ())), self.source.rate_hz, self.source.polarity(ch), status,
            pending, self._long_view(ch), self._quality(ch),
        )

    def _quality(self, ch: int) -> ChannelQuality | None:
        """The key's SNR verdict and what it rests on, when the source measures one."""
        quality = getattr(self.source, "quality", None)
        return quality(ch) if quality is not None else None

    def _time_rate_hz(self) -> float | None:
        """The rate times in ms are shown and typed at: the board's, once stated or measured (a source
        that cannot tell gives the rate it runs at)."""
        known = getattr(type(self.source), "known_rate_hz", None)
        return self.source.known_rate_hz if known is not None else self.source.rate_hz  # type: ignore[attr-defined]

    def _long_view(self, ch: int) -> LongView | None:
        """The zoomed-out history for the panel, when it is zoomed out and the source keeps one."""
        long_view = getattr(self.source, "long_view", None)
        if not self.detail_panel.zoomed_out or long_view is None:
            return None
        return long_view(ch, self.detail_panel.zoom_window_s)

    def _spectrum_for(self, ch: int) -> Spectrum | None:
        """The noise spectrum, recomputed at most once a second (it covers seconds of frames anyway)."""
        now = self.clock()
        cached = self._spectrum_cache
        if cached is not None and cached[0] == ch and now - cached[1] < SPECTRUM_EVERY_S:
            return cached[2]
        spectrum = self.source.spectrum(ch)
        self._spectrum_cache = (ch, now, spectrum)
        return spectrum

    # -- state ------------------------------------------------------------------------------------
    @property
    def cursor(self) -> int:
        return self.table.cursor

    @property
    def field_key(self) -> str:
        return EDIT_FIELDS[self.field_index].key

    def validate_field_index(self, value: int) -> int:
        return value % len(EDIT_FIELDS)

    def watch_field_index(self) -> None:
        self._show_channel()

    def watch_detail(self, shown: bool) -> None:
        self.set_class(shown, "-detail")
        self.refresh_bindings()  # the panel's zoom keys come and go with it (check_action)
        self.detail_panel.display = shown
        self.lower.display = not shown
        self._show_channel()

    def watch_spectrum(self) -> None:
        self._show_channel()

    def watch_paused(self, paused: bool) -> None:
        self.table.set_class(paused, "-paused")
        self.link_strip.show(self._link_view())

    def on_channel_table_highlighted(self, message: ChannelTable.Highlighted) -> None:
        self._show_channel()

    def _after_change(self) -> None:
        """Show the effect of an action at once (the timer would, within a frame; tests run without it)."""
        self._show_channel()
        self.link_strip.show(self._link_view())
        if self.ui_hz == 0:
            self.refresh_now()

    def _log(self, line: str) -> None:
        self.log_view.add(*self.feed.now(line))

    def say(self, text: str, severity: SeverityLevel = "information", timeout: float | None = None) -> None:
        """A notice, as plain text (file names and board lines may hold brackets)."""
        self.notify(text, severity=severity, timeout=timeout, markup=False)

    def _has_channels(self) -> bool:
        if self.source.channel_names():
            return True
        self.say("No channels yet: waiting for the board's first frames.", severity="warning")
        return False

    def _report(self, result: EditResult) -> None:
        """An edit's result as the user sees it: a log line when it was done, else a notice."""
        if result.applied:
            self._log(result.message)
            self._after_change()
        elif result.outcome is Outcome.REFUSED:
            self.app.bell()
            self.say(result.message, severity="warning")
        else:
            self.say(result.message, "warning" if result.outcome is Outcome.UNAVAILABLE else "information")

    # -- editing ----------------------------------------------------------------------------------
    def action_field(self, step: int) -> None:
        self.field_index += step

    def action_step(self, steps: int, coarse: bool) -> None:
        self._report(self.editor.step(self.cursor, self.field_key, steps, coarse))

    def action_type_value(self) -> None:
        if not self._has_channels():
            return
        ch, key = self.cursor, self.field_key
        f, name = field(key), self.source.channel_names()[ch]
        if key == POLARITY_KEY:
            question, now = f"{name}: polarity", polarity_word(self.source.polarity(ch))
        else:
            unit = "a shift n: the baseline moves 1/2ⁿ of the way a step" if f.unit == "shift" else f.unit
            question, now = f"{name}: new {f.label} ({unit})", str(getattr(self.source.settings(ch), key))

        rate = self._time_rate_hz()
        hint = f"allowed: {self.editor.allowed(ch, key, rate)}"
        if key in TIME_KEYS:  # frame counts may be typed as times (tui/fields.py says how they round)
            question = question[:-1] + ", or a time: 40ms, 0.04s)"
            if not rate:
                hint += f"\n{NO_RATE}"

        def done(text: str | None) -> None:
            if text is not None:
                self._report(self.editor.type_value(ch, key, text, self._time_rate_hz()))

        self.app.push_screen(PromptScreen(question, now,
                                          lambda text: self.editor.check_text(ch, key, text, rate),
                                          hint=hint, note=(lambda text: self.editor.rounding(key, text, rate))
                                          if key in TIME_KEYS else None),
                             done)

    def action_apply_all(self) -> None:
        self._report(self.editor.copy_to_all(self.cursor))

    def action_apply_group(self) -> None:
        self._report(self.editor.copy_to_group(self.cursor))

    def action_undo(self) -> None:
        self._report(self.editor.undo())

    def action_redo(self) -> None:
        self._report(self.editor.redo())

    def apply_capture(self, settings: dict[int, ChannelSettings], polarity: dict[int, int],
                      unmeasured: Sequence[int] = ()) -> None:
        """The guided capture's outcome: one undoable edit (its learned polarities with it, and the marks
        of `unmeasured` keys, which keep settings the capture did not measure: `measured_marks`)."""
        names = self.source.channel_names()
        which = sorted(settings)
        what = ", ".join(names[c] for c in which if c < len(names)) if len(which) <= 3 else \
            plural(len(which), "key")
        base = getattr(self.source, "measured_base", lambda: None)()
        marks = measured_marks(base, which, unmeasured)  # a key measured now loses an old mark too
        left = [printable(names[c]) for c in unmeasured if c < len(names) and not marks[c]]
        note = f" ({', '.join(left)} not measured: marked measured = false)" if left else ""
        result = self.editor.apply_batch(f"guided capture: {what}{note}", settings, polarity, marks)
        self._report(result)
        if result.applied:
            self.say(f"Applied the suggestions for {plural(len(which), 'key')}."
                     + (f" Not measured: {', '.join(left)}: they keep their settings, saved marked "
                        "measured = false." if left else ""), severity="warning" if left else "information")

    # -- channel and display ----------------------------------------------------------------------
    def action_rebaseline(self, every: bool) -> None:
        if self._has_channels():
            # The engine takes the next frame as the baseline and reports it; the log shows that event.
            self.source.rebaseline(None if every else self.cursor)

    def action_toggle_detail(self) -> None:
        self.detail = not self.detail

    def action_toggle_spectrum(self) -> None:
        self.spectrum = not self.spectrum
        if self.spectrum and not self.detail:
            self.detail = True

    def action_zoom(self, step: int) -> None:
        """The detail panel's zoom: out to minutes, hours, the whole session; in back to seconds."""
        self.spectrum = False  # zooming asks for the plot over time
        self.detail_panel.zoom_by(step)  # the panel's title says what it shows now
        self._draw_detail()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """The zoom keys are the detail panel's: they act (and show in the footer) while it shows."""
        return self.detail if action == "zoom" else True

    def action_toggle_pause(self) -> None:
        self.paused = not self.paused

    def action_wizard(self) -> None:
        from tui.screens.capture import open_capture

        open_capture(self, self.source, self.apply_capture, clock=self.clock, selected=self.cursor)

    # -- the simulated board ----------------------------------------------------------------------
    def _press(self, ch: int, pressed: bool) -> None:
        if not self.source.can_press():
            self.say("Key presses from the keyboard work only on a simulated board (padtune demo).",
                        severity="warning")
            return
        if not 0 <= ch < len(self.source.channel_names()):
            return
        if not self.source.press(ch, pressed):
            self.say("The board is not connected: the key press was not sent.", severity="warning")
            return
        (self.held.add if pressed else self.held.discard)(ch)

    def action_tap(self) -> None:
        ch = self.cursor
        self._press(ch, True)
        if ch in self.held:
            self.set_timer(TAP_S, lambda: self._press(ch, False))

    def action_hold(self) -> None:
        self.action_hold_number(self.cursor)

    def action_hold_number(self, ch: int) -> None:
        self._press(ch, ch not in self.held)
