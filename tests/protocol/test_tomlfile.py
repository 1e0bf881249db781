"""`protocol.tomlfile`: the file hazards shared by profiles and board files, tested on their own.

Reference for the sizes: the byte counts of files written here; for "permission denied", the errno names
of the stdlib (`errno.EACCES`), raised by a stand-in for `os.open` because root reads any file.
"""

from __future__ import annotations

import errno
import os

import pytest

from protocol.errors import UserError
from protocol.tomlfile import MIB, read_capped, read_toml, size_words


def test_size_words_gives_mib_and_bytes():
    assert size_words(512) == "512 bytes"
    assert size_words(2 * MIB) == "2.0 MiB (2097152 bytes)"


def test_permission_denied_is_plain_words(tmp_path, monkeypatch):
    path = tmp_path / "p.toml"
    path.write_text("a = 1\n")

    def denied(*args, **kwargs):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(path))

    monkeypatch.setattr(os, "open", denied)
    with pytest.raises(UserError) as info:
        read_capped(path, "profile", MIB)
    assert "cannot read: permission denied" in str(info.value) and "Errno" not in str(info.value)


def test_a_file_swapped_for_a_fifo_after_the_check_cannot_block(tmp_path, monkeypatch):
    # The name is checked first, then the descriptor: a FIFO put in between is refused, not waited on.
    path = tmp_path / "p.toml"
    path.write_text("a = 1\n")
    real_open = os.open

    def swap_then_open(name, flags, *args):
        os.unlink(path)
        os.mkfifo(path)
        assert flags & os.O_NONBLOCK  # without it, this open would wait for a writer
        return real_open(name, flags, *args)

    monkeypatch.setattr(os, "open", swap_then_open)
    with pytest.raises(UserError, match="is a FIFO, not a file"):
        read_capped(path, "profile", MIB)


def test_read_toml_reads_a_good_file_with_a_byte_order_mark(tmp_path):
    path = tmp_path / "p.toml"
    path.write_bytes(b"\xef\xbb\xbfa = 1\n")
    assert read_toml(path, "profile", MIB) == {"a": 1}


def test_control_codes_in_the_path_are_escaped(tmp_path):
    with pytest.raises(UserError) as info:
        read_toml(tmp_path / "\x1b[2Jx.toml", "profile", MIB)
    assert "\\x1b[2Jx.toml: no such profile file" in str(info.value)
