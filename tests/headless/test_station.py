"""The production station end to end: four simulated units on pseudo-terminals (`padtune sim --link`),
one of them faulty, checked at once by `padtune check PORT ...` as a subprocess, their results in a
SQLite file, `padtune lot` over it, and a station killed with SIGKILL mid-run."""

from __future__ import annotations

import contextlib
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest

from processing.profile import load_profile, save_profile
from processing.recording import read_recording
from processing.settings import Limits

from .helpers import ROOT, json_lines, padtune, sim_capture, write_recording

WAIT_S = 60.0
SEEDS = (11, 12, 13, 14)
FAULTY = 13  # open:zone2


@pytest.fixture(scope="module")
def bench(tmp_path_factory):
    """A profile with limits, and four simulated units served on pseudo-terminals (one with an open pad)."""
    folder = tmp_path_factory.mktemp("station")
    _, data = sim_capture(12.0, seed=1)
    write_recording(folder / "gh.csv", data)
    # The capture touches the zone keys only: the slider pads are written from defaults, marked so.
    out = padtune("tune", str(folder / "gh.csv"), "-o", str(folder / "tuned.toml"), "--partial")
    assert out.returncode == 0, out.stderr
    _, _, readings = read_recording(folder / "gh.csv").arrays()
    # A margin of about 20 % on a good unit's baseline and a few times its noise (common practice, no
    # source), as in test_live_commands.
    limits = Limits(max_noise_pp_counts=40.0, max_noise_rms_counts=8.0, min_snr_pp=2.0,
                    baseline_min_counts=int(readings.min() * 0.8),
                    baseline_max_counts=int(readings.max() * 1.2))
    save_profile(replace(load_profile(folder / "tuned.toml"), limits=limits), folder / "limits.toml")
    sims, links = [], []
    try:
        for seed in SEEDS:
            link = folder / f"unit{seed}"
            fault = ["--fault", "open:zone2"] if seed == FAULTY else []
            sims.append(subprocess.Popen([sys.executable, "-m", "tui.cli", "sim", "greenhouse", "--seed",
                                          str(seed), "--no-script", "--link", str(link), *fault],
                                         cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
            links.append(link)
        deadline = time.monotonic() + WAIT_S
        while not all(os.path.exists(p) for p in links):
            assert time.monotonic() < deadline, "the simulated units did not come up"
            time.sleep(0.05)
        yield folder, [str(p) for p in links]
    finally:
        for proc in sims:
            proc.send_signal(signal.SIGTERM)
        for proc in sims:
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


def _station(folder: Path, ports: list[str], *extra: str) -> subprocess.CompletedProcess:
    return padtune("check", *ports, "--profile", str(folder / "limits.toml"), "--duration", "1.5", *extra)


def test_four_units_at_once_one_faulty_results_and_lot(bench):
    folder, ports = bench
    db = folder / "lot.sqlite"
    out = _station(folder, ports, "--json", "--results", str(db))
    assert out.returncode == 1, out.stderr  # one unit failed
    units = {u["serial"]: u for u in json_lines(out.stdout)}
    assert sorted(units) == [f"greenhouse-{s:04d}" for s in SEEDS]  # named by the boards' info lines
    bad = units[f"greenhouse-{FAULTY:04d}"]
    assert bad["status"] == "fail" and not bad["passed"] and bad["port"] == ports[SEEDS.index(FAULTY)]
    zone2 = next(c for c in bad["channels"] if c["name"] == "zone2")
    assert zone2["checks"]["alive"] == "fail" and "open pad?" in zone2["reasons"][0]
    assert [c["name"] for c in bad["channels"] if not c["passed"]] == ["zone2"]
    assert all(u["status"] == "pass" for s, u in units.items() if s != bad["serial"])
    assert "3 of 4 units passed; failed: " in out.stderr

    # Retest the faulty unit by name, as after a repair that did not work: it counts once in the lot.
    again = _station(folder, [ports[SEEDS.index(FAULTY)]], "--unit", "R{n:02}", "--unit-start", "7",
                     "--results", str(db))
    assert again.returncode == 1 and again.stdout.startswith("R07 (greenhouse-0013) on ")
    assert "FAIL: zone2: open pad?" in again.stdout

    lot = padtune("lot", str(db), "--json", "--report", str(folder / "lot.html"))
    assert lot.returncode == 0, lot.stderr
    s = json.loads(lot.stdout)
    assert (s["tests"], s["units"], s["judged"], s["passed"]) == (5, 5, 5, 3)
    assert s["failures_by_check"] == {"alive": 2}
    by_name = {c["name"]: c for c in s["channels"]}
    assert by_name["zone2"]["failed_units"] == 2 and by_name["zone1"]["failed_units"] == 0
    assert by_name["zone3"]["baseline"]["n"] == 5
    page = (folder / "lot.html").read_text()
    assert page.count("<svg") >= 5 and "<script" not in page.lower()
    assert "http" not in page.replace('xmlns="http://www.w3.org/2000/svg"', "")  # nothing to fetch
    text = padtune("lot", str(db))
    assert "yield 60.0 %" in text.stdout and "failures by check: alive 2" in text.stdout


def _children(pid: int) -> list[int]:
    out = []
    for task in Path(f"/proc/{pid}/task").iterdir():
        out += [int(c) for c in (task / "children").read_text().split()]
    return out


def _units_in(db: Path) -> int:
    if not db.exists():
        return 0
    try:
        with sqlite3.connect(db, timeout=5) as conn:
            return conn.execute("SELECT COUNT(*) FROM units").fetchone()[0]
    except sqlite3.OperationalError:  # the schema is not there yet
        return 0


def test_a_station_killed_with_sigkill_keeps_every_finished_unit_whole(bench):
    folder, ports = bench
    db = folder / "killed.sqlite"
    station = subprocess.Popen([sys.executable, "-m", "tui.cli", "check", *ports, "--profile",
                                str(folder / "limits.toml"), "--duration", "1.5", "--unit", "K{n}",
                                "--results", str(db)], cwd=ROOT, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
    held: list[int] = []
    try:
        # Hold the last unit's check where it is (SIGSTOP), so it is surely in progress at the kill.
        deadline = time.monotonic() + WAIT_S
        while not held:
            assert time.monotonic() < deadline, "the station did not start its checks"
            for child in _children(station.pid):
                cmd = Path(f"/proc/{child}/cmdline").read_bytes().split(b"\0")
                # The unit's own check (`check PORT`), not a fork that has not run it yet (whose
                # command line is still the station's: `check PORT1 PORT2 ...`).
                if b"check" in cmd and cmd[cmd.index(b"check") + 1:][:1] == [ports[-1].encode()]:
                    os.kill(child, signal.SIGSTOP)
                    held.append(child)
            time.sleep(0.02)
        while _units_in(db) < 3:
            assert time.monotonic() < deadline, f"{_units_in(db)} of 3 units written"
            time.sleep(0.05)
        os.kill(station.pid, signal.SIGKILL)
        station.wait(timeout=WAIT_S)
        os.kill(held[0], signal.SIGCONT)  # its SIGTERM from the station's death waits for this
        deadline = time.monotonic() + WAIT_S
        while Path(f"/proc/{held[0]}").exists() and b"Z" not in _state(held[0]):
            assert time.monotonic() < deadline, "the unit's check outlived its station"
            time.sleep(0.05)
    finally:
        if station.poll() is None:
            station.kill()
        for pid in held:
            with contextlib.suppress(ProcessLookupError):
                os.kill(pid, signal.SIGKILL)
    with sqlite3.connect(db) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        rows = conn.execute("SELECT u.unit, u.channel_count, COUNT(c.channel) FROM units u JOIN channels c "
                            "ON c.unit_id = u.id GROUP BY u.id ORDER BY u.unit").fetchall()
    assert [r[0] for r in rows] == ["K1", "K2", "K3"]  # K4 was in progress: lost, nothing half there
    assert all(want == got == 9 for _, want, got in rows)
    lot = padtune("lot", str(db), "--json")
    assert json.loads(lot.stdout)["units"] == 3


def _state(pid: int) -> bytes:
    try:
        return Path(f"/proc/{pid}/stat").read_bytes().rsplit(b")", 1)[1][:3]
    except FileNotFoundError:
        return b"Z"


def test_station_usage_mistakes_are_one_line_and_test_nothing(bench, tmp_path):
    folder, ports = bench
    cases = [
        ((ports[0], ports[0]), (), "is given twice"),
        (tuple(ports[:2]), ("--unit", "A1"), "1 --unit for 2 ports"),
        (tuple(ports[:2]), ("--unit", "A{m}"), "is not a unit pattern"),
        (tuple(ports[:2]), ("--unit", "A", "--unit", "A"), "more than one port"),
        (tuple(ports[:2]), ("--report", str(tmp_path / "r.html")), "padtune lot"),
        (tuple(ports[:2]), ("--results", str(tmp_path)), "is a folder"),
        (tuple(ports[:2]), ("--results", str(folder / "limits.toml")), "cannot use it as a results database"),
    ]
    for given, extra, words in cases:
        out = _station(folder, list(given), *extra)
        assert out.returncode == 2 and words in out.stderr, (extra, out.stderr)
        assert len(out.stderr.strip().splitlines()) == 1 and out.stdout == ""
    assert load_profile(folder / "limits.toml")  # the file given as a database is untouched


def test_a_unit_that_cannot_be_opened_is_not_tested_and_the_others_are(bench, tmp_path):
    folder, ports = bench
    out = _station(folder, [ports[0], str(tmp_path / "no-such-port")], "--json")
    assert out.returncode == 2, out.stderr
    units = {u["port"]: u for u in json_lines(out.stdout)}
    assert units[ports[0]]["status"] == "pass"
    missing = units[str(tmp_path / "no-such-port")]
    assert missing["status"] == "error" and not missing["passed"] and "no-such-port" in missing["reason"]


def test_two_stations_append_to_one_results_file_at_once(bench, tmp_path):
    folder, _ = bench
    db = tmp_path / "shared.sqlite"
    cmd = [sys.executable, "-m", "tui.cli", "check", "--profile", str(folder / "limits.toml"),
           "--duration", "1", "--results", str(db), "--json"]
    sim = "sim://greenhouse?script=0&seed="
    stations = [subprocess.Popen([*cmd, f"{sim}{a}", f"{sim}{b}", "--unit", f"{tag}{{n}}"], cwd=ROOT,
                                 stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True)
                for tag, a, b in (("S", 21, 22), ("T", 23, 24))]
    for proc in stations:
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 0, err
        assert len(json_lines(out)) == 2
    with sqlite3.connect(db) as conn:
        units = sorted(r[0] for r in conn.execute("SELECT unit FROM units"))
        assert conn.execute("SELECT COUNT(*) FROM channels").fetchone()[0] == 4 * 9
    assert units == ["S1", "S2", "T1", "T2"]
