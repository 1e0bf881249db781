"""The guided capture screen: hands off, then each key "touch and hold" and release; then suggestions.

The step logic is `processing.capture.CaptureWizard` (pure); this screen only shows it and feeds it.
It reads the frames the session has taken since the last tick from the session's bounded history, so it
works while the app's own timer keeps polling the link (pass `poll` to drive the source yourself, as
tests do). At the end a table lists per key noise pp, touch delta, SNR pp and verdict and the
suggested threshold, hysteresis and debounce; the selected key's RMS figures, reasons and histogram
show below it.
`a` applies the selected key's suggestion, `A` all of them, Esc discards. The screen dismisses with
`{channel: ChannelSettings}` of what to apply (empty when discarded).

Open it with `open_capture(screen, source, apply)` (the live screen's `w` key does), or push
`CaptureScreen(session, clock=...)`.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any, ClassVar

import numpy as np
from rich.console import Group
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, ProgressBar, Static

from processing.capture import CaptureOutcome, CaptureWizard, summarise
from processing.recording import Mark
from processing.session import Session
from processing.settings import ChannelSettings
from protocol.events import FrameBlock
from tui.fields import FIELDS
from tui.headless.histogram import DeltaHistogram
from tui.render.help import key_display
from tui.session_source import SessionSource
from tui.source import LiveSource

TICK_S = 0.1
# Two-line heads (the quantity over its form or unit) in plain words. Eleven columns with full words
# cannot fit 80 cells, so the RMS forms of noise and SNR moved to the selected key's detail lines,
# and the columns are one cell apart (each cell carries its own leading space) instead of two.
COLUMNS: tuple[tuple[str, str], ...] = (
    ("key", ""), ("noise", "pp"), ("touch", "delta"), ("SNR", "pp"), ("verdict", ""),
    ("threshold", "counts"), ("hysteresis", "counts"), ("debounce", "frames"), ("applied", ""),
)
# Setting keys (as the suggestion's reasons carry them) -> the words the editor shows for them.
_LABELS = {f.key: f.label for f in FIELDS}


def setting_label(key: str) -> str:
    """`threshold_counts` -> `threshold`: a setting key as the user reads it (unknown keys unchanged)."""
    return _LABELS.get(key, key.replace("_", " "))


def _cell(value: str) -> Text:
    return Text(f" {value}")


def _num(value: float | None, digits: int = 1) -> str:
    return "-" if value is None else ("inf" if not np.isfinite(value) else f"{value:.{digits}f}")


def outcome_row(o: CaptureOutcome, applied: bool) -> tuple[str, ...]:
    f, s = o.figures, o.after
    settings = (str(s.threshold_counts), str(s.hysteresis_counts),
                f"{s.touch_debounce_frames}/{s.release_debounce_frames}") if o.suggested else ("-", "-", "-")
    mark = "yes" if applied else ("-" if o.suggested else "none")
    return (o.name, _num(f.noise_pp_counts), _num(f.signal_counts), _num(f.snr_pp), o.verdict, *settings,
            mark)


def outcome_detail(o: CaptureOutcome) -> Group:
    """The selected key's reasons and its histogram of untouched and touched deltas."""
    f = o.figures
    lines = [Text(f"{o.name}", style="bold"),
             Text(f"  noise {_num(f.noise_pp_counts)} pp, {_num(f.noise_rms_counts)} RMS counts; "
                  f"touch delta {_num(f.signal_counts)} counts"),
             Text(f"  SNR {_num(f.snr_pp)} pp, {_num(f.snr_rms)} RMS: {o.verdict}")]
    if o.suggested:
        for key, reason in o.suggestion.reasons.items():  # type: ignore[union-attr]
            lines.append(Text(f"  {setting_label(key)}: {reason}"))
    else:
        lines.append(Text(f"  no suggestion: {o.suggestion.reason}"))  # type: ignore[union-attr]
    if o.stray_frames:
        lines.append(Text(f"  {o.stray_frames} frames rose beyond its noise while other keys were held "
                          "(a stray finger or strong crosstalk): left out of its untouched deltas"))
    threshold = float(o.after.threshold_counts) if o.suggested else None
    lines.append(Text(""))
    return Group(*lines, DeltaHistogram(o.untouched, o.touched, threshold=threshold, width=48))


class CaptureScreen(Screen[dict[int, ChannelSettings]]):
    """Guided capture over a live `Session`. `clock` gives the time for timeouts (tests pass their own)."""

    CSS_PATH = "capture.tcss"
    BINDINGS: ClassVar = [
        Binding("escape", "discard", "discard", id="capture.discard", key_display=key_display("escape"),
                tooltip="Close without applying"),
        Binding("s", "skip", "skip key", id="capture.skip", tooltip="Skip the key asked for now"),
        Binding("a", "apply_one", "apply key", id="capture.apply_one",
                tooltip="Apply the selected key's suggestion"),
        Binding("A", "apply_all", "apply all", id="capture.apply_all", tooltip="Apply every suggestion"),
    ]

    def __init__(self, session: Session, *, clock: Callable[[], float] = time.monotonic,
                 poll: Callable[[], Any] | None = None, tick_s: float = TICK_S,
                 marker: Callable[[Mark], None] | None = None, **wizard_options: Any) -> None:
        super().__init__()
        self.session, self.clock, self.poll, self.tick_s = session, clock, poll, tick_s
        self.marker = marker  # gets the wizard's quiet/touch marks (open_capture: into the recording)
        self._marks_sent = 0
        self.wizard_options = wizard_options
        self.wizard: CaptureWizard | None = None
        self.outcomes: list[CaptureOutcome] = []
        self.applied: dict[int, ChannelSettings] = {}
        self._history: object | None = None
        self._seen = 0

    def compose(self) -> ComposeResult:
        with Vertical(id="capture-steps"):
            yield Static("Guided capture", id="capture-title")
            yield Static("waiting for frames from the board…", id="capture-step")
            yield ProgressBar(total=100, show_eta=False, id="capture-progress")
            yield Static("", id="capture-notice")
            yield Static("", id="capture-overall")
        with VerticalScroll(id="capture-results"):
            yield DataTable(id="capture-table", cursor_type="row", zebra_stripes=True, header_height=2,
                            cell_padding=0)
            yield Static("", id="capture-detail")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#capture-results").display = False
        self.query_one(DataTable).add_columns(*(_cell(f"{top}\n {unit}") for top, unit in COLUMNS))
        if self.tick_s > 0:
            self.set_interval(self.tick_s, self.tick)
        self.tick()

    # -- feeding ----------------------------------------------------------------------------------
    def _start(self) -> bool:
        s = self.session
        if s.engine is None or s.measures is None or not s.names:
            return False
        polarity = [p or 0 for p in s.polarity]  # 0: not known yet, the touch asked for teaches it
        self.wizard = CaptureWizard(list(s.names), polarity, s.rate_hz, **self.wizard_options)
        self._history, self._seen = s.measures.history, s.measures.history.written
        return True

    def _new_block(self) -> FrameBlock | None:
        m = self.session.measures
        if m is None:
            return None
        h = m.history
        if h is not self._history:  # the board changed width or restarted: begin again
            self.notify("The board changed: the capture starts again.", severity="warning")
            self.wizard, self._marks_sent = None, 0
            return None
        new = h.written - self._seen
        self._seen = h.written
        if new <= 0:
            return None
        t_s, readings, _, _ = h.last(min(new, len(h)))
        return FrameBlock(t_s, np.full(len(t_s), -1, np.int64), readings, 0)

    def tick(self) -> None:
        if self.poll is not None:
            self.poll()
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
        assert w is not None
        self.query_one("#capture-step", Static).update(Text(w.message, style="bold"))
        self.query_one("#capture-notice", Static).update(Text(w.notice))
        self.query_one(ProgressBar).update(progress=round(100 * w.progress))
        number = min(w.step_index + 1, len(w.steps))
        self.query_one("#capture-overall", Static).update(
            Text(f"step {number} of {len(w.steps)}   s: skip this key   {key_display('escape')}: discard"))

    def _finish(self) -> None:
        assert self.wizard is not None
        self.outcomes = summarise(self.wizard, self.session.settings)
        self.query_one("#capture-steps").display = False
        self.query_one("#capture-results").display = True
        self._fill_table()
        table = self.query_one(DataTable)
        table.focus()
        self._show_detail(0)

    def _fill_table(self) -> None:
        table = self.query_one(DataTable)
        row = table.cursor_row
        table.clear()
        for o in self.outcomes:
            table.add_row(*map(_cell, outcome_row(o, o.channel in self.applied)), key=str(o.channel))
        if self.outcomes:
            table.move_cursor(row=min(max(row, 0), len(self.outcomes) - 1))

    def _show_detail(self, row: int) -> None:
        if 0 <= row < len(self.outcomes):
            self.query_one("#capture-detail", Static).update(outcome_detail(self.outcomes[row]))

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show_detail(event.cursor_row)

    # -- actions ----------------------------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        done = bool(self.outcomes)
        if action in ("apply_one", "apply_all"):
            return done
        if action == "skip":
            return not done
        return True

    def action_skip(self) -> None:
        if self.wizard is not None and not self.wizard.done:
            self.wizard.skip(self.clock())
            self._send_marks()
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
            self.dismiss(dict(self.applied))

    def action_apply_all(self) -> None:
        for o in self.outcomes:
            if o.suggested:
                self.applied[o.channel] = o.after
        self.dismiss(dict(self.applied))

    def action_discard(self) -> None:
        # Keys applied one by one are kept; everything else is dropped.
        self.dismiss(dict(self.applied))


def open_capture(host: Screen[object], source: LiveSource,
                 apply: Callable[[dict[int, ChannelSettings], dict[int, int]], None],
                 *, clock: Callable[[], float] = time.monotonic) -> None:
    """Push the capture screen over `host` (the live screen); what the user applied goes to `apply`
    (settings per channel, and the polarities the capture learned for them) as one undoable edit."""
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
        if not result:
            host.notify("Guided capture closed: nothing applied.")
            return
        learned = screen.wizard.learned if screen.wizard is not None else {}
        apply(result, {c: sign for c, sign in learned.items() if c in result})

    def marker(mark: Mark) -> None:
        # While the app records, the capture's stretches go into the file as marks, so the same
        # recording can be re-tuned (`padtune tune`) or replayed against its marks later.
        source.mark(mark.kind, mark.channel, mark.text, t_s=mark.t_s)

    screen = CaptureScreen(session, clock=clock, marker=marker)
    host.app.push_screen(screen, done)
