"""The examples in protocol/PROTOCOL.md decode as the text says (so the write-up cannot drift)."""

import pathlib
import re

from protocol.decoder import Decoder
from protocol.events import Answer, BoardInfo, FrameBlock, Note, StreamForm

DOC = pathlib.Path(__file__).parents[2] / "protocol" / "PROTOCOL.md"


def examples() -> list[str]:
    return [line[4:] for line in DOC.read_text().splitlines() if line.startswith("    ") and line.strip()]


def test_every_example_line_decodes_without_faults():
    lines = examples()
    assert len(lines) >= 10
    for line in lines:
        if line == "?" or line.startswith("host: "):  # host to board, not something a board sends
            continue
        dec = Decoder()
        if line.startswith("@1 "):
            dec.feed(b"@0 1 2 3 4\n", 0.0)  # the second sequenced example follows the first
        events = dec.feed(line.encode() + b"\n", 0.0) + dec.flush_hold(0.0)  # a plain line is held
        stats = dec.stats
        faults = stats.garbled + stats.bad_checksum + stats.overlong + stats.lost + stats.width_mismatch
        assert faults == 0, line
        assert events and isinstance(events[-1], FrameBlock | BoardInfo | Note | Answer), line


def test_the_info_example_has_every_v1_key():
    (info_line,) = [x for x in examples() if x.startswith("! proto=1 board=greenhouse")]
    info = Decoder().feed(info_line.encode() + b"\n", 0.0)[0]
    assert set(info.fields) == {"proto", "board", "channels", "rate", "names", "method", "polarity", "fw"}
    assert len(info.names) == info.channels == 6


def test_the_check_value_in_the_doc():
    assert "0x29B1" in DOC.read_text()


def section(title: str) -> str:
    text = DOC.read_text()
    start = text.index(f"## {title}")
    end = text.find("\n## ", start + 1)
    return text[start : end if end > 0 else len(text)]


def blocks(text: str) -> list[list[str]]:
    """The indented example blocks of a piece of the doc, each a list of lines."""
    out: list[list[str]] = []
    previous_indented = False
    for line in text.splitlines():
        indented = line.startswith("    ") and bool(line.strip())
        if indented:
            if not previous_indented:
                out.append([])
            out[-1].append(line[4:])
        previous_indented = indented
    return out


def decode(lines: list[str]) -> tuple[list, Decoder]:
    dec = Decoder()
    data = "".join(line + "\n" for line in lines).encode()
    return dec.feed(data, 0.0) + dec.flush_hold(0.0), dec


def test_the_plain_form_examples_read_as_the_text_says():
    """Section 6's examples: each line of the first three blocks is one board's line; the time and
    scale blocks are one board's first lines each; the text block is notes."""
    found = {tuple(b[0].split()[:1]): b for b in blocks(section("6. Plain forms"))}
    expected_forms = {"1234": "columns", "zone1:1234,": "pairs", "T0:[": "brackets"}
    for first, form in expected_forms.items():
        for line in found[(first,)]:
            events, dec = decode([line])
            (sf,) = [e for e in events if isinstance(e, StreamForm)]
            (block,) = [e for e in events if isinstance(e, FrameBlock)]
            assert sf.form == form, line
            # The values as Python's float() reads them from the line (an independent reading).
            unnamed = re.sub(r"[A-Za-z_][A-Za-z0-9_]*[:=]", " ", line)
            values = [float(v) for v in re.findall(r"-?[0-9]+(?:\.[0-9]+)?", unnamed)]
            assert (block.readings[0] / sf.scale).tolist() == values, line
            if form != "columns":
                assert sf.names in (("zone1", "zone2", "zone3"), ("a", "b", "c"), ("T0", "T1", "T2")), line
            assert dec.stats.garbled == dec.stats.width_mismatch == 0
    events, dec = decode(found[("t:1000",)])  # the time column
    (sf,) = [e for e in events if isinstance(e, StreamForm)]
    assert sf.time_column and sf.names == ("a", "b") and dec.channels == 2
    times = [t for b in events if isinstance(b, FrameBlock) for t in b.board_time.tolist()]
    assert times == [1000, 1010, 1020, 1031]
    events, _ = decode(found[("1234.50",)])  # the scale: 1234.5 is 123450 at d = 2, 1234 would be 123400
    (sf,) = [e for e in events if isinstance(e, StreamForm)]
    rows = [r for b in events if isinstance(b, FrameBlock) for r in b.readings.tolist()]
    assert sf.scale == 100 and rows == [[123450, 125025], [123675, 124800], [123150, 125125]]
    events, dec = decode(found[("Touch",)])
    notes = [e.text for e in events if isinstance(e, Note)]
    assert notes == ["Touch demo v2 ready", "Calibrating, keep hands off..."]
    assert dec.first_unreadable == b"Touch demo v2 ready"


def test_the_wrap_example_in_the_doc():
    """65530 -> 3 is the wrap with 8 frames lost (it said 9 before issue 9)."""
    text = section("3. Frames")
    assert "65530 -> 3 is 9 ahead, so 8 frames were lost" in text
    dec = Decoder()
    dec.feed(b"@65530 1\n@3 1\n", 0.0)
    assert dec.stats.lost == 8 and dec.stats.resets == 0


def test_the_size_claim_in_the_doc():
    """512 channels of 32-bit values with `@65535`, a checksum and CRLF: the byte count the doc gives."""
    from protocol.encoder import encode_frame

    line = encode_frame([-(2**31)] * 512, seq=65535, checksum=True)[:-1] + b"\r\n"
    assert f"is {len(line)} bytes" in section("1. Lines") and len(line) <= 8192 + 2
