"""`padtune replay` and `tune` on damaged or odd recordings, as a user runs them (issue 13): one `padtune:`
line on stderr and exit 2 for a file that cannot be used, nothing on stdout, nothing written; the odd but
usable ones (a leap in time, a lone CR in a capture, a cut last line) read fully and say what was dropped."""

from __future__ import annotations

import os

import pytest

from processing.recording import FORMAT_LINE
from tests.headless.helpers import json_lines, padtune, sim_capture, write_recording

SECONDS = 12.0


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    folder = tmp_path_factory.mktemp("stream_cli")
    _, data = sim_capture(SECONDS, seed=3)
    (folder / "gh.raw").write_bytes(data)
    write_recording(folder / "gh.csv", data)
    return folder


def _in(folder, args: tuple[str, ...]) -> list[str]:
    """File names among the options, in `folder`."""
    return [str(folder / a) if a.endswith(".toml") else a for a in args]


def _one_line(out, *says: str) -> None:
    assert out.returncode == 2, out.stderr
    assert out.stdout == ""
    lines = out.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("padtune: "), out.stderr
    for word in says:
        assert word in lines[0]
    assert "Error" not in lines[0] and "Traceback" not in out.stderr


def test_a_leap_to_1e12_s_ends_with_every_status_due(work, tmp_path):
    """Before: the status loop stepped through 1e12 one-second intervals and never ended."""
    lines = (work / "gh.csv").read_text().split("\n")
    rows = [i for i, line in enumerate(lines) if line[:1].isdigit()]
    for k, i in enumerate(rows[-100:]):
        lines[i] = f"{1e12 + k / 60:.6f}," + lines[i].split(",", 1)[1]
    (tmp_path / "jump.csv").write_text("\n".join(lines))
    out = padtune("replay", str(tmp_path / "jump.csv"), "--json", "--every", "1", timeout=60)
    assert out.returncode == 0, out.stderr
    statuses = [e["t"] for e in json_lines(out.stdout) if e["type"] == "status"]
    assert len(statuses) < SECONDS + 5 and statuses[-1] >= 1e12  # one after the leap, none per second
    assert json_lines(out.stdout)[-1]["frames"] == len(rows)


def test_a_paced_replay_does_not_wait_out_a_leap_in_time(work, tmp_path):
    """At 100x, a leap of 1e12 s would be waited out for 1e10 s; a paced replay waits at most a few."""
    lines = (work / "gh.csv").read_text().split("\n")
    rows = [i for i, line in enumerate(lines) if line[:1].isdigit()]
    for k, i in enumerate(rows[-10:]):
        lines[i] = f"{1e12 + k / 60:.6f}," + lines[i].split(",", 1)[1]
    (tmp_path / "jump.csv").write_text("\n".join(lines))
    out = padtune("replay", str(tmp_path / "jump.csv"), "--json", "--speed", "100", timeout=60)
    assert out.returncode == 0, out.stderr
    assert json_lines(out.stdout)[-1]["frames"] == len(rows)


def test_a_lone_cr_in_a_raw_capture_reads_every_frame_as_the_live_decoder_does(work, tmp_path):
    lines = (work / "gh.raw").read_bytes().split(b"\n")
    (tmp_path / "cr.raw").write_bytes(b"\n".join(lines[:100]) + b"\r" + b"\n".join(lines[100:]))
    want = json_lines(padtune("replay", str(work / "gh.raw"), "--json").stdout)
    got = json_lines(padtune("replay", str(tmp_path / "cr.raw"), "--json").stdout)
    assert got[-1]["frames"] == want[-1]["frames"] > 600
    assert got == want


@pytest.mark.parametrize("command", [("replay",), ("replay", "--json"), ("tune", "-o", "x.toml")])
def test_a_recording_of_100000_columns_is_refused_by_the_protocols_limit(tmp_path, command):
    header = "t_s,seq," + ",".join(f"c{i}" for i in range(100_000))
    row = "0.1,0," + ",".join(["1"] * 100_000)
    (tmp_path / "wide.csv").write_text(f"{FORMAT_LINE}\n{header}\n{row}\n")
    out = padtune(command[0], str(tmp_path / "wide.csv"), *_in(tmp_path, command[1:]))
    _one_line(out, "100000 channels", "512")
    assert not (tmp_path / "x.toml").exists()


@pytest.mark.parametrize("command", [("replay",), ("replay", "--json"), ("tune", "-o", "x.toml"),
                                     ("replay", "--profile", "a.toml", "--against", "a.toml")])
def test_a_recording_cut_inside_its_header_exits_2_in_replay_as_in_tune(work, tmp_path, command):
    text = (work / "gh.csv").read_text()
    cut = text.index("t_s,seq,") + 12  # inside the header row
    (tmp_path / "cut.csv").write_text(text[:cut])
    padtune("tune", str(work / "gh.csv"), "-o", str(tmp_path / "a.toml"), "--partial")
    assert (tmp_path / "a.toml").exists()
    out = padtune(command[0], str(tmp_path / "cut.csv"), *_in(tmp_path, command[1:]))
    _one_line(out, "ends before its header row")
    assert not (tmp_path / "x.toml").exists()


def test_tune_tells_about_a_dropped_partial_last_line(work, tmp_path):
    data = (work / "gh.csv").read_bytes()
    (tmp_path / "cut.csv").write_bytes(data[:-7])  # a writer stopped mid-row
    out = padtune("tune", str(tmp_path / "cut.csv"), "-o", str(tmp_path / "p.toml"), "--json", "--partial")
    assert out.returncode == 0, out.stderr
    told = [line for line in out.stderr.splitlines() if "last line" in line]
    assert len(told) == 1 and told[0].startswith("padtune: ")
    assert json_lines(out.stdout)[0]["truncated"] is True
    whole = padtune("tune", str(work / "gh.csv"), "-o", str(tmp_path / "q.toml"), "--json", "--partial")
    assert json_lines(whole.stdout)[0]["truncated"] is False
    assert "last line" not in whole.stderr


def test_a_fault_row_without_its_kind_names_what_is_missing(work, tmp_path):
    """Before: `rec.csv:17: 'kind'; the file is damaged...` (a bare KeyError)."""
    lines = (work / "gh.csv").read_text().split("\n")
    lines.insert(20, "# fault t_s=1.000000 count=3")
    (tmp_path / "f.csv").write_text("\n".join(lines))
    for command in (("replay",), ("tune", "-o", "x.toml")):
        out = padtune(command[0], str(tmp_path / "f.csv"), *_in(tmp_path, command[1:]))
        _one_line(out, "f.csv:21: a fault row needs kind=")


def test_a_fifo_or_a_device_is_refused_without_waiting(tmp_path):
    os.mkfifo(tmp_path / "pipe.csv")
    for path in (tmp_path / "pipe.csv", "/dev/zero"):
        out = padtune("replay", str(path), timeout=30)
        _one_line(out, ", not a regular file; record the board to a file")


def test_tune_never_writes_over_the_recording_it_reads(work, tmp_path):
    rec = tmp_path / "rec.toml"  # a recording under a profile's name
    rec.write_bytes((work / "gh.csv").read_bytes())
    out = padtune("tune", str(rec), "-o", str(rec))
    _one_line(out, "is the recording being tuned")
    assert rec.read_bytes() == (work / "gh.csv").read_bytes()
    assert not (tmp_path / "rec.toml.bak").exists()


def test_replay_prints_a_boards_text_escaped(work, tmp_path):
    """A board's comment and a note row holding ESC sequences reach the terminal escaped, not raw."""
    data = (work / "gh.raw").read_bytes()
    (tmp_path / "esc.raw").write_bytes(b"# \x1b[2J wiped\n" + data)
    lines = (work / "gh.csv").read_text().split("\n")
    lines.insert(20, "# note t_s=0.100000 text=\x1b]0;title\x07 hi")
    (tmp_path / "esc.csv").write_text("\n".join(lines))
    for name in ("esc.raw", "esc.csv"):
        out = padtune("replay", str(tmp_path / name))
        assert out.returncode == 0, out.stderr
        assert "\x1b" not in out.stdout and "\x07" not in out.stdout
        assert "\\x1b" in out.stdout
