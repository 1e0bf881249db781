"""The live screen's files: the recording, the profile (save, save as, load), the firmware export, and
quitting while there are unsaved edits.

`FileActions` holds the actions behind the keys r, m, s, S, o and x, and `request_quit` (the app's q and
Ctrl+Q). `LiveScreen` (tui/screens/live.py) inherits them and keeps their bindings, so the footer, the help
screen and the command palette, which are built from the screen's bindings, list them as the screen's.
File names are checked in the prompt (tui/files.py). A profile or an export becomes a `FileJob` (prepared on
the UI thread from the session as it is), queued in the screen's `FileQueue` and written by a thread worker,
one at a time: no file is written on the UI thread; the worker's end comes back as `Worker.StateChanged`,
and the log and a notice say how it went. A recording goes straight to the source, whose writer thread
writes it.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from rich.markup import escape
from textual.notifications import SeverityLevel
from textual.screen import Screen
from textual.worker import Worker, WorkerState

from protocol.errors import UserError
from protocol.printable import printable
from tui.editor import Editor
from tui.files import FileQueue, ReplaceOnce, new_recording_path, writable_path
from tui.render.views import LinkView
from tui.screens.confirm import ConfirmScreen, QuitChoice, QuitScreen
from tui.screens.prompt import PromptScreen
from tui.source import FileJob, LiveSource
from tui.widgets.link_strip import LinkStrip
from tui.words import plural


class FileActions(Screen[None]):
    """The live screen's file actions, for `LiveScreen` to inherit: it sets the attributes declared here
    and defines the methods declared under TYPE_CHECKING."""

    source: LiveSource
    editor: Editor
    files: FileQueue  # profiles and exports, written one at a time
    link_strip: LinkStrip
    _quit_when_written = False  # a save-and-quit (or a quit) waits for the file being written

    if TYPE_CHECKING:  # LiveScreen's own, used here
        @property
        def cursor(self) -> int: ...
        def say(self, text: str, severity: SeverityLevel = "information",
                timeout: float | None = None) -> None: ...
        def _log(self, line: str) -> None: ...
        def _after_change(self) -> None: ...
        def _link_view(self) -> LinkView: ...

    # -- recording --------------------------------------------------------------------------------
    def action_toggle_recording(self) -> None:
        if self.source.link_view().recording:
            try:
                path = self.source.stop_recording()
            except UserError as exc:  # its last rows could not be written (a full disk)
                self.say(str(exc), severity="error", timeout=10)
                self._log(f"✗ recording stopped: {exc}")
            else:
                self.say(f"Recording saved to {path}")
                self._log(f"recording stopped: {path}")
            self._after_change()
            return

        def done(text: str | None) -> None:
            if not text:
                return
            path = Path(text).expanduser().resolve()
            try:
                self.source.start_recording(path)
            except UserError as exc:
                self.say(str(exc), severity="error")
                return
            self._log(f"recording to {path}")
            self._after_change()

        default = time.strftime("padtune-%Y%m%d-%H%M%S.csv")
        self.app.push_screen(PromptScreen("Record to file:", default, new_recording_path), done)

    def action_mark(self) -> None:
        if not self.source.link_view().recording:
            self.say("Not recording: press r to start a recording first.", severity="warning")
            return
        names = self.source.channel_names()
        text = f"mark at {names[self.cursor]}" if names else "mark"
        if self.source.mark("note", text=text):
            self._log(text)

    # -- profile and export -----------------------------------------------------------------------
    def action_save(self) -> None:
        self._save(then_quit=False)

    def _save(self, then_quit: bool, asked: bool = False) -> None:
        if not asked and self._ask_unmeasured(lambda: self._save(then_quit, asked=True)):
            return
        if self.source.profile_path() is None:
            self._save_as(then_quit, asked=True)
            return
        try:
            job = self.source.save_job()
        except UserError as exc:
            self.say(str(exc), severity="error")
            return
        self._write(job, then_quit)

    def action_save_as(self) -> None:
        self._save_as(then_quit=False)

    def _ask_unmeasured(self, save: Callable[[], None]) -> bool:
        """Keys newly marked not measured (a guided capture left them without a suggestion) are named
        and the save waits for a yes (True: asked; `save` runs on yes)."""
        news = getattr(self.source, "unmeasured_news", lambda: [])()
        if not news:
            return False
        keys = escape(", ".join(printable(n) for n in news))
        question = (f"Not measured: {keys}. Save them with the settings they have, marked measured = false "
                    "(not tuned)?")
        self.app.push_screen(ConfirmScreen(question, yes="save, marked", no="do not save"),
                             lambda yes: save() if yes else self.say("Not saved."))
        return True

    def _save_as(self, then_quit: bool, asked: bool = False) -> None:
        if not asked and self._ask_unmeasured(lambda: self._save_as(then_quit, asked=True)):
            return
        current = self.source.profile_path()
        default = str(current) if current else f"{self.source.link_view().board or 'board'}.toml"
        replacing = ReplaceOnce("the old one is kept as .bak", current)
        jobs: list[FileJob] = []

        def check(text: str) -> str | None:
            reason = writable_path(text) or replacing(text)
            if reason is None:
                try:
                    jobs.append(self.source.save_job(Path(text).expanduser().resolve()))
                except UserError as exc:
                    reason = str(exc)
            return reason

        def done(text: str | None) -> None:
            if text is not None and jobs:
                self._write(jobs[-1], then_quit)

        question = "Save the profile, then quit, as:" if then_quit else "Save the profile as:"
        self.app.push_screen(PromptScreen(question, default, check), done)

    def action_load(self) -> None:
        def ask() -> None:
            def check(text: str) -> str | None:
                path = Path(text).expanduser().resolve()
                try:
                    self.source.load(path)
                except (UserError, OSError) as exc:
                    return str(exc)
                self.editor.forget()
                self._log(f"profile loaded from {path}")
                self._after_change()
                return None

            current = str(self.source.profile_path() or "")
            self.app.push_screen(PromptScreen("Load the profile from:", current, check))

        if not self.source.unsaved():
            ask()
            return
        self.app.push_screen(ConfirmScreen("Loading another profile drops your unsaved edits. Load anyway?"),
                             lambda yes: ask() if yes else None)

    def action_export(self) -> None:
        current = self.source.profile_path()
        default = str(current.with_suffix(".h")) if current else "padtune_keys.h"
        replacing = ReplaceOnce("it will be replaced")
        jobs: list[FileJob] = []

        def check(text: str) -> str | None:
            reason = writable_path(text) or replacing(text)
            if reason is None:
                try:
                    jobs.append(self.source.export_job(Path(text).expanduser().resolve()))
                except UserError as exc:
                    reason = str(exc)
            return reason

        def done(text: str | None) -> None:
            if text is not None and jobs:
                self._write(jobs[-1])

        self.app.push_screen(PromptScreen("Export for firmware to (.h for a C header, .json for JSON):",
                                          default, check), done)

    # -- writing files off the UI thread ----------------------------------------------------------
    def _write(self, job: FileJob, then_quit: bool = False) -> None:
        """Queue a file job; it runs in a thread worker once the one before it is done."""
        self._quit_when_written = self._quit_when_written or then_quit
        start = self.files.submit(job)
        if start is not None:
            self._start(start)
        self.link_strip.show(self._link_view())

    def _start(self, job: FileJob) -> None:
        self.run_worker(job.write, name=job.what, group="files", thread=True, exit_on_error=False)

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        if event.worker.group != "files" or event.state not in (WorkerState.SUCCESS, WorkerState.ERROR,
                                                                WorkerState.CANCELLED):
            return
        job = self.files.running
        if job is not None and event.state is WorkerState.SUCCESS:
            job.done()
            self._log(f"{job.what} written to {job.path}")
            self.say(f"{job.what[0].upper()}{job.what[1:]} written to {job.path}")
        elif job is not None:
            reason = not_written(job, event.worker.error)
            self._log(f"✗ {reason}")
            self.say(reason, severity="error", timeout=10)
            self._quit_when_written = False  # stay: the edits are still here, and the old file too
        following = self.files.finished()
        if following is not None:
            self._start(following)
        elif self._quit_when_written:
            self.app.exit()
        self._after_change()

    # -- quitting ---------------------------------------------------------------------------------
    def request_quit(self) -> None:
        """Quit, asking first when there are unsaved edits; a file being written is finished first."""
        if isinstance(self.app.screen, QuitScreen):
            return
        if not self.source.unsaved():
            self._exit_when_written()
            return

        def answer(choice: QuitChoice | None) -> None:
            if choice == "save":
                self._save(then_quit=True)
            elif choice == "discard":
                self._exit_when_written()

        self.app.push_screen(QuitScreen("There are unsaved edits."), answer)

    def _exit_when_written(self) -> None:
        if self.files.busy:
            self._quit_when_written = True
            self.say("Quitting once the file being written is complete.")
            return
        self.app.exit()


def not_written(job: FileJob, error: BaseException | None) -> str:
    """Why a file job failed, in one line; the file it would have replaced is unchanged."""
    if isinstance(error, UserError):
        lines = str(error).splitlines() or [f"{job.path}: not written"]
        more = f" (and {plural(len(lines) - 1, 'other problem')})" if len(lines) > 1 else ""
        return f"{job.what} not written: {lines[0]}{more}"
    if isinstance(error, OSError):
        return (f"{job.what} not written to {job.path}: {error.strerror or error}; "
                "the previous file is unchanged")
    return f"{job.what} not written to {job.path}: {type(error).__name__}: {error}"
