"""The live screen's profile load (`o`) given hostile files: a FIFO, a link to /dev/zero, escape codes.

Before issue 13 a FIFO froze the UI thread in `open()` and a link to /dev/zero read until memory ran out;
now the prompt shows one line saying what the path is, and the settings stay as they were.
"""

from __future__ import annotations

import os
from pathlib import Path

from tests.tui.test_app_actions import make_app, run, type_into_prompt


async def test_load_refuses_special_files_and_escapes_keys_in_the_prompt(tmp_path: Path) -> None:
    os.mkfifo(tmp_path / "fifo.toml")
    (tmp_path / "zero.toml").symlink_to("/dev/zero")
    (tmp_path / "esc.toml").write_text('format_version = 1\nchannels = 2\n"\\u001b[2Jx" = 1\n')
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        before = app.source.settings(0)
        for name, says in (("fifo.toml", "is a FIFO, not a file"), ("zero.toml", "is a character device"),
                           ("esc.toml", "\\x1b[2Jx: unknown key")):
            await pilot.press("o")
            await type_into_prompt(pilot, str(tmp_path / name))
            shown = str(app.screen.query_one("#prompt-error").render())
            assert says in shown and "\x1b" not in shown, shown
            await pilot.press("escape")
        assert app.source.settings(0) == before
