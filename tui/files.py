"""Files from the live screen: the checks a file name passes before anything is written, and the queue
that writes them one at a time; pure, no Textual.

Writing happens off the UI thread (the screen runs each `FileJob.write` in a thread worker): the
queue makes sure two never run at once (the atomic writer's temporary names would meet, and a later
save must not land before an earlier one) and that none is dropped. Every check returns the one-line
reason a name cannot be used, or None.
"""

from __future__ import annotations

from collections import deque
from pathlib import Path

from tui.source import FileJob


class FileQueue:
    """Jobs in the order they were asked for; `submit` and `finished` say which job to start now."""

    def __init__(self) -> None:
        self.running: FileJob | None = None
        self._waiting: deque[FileJob] = deque()

    def submit(self, job: FileJob) -> FileJob | None:
        """The job to start now (this one), or None when it waits for the one running."""
        if self.running is not None:
            self._waiting.append(job)
            return None
        self.running = job
        return job

    def finished(self) -> FileJob | None:
        """The running job is done (written or failed): the next one to start, if any."""
        self.running = self._waiting.popleft() if self._waiting else None
        return self.running

    @property
    def busy(self) -> bool:
        return self.running is not None

    def __len__(self) -> int:
        return (self.running is not None) + len(self._waiting)


def writable_path(text: str) -> str | None:
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


def new_recording_path(text: str) -> str | None:
    """Recordings are never overwritten: why this name cannot take a new one, or None."""
    if Path(text).expanduser().exists():
        return f"{Path(text).expanduser()} exists: recordings are never overwritten, give a new name"
    return writable_path(text)


class ReplaceOnce:
    """Asks once before an existing file (other than `current`, the one in use) is replaced: the
    reason names the consequence, and the same name given again is the confirmation."""

    def __init__(self, consequence: str, current: Path | None = None) -> None:
        self.consequence, self.current = consequence, current
        self._asked: set[Path] = set()

    def __call__(self, text: str) -> str | None:
        path = Path(text).expanduser().resolve()
        if not path.exists() or path == self.current or path in self._asked:
            return None
        self._asked.add(path)
        return f"{path.name} exists: press Enter again to replace it ({self.consequence}), or change the name"
