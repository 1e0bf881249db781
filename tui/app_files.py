"""The live screen's file actions: record, mark, save, save as, load and export (a mixin of PadtuneApp).

Every file name is asked for in a prompt that checks it first (a missing folder, a file that would be
replaced, a recording that exists) and shows the reason in place; the old file is never touched
until the new one is complete (profiles and exports are written atomically by `processing`).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from protocol.errors import UserError
from tui.screens.prompt import PromptScreen

if TYPE_CHECKING:
    from tui.source import LiveSource


class FileActions:
    """Needs from the app: `source`, `notify`, `push_screen`, `_log`, `_unless_unsaved`, `history`."""

    if TYPE_CHECKING:  # provided by PadtuneApp and textual.App
        source: LiveSource
        notify: Callable[..., None]
        push_screen: Callable[..., object]

        def _log(self, line: str) -> None: ...
        def refresh_now_if_idle(self) -> None: ...
        def _unless_unsaved(self, question: str, then: Callable[[], None]) -> None: ...

    # -- recording --------------------------------------------------------------------------------
    def action_toggle_recording(self) -> None:
        if self.source.link_view().recording:
            try:
                path = self.source.stop_recording()
            except UserError as exc:  # its last rows could not be written (a full disk)
                self.notify(str(exc), severity="error", timeout=10)
                self._log(f"✗ recording stopped: {exc}")
                self.refresh_now_if_idle()
                return
            self.notify(f"Recording saved to {path}")
            self._log(f"recording stopped: {path}")
            self.refresh_now_if_idle()
            return
        default = time.strftime("padtune-%Y%m%d-%H%M%S.csv")

        def done(text: str | None) -> None:
            if text:
                path = Path(text).expanduser().resolve()
                try:
                    self.source.start_recording(path)
                except UserError as exc:
                    self.notify(str(exc), severity="error")
                    return
                self._log(f"recording to {path}")
                self.refresh_now_if_idle()

        def check(text: str) -> str | None:
            if Path(text).expanduser().exists():
                return f"{Path(text).expanduser()} exists: recordings are never overwritten, give a new name"
            return _writable_path(text)

        self.push_screen(PromptScreen("Record to file:", default, check), done)

    def action_mark(self) -> None:
        if not self.source.link_view().recording:
            self.notify("Not recording: press r to start a recording first.", severity="warning")
            return
        names = self.source.channel_names()
        text = f"mark at {names[self.cursor]}" if names else "mark"
        if self.source.mark("note", text=text):
            self._log(text)

    # -- profile ----------------------------------------------------------------------------------
    def _after_save(self, path: Path, what: str) -> None:
        self.notify(f"{what} written to {path}")
        self._log(f"{what} written to {path}")
        self.refresh_now_if_idle()

    def action_save(self) -> None:
        if self.source.profile_path() is None:
            self.action_save_as()
            return
        try:
            self._after_save(self.source.save(), "profile")
        except UserError as exc:
            self.notify(str(exc), severity="error")

    def action_save_as(self) -> None:
        current = self.source.profile_path()
        default = str(current) if current else f"{self.source.link_view().board or 'board'}.toml"

        asked: set[Path] = set()

        def check(text: str) -> str | None:
            reason = _writable_path(text) or _replacing(text, current, asked, "the old one is kept as .bak")
            if reason:
                return reason
            try:
                self._after_save(self.source.save(Path(text).expanduser().resolve()), "profile")
            except (UserError, OSError) as exc:
                return str(exc)
            return None

        self.push_screen(PromptScreen("Save the profile as:", default, check))

    def action_load(self) -> None:
        def ask() -> None:
            def check(text: str) -> str | None:
                try:
                    self.source.load(Path(text).expanduser().resolve())
                except (UserError, OSError) as exc:
                    return str(exc)
                self.history.clear()
                self._log(f"profile loaded from {Path(text).expanduser().resolve()}")
                return None

            current = str(self.source.profile_path() or "")
            self.push_screen(PromptScreen("Load the profile from:", current, check))

        self._unless_unsaved("Loading another profile drops your unsaved edits. Load anyway?", ask)

    def action_export(self) -> None:
        current = self.source.profile_path()
        default = str(current.with_suffix(".h")) if current else "padtune_keys.h"

        asked: set[Path] = set()

        def check(text: str) -> str | None:
            reason = _writable_path(text) or _replacing(text, None, asked, "it will be replaced")
            if reason:
                return reason
            try:
                path = self.source.export(Path(text).expanduser().resolve())
            except (UserError, OSError) as exc:
                return str(exc)
            self._after_save(path, "firmware export")
            return None

        self.push_screen(PromptScreen("Export for firmware to (.h for a C header, .json for JSON):", default,
                                      check))


def _replacing(text: str, current: Path | None, asked: set[Path], consequence: str) -> str | None:
    """Ask once before replacing an existing file (other than the one in use): Enter again confirms."""
    path = Path(text).expanduser().resolve()
    if not path.exists() or path == current or path in asked:
        return None
    asked.add(path)
    return f"{path.name} exists: press Enter again to replace it ({consequence}), or change the name"


def _writable_path(text: str) -> str | None:
    """Why a file cannot be written there (one line), or None when it can."""
    if not text.strip():
        return "give a file name"
    path = Path(text).expanduser()
    folder = path.resolve().parent
    if not folder.is_dir():
        return f"the folder {folder} does not exist"
    if path.is_dir():
        return f"{path} is a folder; give a file name"
    return None
