"""Opening the live screen on a port or URL: builds the link, the session and the app, runs it.

Shared by `padtune demo`, `padtune watch` and the port picker. Everything a user can get wrong (a
busy or missing port, a bad profile) raises `UserError` before the screen opens, so it prints as one
line; once the screen is up, the link reconnects by itself and the screen shows its state.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence
from pathlib import Path

from processing.profile import Profile, load_profile
from protocol.errors import UserError


def run_live(target: str, baud: int, profile_path: Path | None, demo: bool = False,
             start_profile: Profile | None = None, notices: Sequence[str] = (),
             polarity: tuple[int, ...] = ()) -> int:
    """Open `target`, run the screen until the user quits; `start_profile` is used when no file is given.
    `notices` are lines for the screen's log (stderr belongs to the screen while it runs); `polarity` is
    `--polarity` (empty: the board's, the profile's, or learned)."""
    from processing.session import Session
    from protocol.link import Link
    from tui.app import PadtuneApp
    from tui.session_source import SessionSource

    profile = load_profile(profile_path) if profile_path is not None else start_profile
    link = Link(target, baud)
    link.start()  # UserError (one line) when the port cannot be opened
    try:
        source = SessionSource(link, profile=profile, profile_path=profile_path, port=target, baud=baud,
                               simulated=demo or target.startswith("sim://"),
                               session=Session(profile, polarity=polarity))
        source.notices.extend(notices)
        app = PadtuneApp(source, demo=demo)
        app.run()
    finally:
        link.stop()
    for problem in source.exit_problems:  # after the screen is gone, so they stay readable
        print(f"padtune: {problem}", file=sys.stderr)
    return int(app.return_code or 0)


def check_profile_arg(text: str | None) -> Path | None:
    if text is None:
        return None
    path = Path(text).expanduser()
    if not path.is_file():
        raise UserError(f"no profile file at {path}: give an existing .toml file, or leave --profile out")
    return path


def check_baud(baud: int) -> int:
    if baud <= 0 or baud > 20_000_000:
        raise UserError(f"baud rate {baud} is not valid: give a positive rate such as 115200")
    return baud
