"""Untrusted text is escaped before it is printed (issue 13: control characters in names reach the terminal).

The reference for which characters are unprintable is Python's own `str.isprintable` (stdlib, Unicode
general categories C* and Z* other than the space), and the escapes are compared with what Python's
`repr` writes for the same character.
"""

from __future__ import annotations

import subprocess
import sys

from hypothesis import given
from hypothesis import strategies as st

from protocol.printable import printable


def test_plain_names_are_unchanged() -> None:
    assert printable("zone1") == "zone1"
    assert printable("Ζώνη 3") == "Ζώνη 3"


def test_escape_sequences_nul_and_newlines_are_escaped_as_python_writes_them() -> None:
    for ch in ("\x1b", "\x00", "\n", "\r", "\t", "\x7f", "\x9b", "\u2028"):
        shown = printable(f"a{ch}b")
        assert shown == "a" + repr(ch)[1:-1] + "b"


@given(st.text())
def test_nothing_unprintable_survives(text: str) -> None:
    shown = printable(text)
    assert shown.isprintable()


@given(st.text())
def test_escaping_is_reversible(text: str) -> None:
    # With backslashes doubled, the escaped text reads back as the original (stdlib unicode_escape codec).
    assert printable(text).encode("ascii", "backslashreplace").decode("unicode_escape") == text


def test_limit_cuts_with_an_ellipsis() -> None:
    assert printable("x" * 50, 20) == "x" * 17 + "..."


def test_a_whole_message_keeps_its_backslashes_but_loses_its_controls() -> None:
    assert printable("key 'a\\x1b' \x1b[2J", double_backslash=False) == "key 'a\\x1b' \\x1b[2J"


def test_the_command_line_never_prints_control_codes_from_a_user_error(tmp_path) -> None:
    bad = tmp_path / "\x1b[2Jprofile.toml"
    run = subprocess.run([sys.executable, "-m", "tui.cli", "export", str(bad), "--c-header", "-"],
                         capture_output=True, text=True, timeout=60)
    assert run.returncode == 2
    assert "\x1b" not in run.stderr
    assert "\\x1b[2J" in run.stderr
