"""The guided capture screen: choose the keys, hands off, then each key "touch and hold" and release;
then suggestions.

Three stages on one screen. First the user chooses which keys to capture (`tui.widgets.key_choice`):
all of them, the key selected when the capture opened, an exclusive group or a slider's pads (from the
profile), or keys typed as numbers, ranges and names (`processing.capture.choose_keys`: `3-10`,
`stop, zone1-zone4`).
Then the steps: the step logic is `processing.capture.CaptureWizard` (pure); this screen only shows it
and feeds it. It reads the frames the session has taken since the last tick from the session's bounded
history, so it works while the app's own timer keeps polling the link (pass `poll` to drive the source
yourself, as tests do). At the end a table lists per key noise pp, touch delta, SNR pp and verdict and
the suggested threshold, hysteresis and debounce; below it the selected key's figures and histogram,
then its reasons (Tab to scroll them when they do not fit).

On a simulated board the screen presses keys itself (`press`, from the source): `p` holds or lets go of
the key asked for, `t` touches it until its step is done, `1`..`0` hold or let go of keys 1..10; any key
it still holds is let go when it closes. `a` applies the selected key's suggestion, `A` all of them,
Esc closes. A key without a suggestion (skipped, never touched, refused) is never applied as if it had
been measured: the first `A` names each such key and why, and applies nothing; a second `A` applies
the others, and those keys keep their settings marked not measured (as `padtune tune` without
`--partial` writes nothing, and with it marks them). The screen dismisses with
`{channel: ChannelSettings}` of what to apply (empty when nothing was); `unmeasured()` names the keys
the live screen marks `measured = false` (by `processing.tuning.measured_marks`: a key keeps its claim
only when a profile file held it as measured).

What it draws is plain rich in `tui.render.capture`. Open it with `open_capture(screen, source,
apply)` (the live screen's `w` key does), or push `CaptureScreen(session, clock=...)`; given
`channels=[...]` it skips the choice and captures those.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any, ClassVar

import numpy as np
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, ProgressBar, Static

from processing.capture import (
    RELEASE,
    TOUCH,
    CaptureOutcome,
    CaptureWizard,
    key_ranges,
    summarise,
)
from processing.recording import Mark
from processing.session import Session
from processing.settings import ChannelSettings
from protocol.events import FrameBlock
from tui.render.capture import (  # noqa: F401  (setting_label, outcome_detail: what tests and callers read)
    COLUMNS,
    cell,
    outcome_detail,
    outcome_row,
    setting_label,
)
from tui.render.help import key_display
from tui.render.histogram import ROLES as HISTOGRAM_ROLES
from tui.session_source import SessionSource
from tui.source import LiveSource
from tui.widgets.key_choice import KeyChoice

TICK_S = 0.1


class CaptureScreen(Screen[dict[int, ChannelSettings]]):
    """Guided capture over a live `Session`. `clock` gives the time for timeouts (tests pass their own);
    `selected` is the key selected when it opened (one of the choices); `press(channel, pressed) -> bool`
    presses a key of a simulated board (None: a real board, the keys are the user's)."""

    CSS_PATH = "capture.tcss"
    COMPONENT_CLASSES: ClassVar[set[str]] = {f"capture--{role}" for role in HISTOGRAM_ROLES}
    BINDINGS: ClassVar = [
        Binding("escape", "discard", "close", id="capture.discard", key_display=key_display("escape"),
                tooltip="Close the capture (suggestions already applied stay)"),
        Binding("s", "skip", "skip key", id="capture.skip", tooltip="Skip the key asked for now"),
        Binding("p", "hold", "hold key", id="capture.hold",
                tooltip="Hold / let go of the key the capture asks for, on the simulated board"),
        Binding("t", "touch", "touch key", id="capture.touch",
                tooltip="Touch the key the capture asks for on the simulated board, until its step is done"),
        *[Binding(str(n % 10), f"hold_number({n - 1})", f"Hold / let go of key {n} on the simulated board",
                  id=f"capture.key{n}", show=False) for n in range(1, 11)],
        # The same keys when they press nothing (choosing, results, a real board): the screen still owns
        # them, so they never reach a binding of the screen underneath.
        Binding(",".join(["p", "t", *map(str, range(10))]), "board_key_off", show=False,
                id="capture.board_keys_off"),
        Binding("a", "apply_one", "apply key", id="capture.apply_one",
                tooltip="Apply the selected key's suggestion"),
        Binding("A", "apply_all", "apply all", id="capture.apply_all", tooltip="Apply every suggestion"),
    ]

    def __init__(self, session: Session, *, clock: Callable[[], float] = time.monotonic,
                 poll: Callable[[], Any] | None = None, tick_s: float = TICK_S,
                 marker: Callable[[Mark], None] | None = None, selected: int | None = None,
                 press: Callable[[int, bool], bool] | None = None, **wizard_options: Any) -> None:
        super().__init__()
        self.session, self.clock, self.poll, self.tick_s = session, clock, poll, tick_s
        self.marker = marker  # gets the wizard's quiet/touch marks (open_capture: into the recording)
        self.selected, self.press = selected, press
        self._marks_sent = 0
        # Chosen beforehand (`channels=`): no choice step.
        chosen = wizard_options.pop("channels", None)
        self.chosen: list[int] | None = None if chosen is None else list(chosen)
        self.wizard_options = wizard_options
        self.wizard: CaptureWizard | None = None
        self.outcomes: list[CaptureOutcome] = []
        self.applied: dict[int, ChannelSettings] = {}
        self._partial_confirmed = False  # "A" once named the keys without a suggestion
        self._applied_all = False  # "A" applied the keys with a suggestion, the others left out
        self.held: set[int] = set()  # simulated keys this screen holds down
        self._touching: int | None = None  # `t`: held until its touch step is done
        self._history: object | None = None
        self._seen = 0

    def compose(self) -> ComposeResult:
        yield KeyChoice(id="capture-choose")
        with Vertical(id="capture-steps"):
            yield Static("Guided capture", classes="capture-title")
            yield Static("waiting for frames from the board…", id="capture-step")
            yield ProgressBar(total=100, show_eta=False, id="capture-progress")
            yield Static("", id="capture-notice")
            yield Static("", id="capture-overall")
        with Vertical(id="capture-results"):
            yield DataTable(id="capture-table", cursor_type="row", zebra_stripes=True, header_height=2,
                            cell_padding=0)
            with VerticalScroll(id="capture-detail-scroll"):
                yield Static("", id="capture-detail")
            yield Static("", id="capture-more")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#capture-results").display = False
        self.query_one("#capture-choose").display = self.chosen is None
        self.query_one("#capture-steps").display = self.chosen is not None
        self.query_one(DataTable).add_columns(*(cell(f"{top}\n {unit}") for top, unit in COLUMNS))
        if self.tick_s > 0:
            self.set_interval(self.tick_s, self.tick)
        self.tick()

    # -- choosing the keys ------------------------------------------------------------------------
    @property
    def choosing(self) -> bool:
        return self.chosen is None

    def _sets(self) -> list[tuple[str, str, list[int]]]:
        """The profile's exclusive groups and sliders as (kind, name, channels)."""
        profile = self.session.profile
        if profile is None:
            return []
        return ([("group", g.name, list(g.members)) for g in profile.groups]
                + [("wheel" if s.wheel else "slider", s.name, list(s.pads)) for s in profile.sliders])

    def _offer_choices(self) -> None:
        self.query_one(KeyChoice).offer(self.session.names, self.selected, self._sets())

    def on_key_choice_chosen(self, event: KeyChoice.Chosen) -> None:
        event.stop()
        self._begin(event.channels)

    def _begin(self, keys: list[int]) -> None:
        self.chosen = keys
        self.query_one("#capture-choose").display = False
        self.query_one("#capture-steps").display = True
        self.set_focus(None)
        self.tick()
        self.refresh_bindings()

    # -- feeding ----------------------------------------------------------------------------------
    def _start(self) -> bool:
        s = self.session
        if s.engine is None or s.measures is None or not s.names or self.chosen is None:
            return False
        keys = [c for c in self.chosen if 0 <= c < len(s.names)]
        if not keys:  # the board changed under the choice: choose again
            self._choose_again()
            return False
        polarity = [p or 0 for p in s.polarity]  # 0: not known yet, the touch asked for teaches it
        self.wizard = CaptureWizard(list(s.names), polarity, s.rate_hz, channels=keys, **self.wizard_options)
        self._history, self._seen = s.measures.history, s.measures.history.written
        self._marks_sent = 0
        self.refresh_bindings()
        return True

    def _choose_again(self) -> None:
        self.chosen = None
        self.query_one("#capture-steps").display = False
        self.query_one("#capture-choose").display = True
        self._offer_choices()

    def _new_block(self) -> FrameBlock | None:
        m = self.session.measures
        if m is None:
            return None
        h = m.history
        if h is not self._history:  # the board changed width or restarted: begin again
            self.notify("The board changed: the capture starts again.", severity="warning")
            self._stop_wizard()
            return None
        new = h.written - self._seen
        self._seen = h.written
        if new <= 0:
            return None
        t_s, readings, _, _ = h.last(min(new, len(h)))
        return FrameBlock(t_s, np.full(len(t_s), -1, np.int64), readings, 0)

    def _stop_wizard(self) -> None:
        """End the stretch under way (its end mark is written) and drop the wizard."""
        if self.wizard is not None:
            self.wizard.close()
            self._send_marks()
        self.wizard = None
        self._let_go()

    def tick(self) -> None:
        if self.poll is not None:
            self.poll()
        if self.choosing:
            self._offer_choices()
            return
        if self.wizard is None and not self._start():
            return
        assert self.wizard is not None
        was_done = self.wizard.done
        block = self._new_block()
        if self.wizard is None:
            return
        if block is not None:
            self.wizard.feed(block, self.clock())
        else:
            self.wizard.feed(FrameBlock(np.zeros(0), np.zeros(0, np.int64), np.zeros((0, 1), np.int64), 0),
                             self.clock())
        self._send_marks()
        self._follow_touch()
        if self.wizard.done and not was_done:
            self._finish()
        self._show_step()

    def _send_marks(self) -> None:
        if self.wizard is None:
            return
        new = self.wizard.marks[self._marks_sent:]
        self._marks_sent = len(self.wizard.marks)
        if self.marker is not None:
            for mark in new:
                self.marker(mark)

    def _show_step(self) -> None:
        w = self.wizard
        if w is None:
            return
        self.query_one("#capture-step", Static).update(Text(w.message, style="bold"))
        self.query_one("#capture-notice", Static).update(Text(w.notice))
        self.query_one(ProgressBar).update(progress=round(100 * w.progress))
        number = min(w.step_index + 1, len(w.steps))
        keys = key_ranges(list(w.keys), w.names)
        self.query_one("#capture-overall", Static).update(
            Text(f"step {number} of {len(w.steps)}: {keys}"))

    def _finish(self) -> None:
        assert self.wizard is not None
        self._let_go()
        profile = self.session.profile
        self.outcomes = summarise(self.wizard, self.session.settings,
                                  sliders=profile.sliders if profile is not None else ())
        self.query_one("#capture-steps").display = False
        self.query_one("#capture-results").display = True
        self._fill_table()
        table = self.query_one(DataTable)
        table.focus()
        self._show_detail(0)
        self.refresh_bindings()

    def _fill_table(self) -> None:
        table = self.query_one(DataTable)
        row = table.cursor_row
        table.clear()
        for o in self.outcomes:
            table.add_row(*map(cell, outcome_row(o, o.channel in self.applied)), key=str(o.channel))
        if self.outcomes:
            table.move_cursor(row=min(max(row, 0), len(self.outcomes) - 1))

    def _show_detail(self, row: int) -> None:
        if 0 <= row < len(self.outcomes):
            styles = {r: self.get_component_rich_style(f"capture--{r}", partial=True)
                      for r in HISTOGRAM_ROLES}
            self.query_one("#capture-detail", Static).update(outcome_detail(self.outcomes[row], styles))
            self.query_one("#capture-detail-scroll", VerticalScroll).scroll_home(animate=False)
            self.call_after_refresh(self._show_more)

    def _show_more(self) -> None:
        """Say where the rest of the detail is when it does not fit (at 80x24 the reasons scroll)."""
        scroll = self.query_one("#capture-detail-scroll", VerticalScroll)
        hint = self.query_one("#capture-more", Static)
        if scroll.max_scroll_y <= 0:
            hint.update("")
        elif scroll.has_focus:
            hint.update(Text("↑ ↓ PgUp PgDn scroll the reasons · Tab: back to the table"))
        else:
            hint.update(Text("↓ more reasons below: Tab, then ↓ / PgDn"))

    def on_descendant_focus(self) -> None:
        if self.outcomes:
            self.call_after_refresh(self._show_more)

    def on_resize(self) -> None:
        if self.outcomes:
            self.call_after_refresh(self._show_more)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show_detail(event.cursor_row)

    # -- the simulated board's keys ---------------------------------------------------------------
    def _asked(self) -> int | None:
        """The key the capture asks for now (to touch, or to release)."""
        step = self.wizard.step if self.wizard is not None else None
        return step.channel if step is not None and step.kind in (TOUCH, RELEASE) else None

    def _set_key(self, channel: int, pressed: bool) -> None:
        if self.press is None or not 0 <= channel < len(self.session.names):
            return
        if not self.press(channel, pressed):
            self.notify("The board is not connected: the key press was not sent.", severity="warning")
            return
        (self.held.add if pressed else self.held.discard)(channel)

    def _let_go(self) -> None:
        """A simulated finger never stays on after its step or the capture."""
        for channel in sorted(self.held):
            self._set_key(channel, False)
        self._touching = None

    def _follow_touch(self) -> None:
        """`t` holds the key until its touch step is done, then lets go for the release step."""
        c = self._touching
        step = self.wizard.step if self.wizard is not None else None
        if c is not None and (step is None or step.kind != TOUCH or step.channel != c):
            self._touching = None
            if c in self.held:
                self._set_key(c, False)

    def _no_key_asked(self) -> None:
        self.notify("Hands off now: the capture asks for no key yet.", severity="warning")

    def action_hold(self) -> None:
        c = self._asked()
        if c is None:
            self._no_key_asked()
            return
        self._touching = None
        self._set_key(c, c not in self.held)

    def action_touch(self) -> None:
        c = self._asked()
        step = self.wizard.step if self.wizard is not None else None
        if c is None or step is None:
            self._no_key_asked()
        elif step.kind == RELEASE:
            self._set_key(c, False)
        elif c not in self.held:
            self._set_key(c, True)
            self._touching = c if c in self.held else None

    def action_hold_number(self, channel: int) -> None:
        if self._touching == channel:
            self._touching = None
        self._set_key(channel, channel not in self.held)

    # -- actions ----------------------------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        done = bool(self.outcomes)
        capturing = not self.choosing and not done
        if action in ("apply_one", "apply_all"):
            return done
        if action == "skip":
            return capturing
        if action in ("hold", "touch", "hold_number"):
            return capturing and self.press is not None
        if action == "board_key_off":
            return not (capturing and self.press is not None)
        return True

    def action_board_key_off(self) -> None:
        if not self.choosing and not self.outcomes and self.press is None:
            self.notify("Key presses from the keyboard work only on a simulated board (padtune demo).",
                        severity="warning")

    def action_skip(self) -> None:
        if self.wizard is not None and not self.wizard.done:
            self.wizard.skip(self.clock())
            self._send_marks()
            self._follow_touch()
            if self.wizard.done:
                self._finish()
            self._show_step()

    def action_apply_one(self) -> None:
        row = self.query_one(DataTable).cursor_row
        if not 0 <= row < len(self.outcomes):
            return
        o = self.outcomes[row]
        if not o.suggested:
            self.notify(f"{o.name}: no suggestion to apply", severity="warning")
            return
        self.applied[o.channel] = o.after
        self._fill_table()
        if all(x.channel in self.applied for x in self.outcomes if x.suggested):
            self._close()

    def action_apply_all(self) -> None:
        unmeasured = [o for o in self.outcomes if not o.suggested]
        if unmeasured and not self._partial_confirmed:
            self._partial_confirmed = True
            why = "; ".join(f"{o.name}: {getattr(o.suggestion, 'reason', '-')}" for o in unmeasured)
            self.notify(f"Not measured, nothing applied yet: {why}. Press A again to apply the other keys "
                        "(these keep their settings, marked not measured: measured = false when saved), "
                        "or Esc to close.", severity="warning", timeout=15)
            return
        self._applied_all = True
        for o in self.outcomes:
            if o.suggested:
                self.applied[o.channel] = o.after
        if unmeasured:
            self.notify("Applied all but " + ", ".join(o.name for o in unmeasured) + " (not measured: they "
                        "keep their settings, marked measured = false).", severity="warning")
        self._close()

    def action_discard(self) -> None:
        # Keys applied one by one are kept; everything else is dropped.
        self._close()

    def unmeasured(self) -> list[int]:
        """The captured keys without a suggestion, once the user applied anything (`a`, or `A` with them
        left out): they keep their settings, and the profile may not call those measured."""
        if not (self.applied or self._applied_all):
            return []
        return [o.channel for o in self.outcomes if not o.suggested]

    def _close(self) -> None:
        """Dismiss with what was applied; a stretch under way gets its end mark, held keys are let go."""
        if self.wizard is not None and not self.wizard.done:
            self._stop_wizard()
        self._let_go()
        self.dismiss(dict(self.applied))


def open_capture(host: Screen[object], source: LiveSource,
                 apply: Callable[[dict[int, ChannelSettings], dict[int, int], list[int]], None],
                 *, clock: Callable[[], float] = time.monotonic, selected: int | None = None) -> None:
    """Push the capture screen over `host` (the live screen); what the user applied goes to `apply`
    (settings per channel, the polarities the capture learned for them, and the captured keys left
    without a suggestion, `CaptureScreen.unmeasured`) as one undoable edit.
    `selected` is the channel selected in the table (one of the choices of keys to capture)."""
    if not isinstance(source, SessionSource):
        host.notify("The guided capture needs a live session.", severity="warning")
        return
    session = source.session

    # On a simulated board the demo's scripted touches would land on the wrong keys mid-capture:
    # ask the board to keep still until the capture closes (a real board ignores the request).
    if source.keep_still(True):
        host.notify("The simulated board's scripted touches are paused during the capture.")

    def done(result: dict[int, ChannelSettings] | None) -> None:
        source.keep_still(False)
        unmeasured = screen.unmeasured()
        if not result and not unmeasured:
            host.notify("Guided capture closed: nothing applied.")
            return
        learned = screen.wizard.learned if screen.wizard is not None else {}
        result = result or {}
        apply(result, {c: sign for c, sign in learned.items() if c in result}, unmeasured)

    def marker(mark: Mark) -> None:
        # While the app records, the capture's stretches go into the file as marks, so the same
        # recording can be re-tuned (`padtune tune`) or replayed against its marks later.
        source.mark(mark.kind, mark.channel, mark.text, t_s=mark.t_s)

    # The simulated board's keys are the capture screen's own (`p`, `t`, digits): they press what it
    # asks for. A real board's keys are pressed by a finger.
    press = source.press if source.can_press() else None
    screen = CaptureScreen(session, clock=clock, marker=marker, selected=selected, press=press)
    host.app.push_screen(screen, done)
