"""Self-contained HTML reports (inline SVG plots from matplotlib, no network) for `tune` and `check`.

matplotlib is an optional extra (`pip install 'padtune[report]'`); `require_matplotlib` turns its
absence into one clear line before any work is done.
"""

from __future__ import annotations

from protocol.errors import UserError


def require_matplotlib() -> None:
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        raise UserError("--report needs matplotlib, which is not installed: "
                        "pip install 'padtune[report]' (or leave --report out)") from None


def check_report_path(text: str) -> None:
    """Refuse a report path that cannot be written before any measuring is done."""
    from pathlib import Path

    from processing.atomic import NotRegularFile, refuse_non_regular
    from tui.dash import refuse_dash

    refuse_dash("--report", text, "the report is a file (standard output carries the command's own results)")
    path = Path(text).expanduser()
    try:
        if not path.is_dir():
            refuse_non_regular(path)
    except NotRegularFile as exc:
        raise UserError(f"--report {path}: {exc.strerror} (FILE.html)") from None
    if path.is_dir():
        raise UserError(f"--report {path}: is a folder; give the report's file name (FILE.html)")
    folder = path.resolve().parent
    if not folder.is_dir():
        raise UserError(f"--report {path}: the folder {folder} does not exist")
