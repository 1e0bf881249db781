"""Opening the live screen on a port or URL: builds the link, the session and the app, runs it.

Shared by `padtune demo`, `padtune watch` and the port picker; all errors a user can cause (a busy
port, a bad profile) are raised as `UserError` before the screen opens, so they print as one line.
"""

from __future__ import annotations

from pathlib import Path

from protocol.errors import UserError


def run_live(target: str, baud: int, profile_path: Path | None, demo: bool = False) -> int:
    from protocol.link import Link, open_port

    from processing.profile import load_profile
    from tui.app import PadtuneApp
    from tui.session_source import SessionSource

    profile = load_profile(profile_path) if profile_path is not None else None
    # Open once up front so a missing or busy port is a one-line error, not a screen that never connects.
    open_port(target, baud, 0.2).close()
    link = Link(target, baud)
    source = SessionSource(link, profile=profile, profile_path=profile_path, port=target, baud=baud)
    app = PadtuneApp(source, demo=demo)
    link.start()
    try:
        app.run()
    finally:
        link.stop()
    return int(app.return_code or 0)


def check_profile_arg(text: str | None) -> Path | None:
    if text is None:
        return None
    path = Path(text).expanduser()
    if not path.is_file():
        raise UserError(f"no profile file at {path}: give an existing .toml file, or leave --profile out")
    return path
