"""monitor, record, replay and check as subprocesses against live simulated boards (sim:// URLs and a
pseudo-terminal served by devices.pty_server), as a user or a script would run them."""

from __future__ import annotations

import datetime as dt
import os
import select
import signal
import subprocess
import sys
import threading
import time
from dataclasses import replace
from pathlib import Path

import pytest

from devices.pty_server import PtyServer
from devices.simulator import SimBoard
from processing.profile import load_profile, save_profile
from processing.recording import read_recording
from processing.settings import Limits
from tests.headless.helpers import ROOT, json_lines, match_touches, padtune, sim_capture, write_recording
from tests.headless.test_offline_commands import ReportParser

pytestmark = pytest.mark.e2e
RATE_HZ = 60.0  # the greenhouse board's frame rate
WATER_START_S = 23.0  # the script's water film on zone3 and zone4
BACKLOG_S = 60  # sim:// keeps this many seconds for a reader that stalls (a loaded CI machine)
WAIT_S = 30.0  # generous: the machine running the tests may be loaded


class LineWatcher:
    """Collects a child's stdout lines in a thread, so a test waits on a condition with a deadline
    instead of blocking in readline() or sleeping and hoping. A child that ended fails the wait at
    once, with its exit code and stderr."""

    def __init__(self, proc: subprocess.Popen) -> None:
        self.proc = proc
        self.lines: list[str] = []
        self._thread = threading.Thread(target=self._read, args=(proc.stdout,), daemon=True)
        self._thread.start()

    def _read(self, stream) -> None:
        for line in stream:
            self.lines.append(line)

    def wait_for(self, condition, what: str) -> None:
        deadline = time.monotonic() + WAIT_S
        while not condition(self.lines):
            if not self._thread.is_alive() and not condition(self.lines):  # stdout closed: it ended
                self.proc.wait(WAIT_S)
                err = self.proc.stderr.read() if self.proc.stderr else ""
                raise AssertionError(f"exited {self.proc.returncode} before {what}: {err[-2000:]}")
            assert time.monotonic() < deadline, f"timed out waiting for {what}: {self.lines[-5:]}"
            time.sleep(0.02)

    def wait_text(self, text: str) -> None:
        self.wait_for(lambda lines: any(text in line for line in lines), text)

    def finish(self) -> str:
        self._thread.join(WAIT_S)
        return "".join(self.lines)


def recorded_rows(path: Path) -> int:
    """Whole data rows a recording holds on disk by now (a row being written is not counted)."""
    if not path.exists():
        return 0
    return sum(1 for line in path.read_text().split("\n")[:-1] if line[:1].isdigit())


def wait_rows(path: Path, rows: int) -> None:
    deadline = time.monotonic() + WAIT_S
    while recorded_rows(path) < rows:
        assert time.monotonic() < deadline, f"{path} holds {recorded_rows(path)} of {rows} rows"
        time.sleep(0.05)


@pytest.fixture(scope="module")
def profiles(tmp_path_factory):
    """A tuned greenhouse profile (from a recording of the script), and one with acceptance limits."""
    folder = tmp_path_factory.mktemp("live")
    _, data = sim_capture(22.0, seed=1)
    write_recording(folder / "gh.csv", data)
    out = padtune("tune", str(folder / "gh.csv"), "-o", str(folder / "tuned.toml"))
    assert out.returncode == 0, out.stderr
    tuned = load_profile(folder / "tuned.toml")
    rec = read_recording(folder / "gh.csv")
    _, _, readings = rec.arrays()
    lo, hi = int(readings.min() * 0.8), int(readings.max() * 1.2)
    # Limits a production engineer might set from a good unit (common practice, no source: a margin of
    # about 20 % on the baseline and a few times the good unit's noise).
    limits = Limits(max_noise_pp_counts=40.0, max_noise_rms_counts=8.0, min_snr_pp=2.0,
                    baseline_min_counts=lo, baseline_max_counts=hi)
    save_profile(replace(tuned, limits=limits), folder / "limits.toml")
    return folder


def test_monitor_json_matches_the_simulated_touch_script(profiles):
    # 7 s at 4x covers the script to the long zone2 hold (ends at 21.5 s) even when the start is slow on
    # a loaded machine; a generous backlog keeps a stalled test process from losing frames.
    url = f"sim://greenhouse?speed=4&seed=3&backlog_s={BACKLOG_S}"
    out = padtune("monitor", url, "--profile", str(profiles / "tuned.toml"), "--json", "--duration", "7",
                  "--every", "2")
    assert out.returncode == 0, out.stderr
    events = json_lines(out.stdout)
    assert all({"type", "t"} <= set(e) for e in events)
    assert next(e for e in events if e["type"] != "link")["type"] in ("note", "hello")
    hello = next(e for e in events if e["type"] == "hello")
    assert hello["board"] == "greenhouse" and hello["channels"] == 9 and hello["rate_hz"] == RATE_HZ
    statuses = [e for e in events if e["type"] == "status"]
    assert len(statuses) >= 2 and len(statuses[-1]["channels"]) == 9  # the first may precede the board
    fields = {"name", "reading", "baseline", "delta", "state", "noise", "snr", "provisional", "polarity",
              "phase"}
    assert set(statuses[-1]["channels"][0]) == fields
    summary = events[-1]
    assert summary["type"] == "summary" and summary["lost"] == 0 and summary["garbled"] == 0
    # Frame index n is sim time n / rate exactly: compare detections with the script in sim time.
    sim_s = summary["frames"] / RATE_HZ
    assert sim_s > 20.0, "the run must cover the script up to the long zone2 hold"
    # Up to the water film at 23 s: whether a film reads as a touch is the tuning's business, not this test's.
    horizon_s = min(sim_s - 1.0, WATER_START_S - 0.5)
    truth = SimBoard("greenhouse", seed=3).touches.truth(horizon_s)
    assert not [c for c in truth if c.kind == "water"]
    touches = [{**e, "t": e["index"] / RATE_HZ} for e in events if e["type"] == "touch"]
    touches = [t for t in touches if t["t"] < horizon_s]
    profile = load_profile(profiles / "tuned.toml")
    debounce = max(s.touch_debounce_frames for s in profile.all_settings())
    missing, extra = match_touches(touches, truth, RATE_HZ, debounce, profile.names)
    assert not missing and not extra, (missing, extra)


def test_monitor_with_record_then_replay_gives_the_same_events(profiles, tmp_path):
    rec = tmp_path / "live.csv"
    profile = str(profiles / "tuned.toml")
    live = padtune("monitor", "sim://greenhouse?speed=4&seed=5", "--profile", profile, "--json",
                   "--duration", "4", "--record", str(rec))
    assert live.returncode == 0, live.stderr
    again = padtune("replay", str(rec), "--profile", profile, "--json")
    assert again.returncode == 0, again.stderr

    def detections(text: str) -> list[tuple]:
        return [(e["type"], e["channel"], e["index"], e.get("delta"), round(e["t"], 4))
                for e in json_lines(text) if e["type"] in ("touch", "release")]

    assert detections(live.stdout), "the script touches keys in the first seconds"
    assert detections(again.stdout) == detections(live.stdout)
    live_sum, replay_sum = json_lines(live.stdout)[-1], json_lines(again.stdout)[-1]
    assert replay_sum["frames"] == live_sum["frames"]
    assert replay_sum["channels"] == live_sum["channels"]


def test_monitor_human_lines_are_plain_when_piped(profiles):
    out = padtune("monitor", "sim://greenhouse?speed=4&seed=3", "--profile", str(profiles / "tuned.toml"),
                  "--duration", "3", env={"NO_COLOR": ""})  # zone1 is touched at 2 s of sim time (0.5 s)
    assert out.returncode == 0, out.stderr
    assert "\x1b[" not in out.stdout
    assert "touch    zone1" in out.stdout and "summary after" in out.stdout


def test_record_survives_kill_9(tmp_path):
    path = tmp_path / "killed.csv"
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "record", "sim://greenhouse?speed=2&seed=4",
                             "-o", str(path)], cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + WAIT_S
        while time.monotonic() < deadline:  # wait until frames are on disk, then let it run a while
            if path.exists() and path.read_text().count("\n") > 20:
                break
            time.sleep(0.05)
        time.sleep(1.5)
        killed_epoch = time.time()
        proc.send_signal(signal.SIGKILL)
        proc.wait(10)
    finally:
        if proc.poll() is None:
            proc.kill()
    rec = read_recording(path)
    t_s, seq, readings = rec.arrays()
    assert readings.shape[1] == 9 and len(seq) > 60
    assert (seq == range(len(seq))).all()  # every row whole, none missing
    start = dt.datetime.strptime(rec.meta["start_utc"], "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=dt.UTC)
    lost_s = killed_epoch - (start.timestamp() + float(t_s[-1]))
    assert lost_s < 1.0, f"lost {lost_s:.2f} s of frames"
    out = padtune("replay", str(path), "--json")
    assert out.returncode == 0 and json_lines(out.stdout)[-1]["frames"] == len(seq)


def _check(profiles: Path, url: str, *extra: str) -> tuple[int, dict]:
    out = padtune("check", url, "--profile", str(profiles / "limits.toml"), "--duration", "1.5", "--json",
                  *extra)
    assert out.returncode in (0, 1), out.stderr
    report = json_lines(out.stdout)[0]
    return out.returncode, report


def test_check_passes_a_healthy_board(profiles, tmp_path):
    html_path = tmp_path / "check.html"
    code, report = _check(profiles, "sim://greenhouse?seed=6&script=0", "--report", str(html_path))
    assert code == 0 and report["passed"], report
    for ch in report["channels"]:
        assert ch["checks"] == {"alive": "pass", "noise": "pass", "stuck": "pass"}
    parser = ReportParser()
    parser.feed(html_path.read_text(encoding="utf-8"))
    assert not parser.external
    for ch in report["channels"]:
        rows = parser.rows[ch["name"]]
        assert all(r["verdict"] == "PASS" and r["noise_pp"] == f"{ch['noise_pp']:.1f}" for r in rows)
        assert parser.figures[ch["name"]] == {"delta": True, "histogram": True}


@pytest.mark.parametrize(
    ("fault", "pad", "reason", "check"),
    [
        ("open:zone2", "zone2", "open pad", "alive"),
        ("short:stop", "stop", "shorted pad", "alive"),
        ("noisy:zone3:20", "zone3", "noisy pad", "noise"),
        ("stuck:zone4@0.5", "zone4", "stuck key", "stuck"),
    ],
)
def test_check_fails_a_faulty_unit_with_the_right_reason(profiles, fault, pad, reason, check):
    code, report = _check(profiles, f"sim://greenhouse?seed=6&script=0&fault={fault}")
    assert code == 1 and not report["passed"]
    failed = [c for c in report["channels"] if not c["passed"]]
    assert [c["name"] for c in failed] == [pad], failed
    assert failed[0]["checks"][check] == "fail"
    assert any(r.startswith(reason) for r in failed[0]["reasons"]), failed[0]["reasons"]


def test_check_touch_step_over_a_pseudo_terminal(profiles):
    """The guided step asks for each key; a 'person' (this test) touches it on the simulated panel."""
    board = SimBoard("greenhouse", seed=8, script=False)
    server = PtyServer(board)
    stop = threading.Event()
    thread = threading.Thread(target=server.serve, args=(stop.is_set,), daemon=True)
    thread.start()
    proc = subprocess.Popen(
        [sys.executable, "-m", "tui.cli", "check", server.path, "--profile", str(profiles / "limits.toml"),
         "--duration", "1", "--touch", "--touch-timeout", "8", "--json"],
        cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env={**os.environ, "NO_COLOR": "1"})
    asked = []
    try:
        for line in proc.stderr:
            if line.startswith("touch and hold "):
                name = line.split()[3].rstrip(",")
                asked.append(name)
                if name == "dur2":
                    continue  # this key is never touched: the check must fail it
                time.sleep(0.2)
                board.press(name, True)
                time.sleep(0.5)
                board.press(name, False)
        out = proc.stdout.read()
        proc.wait(30)
    finally:
        stop.set()
        if proc.poll() is None:
            proc.kill()
        thread.join(5)
        server.close()
    assert asked == list(board.spec.names)
    assert proc.returncode == 1
    report = json_lines(out)[0]
    by_name = {c["name"]: c for c in report["channels"]}
    assert not by_name["dur2"]["passed"] and by_name["dur2"]["checks"]["touch"] == "fail"
    for name, ch in by_name.items():
        if name != "dur2":
            assert ch["passed"], ch
            assert ch["snr"] >= 2.0 and ch["signal"] > 0


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["monitor", "/dev/padtune-no-such-port", "--duration", "1"], "/dev/padtune-no-such-port"),
        (["monitor", "sim://nosuchboard", "--duration", "1"], "nosuchboard"),
        (["monitor", "sim://greenhouse", "--duration", "-3"], "must be a positive number"),
        (["record", "sim://greenhouse", "-o", "{tmp}/exists.csv", "--duration", "1"], "already exists"),
        (["record", "sim://greenhouse", "-o", "/nonexistent-dir/x.csv", "--duration", "1"], "cannot create"),
        (["check", "sim://greenhouse", "--duration", "1"], "--profile"),
        (["check", "sim://greenhouse", "--profile", "{tmp}/missing.toml"], "no such profile"),
        (["monitor", "sim://greenhouse", "--baud", "fast"], "not a baud rate"),
    ],
)
def test_live_commands_reject_bad_input_with_exit_2(tmp_path, args, message):
    (tmp_path / "exists.csv").write_text("keep me")
    out = padtune(*[a.replace("{tmp}", str(tmp_path)) for a in args])
    assert out.returncode == 2, (out.stdout, out.stderr)
    assert message in out.stderr and "Traceback" not in out.stderr
    assert (tmp_path / "exists.csv").read_text() == "keep me"


def test_link_faults_show_as_link_events_and_in_the_summary(tmp_path):
    url = ("sim://greenhouse?speed=4&seed=2&fault=drop:0.02&fault=junk:0.01&fault=garble:0.01"
           "&fault=reset@6&fault=width:7@14")
    rec = tmp_path / "faults.csv"
    # 6 s at 4x reaches the width change at 14 s of sim time with room for a slow start.
    out = padtune("monitor", url, "--json", "--duration", "6", "--record", str(rec))
    assert out.returncode == 0, out.stderr
    events = json_lines(out.stdout)
    link = [e for e in events if e["type"] == "link"]
    kinds = {e["event"] for e in link}
    assert {"lost", "garbled", "bad_checksum", "reset", "board changed"} <= kinds, kinds
    summary = events[-1]
    for kind, key in (("lost", "lost"), ("garbled", "garbled"), ("bad_checksum", "bad_checksum"),
                      ("reset", "resets")):
        assert summary[key] == sum(e["count"] for e in link if e["event"] == kind) > 0
    assert len(summary["channels"]) == 7  # the board now sends 7 channels
    # The recording keeps the faults in stream order: its replay counts the same.
    again = json_lines(padtune("replay", str(rec), "--json").stdout)[-1]
    for key in ("frames", "lost", "garbled", "bad_checksum", "resets"):
        assert again[key] == summary[key], key


def test_monitor_without_duration_ends_on_sigterm_with_a_summary():
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "monitor", "sim://greenhouse?speed=4",
                             "--json", "--every", "0.2"], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    watcher = LineWatcher(proc)
    try:
        # A status with channels: frames have gone through detection, so the summary must count them.
        watcher.wait_for(lambda lines: any('"type":"status"' in x and '"name"' in x for x in lines),
                         "a status with channels")
        proc.send_signal(signal.SIGTERM)
        proc.wait(WAIT_S)
        out, err = watcher.finish(), proc.stderr.read()
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    assert json_lines(out)[0]["type"] == "link"
    assert json_lines(out)[-1]["type"] == "summary" and json_lines(out)[-1]["frames"] > 0


def test_record_on_a_terminal_marks_a_moment_on_enter(tmp_path):
    """stdin and stderr on a pseudo-terminal, as when a person runs it: Enter writes a mark."""
    import pty
    import tty

    master, slave = pty.openpty()
    tty.setraw(slave)
    path = tmp_path / "marked.csv"
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "record", "sim://greenhouse?speed=4",
                             "-o", str(path)], cwd=ROOT, stdin=slave, stdout=slave, stderr=slave,
                            env={**os.environ, "NO_COLOR": "1", "TERM": "xterm"})
    os.close(slave)
    seen = bytearray()
    deadline = time.monotonic() + WAIT_S

    def read_until(text: bytes) -> None:
        while text not in seen and time.monotonic() < deadline:
            ready, _, _ = select.select([master], [], [], 0.2)
            if ready:
                seen.extend(os.read(master, 1024))
        assert text in seen, bytes(seen)

    try:
        read_until(b"Enter marks a moment")
        wait_rows(path, 1)  # frames are on disk, so the recording holds some when it stops
        os.write(master, b"zone1 by hand\n")
        read_until(b"mark at")
        proc.send_signal(signal.SIGTERM)
        proc.wait(20)
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
    assert proc.returncode == 0
    rec = read_recording(path)
    assert [(m.kind, m.text) for m in rec.marks] == [("note", "zone1 by hand")]
    assert rec.frames > 0


def _serve(board: SimBoard):
    """A simulated board on a pseudo-terminal, served from this process (so a test can change its pads)."""
    server = PtyServer(board)
    stop = threading.Event()
    thread = threading.Thread(target=server.serve, args=(stop.is_set,), daemon=True)
    thread.start()

    def close() -> None:
        stop.set()
        thread.join(5)
        server.close()
    return server, close


def test_limits_from_a_good_unit_pass_it_and_fail_a_short_and_a_drifted_pad(profiles, tmp_path):
    """The production flow: record a good unit, `tune --limits`, then `check` units against it. Each
    channel has its own baseline range: dur0 (about 1,170 counts) drifted to stop's count (about 1,660)
    is inside the whole unit's band (dur's lowest -20 % .. stop's highest +20 %) but outside its own."""
    golden = tmp_path / "golden.toml"
    out = padtune("tune", str(profiles / "gh.csv"), "-o", str(golden), "--limits", "--json")
    assert out.returncode == 0, out.stderr
    tuned = json_lines(out.stdout)[0]
    assert tuned["limits"]["min_snr_pp"] is not None
    own = {c["name"]: c["limits"] for c in tuned["channels"]}
    stop_mid = (own["stop"]["baseline_min_counts"] + own["stop"]["baseline_max_counts"]) / 2
    assert own["dur0"]["baseline_max_counts"] < stop_mid  # stop's count lies outside dur0's own range
    assert all(v["max_noise_pp_counts"] and v["baseline_min_counts"] for v in own.values())
    good = padtune("check", "sim://greenhouse?seed=9&script=0", "--profile", str(golden), "--duration", "1.5")
    assert good.returncode == 0, good.stdout
    assert "PASS: every channel passed" in good.stdout
    bad = padtune("check", "sim://greenhouse?seed=9&script=0&fault=short:zone1", "--profile",
                  str(golden), "--duration", "1.5")
    assert bad.returncode == 1 and "FAIL: zone1" in bad.stdout and "shorted pad?" in bad.stdout

    board = SimBoard("greenhouse", seed=9, script=False)
    names = list(board.spec.names)
    board.model.parasitic_f[names.index("dur0")] = board.model.parasitic_f[names.index("stop")]
    server, close = _serve(board)
    whole_unit = tmp_path / "whole.toml"
    save_profile(replace(load_profile(golden), channel_limits={}), whole_unit)  # [limits] only
    try:
        drifted = padtune("check", server.path, "--profile", str(golden), "--duration", "1.5", "--json")
        banded = padtune("check", server.path, "--profile", str(whole_unit), "--duration", "1.5", "--json")
    finally:
        close()
    assert drifted.returncode == 1, drifted.stderr
    report = json_lines(drifted.stdout)[0]
    failed = [c for c in report["channels"] if not c["passed"]]
    assert [c["name"] for c in failed] == ["dur0"] and failed[0]["checks"]["alive"] == "fail"
    assert f"above the allowed {own['dur0']['baseline_min_counts']}..{own['dur0']['baseline_max_counts']}" \
        in failed[0]["reasons"][0]
    assert banded.returncode == 0, banded.stdout  # one band for all channels passes the drifted pad


def test_check_without_limits_is_a_setup_error_unless_no_limits(profiles):
    bare = padtune("check", "sim://greenhouse?script=0", "--profile", str(profiles / "tuned.toml"),
                   "--duration", "1")
    assert bare.returncode == 2 and bare.stdout == ""
    (line,) = bare.stderr.splitlines()
    assert "no baseline range or noise limits for zone1" in line and "--no-limits" in line
    loose = padtune("check", "sim://greenhouse?script=0", "--profile", str(profiles / "tuned.toml"),
                    "--duration", "1", "--no-limits", "--json")
    assert loose.returncode == 0, loose.stderr
    report = json_lines(loose.stdout)[0]
    assert report["passed"] and "--no-limits" in report["warnings"][0]
    assert all(c["checks"]["alive"] == "not checked" for c in report["channels"])


def test_check_touch_without_an_snr_limit_is_a_setup_error(profiles, tmp_path):
    no_snr = load_profile(profiles / "limits.toml")
    save_profile(replace(no_snr, limits=replace(no_snr.limits, min_snr_pp=None)), tmp_path / "p.toml")
    out = padtune("check", "sim://greenhouse?script=0", "--profile", str(tmp_path / "p.toml"), "--touch")
    assert out.returncode == 2 and out.stdout == ""
    (line,) = out.stderr.splitlines()
    assert "no SNR limits for zone1" in line


def _no_frames_check(profiles: Path, noise: bytes) -> subprocess.CompletedProcess:
    """`check --json` on a pseudo-terminal where a writer sends `noise` over and over (or nothing)."""
    import tty

    master, slave = os.openpty()
    tty.setraw(slave)
    stop = threading.Event()

    def write() -> None:
        while noise and not stop.wait(0.05):
            os.write(master, noise)
    writer = threading.Thread(target=write, daemon=True)
    writer.start()
    try:
        return padtune("check", os.ttyname(slave), "--profile", str(profiles / "limits.toml"),
                       "--duration", "1", "--json")
    finally:
        stop.set()
        writer.join(5)
        os.close(slave)
        os.close(master)


def test_check_with_no_data_or_the_wrong_baud_rate_is_a_setup_error(profiles):
    silent = _no_frames_check(profiles, b"")
    assert silent.returncode == 2, silent.stderr
    assert "no data from" in json_lines(silent.stdout)[0]["error"]
    assert "no data from" in silent.stderr.splitlines()[-1] and "Traceback" not in silent.stderr
    # What a UART at the wrong rate delivers: framing-error bytes (as tests/protocol/test_linkwatch.py).
    garbage = bytes([0x00, 0x80, 0xF8, 0xFE, 0xE0, 0x78, 0x0A, 0xF0] * 8)
    wrong = _no_frames_check(profiles, garbage)
    assert wrong.returncode == 2, wrong.stderr
    report = json_lines(wrong.stdout)[0]
    assert report["passed"] is False and report["channels"] == []
    assert "baud rate" in report["error"] and "not one frame" in report["error"]


def _run_on_pty(args: list[str], no_color: bool) -> bytes:
    """Run padtune with stdout and stderr on a pseudo-terminal, as in a terminal window."""
    import tty

    env = {k: v for k, v in os.environ.items() if k not in ("NO_COLOR", "COLUMNS")}
    env["TERM"] = "xterm-256color"
    if no_color:
        env["NO_COLOR"] = "1"
    master, slave = os.openpty()
    tty.setraw(slave)
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", *args], cwd=ROOT, stdin=subprocess.DEVNULL,
                            stdout=slave, stderr=slave, env=env)
    os.close(slave)
    out = bytearray()
    try:
        while True:
            ready, _, _ = select.select([master], [], [], 0.2)
            if ready:
                try:
                    chunk = os.read(master, 4096)
                except OSError:  # the child closed its side
                    break
                if not chunk:
                    break
                out.extend(chunk)
            elif proc.poll() is not None:
                break
        proc.wait(20)
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
    return bytes(out)


def test_monitor_on_a_terminal_uses_colour_unless_no_color(profiles):
    import re

    args = ["monitor", "sim://greenhouse?speed=4&seed=3", "--profile", str(profiles / "tuned.toml"),
            "--duration", "1.5"]
    colour_sgr = re.compile(rb"\x1b\[[0-9;]*(3[0-7]|38;[25])[0-9;]*m")  # SGR foreground colours
    coloured = _run_on_pty(args, no_color=False)
    assert b"touch" in coloured and colour_sgr.search(coloured), coloured[:300]
    plain = _run_on_pty(args, no_color=True)
    assert b"touch" in plain and not colour_sgr.search(plain)


def test_monitor_reports_an_unplug_and_the_replug(tmp_path):
    """A board on a pseudo-terminal behind a stable symlink, unplugged and plugged back mid-run."""
    import numpy as np

    from protocol.encoder import encode_frames, encode_info
    from tests.protocol.ptyboard import PtyBoard

    board = PtyBoard(tmp_path)
    info = encode_info({"proto": 1, "board": "bench", "channels": 2, "rate": 100, "names": "a,b"})
    block = lambda first, n: encode_frames(1000 + np.zeros((n, 2), np.int64), first, checksum=True)  # noqa: E731
    rec = tmp_path / "unplug.csv"
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "monitor", str(board.path), "--json",
                             "--record", str(rec)], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    watcher = LineWatcher(proc)
    try:
        watcher.wait_text('"event":"connected"')
        board.send(info + block(0, 40))
        watcher.wait_text('"type":"hello"')
        wait_rows(rec, 40)  # every frame read before the unplug (closing the pty drops unread bytes)
        board.unplug()
        watcher.wait_text('"event":"disconnected"')
        board.plug()
        watcher.wait_text('"event":"reconnected"')
        board.send(block(40, 40))
        wait_rows(rec, 80)
        proc.send_signal(signal.SIGTERM)
        proc.wait(WAIT_S)
        out = watcher.finish()
    finally:
        if proc.poll() is None:
            proc.kill()
        board.close()
    events = json_lines(out)
    summary = events[-1]
    assert summary["type"] == "summary" and summary["frames"] == 80 and summary["lost"] == 0
    states = [e["event"] for e in events if e["type"] == "link"]
    assert states.index("disconnected") < states.index("reconnected")


def _holds_open(pid: int, path: str) -> bool:
    folder = Path(f"/proc/{pid}/fd")
    try:
        return any(os.path.realpath(fd) == path for fd in folder.iterdir())
    except OSError:  # the process (or one descriptor) went away while we looked: not open
        return False


def test_check_measures_its_duration_from_the_first_frame(tmp_path):
    """A board that says nothing for the first 2 s after the port opens (many reset on open) is
    measured for the whole --duration once it speaks, not failed as dead or cut short."""
    import numpy as np

    from processing.profile import profile_for
    from protocol.encoder import encode_frames, encode_info
    from tests.protocol.ptyboard import PtyBoard

    save_profile(profile_for(2, names=("a", "b")), tmp_path / "two.toml")
    board = PtyBoard(tmp_path)
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "check", str(board.path), "--profile",
                             str(tmp_path / "two.toml"), "--duration", "1", "--json", "--no-limits"],
                            cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        # Bytes sent before the port is open would be flushed: wait until the check holds it open.
        tty_path = os.path.realpath(board.path)
        deadline = time.monotonic() + WAIT_S
        while not _holds_open(proc.pid, tty_path):
            assert proc.poll() is None and time.monotonic() < deadline, "the check never opened the port"
            time.sleep(0.02)
        time.sleep(2.0)  # the silence under test (the check must wait through it)
        board.send(encode_info({"proto": 1, "board": "late", "channels": 2, "rate": 100, "names": "a,b"}))
        spoke_at = time.monotonic()
        first = 0
        while proc.poll() is None and first < 100 * 60:  # 100 Hz until the check ends (at most a minute)
            board.send(encode_frames(1000 + np.zeros((5, 2), np.int64), first, checksum=True))
            first += 5
            time.sleep(0.05)
        listened_s = time.monotonic() - spoke_at
        out, err = proc.communicate(timeout=WAIT_S)
    finally:
        if proc.poll() is None:
            proc.kill()
        board.close()
    assert proc.returncode == 0, err
    report = json_lines(out)[0]
    assert report["passed"] and [c["name"] for c in report["channels"]] == ["a", "b"]
    assert listened_s >= 1.0  # it measured for the whole duration after the first frame
