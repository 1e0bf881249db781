"""`padtune check PORT [PORT ...]`: a production station testing several units at once.

One fixture per port. Each unit runs the single-unit check (`padtune check PORT --json`, the same code
path as one port) in its own process, all at once: a slow, silent or hung unit never stalls the others,
and a crash in one is that unit's error, not the station's. The station names each unit (`--unit`, or
the `serial` key of the board's info line), relays its prompts on stderr with its name in front,
prints one line (or one JSON object) per unit as it finishes, and appends it to `--results` at once,
one transaction per unit: a station killed mid-run loses at most the units still under test.

Exit: 0 every unit passed, 1 a unit failed, 2 a unit could not be tested (setup: no data, a port that
would not open, an unreadable stream) or a usage problem found before any unit started.
"""

from __future__ import annotations

import argparse
import contextlib
import ctypes
import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from datetime import UTC, datetime
from queue import Queue
from typing import Any

from processing.results_db import UnitRecord, open_results, write_unit
from protocol.errors import UserError
from tui.headless.output import make_console
from tui.headless.ports import load_profile_arg

# A unit's check ends by itself (its --duration, the 5 s first-frame wait, --touch's timeouts); this is
# only the station's guard against a check that hangs outright (common practice, no source).
HANG_MARGIN_S = 60.0


@dataclass
class Fixture:
    """One port of the station and what its check returned."""

    port: str
    unit: str | None
    label: str
    code: int | None = None
    report: dict[str, Any] = field(default_factory=dict)
    stderr_tail: list[str] = field(default_factory=list)
    started_utc: str = ""
    elapsed_s: float = 0.0


def unit_ids(ports: list[str], given: list[str] | None, start: int) -> list[str | None]:
    """One id per port from `--unit` (one per port, or one pattern with `{n}`), else None each."""
    if not given:
        return [None] * len(ports)
    if len(given) == 1 and "{" in given[0]:
        pattern = given[0]
        try:
            ids = [pattern.format(n=start + i) for i in range(len(ports))]
        except (KeyError, IndexError, ValueError) as exc:
            raise UserError(f"--unit {pattern!r} is not a unit pattern ({exc}): write the number as {{n}}, "
                            "such as A{n:03} for A001, A002, ...") from None
    elif len(given) == len(ports):
        ids = list(given)
    else:
        raise UserError(f"{len(given)} --unit for {len(ports)} ports: give one --unit per port, in the "
                        "ports' order, or one pattern such as A{n:03}")
    dupes = sorted({u for u in ids if ids.count(u) > 1})
    if dupes:
        raise UserError(f"unit id {dupes[0]} is given to more than one port: each unit needs its own id")
    if any(not u.strip() for u in ids):
        raise UserError("an empty --unit: give each unit a name")
    return list(ids)


def _child_args(args: argparse.Namespace, port: str) -> list[str]:
    """The single-unit check of one port, with the station's options (the same path as one port)."""
    out = [sys.executable, "-m", "tui.cli", "check", port, "--profile", args.profile, "--json",
           "--duration", repr(args.duration)]
    if args.baud is not None:
        out += ["--baud", str(args.baud)]
    if args.polarity:
        out.append("--polarity=" + ",".join("+" if s > 0 else "-" for s in args.polarity))
    if args.touch:
        out += ["--touch", "--touch-timeout", repr(args.touch_timeout)]
    if getattr(args, "no_limits", False):
        out.append("--no-limits")
    return out


def _die_with_parent() -> None:
    """In the child before exec: SIGTERM it when the station dies (even by kill -9), so no orphan keeps
    a fixture's port open (Linux's PR_SET_PDEATHSIG; elsewhere the check ends by its own timeouts)."""
    with contextlib.suppress(OSError, AttributeError):
        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGTERM)  # 1 = PR_SET_PDEATHSIG


def _run_fixture(fx: Fixture, args: argparse.Namespace, done: Queue, procs: list[subprocess.Popen]) -> None:
    fx.started_utc = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    t0 = time.monotonic()
    env = {**os.environ, "NO_COLOR": "1"}
    try:
        proc = subprocess.Popen(_child_args(args, fx.port), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                stdin=subprocess.DEVNULL, text=True, env=env,
                                preexec_fn=_die_with_parent if sys.platform == "linux" else None)
    except OSError as exc:
        fx.code, fx.stderr_tail = 2, [f"padtune: cannot start the check: {exc}"]
        done.put(fx)
        return
    procs.append(proc)
    relay = threading.Thread(target=_relay, args=(proc, fx), daemon=True)
    relay.start()
    assert proc.stdout is not None
    out = proc.stdout.read()
    budget_s = args.duration + 5.0 + (args.touch_timeout * 64 if args.touch else 0) + HANG_MARGIN_S
    try:
        proc.wait(timeout=budget_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
        fx.stderr_tail.append(f"padtune: the check of {fx.port} did not end in {budget_s:.0f} s: stopped")
    relay.join(timeout=5.0)
    fx.code, fx.elapsed_s = proc.returncode, time.monotonic() - t0
    for line in reversed(out.splitlines()):
        with contextlib.suppress(json.JSONDecodeError):
            got = json.loads(line)
            if isinstance(got, dict):
                fx.report = got
                break
    done.put(fx)


def _relay(proc: subprocess.Popen, fx: Fixture) -> None:
    """The unit's prompts and warnings on the station's stderr, its name in front of each line."""
    assert proc.stderr is not None
    for line in proc.stderr:
        line = line.rstrip("\n")
        fx.stderr_tail = [*fx.stderr_tail, line][-5:]
        with contextlib.suppress(BrokenPipeError, ValueError):
            sys.stderr.write(f"[{fx.label}] {line}\n")
            sys.stderr.flush()


def _status(fx: Fixture) -> tuple[str, str | None]:
    """('pass' | 'fail' | 'error', the reason in one line) from the check's exit code and report."""
    said = next((line.removeprefix("padtune: ") for line in reversed(fx.stderr_tail)
                 if line.startswith("padtune: ")), None)
    if fx.code in (0, 1) and fx.report:
        passed = bool(fx.report.get("passed"))
        if fx.code == 0 and passed:
            return "pass", None
        if fx.code == 1 and not passed:
            return "fail", fx.report.get("reason") or _failed_channels(fx.report)
    if fx.code == 2:
        return "error", said or "the check stopped on a setup problem"
    return "error", (said or f"the check ended with exit code {fx.code} and no report")


def _failed_channels(report: dict[str, Any]) -> str:
    parts = [f"{c['name']}: {'; '.join(c.get('reasons', [])) or 'failed'}"
             for c in report.get("channels", []) if not c.get("passed")]
    return " | ".join(parts) or "failed"


def _record(fx: Fixture, args: argparse.Namespace, status: str, reason: str | None) -> UnitRecord:
    rep = fx.report
    return UnitRecord(port=fx.port, started_utc=fx.started_utc, status=status, unit=fx.unit,
                      serial=rep.get("serial"), station=f"{socket.gethostname()}:{os.getpid()}",
                      profile=args.profile, board=rep.get("board"), elapsed_s=fx.elapsed_s,
                      duration_s=args.duration, touch=bool(args.touch), reason=reason,
                      channels=list(rep.get("channels", [])), report=rep)


def run_station(args: argparse.Namespace) -> int:
    ports: list[str] = list(args.port)
    dupes = sorted({p for p in ports if ports.count(p) > 1})
    if dupes:
        raise UserError(f"port {dupes[0]} is given twice: one fixture per port")
    if args.report:
        raise UserError("--report writes one unit's report: with several units, keep --results FILE.sqlite "
                        "and write the lot's report with `padtune lot FILE.sqlite --report FILE.html`")
    ids = unit_ids(ports, args.unit, args.unit_start)
    load_profile_arg(args.profile)  # a bad profile is one line before any fixture starts
    conn = open_results(args.results) if args.results else None
    width = max(len(u or p) for u, p in zip(ids, ports, strict=True))
    fixtures = [Fixture(p, u, (u or p).ljust(width)) for u, p in zip(ids, ports, strict=True)]
    done: Queue[Fixture] = Queue()
    procs: list[subprocess.Popen] = []
    old = {sig: signal.getsignal(sig) for sig in (signal.SIGINT, signal.SIGTERM)}

    def stop(signum: int, frame: object) -> None:  # every unit stops and says so: no verdict
        for proc in list(procs):
            with contextlib.suppress(ProcessLookupError):
                proc.send_signal(signal.SIGTERM)

    for sig in old:
        signal.signal(sig, stop)
    try:
        for fx in fixtures:
            threading.Thread(target=_run_fixture, args=(fx, args, done, procs), daemon=True).start()
        results = [_finish(done.get(), args, conn) for _ in fixtures]
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)
        if conn is not None:
            conn.close()
    return _summary(args, results)


def _finish(fx: Fixture, args: argparse.Namespace, conn: Any) -> tuple[Fixture, str, str | None]:
    """One unit is done: into the results file (its own transaction), then one line or object out."""
    status, reason = _status(fx)
    rec = _record(fx, args, status, reason)
    if conn is not None:
        write_unit(conn, rec)
    if fx.unit is None and not rec.serial:
        sys.stderr.write(f"padtune: the unit on {fx.port} has no id (no --unit, no serial in its info "
                         "line): recorded without one\n")
    with contextlib.suppress(BrokenPipeError):
        if args.json:
            obj = {**fx.report, "type": "check", "unit": fx.unit, "serial": rec.serial, "port": fx.port,
                   "status": status, "passed": status == "pass", "reason": reason}
            obj.setdefault("channels", [])
            sys.stdout.write(json.dumps(obj) + "\n")
        else:
            serial = f" ({rec.serial})" if rec.serial and rec.serial != fx.unit else ""
            word = {"pass": "PASS", "fail": "FAIL", "error": "NOT TESTED"}[status]
            make_console().print(f"{fx.unit or rec.serial or '(no id)'}{serial} on {fx.port}: {word}"
                                 + (f": {reason}" if reason else ""), highlight=False, markup=False)
        sys.stdout.flush()
    return fx, status, reason


def _summary(args: argparse.Namespace, results: list[tuple[Fixture, str, str | None]]) -> int:
    passed = sum(1 for _, s, _ in results if s == "pass")
    failed = [fx.unit or fx.port for fx, s, _ in results if s == "fail"]
    errors = [fx.unit or fx.port for fx, s, _ in results if s == "error"]
    line = f"{passed} of {len(results)} units passed"
    if failed:
        line += f"; failed: {', '.join(failed)}"
    if errors:
        line += f"; not tested: {', '.join(errors)}"
    with contextlib.suppress(BrokenPipeError):
        sys.stderr.write(f"padtune: {line}\n" + (f"padtune: results appended to {args.results}\n"
                                                 if args.results else ""))
    return 2 if errors else 1 if failed else 0
