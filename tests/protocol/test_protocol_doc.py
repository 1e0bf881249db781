"""The examples in protocol/PROTOCOL.md decode as the text says (so the write-up cannot drift)."""

import pathlib

from protocol.decoder import Decoder
from protocol.events import BoardInfo, FrameBlock, Note

DOC = pathlib.Path(__file__).parents[2] / "protocol" / "PROTOCOL.md"


def examples() -> list[str]:
    return [line[4:] for line in DOC.read_text().splitlines() if line.startswith("    ") and line.strip()]


def test_every_example_line_decodes_without_faults():
    lines = examples()
    assert len(lines) >= 10
    for line in lines:
        if line == "?":  # host to board, not something a board sends
            continue
        dec = Decoder()
        if line.startswith("@1 "):
            dec.feed(b"@0 1 2 3 4\n", 0.0)  # the second sequenced example follows the first
        events = dec.feed(line.encode() + b"\n", 0.0) + dec.flush_hold(0.0)  # a plain line is held
        stats = dec.stats
        faults = stats.garbled + stats.bad_checksum + stats.overlong + stats.lost + stats.width_mismatch
        assert faults == 0, line
        assert events and isinstance(events[-1], FrameBlock | BoardInfo | Note), line


def test_the_info_example_has_every_v1_key():
    (info_line,) = [x for x in examples() if x.startswith("!")]
    info = Decoder().feed(info_line.encode() + b"\n", 0.0)[0]
    assert set(info.fields) == {"proto", "board", "channels", "rate", "names", "method", "polarity", "fw"}
    assert len(info.names) == info.channels == 6


def test_the_check_value_in_the_doc():
    assert "0x29B1" in DOC.read_text()
