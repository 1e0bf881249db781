"""The hostile recordings corpus (issue 13): damaged, absurd and malicious recordings and raw captures.

Each case writes one input (a padtune CSV recording, a raw capture of protocol lines as a board prints
them, or something that is neither) into an empty folder and runs the command a user would run on it:
`replay` (plain, `--json`, `--every 1`, `--profile`, `--against`), `tune -o` (whose profile must not be
written), and `check` given a recording where a port belongs. `cases.run_case` judges each run: exit 2
with one `padtune:` line, no control characters, no Python internals, within the time bound, no output
written, the input unchanged. A few cases are inputs that must still be read in full (a lone CR, CR line
ends, CRLF, 512 columns): those expect exit 0, and a dropped partial last line is a warning (exit 0 and
a line that says so), never an error that loses what was written before it.

`guards()` says, per case, which defect it guards against. The corpus is written against the intended
behaviour of issue 13; cases that fail on main before the streaming reader lands are marked in
`test_hostile_recordings.py`, not here.

The demo data is invented: a four-zone irrigation panel, readings near 1000 counts, one touch per key.
Every input is generated here from fixed seeds, so a run never depends on a board or on padtune's writer.
"""

from __future__ import annotations

import binascii
import functools
import os
import random
from collections.abc import Callable
from pathlib import Path

from tests.reliability.cases import ROOT, HostileCase

NAMES = ("zone1", "zone2", "zone3", "zone4")
RATE_HZ = 100
FRAMES = 800
REC = "rec.csv"
CAP = "capture.txt"
OUT = "out.toml"
MAX_COLUMNS = 512  # the protocol's most channels (PROTOCOL.md, section 4): the reader's column limit
# Every run gets an address-space cap (tests/reliability/memcap): an unbounded allocation fails in its
# own process instead of taking a shared machine's memory. 2 GiB is far above the goal of a
# 300 MB peak for a 200 MB recording, so a reader that streams never meets it.
MEMORY_CAP_BYTES = 2 * 1024**3
_CAP_ENV = {"PYTHONPATH": os.pathsep.join([str(ROOT), str(Path(__file__).with_name("memcap"))]),
            "PADTUNE_TEST_AS_LIMIT_BYTES": str(MEMORY_CAP_BYTES)}

# ------------------------------------------------------------------ inputs (pure text and bytes)


@functools.cache
def _readings(frames: int, seed: int, touch_at: Callable[[int], int]) -> tuple[tuple[int, ...], ...]:
    """Frames of readings: about 1000 counts, +-2 of noise, +150 while a key is touched (60 frames)."""
    rnd = random.Random(seed)
    rows = []
    for i in range(frames):
        row = []
        for c in range(len(NAMES)):
            start = touch_at(c)
            row.append(1000 + 40 * c + rnd.randint(-2, 2) + (150 if start <= i < start + 60 else 0))
        rows.append(tuple(row))
    return tuple(rows)


def _csv_touch_at(c: int) -> int:
    return 150 + 150 * c  # frames 150, 300, 450, 600: after a quiet second and a half


def data_rows(frames: int = FRAMES, first: int = 0) -> list[str]:
    """Data rows as padtune writes them: host time (6 decimals), seq, readings."""
    rows = _readings(frames + first, 13, _csv_touch_at)[first:]
    return [f"{(first + i) / RATE_HZ:.6f},{first + i}," + ",".join(map(str, r)) for i, r in enumerate(rows)]


def head_lines(names: tuple[str, ...] = NAMES, info: bool = True) -> list[str]:
    head = ["# padtune recording v1", "# start_utc=2026-12-02T06:00:00.000000Z", "# source=sim://panel"]
    if info:
        head.append(f"# info t_s=0.000000 proto=1 board=panel channels={len(names)} rate={RATE_HZ} "
                    f"names={','.join(names)} polarity=+")
    return [*head, "# first_index=0", "t_s,seq," + ",".join(names)]


def mark_lines() -> list[str]:
    """Hands off for the first second, then touch-start/touch-end around each key's touch."""
    marks = ["# mark t_s=0.100000 kind=quiet-start", "# mark t_s=1.300000 kind=quiet-end"]
    for c, name in enumerate(NAMES):
        start = _csv_touch_at(c) / RATE_HZ
        marks.append(f"# mark t_s={start - 0.05:.6f} kind=touch-start channel={name}")
        marks.append(f"# mark t_s={start + 0.65:.6f} kind=touch-end channel={name}")
    return marks


def recording(rows: list[str] | None = None, extra: tuple[str, ...] | list[str] = (),
              head: list[str] | None = None, marks: bool = True) -> str:
    """A whole, valid recording (LF line ends); `extra` rows go between the marks and the data."""
    lines = (head_lines() if head is None else head) + (mark_lines() if marks else []) + list(extra)
    return "\n".join(lines + (data_rows() if rows is None else rows)) + "\n"


def _with_row(index: int, row: str) -> str:
    """The good recording with data row `index` replaced."""
    rows = data_rows()
    rows[index] = row
    return recording(rows)


def info_line(channels: int = len(NAMES), rate: str = str(RATE_HZ), names: tuple[str, ...] = NAMES) -> str:
    return f"! proto=1 board=panel channels={channels} rate={rate} names={','.join(names)} polarity=+"


def _capture_touch_at(first_touch: int, c: int) -> int:
    return first_touch + 300 * c


def capture_lines(frames: int = 2000, first_touch: int = 400) -> list[str]:
    """A raw capture as a v1 board prints it: an info line, then sequenced frames with checksums."""
    rows = _readings(frames, 7, functools.partial(_capture_touch_at, first_touch))
    lines = [info_line()] + [f"@{i % 65536} " + " ".join(map(str, r)) for i, r in enumerate(rows)]
    return [f"{line}*{binascii.crc_hqx(line.encode(), 0xFFFF):04X}" for line in lines]


def capture(lines: list[str] | None = None, end: str = "\n") -> bytes:
    return (end.join(capture_lines() if lines is None else lines) + end).encode()


def cr_at_chunk_edges() -> bytes:
    """A capture whose line ends are a lone CR exactly at (or just after) every power-of-two offset from
    4 KiB to 2 MiB, where a reader working in chunks cuts: comment lines pad the stream out to each edge.
    Every touch comes after the last edge, so a reader that stops at any lone CR finds no touch at all."""
    lines = capture_lines(frames=1600, first_touch=600)
    out = bytearray()
    frame_lines = iter(lines)
    for n in range(12, 22):
        edge = 1 << n
        out += (next(frame_lines) + "\n").encode()
        pad = edge - len(out) - (1 if n % 2 else 0)  # the CR lands on byte edge-1 (odd n) or edge (even n)
        while pad > 8000:  # comments stay below the protocol's 8192-byte line limit
            out += b"#" + b"x" * 7998 + b"\n"
            pad -= 8000
        out += b"#" + b"x" * max(pad - 1, 0) + b"\r"
    for line in frame_lines:
        out += (line + "\n").encode()
    return bytes(out)


def profile_text(threshold_counts: int = 60) -> str:
    """A small valid profile for `--profile` and `--against` (the recording's four keys)."""
    return (f"format_version = 1\nchannels = {len(NAMES)}\n"
            f"[defaults]\nthreshold_counts = {threshold_counts}\nhysteresis_counts = 10\n")


# ------------------------------------------------------------------ commands


def _put(folder: Path, name: str, data: str | bytes) -> str:
    (folder / name).write_bytes(data.encode() if isinstance(data, str) else data)
    return name


def _profiles(folder: Path) -> list[str]:
    _put(folder, "a.toml", profile_text(60))
    _put(folder, "b.toml", profile_text(90))
    return ["--profile", "a.toml"]


Runner = Callable[[Path, str], list[str]]
PROFILES = ("a.toml", "b.toml")  # what replay_profile and replay_against write: inputs too, kept unchanged


def replay(*options: str) -> Runner:
    return lambda folder, name: ["replay", name, *options]


def replay_profile(*options: str) -> Runner:
    return lambda folder, name: ["replay", name, *_profiles(folder), *options]


def replay_against(*options: str) -> Runner:
    return lambda folder, name: ["replay", name, *_profiles(folder), "--against", "b.toml", *options]


def tune(*options: str) -> Runner:
    return lambda folder, name: ["tune", name, "-o", OUT, *options]


def check_port(folder: Path, name: str) -> list[str]:
    _put(folder, "limits.toml", profile_text())
    return ["check", name, "--profile", "limits.toml", "--no-limits", "--duration", "1"]


# ------------------------------------------------------------------ the corpus


class _Corpus:
    """Collects cases with the defect each one guards against."""

    def __init__(self) -> None:
        self.cases: list[HostileCase] = []
        self.guards: dict[str, str] = {}

    def add(self, name: str, guards: str, make: Callable[[Path], str], run: Runner, *,
            expect_exit: int = 2, says: tuple[str, ...] = (), keep_input: bool = True,
            must_not_exist: tuple[str, ...] | None = None, input_name: str = REC,
            also_unchanged: tuple[str, ...] = ()) -> None:
        if name in self.guards:
            raise ValueError(f"two cases named {name}")

        def build(folder: Path) -> list[str]:
            return run(folder, make(folder))

        if must_not_exist is None:
            must_not_exist = (OUT, OUT + ".bak", "report.html") if expect_exit == 2 else ()
        self.cases.append(HostileCase(
            name=name, build=build, expect_exit=expect_exit, says=says, must_not_exist=must_not_exist,
            unchanged=((input_name,) if keep_input else ()) + also_unchanged, extra_env=dict(_CAP_ENV)))
        self.guards[name] = guards

    def text(self, name: str, guards: str, data: str | bytes | Callable[[], str | bytes], run: Runner, *,
             file: str = REC, **kw: object) -> None:
        """A case whose input is one regular file with these bytes (or what `data()` makes, when the
        case runs: the large inputs are made only then)."""
        def make(folder: Path) -> str:
            return _put(folder, file, data() if callable(data) else data)

        self.add(name, guards, make, run, input_name=file, **kw)


def _csv_structure(c: _Corpus) -> None:
    cut_in_header = "\n".join(head_lines()[:-1]) + "\nt_s,seq,zone1,zo"
    c.text("csv_cut_inside_header_replay", "replay of a recording cut inside its header exited 0 with 0 "
           "frames (tune exits 2 on the same file)", cut_in_header, replay())
    c.text("csv_cut_inside_header_tune", "tune on a header-cut recording: exit 2 and no profile",
           cut_in_header, tune())
    c.text("csv_cut_inside_metadata_replay", "a recording cut in its metadata (no header at all) replayed "
           "as 0 frames with exit 0", "# padtune recording v1\n# start_utc=2026-12-0", replay())
    c.text("csv_only_format_line_replay", "a recording of only its format line replayed as 0 frames",
           "# padtune recording v1\n", replay("--json"))
    header_only = "\n".join(head_lines()) + "\n"
    c.text("csv_header_only_replay", "a complete header and no rows: replay must say there are no frames "
           "(as for a raw capture without frames), not exit 0", header_only, replay())
    c.text("csv_header_only_tune", "tune on a header without rows must write no profile", header_only, tune())
    c.text("empty_file_replay", "an empty file is neither a recording nor a capture", b"", replay())
    c.text("csv_data_row_before_header", "a data row before any header row", "# padtune recording v1\n"
           "0.010000,0,1000,1040,1080,1120\n" + "\n".join(head_lines()[1:]) + "\n", replay())
    c.text("csv_header_without_channels", "a header of only t_s,seq (no channel column)",
           recording(head=[*head_lines()[:-1], "t_s,seq"], rows=["0.010000,0"]), replay())
    c.text("csv_format_version_newer", "a recording of a newer format version must say which version",
           "# padtune recording v2\n" + recording().split("\n", 1)[1], replay(), says=("v2",))
    c.text("csv_format_version_5000_digits", "a version number of 5,000 digits leaked Python's int "
           "conversion limit", "# padtune recording v" + "9" * 5000 + "\n" + recording().split("\n", 1)[1],
           tune())
    c.text("csv_info_row_channels_100000", "an info row claiming 100,000 channels",
           recording(head=[*head_lines()[:3], "# info t_s=0.0 proto=1 channels=100000 rate=100",
                           *head_lines()[4:]]), replay())
    c.text("csv_then_raw_protocol_lines", "a recording with a board's raw protocol lines appended (two "
           "files concatenated)", recording() + "\n".join(capture_lines(frames=50)) + "\n", replay())


def _csv_columns(c: _Corpus) -> None:
    def wide(columns: int, rows: int = 3) -> str:
        names = tuple(f"k{i}" for i in range(columns))
        body = [f"{i / RATE_HZ:.6f},{i}," + ",".join(["1000"] * columns) for i in range(rows)]
        return "\n".join(head_lines(names, info=False) + body) + "\n"

    huge = functools.partial(wide, 100_000)
    c.text("csv_100000_columns_replay", "a 2 MB recording with 100,000 columns tried to allocate 6 GiB: "
           "the reader must refuse more columns than the protocol's 512 and say the limit", huge, replay(),
           says=(str(MAX_COLUMNS),))
    c.text("csv_100000_columns_tune", "the same 100,000 columns through tune: the limit, no profile",
           huge, tune(), says=(str(MAX_COLUMNS),))
    c.text("csv_513_columns_replay", "one column over the protocol's limit of 512 channels",
           functools.partial(wide, MAX_COLUMNS + 1), replay("--json"), says=(str(MAX_COLUMNS),))
    c.text("csv_512_columns_replay_accepted", "the column limit must not refuse the widest board the "
           "protocol allows (512 channels)", functools.partial(wide, MAX_COLUMNS, rows=50), replay("--json"),
           expect_exit=0)
    c.text("csv_row_missing_field", "a data row with one reading missing (must name its line)",
           _with_row(100, "1.000000,100,1000,1040,1080"), replay(), says=(f"{REC}:",))
    c.text("csv_row_extra_field", "a data row with a reading too many",
           _with_row(100, data_rows()[100] + ",7"), tune(), says=(f"{REC}:",))
    dup = head_lines(("zone1", "zone1", "zone3", "zone4"), info=False)
    c.text("csv_duplicate_column_names_tune", "two columns with one name: the profile has one table per "
           "name, so the second key could overwrite the first or break the TOML; a repeated name falls back "
           "to chN (PROTOCOL.md, channel names) and tune writes a profile (no marks: they would name "
           "one of the two)", recording(head=dup, marks=False), tune(), expect_exit=0)


def _csv_values(c: _Corpus) -> None:
    c.text("csv_time_nan", "a data row whose time is nan", _with_row(300, "nan,300,1000,1040,1080,1120"),
           replay("--every", "1"))
    c.text("csv_time_inf", "a data row whose time is inf", _with_row(300, "inf,300,1000,1040,1080,1120"),
           tune())
    c.text("csv_time_5000_digits", "a time of 5,000 digits (a float that overflows to inf)",
           _with_row(10, "9" * 5000 + ",10,1000,1040,1080,1120"), replay())
    c.text("csv_reading_5000_digits", "a reading of 5,000 digits leaked Python's int conversion limit",
           _with_row(10, "0.100000,10," + "7" * 5000 + ",1040,1080,1120"), tune())
    c.text("csv_seq_5000_digits", "a sequence number of 5,000 digits",
           _with_row(10, "0.100000," + "3" * 5000 + ",1000,1040,1080,1120"), replay("--json"))
    c.text("csv_reading_beyond_int32", "a reading past the 32-bit range the protocol allows",
           _with_row(10, "0.100000,10,2147483648,1040,1080,1120"), replay())
    c.text("csv_reading_with_decimals", "a reading with decimals (readings are integers)",
           _with_row(10, "0.100000,10,1000.5,1040,1080,1120"), tune())
    jump = data_rows()
    jump[-200:] = [f"{1e12 + i:.6f}," + row.split(",", 1)[1] for i, row in enumerate(jump[-200:])]
    c.text("csv_time_jump_1e12_json_every1", "replay --json --every 1 on a recording whose time jumps "
           "to 1e12 s never ended (the status loop stepped one second at a time); the frames are still "
           "the board's, so the replay must finish, quickly", recording(jump),
           replay("--json", "--every", "1"), expect_exit=0)


def _csv_rows(c: _Corpus) -> None:
    c.text("csv_fault_row_without_kind", "a fault row without kind= leaked a bare KeyError ('kind'): the "
           "message must say which row lacks what", recording(extra=["# fault t_s=1.000000 count=3"]),
           replay(), says=("fault",))
    c.text("csv_fault_row_unknown_kind", "a fault row of an unknown kind leaked the enum's class name "
           "(FaultKind)", recording(extra=["# fault t_s=1.000000 kind=meltdown count=1"]), tune(),
           says=("fault",))
    c.text("csv_fault_row_count_not_a_number", "a fault count that is no number leaked Python's "
           "'invalid literal for int()'", recording(extra=["# fault t_s=1.000000 kind=garbled count=many"]),
           replay(), says=("count",))
    c.text("csv_link_row_without_state", "a link row without state= leaked a bare KeyError ('state')",
           recording(extra=["# link t_s=1.000000 port=sim://panel"]), replay("--json"), says=("link",))
    c.text("csv_board_changed_row_without_channels", "a board-changed row without channels= leaked a bare "
           "KeyError ('channels')", recording(extra=["# board-changed t_s=1.000000 old=4"]), tune(),
           says=("board-changed",))
    c.text("csv_index_row_5000_digits", "an index row of 5,000 digits leaked Python's int conversion "
           "limit ('Exceeds the limit')", recording(extra=["# index value=" + "8" * 5000]), replay())
    c.text("csv_first_index_5000_digits", "a first_index metadata value of 5,000 digits leaked Python's "
           "int conversion limit",
           recording(head=[*head_lines()[:3], "# first_index=" + "8" * 5000, head_lines()[-1]]), tune())
    c.text("csv_mark_kind_with_escape_sequence", "an unknown mark kind holding ESC [2J (percent-encoded) "
           "must print escaped, never clear the terminal", recording(extra=["# mark t_s=1.0 kind=%1B%5B2J"]),
           replay(), says=("\\x1b",))
    c.text("csv_mark_time_not_a_number", "a mark whose time is no number leaked Python's 'could not "
           "convert string to float'", recording(extra=["# mark t_s=soon kind=note"]), tune(), says=("t_s",))


def _csv_bytes(c: _Corpus) -> None:
    c.text("csv_header_name_with_escape_and_nul", "a header with ESC, NUL and an empty name: the message "
           "quotes it escaped",
           recording(head=[*head_lines()[:-1], "t_s,seq,\x1b[31mzone1,zo\x00ne2,,zone4"]), replay(),
           says=("\\x1b",))
    c.text("csv_row_with_escape_sequence", "a data row holding ESC ]0; (a terminal title change) quoted "
           "in the message", _with_row(5, "0.050000,5,\x1b]0;owned\x07,1040,1080,1120"), tune(),
           says=("\\x1b",))
    c.text("csv_row_with_nul", "a NUL byte inside a data row",
           _with_row(5, "0.050000,5,10\x0000,1040,1080,1120"), replay())
    c.text("csv_lone_cr_inside_row", "a lone CR in the middle of a data row (not a line end in the "
           "format)", _with_row(5, "0.050000,5,1000\r,1040,1080,1120"), replay("--json"))
    c.text("csv_invalid_utf8", "bytes that are not UTF-8 in a recording", recording().encode()[:900]
           + b"\xff\xfe\xc3(" + recording().encode()[900:], tune(), says=("UTF-8",))
    c.text("csv_crlf_line_ends_tune", "a recording saved with CRLF line ends (edited on Windows) must still "
           "be read in full: tune finds every key and writes the profile", recording().replace("\n", "\r\n"),
           tune(), expect_exit=0)
    c.text("csv_bom_before_format_line", "a recording saved with a UTF-8 BOM (by an editor) read as a raw "
           "capture would turn its rows into other frames; it must be read as the recording it is",
           "\ufeff" + recording(), tune(), expect_exit=0)


def _truncated(c: _Corpus) -> None:
    whole = recording()
    cut = whole[: whole.rindex(",") + 3]  # the last row cut inside its last reading: right column count
    c.text("csv_truncated_last_row_tune_warns", "tune said nothing about a dropped partial last row (a "
           "writer killed mid-row): it must warn, keep what came before and still write the profile",
           cut, tune(), expect_exit=0, says=("last line",))
    c.text("csv_nul_tail_after_power_loss_tune_warns", "a recording whose end is NUL bytes (a file system "
           "after a power loss) has a partial last line: tune warns, keeps the rows before it",
           whole.encode() + b"\0" * 4096, tune(), expect_exit=0, says=("last line",))
    c.text("csv_truncated_last_row_against_warns", "replay --against on a cut recording warns on stderr",
           cut, replay_against(), expect_exit=0, says=("cut short",), also_unchanged=PROFILES)
    cap = capture()
    c.text("raw_truncated_last_line_tune_warns", "tune on a raw capture whose last frame is cut must say it "
           "dropped it", cap[:-7], tune(), expect_exit=0, says=("last line",), file=CAP)

    def sparse(folder: Path) -> str:
        head = recording().encode()
        with open(folder / REC, "wb") as f:
            f.write(head)
            f.truncate(len(head) + 8 * 1024**3)  # 8 GiB of NULs after the rows, no line end: sparse
        return REC

    c.add("csv_8GiB_nul_tail_no_line_end", "a file larger than any limit (8 GiB, sparse) was read whole "
          "into memory: a row can never be longer than 512 columns of 32-bit values, so the reader must "
          "stop at that bound, quickly and in bounded memory", sparse, replay(), keep_input=False)


def _raw(c: _Corpus) -> None:
    garbage = "\n".join(f"[INFO] +++ {i} ???" if i % 3 else "---- boot ----" for i in range(3000)) + "\n"
    c.text("raw_only_garbage", "a capture of only garbled lines: no frames, one line", garbage, replay(),
           file=CAP)
    rnd = random.Random(5)
    noise = bytes(rnd.randrange(128, 256) if i % 97 else 10 for i in range(200_000))
    c.text("raw_binary_noise", "a binary file (bytes at a wrong baud rate): no frames", noise, tune(),
           file=CAP)
    png_like = b"\x89PNG\r\n\x1a\n\0\0\0\rIHDR" + bytes(range(256)) * 64
    c.text("raw_binary_with_control_bytes", "a binary file with NUL, ESC and CR bytes", png_like,
           replay("--json"), file=CAP)
    c.text("raw_single_line_20MB_no_line_end", "a 20 MB capture without any line end (a board that never "
           "prints a newline): no frames, within the bound", lambda: b"1000 " * 4_000_000, replay(), file=CAP)
    c.text("raw_frames_100000_values", "frames of 100,000 values (past the 8192-byte line limit)",
           ("\n".join([f"@{i} " + " 1000" * 100_000 for i in range(3)]) + "\n"), replay(), file=CAP)
    c.text("raw_info_channels_100000", "an info line that says 100,000 channels, then frames of that width",
           "! proto=1 board=panel channels=100000 rate=100\n" + "\n".join(
               f"@{i}" + " 7" * 4000 for i in range(5)) + "\n", tune(), file=CAP)
    c.text("raw_frames_513_wide", "plain frames of 513 values (one past the protocol's channel limit)",
           "\n".join(" ".join(["1000"] * (MAX_COLUMNS + 1)) for _ in range(40)) + "\n", replay("--json"),
           file=CAP)
    c.text("raw_frames_4096_wide", "frames of 4,096 one-digit values fit the line limit but are 8 times the "
           "protocol's 512 channels: replaying 300 of them took 5.6 s; the column limit applies to captures",
           lambda: "\n".join(" ".join(["7"] * 4096) for _ in range(300)) + "\n", replay("--json"), file=CAP,
           says=(str(MAX_COLUMNS),))
    c.text("raw_width_mismatch_only", "an info line of 4 channels and only frames of 3: every frame dropped",
           info_line() + "\n" + "\n".join(f"@{i} 1 2 3" for i in range(2)) + "\n", replay(), file=CAP)
    c.text("raw_lone_cr_mid_capture_tune", "a lone CR in the middle of a capture stopped reading there, "
           "silently (99 of 2,000 frames): every touch comes after it, so tune finds them all or none",
           capture(capture_lines()[:100]).rstrip(b"\n") + b"\r" + capture(capture_lines()[100:]), tune(),
           expect_exit=0, file=CAP)
    c.text("raw_lone_cr_at_chunk_edges_tune", "lone CRs on the edges where a streaming reader cuts its "
           "chunks (4 KiB to 2 MiB): a reader that stops or loses a frame at an edge loses the touches",
           cr_at_chunk_edges, tune(), expect_exit=0, file=CAP)
    c.text("raw_cr_only_line_ends_tune", "a capture whose every line ends in a lone CR (a board that prints "
           "\\r only) must be read in full", capture(end="\r"), tune(), expect_exit=0, file=CAP)
    tiny_rate = [info_line(rate="1e-300"), *capture_lines(frames=40)[1:]]
    c.text("raw_info_rate_1e-300_every1", "an info line with a rate of 1e-300 Hz makes frame times of "
           "1e300 s, where adding a 1 s status interval changes nothing: replay --every 1 must still end",
           capture(tiny_rate), replay("--json", "--every", "1"), expect_exit=0, file=CAP)


def _paths(c: _Corpus) -> None:
    def folder_input(folder: Path) -> str:
        (folder / REC).mkdir()
        return REC

    def fifo(folder: Path) -> str:
        os.mkfifo(folder / REC)  # nobody ever writes it: reading it would wait for ever
        return REC

    def link_to(target: str, name: str = REC) -> Callable[[Path], str]:
        def make(folder: Path) -> str:
            (folder / name).symlink_to(target)
            return name
        return make

    def loop(folder: Path) -> str:
        (folder / "a.csv").symlink_to("b.csv")
        (folder / "b.csv").symlink_to("a.csv")
        return "a.csv"

    c.add("path_is_a_folder", "a folder given as the recording", folder_input, replay(), keep_input=False)
    c.add("path_is_a_fifo_replay", "a FIFO as the recording hung replay for ever", fifo, replay(),
          keep_input=False)
    c.add("path_is_a_fifo_tune", "a FIFO as tune's recording hung", fifo, tune(), keep_input=False)
    c.add("path_symlink_to_dev_zero", "a link to /dev/zero read without end, eating memory",
          link_to("/dev/zero"), tune(), keep_input=False)
    c.add("path_is_dev_null", "a character device that reads as empty", lambda folder: "/dev/null",
          replay(), keep_input=False)
    c.add("path_symlink_loop", "two links pointing at each other (ELOOP) leaked an OSError's text", loop,
          replay(), keep_input=False)
    c.add("path_dangling_symlink", "a link to a recording that was deleted", link_to("gone.csv"), tune(),
          keep_input=False)
    c.add("path_missing", "a recording that does not exist", lambda folder: "nothing-here.csv", replay(),
          keep_input=False)


def _commands(c: _Corpus) -> None:
    bad = _with_row(50, "0.500000,50,1000,,1080,1120")

    def keep_profile(folder: Path) -> str:
        _put(folder, OUT, profile_text(77))
        return _put(folder, REC, bad)

    c.add("tune_bad_recording_keeps_existing_profile", "tune on a damaged recording must leave the profile "
          "already at -o byte for byte and make no .bak", keep_profile, tune(),
          must_not_exist=(OUT + ".bak",), also_unchanged=(OUT,))
    c.text("tune_report_not_written_for_bad_recording", "tune --report on a damaged recording writes neither "
           "the profile nor the report", bad, tune("--report", "report.html"))
    c.text("replay_profile_bad_recording", "replay --profile on a damaged recording", bad, replay_profile(),
           also_unchanged=PROFILES)
    c.text("replay_against_bad_recording", "replay --against on a damaged recording", bad, replay_against(),
           also_unchanged=PROFILES)
    c.text("replay_against_header_cut", "replay --against on a header-cut recording (0 frames)",
           "\n".join(head_lines()[:-1]) + "\nt_s,seq,zo", replay_against("--json"), also_unchanged=PROFILES)

    c.text("tune_output_is_the_recording_itself", "tune -o naming its own input replaced the recording "
           "with a profile: what was recorded is lost (never lose what was already written)", recording(),
           lambda folder, name: ["tune", name, "-o", name], file="rec.toml", must_not_exist=("rec.toml.bak",))
    c.add("check_given_a_recording_as_port", "check given a recording where a port belongs",
          lambda folder: _put(folder, REC, recording()), check_port)


@functools.cache
def _catalogue() -> _Corpus:
    corpus = _Corpus()
    for part in (_csv_structure, _csv_columns, _csv_values, _csv_rows, _csv_bytes, _truncated, _raw, _paths,
                 _commands):
        part(corpus)
    return corpus


def cases() -> list[HostileCase]:
    """Every hostile recording, each with a unique name."""
    return list(_catalogue().cases)


def guards() -> dict[str, str]:
    """Case name -> the defect it guards against."""
    return dict(_catalogue().guards)
