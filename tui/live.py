"""Opening the live screen on a port or URL: builds the link, the session and the app, runs it.

Shared by `padtune demo`, `padtune watch` and the port picker. Everything a user can get wrong (a
busy or missing port, a bad profile) raises `UserError` before the screen opens, so it prints as one
line; once the screen is up, the link reconnects by itself and the screen shows its state.
"""

from __future__ import annotations

import stat
import sys
from collections.abc import Sequence
from pathlib import Path

from processing.profile import MAX_PROFILE_BYTES, Profile, load_profile
from protocol.errors import UserError
from protocol.tomlfile import shown_path


def run_live(target: str, baud: int, profile_path: Path | None, demo: bool = False,
             start_profile: Profile | None = None, notices: Sequence[str] = (),
             polarity: tuple[int, ...] = ()) -> int:
    """Open `target`, run the screen until the user quits; `start_profile` is used when no file is given.
    `notices` are lines for the screen's log (stderr belongs to the screen while it runs); `polarity` is
    `--polarity` (empty: the board's, the profile's, or learned)."""
    # The profile first: a bad one is one line before the port, the session or the screen (Textual) exist.
    profile = load_profile(profile_path) if profile_path is not None else start_profile
    from processing.session import Session
    from protocol.link import Link
    from tui.app import PadtuneApp
    from tui.session_source import SessionSource

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
    """`--profile`'s path, refused at once when it is no regular file (a FIFO, a device, a folder: by what
    it is, never opened) or too large; `run_live` then loads it before the port opens or the screen starts."""
    if text is None:
        return None
    path = Path(text).expanduser()
    try:
        st = path.stat()
    except FileNotFoundError:
        raise UserError(f"no profile file at {shown_path(path)}: give an existing .toml file, or leave "
                        "--profile out") from None
    except OSError:
        st = None  # load_profile says why it cannot be read
    if st is None or not stat.S_ISREG(st.st_mode) or st.st_size > MAX_PROFILE_BYTES:
        load_profile(path)  # raises ProfileError naming what the path is, or its size against the cap
    return path


def check_baud(baud: int) -> int:
    if baud <= 0 or baud > 20_000_000:
        raise UserError(f"baud rate {baud} is not valid: give a positive rate such as 115200")
    return baud
