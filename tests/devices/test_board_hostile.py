"""Hostile board files (issue 13): special files, sizes, deep nesting, huge numbers, control characters.

Each hazard is one UserError line with no control characters (Python's `str.isprintable`, stdlib, is the
reference) and none of Python's own words; nothing blocks or reads without bound.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path

import pytest

from devices.boards import MAX_BOARD_BYTES, MESSAGE_CHARS, load_board
from protocol.errors import UserError

BUNDLED = Path(__file__).resolve().parents[2] / "devices" / "boards"
GRID = (BUNDLED / "grid64.toml").read_text()


def refused(path: Path) -> str:
    with pytest.raises(UserError) as info:
        load_board(str(path))
    message = str(info.value)
    assert message.isprintable() and len(message) <= MESSAGE_CHARS + 200, message
    for word in ("Traceback", "Error", "set_int_max_str_digits", "[Errno", "int too large"):
        assert word not in message, message
    return message


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "b.toml"
    path.write_text(text)
    return path


def test_a_fifo_board_file_is_refused_by_name(tmp_path):
    fifo = tmp_path / "b.toml"
    os.mkfifo(fifo)
    said: list[str] = []
    reader = threading.Thread(target=lambda: said.append(refused(fifo)), daemon=True)
    reader.start()
    reader.join(10)
    if reader.is_alive():
        os.close(os.open(fifo, os.O_WRONLY | os.O_NONBLOCK))
        pytest.fail("load_board blocked opening a FIFO")
    assert "is a FIFO, not a file" in said[0]


def test_a_link_to_a_device_and_a_big_file_are_refused_unread(tmp_path):
    link = tmp_path / "b.toml"
    link.symlink_to("/dev/zero")
    assert "is a character device, not a file" in refused(link)
    link.unlink()
    big = write(tmp_path, GRID + "#" * MAX_BOARD_BYTES + "\n")
    assert f"a board file is at most 1.0 MiB ({MAX_BOARD_BYTES} bytes)" in refused(big)


def test_nesting_digits_and_encoding_are_one_line(tmp_path):
    assert "nested too deeply" in refused(write(tmp_path, GRID + "x = " + "[" * 5000 + "]" * 5000 + "\n"))
    digits = GRID.replace("rate_hz = 1000", "rate_hz = " + "9" * 5000)
    assert "thousands of digits" in refused(write(tmp_path, digits))
    path = tmp_path / "b.toml"
    path.write_bytes(GRID.encode() + b"\n# \xff\n")
    assert "not UTF-8 text" in refused(path)


@pytest.mark.parametrize("old, new, says", [
    ("rate_hz = 1000", "rate_hz = " + "9" * 400, "board.rate_hz: must be a number"),  # was OverflowError
    ("adc_bits = 12", "adc_bits = " + "9" * 400, "method.adc_bits: must be a positive number"),
    ('description = "8 x 8', 'description = "\\u001b]0;x\\u0007 8', "board.description: must be one line"),
    ('prefix = "k"', 'prefix = "\\u001b"', "pad_grid.prefix: '\\x1b' does not make plain pad names"),
    ('prefix = "k"', 'prefix = "' + "p" * 100 + '"', "pad_grid.prefix"),
    ('name = "grid64"', 'name = "\\u001b[2J"', "board.name: '\\x1b[2J' is not a plain name"),
    ('kind = "charge_share"', 'kind = "\\u001b[31m"', "unknown method '\\x1b[31m'"),
    ("sample_pf = 20", '"\\u001b[2J" = 20', "method.\\x1b[2J: unknown key"),
    ('material = "acrylic"', 'material = "' + "a" * 100_000 + '"', "unknown overlay material 'aaaa"),
])
def test_bad_values_are_one_escaped_line(tmp_path, old, new, says):
    assert old in GRID
    assert says in refused(write(tmp_path, GRID.replace(old, new)))


def test_forty_thousand_pads_are_refused_by_their_count(tmp_path):
    head = GRID.split("[pad_grid]")[0]
    tail = "[noise]" + GRID.split("[noise]")[1]
    pads = "".join(f'[[pad]]\nname = "p{i}"\n' for i in range(40000))
    assert "40000 pads; a simulated board has at most 256" in refused(write(tmp_path, head + pads + tail))
