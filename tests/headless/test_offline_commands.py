"""replay and tune as subprocesses over recordings of the simulated board, and the HTML report."""

from __future__ import annotations

import json
import os
import re
from html.parser import HTMLParser

import numpy as np
import pytest

from processing.profile import load_profile
from processing.recording import Mark, read_recording
from tests.headless.helpers import json_lines, match_touches, padtune, sim_capture, write_recording

SECONDS = 22.0  # the greenhouse script up to the end of the long zone2 hold (before the splash)


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    folder = tmp_path_factory.mktemp("offline")
    sim, data = sim_capture(SECONDS, seed=1)
    (folder / "gh.raw").write_bytes(data)
    write_recording(folder / "gh.csv", data)
    out = padtune("tune", str(folder / "gh.csv"), "-o", str(folder / "gh.toml"), "--json")
    assert out.returncode == 0, out.stderr
    return folder, sim, json_lines(out.stdout)[0]


def test_tune_writes_a_profile_that_replay_uses_to_find_every_scripted_touch(work):
    folder, sim, tuned = work
    profile = load_profile(folder / "gh.toml")
    assert profile.names[:5] == ("zone1", "zone2", "zone3", "zone4", "stop")
    rows = {r["name"]: r for r in tuned["channels"]}
    for name in ("zone1", "zone2", "zone3", "stop"):
        assert rows[name]["suggested"], rows[name]
        s = profile.settings_for(profile.names.index(name))
        assert s.threshold_counts == rows[name]["threshold"]
        assert rows[name]["noise_pp"] < s.threshold_counts < rows[name]["signal"]
    out = padtune("replay", str(folder / "gh.csv"), "--profile", str(folder / "gh.toml"), "--json")
    assert out.returncode == 0, out.stderr
    events = json_lines(out.stdout)
    assert all("type" in e and "t" in e for e in events)
    assert events[-1]["type"] == "summary" and events[-1]["frames"] == round(SECONDS * 60) + 1
    touches = [e for e in events if e["type"] == "touch"]
    debounce = max(profile.settings_for(c).touch_debounce_frames for c in range(profile.channels))
    truth = [c for c in sim.scripted_touches(SECONDS - 0.5)]
    missing, extra = match_touches(touches, truth, 60.0, debounce, profile.names)
    assert not missing, missing
    assert not extra, extra
    releases = [e for e in events if e["type"] == "release"]
    assert {r["channel"] for r in releases} >= {"zone1", "zone3", "zone4", "stop"}
    counts = {c["name"]: c["touches"] for c in events[-1]["channels"]}
    assert counts["zone2"] == 2 and counts["zone1"] == 1


def test_raw_capture_replays_exactly_like_its_csv_recording(work):
    folder, _, _ = work
    profile = str(folder / "gh.toml")
    raw = json_lines(padtune("replay", str(folder / "gh.raw"), "--profile", profile, "--json").stdout)
    csv = json_lines(padtune("replay", str(folder / "gh.csv"), "--profile", profile, "--json").stdout)
    key = lambda e: (e["type"], e.get("channel"), e.get("index"), e.get("delta"))  # noqa: E731
    assert [key(e) for e in raw if e["type"] in ("touch", "release")] == \
        [key(e) for e in csv if e["type"] in ("touch", "release")]
    assert raw[-1]["channels"] == csv[-1]["channels"]


def test_marks_count_false_touches(work, tmp_path):
    folder, _, _ = work
    data = (folder / "gh.raw").read_bytes()
    # Only the first zone1 touch (2.0-2.6 s) and the stop touch (11-12.5 s) are marked as intended.
    marks = [Mark(1.9, "touch-start", "zone1"), Mark(2.8, "touch-end", "zone1"),
             Mark(10.9, "touch-start", "stop"), Mark(12.7, "touch-end", "stop")]
    write_recording(tmp_path / "marked.csv", data, marks)
    out = padtune("replay", str(tmp_path / "marked.csv"), "--profile", str(folder / "gh.toml"), "--json")
    summary = json_lines(out.stdout)[-1]
    rows = {c["name"]: c for c in summary["channels"]}
    assert rows["zone1"]["false_touches"] == 0 and rows["stop"]["false_touches"] == 0
    assert rows["zone2"]["false_touches"] == rows["zone2"]["touches"] == 2
    human = padtune("replay", str(tmp_path / "marked.csv"), "--profile", str(folder / "gh.toml"))
    assert "false" in human.stdout and "\x1b[" not in human.stdout  # piped: plain text


def test_note_marks_alone_judge_no_touch(work, tmp_path):
    """A moment marked with Enter in `record` says nothing about which touches were meant."""
    folder, _, _ = work
    write_recording(tmp_path / "noted.csv", (folder / "gh.raw").read_bytes(), [Mark(2.0, "note", None, "x")])
    out = padtune("replay", str(tmp_path / "noted.csv"), "--profile", str(folder / "gh.toml"), "--json")
    channels = json_lines(out.stdout)[-1]["channels"]
    assert sum(c["touches"] for c in channels) > 2
    assert not any("false_touches" in c for c in channels)


def test_tune_refuses_keys_it_did_not_measure_unless_partial(work, tmp_path):
    """Only zone1 is marked touched: the other keys were never measured. Without --partial: exit 1, each
    named on stderr and in the table, no profile written; with it: exit 0, each marked measured = false."""
    folder, _, _ = work
    data = (folder / "gh.raw").read_bytes()
    marks = [Mark(0.2, "quiet-start"), Mark(1.8, "quiet-end"),
             Mark(2.05, "touch-start", "zone1"), Mark(2.55, "touch-end", "zone1")]
    write_recording(tmp_path / "m.csv", data, marks)
    refused = padtune("tune", str(tmp_path / "m.csv"), "-o", str(tmp_path / "m.toml"))
    assert refused.returncode == 1 and not (tmp_path / "m.toml").exists()
    assert "padtune: zone2: not measured: no touch found" in refused.stderr
    assert "Traceback" not in refused.stderr and "--partial" in refused.stderr.splitlines()[-1]
    assert re.search(r"zone2[ |]+NO\b", refused.stdout) and re.search(r"zone1[ |]+yes\b", refused.stdout)
    out = padtune("tune", str(tmp_path / "m.csv"), "-o", str(tmp_path / "m.toml"), "--json", "--partial")
    assert out.returncode == 0, out.stderr
    result = json_lines(out.stdout)[0]
    assert result["from_marks"] is True
    rows = {r["name"]: r for r in result["channels"]}
    assert rows["zone1"]["suggested"] and rows["zone1"]["touches"] == 1 and rows["zone1"]["measured"]
    assert not rows["zone2"]["suggested"] and "no touch" in rows["zone2"]["refusal"]
    assert "zone2" in result["unmeasured"] and "zone1" not in result["unmeasured"]
    profile = load_profile(tmp_path / "m.toml")
    assert [profile.names[c] for c in profile.unmeasured()] == result["unmeasured"]
    assert "[channel.zone2]\nmeasured = false" in (tmp_path / "m.toml").read_text()
    human = padtune("tune", str(tmp_path / "m.csv"), "-o", str(tmp_path / "m.toml"), "--partial")
    assert human.returncode == 0 and "marked measured = false (--partial)" in human.stderr
    assert "from the recording's marks" in human.stdout and "zone2: no suggestion" in human.stdout
    assert (tmp_path / "m.toml.bak").exists()  # the second save kept the first profile


class ReportParser(HTMLParser):
    """Collects table rows (data-key -> {data-field: text}) and figures (data-key -> plots with svg)."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: dict[str, list[dict[str, str]]] = {}
        self.figures: dict[str, dict[str, bool]] = {}
        self.external: list[str] = []
        self._row: dict[str, str] | None = None
        self._field: str | None = None
        self._figure: tuple[str, str] | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for name, value in attrs:  # src, href and xlink:href: only links inside the page
            if (name in ("src", "href") or name.endswith(":href")) and value and not value.startswith("#"):
                self.external.append(value)
        self.external += [v for v in a.values() if v and re.search(r"url\((?!#)|@import", v)]
        if tag == "tr" and "data-key" in a:
            self._row = {}
            self.rows.setdefault(a["data-key"], []).append(self._row)
        elif tag == "td" and self._row is not None:
            self._field = a.get("data-field")
            self._row[self._field] = ""
        elif tag == "figure":
            self._figure = (a["data-key"], a["data-plot"])
            self.figures.setdefault(a["data-key"], {})[a["data-plot"]] = False
        elif tag == "svg" and self._figure:
            self.figures[self._figure[0]][self._figure[1]] = True

    def handle_endtag(self, tag):
        if tag == "tr":
            self._row = None
        elif tag == "td":
            self._field = None
        elif tag == "figure":
            self._figure = None

    def handle_data(self, data):
        if re.search(r"url\((?!#)|@import", data):  # a stylesheet (or SVG style) fetching something
            self.external.append(data.strip()[:80])
        if self._row is not None and self._field:
            self._row[self._field] += data


def _shown(value) -> str:
    return "-" if value is None else f"{value:.1f}" if isinstance(value, float) else str(value)


def test_tune_report_has_every_key_with_plots_and_matching_numbers(work, tmp_path):
    folder, _, _ = work
    report = tmp_path / "tune.html"
    out = padtune("tune", str(folder / "gh.csv"), "-o", str(tmp_path / "r.toml"), "--report", str(report),
                  "--json")
    assert out.returncode == 0, out.stderr
    result = json_lines(out.stdout)[0]
    parser = ReportParser()
    parser.feed(report.read_text(encoding="utf-8"))
    assert not parser.external  # self-contained: nothing loaded from anywhere
    names = read_recording(folder / "gh.csv").names
    pairs = {k: v for k, v in parser.rows.items() if " > " in k}  # the crosstalk table's rows
    parser.rows = {k: v for k, v in parser.rows.items() if " > " not in k}
    assert set(parser.rows) == set(names) and len(names) == 9
    assert set(pairs) == {x["pair"] for x in result["crosstalk"]} and pairs
    for x in result["crosstalk"]:
        (cells,) = pairs[x["pair"]]
        assert cells["shift"] == _shown(x["shift"]) and cells["share_pct"] == _shown(x["share_pct"])
        assert cells["flagged"] == ("yes" if x["flagged"] else "no")
    for row in result["channels"]:
        shown = parser.rows[row["name"]]
        assert len(shown) == 2  # summary table and the key's own section
        for cells in shown:
            for field in ("noise_pp", "noise_rms", "noise_touched_pp", "crosstalk_pct", "signal", "snr_pp",
                          "threshold", "hysteresis"):
                assert cells[field] == _shown(row[field]), (row["name"], field)
            assert cells["verdict"] == row["verdict"]
        assert parser.figures[row["name"]] == {"delta": True, "histogram": True}


def test_report_without_matplotlib_says_so_in_one_line(work, tmp_path):
    folder, _, _ = work
    blocker = tmp_path / "block"
    blocker.mkdir()
    (blocker / "matplotlib.py").write_text("raise ImportError('blocked for the test')\n")
    out = padtune("tune", str(folder / "gh.csv"), "-o", str(tmp_path / "x.toml"), "--report",
                  str(tmp_path / "x.html"), env={"PYTHONPATH": str(blocker)})
    assert out.returncode == 2
    assert out.stderr.strip().count("\n") == 0 and "needs matplotlib" in out.stderr
    assert not (tmp_path / "x.toml").exists()  # nothing half done


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["replay", "/nonexistent/rec.csv"], "no such file"),
        (["replay", "{tmp}"], "is a folder"),
        (["replay", "{tmp}/garbage.csv"], "no frames found"),
        (["replay", "{tmp}/damaged.csv"], ":3: "),
        (["replay", "{gh}", "--speed", "-1"], "must be 0"),
        (["replay", "{gh}", "--every", "abc"], "not a number of seconds"),
        (["replay", "{gh}", "--profile", "/nonexistent.toml"], "no such profile"),
        (["replay", "{gh}", "--profile", "{tmp}/bad.toml"], "bad.toml"),
        (["tune", "{gh}", "-o", "{tmp}/out.txt"], "end the name in .toml"),
        (["tune", "{gh}"], "required"),
        (["tune", "{tmp}/short.csv", "-o", "{tmp}/s.toml"], "only"),
        (["tune", "{gh}", "-o", "{tmp}/r.toml", "--report", "/nonexistent-dir/r.html"], "does not exist"),
        (["tune", "{gh}", "-o", "{tmp}/r.toml", "--report", "{tmp}"], "is a folder"),
    ],
)
def test_bad_arguments_and_files_exit_2_with_one_clear_line(work, tmp_path, args, message):
    folder, _, _ = work
    (tmp_path / "garbage.csv").write_bytes(b"\x00\x01 hello there\nnot a frame\n")
    (tmp_path / "damaged.csv").write_text("# padtune recording v1\nt_s,seq,a\n0.1,0,zz\n")
    (tmp_path / "short.csv").write_text("# padtune recording v1\nt_s,seq,a\n0.1,0,5\n")
    (tmp_path / "bad.toml").write_text("format_version = 1\nchannels = 2\nnames = ['a', 'b']\n"
                                       "[defaults]\nthreshhold_counts = 5\n")
    full = [a.replace("{tmp}", str(tmp_path)).replace("{gh}", str(folder / "gh.csv")) for a in args]
    out = padtune(*full)
    assert out.returncode == 2, (out.stdout, out.stderr)
    assert message in out.stderr
    assert "Traceback" not in out.stderr
    if not out.stderr.startswith("usage:"):  # argparse adds its usage line; ours are one line
        assert out.stderr.strip().count("\n") == 0 or "bad.toml" in message, out.stderr


def test_every_command_has_help():
    for command in ("monitor", "record", "replay", "tune", "check"):
        out = padtune(command, "--help")
        assert out.returncode == 0 and f"usage: padtune {command}" in out.stdout


def test_paced_replay_gives_the_same_events_as_flat_out(work):
    folder, _, _ = work
    profile = str(folder / "gh.toml")
    # A short piece of the recording: pacing hands frames over in 50 ms slices instead of one block.
    data = (folder / "gh.raw").read_bytes()
    short = b"\n".join(data.split(b"\n")[:400]) + b"\n"
    (folder / "short.raw").write_bytes(short)
    fast = json_lines(padtune("replay", str(folder / "short.raw"), "--profile", profile, "--json").stdout)
    paced = json_lines(padtune("replay", str(folder / "short.raw"), "--profile", profile, "--json",
                               "--speed", "40", "--every", "1").stdout)
    flat = json_lines(padtune("replay", str(folder / "short.raw"), "--profile", profile, "--json",
                              "--every", "1").stdout)
    pick = lambda events: [e for e in events if e["type"] in ("touch", "release")]  # noqa: E731
    assert pick(fast) and pick(paced) == pick(fast) == pick(flat)
    for run in (paced, flat):
        times = [e["t"] for e in run if e["type"] == "status"]
        assert times == pytest.approx([1.0, 2.0, 3.0, 4.0, 5.0, 6.0], abs=0.3)


def test_groups_and_sliders_of_the_profile_appear_in_json(work, tmp_path):
    from processing.profile import save_profile
    from tui.demo_profile import demo_profile

    folder, _, _ = work
    save_profile(demo_profile("greenhouse"), tmp_path / "demo.toml")
    events = json_lines(padtune("replay", str(folder / "gh.csv"), "--profile", str(tmp_path / "demo.toml"),
                                "--json").stdout)
    sliders = [e for e in events if e["type"] == "slider"]
    groups = [e for e in events if e["type"] == "group"]
    assert groups and {"group", "channel", "index"} <= set(groups[0])
    assert sliders and sliders[0]["touched"] and sliders[-1]["position"] is None
    positions = np.array([e["position"] for e in sliders if e["touched"]], float)
    # The script swipes the duration slider from one end to the other: the position rises with time
    # (noise makes it jitter by a few steps). numpy's correlation coefficient as the measure.
    assert positions[:3].max() < 20 and positions.max() > 80
    assert np.corrcoef(np.arange(len(positions)), positions)[0, 1] > 0.9


# A status every 50 ms of recorded time: far more output than a pipe holds, so the writer meets the
# closed pipe (a short output would fit in the pipe's buffer and never notice).
@pytest.mark.parametrize("command", [["replay", "{csv}", "--every", "0.05"],
                                     ["replay", "{csv}", "--json", "--every", "0.05"]])
def test_a_reader_that_goes_away_ends_the_command_quietly_with_exit_0(work, tmp_path, command):
    """`padtune ... | head -1`: exit 0 (1 would read as a failed check), nothing on stderr."""
    import subprocess
    import sys

    from tests.headless.helpers import ROOT

    folder, _, _ = work
    args = [a.format(csv=folder / "gh.csv", tmp=tmp_path) for a in command]
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", *args], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env={**os.environ, "NO_COLOR": "1"})
    proc.stdout.readline()
    proc.stdout.close()  # the reader goes away after one line, as `head -1` does
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 0 and b"Traceback" not in err and b"Exception" not in err, err


def test_tune_tells_slider_neighbours_from_crosstalk_with_the_boards_slider(work, tmp_path):
    # The demo board's duration slider (devices/boards/greenhouse.toml: dur0..dur3) in the profile given:
    # its pads moving together on a swipe are slider neighbours (shown, not flagged); the zone keys'
    # pairs are judged as before. Without the slider (the fixture's run) dur0 > dur1 was flagged above 30 %.
    from processing.profile import save_profile
    from tui.demo_profile import demo_profile

    folder, _, plain = work
    save_profile(demo_profile("greenhouse"), tmp_path / "base.toml")
    out = padtune("tune", str(folder / "gh.csv"), "--profile", str(tmp_path / "base.toml"), "-o",
                  str(tmp_path / "gh.toml"), "--json")
    assert out.returncode == 0, out.stderr
    tuned = json_lines(out.stdout)[0]
    cross = {(x["source"], x["target"]): x for x in tuned["crosstalk"]}
    before = {(x["source"], x["target"]): x for x in plain["crosstalk"]}
    pads = ("dur0", "dur1", "dur2", "dur3")
    assert before[("dur0", "dur1")]["flagged"] and before[("dur0", "dur1")]["slider"] is None
    slider = cross[("dur0", "dur1")]
    assert slider["slider"] == "duration" and not slider["flagged"] and slider["share_pct"] > 30
    for (a, b), x in cross.items():
        assert (x["slider"] == "duration") == (a in pads and b in pads), x
        if x["slider"]:
            assert not x["flagged"]
    rows = {r["name"]: r for r in tuned["channels"]}
    for pad in pads:  # a pad's column names crosstalk from outside its slider only
        assert rows[pad]["crosstalk_from"] not in pads, rows[pad]
    zones = [x for (a, b), x in cross.items() if a.startswith("zone") and b.startswith("zone")]
    assert zones and all(not x["flagged"] and x["slider"] is None for x in zones)
    text = padtune("tune", str(folder / "gh.csv"), "--profile", str(tmp_path / "base.toml"), "-o",
                   str(tmp_path / "gh2.toml"))
    assert "slider neighbours in duration (not crosstalk, not flagged): dur0 > dur1" in text.stdout
    assert "crosstalk flagged: touching dur0 moves dur1" not in text.stdout


def test_tune_json_has_crosstalk_noise_while_touched_and_what_each_verdict_rests_on(work):
    # Issue 12, on the demo board's recording (greenhouse, 60 frames/s, 50 Hz mains coupled by a finger):
    # - a touch's hum shows in the noise while touched and aliases to |50 - 60| = 10 Hz (worked by hand);
    # - the duration slider's pads share a finger: touching dur0 moves dur1 by far more than the zone keys
    #   move each other, flagged above 30 % of its threshold (common practice, no source);
    # - each verdict names the touches and frames it rests on.
    _, _, tuned = work
    rows = {r["name"]: r for r in tuned["channels"]}
    for name in ("zone1", "zone2", "stop"):
        r = rows[name]
        assert r["noise_touched_pp"] > r["noise_pp"], r  # the finger brings hum
        assert "alias of 50 Hz" in r["touched_tone"] and r["touched_tone"].startswith("10."), r
        assert r["basis"].startswith(f"{r['touches']} touch"), r
    assert rows["zone2"]["basis"].startswith("2 touches")
    cross = {(x["source"], x["target"]): x for x in tuned["crosstalk"]}
    slider = cross[("dur0", "dur1")]
    assert slider["flagged"] and slider["share_pct"] > 30
    assert rows["dur1"]["crosstalk_flagged"] and rows["dur1"]["crosstalk_from"] in ("dur0", "dur2")
    zones = [x for (a, b), x in cross.items() if a.startswith("zone") and b.startswith("zone")]
    assert zones and all(not x["flagged"] for x in zones)
    # the table's column is each key's largest crosstalk: the table's largest share is one of them
    worst = max(r["crosstalk_pct"] for r in rows.values() if r["crosstalk_pct"] is not None)
    assert worst == max(x["share_pct"] for x in tuned["crosstalk"])


def test_touch_marks_after_the_recordings_end_mark_nothing(tmp_path):
    # Marks written after the recording was cut short (their times hold no frame): the key is tuned from
    # its real touch, the report is drawn, nothing raises (each such pair is left out, not an empty touch).
    from processing.recording import RecordingWriter
    from protocol.events import BoardInfo, FrameBlock

    n, rng = 2000, np.random.default_rng(0)
    r = 1000 + rng.integers(-3, 4, (n, 2))
    r[500:700, 0] += 300
    r[1200:1400, 1] += 300
    info = BoardInfo(0.0, {}, proto=1, channels=2, rate_hz=100.0, names=("k0", "k1"), polarity=(1,))
    path = tmp_path / "cut.csv"
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0, source="test", info=info) as w:
        w.write_events([info, FrameBlock(np.arange(n) / 100.0, np.full(n, -1), r, 0)])
        for t0, t1, key in ((5.0, 7.0, "k0"), (12.0, 14.0, "k1"), (20.5, 20.6, "k1"), (-3.0, -2.0, "k0")):
            w.mark(t0, "touch-start", key, "")
            w.mark(t1, "touch-end", key, "")
    out = padtune("tune", str(path), "-o", str(tmp_path / "p.toml"), "--json", "--report",
                  str(tmp_path / "r.html"))
    assert out.returncode == 0, out.stderr
    keys = json.loads(out.stdout)["channels"]
    assert [k["touches"] for k in keys] == [1, 1] and all(k["measured"] for k in keys)
    assert (tmp_path / "r.html").stat().st_size > 0 and (tmp_path / "p.toml").exists()


def test_a_clock_that_jumped_is_said_and_rate_sets_the_boards_rate(tmp_path):
    # A recording whose info line states no rate, its host times 10 ms apart but for one jump of 1e6 s:
    # measured over the whole recording that is 0.002 Hz, frame to frame 100 Hz. tune says so in one
    # `padtune:` line, and --rate 100 tunes it at the board's rate.
    from processing.recording import RecordingWriter
    from protocol.events import BoardInfo, FrameBlock

    n, rng = 2000, np.random.default_rng(4)
    r = 1000 + rng.integers(-3, 4, (n, 2))
    r[500:700, 0] += 300
    r[1200:1400, 1] += 300
    t_s = np.arange(n) / 100.0
    t_s[1000:] += 1e6
    info = BoardInfo(0.0, {}, proto=1, channels=2, rate_hz=None, names=("k0", "k1"), polarity=(1,))
    path = tmp_path / "jump.csv"
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0, source="test", info=info) as w:
        w.write_events([info, FrameBlock(t_s, np.arange(n), r, 0)])
    out = padtune("tune", str(path), "-o", str(tmp_path / "a.toml"), "--json", "--partial")
    said = [line for line in out.stderr.splitlines() if "host times jump" in line]
    assert len(said) == 1 and said[0].startswith("padtune:") and "100 Hz frame to frame" in said[0]
    out = padtune("tune", str(path), "-o", str(tmp_path / "b.toml"), "--json", "--rate", "100")
    assert out.returncode == 0, out.stderr
    assert "host times jump" not in out.stderr and json.loads(out.stdout)["rate_hz"] == 100.0
    assert all(k["measured"] for k in json.loads(out.stdout)["channels"])
