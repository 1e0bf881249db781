"""`padtune check PORT_OR_URL --profile F`: a production test of one unit, with a pass/fail exit code.

Hands off for `--duration` seconds (alive, noise, stuck), then with `--touch` each key in turn. Prints
a pass/fail table (or one JSON report with `--json`); exit 0 when every channel passes, 1 otherwise,
2 for a usage or input error. See `processing.acceptance` for what each check means.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from typing import Any

from rich.console import Console

from processing.acceptance import ChannelVerdict, UnitProbe, evaluate
from processing.session import Session
from processing.settings import Limits
from protocol.errors import UserError
from tui.headless.output import channel_table, make_console
from tui.headless.ports import (
    DEFAULT_BAUD,
    StopFlag,
    baud_rate,
    load_profile_arg,
    open_link,
    quiet_broken_pipe,
    seconds,
)
from tui.headless.production import assume_rising, probe_pipeline, quiet_phase, touch_phase
from tui.polarity_arg import add_polarity_arg


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "check", help="production test of one unit against a profile's acceptance limits",
        description="Check one unit: every channel alive (baseline inside the profile's range: no open or "
        "shorted pad), noise below the limit, no key stuck; with --touch, each key is asked for in turn "
        "and its SNR checked. Exit 0 pass, 1 fail, 2 usage or input error.")
    p.add_argument("port", metavar="PORT_OR_URL", nargs="+",
                   help="serial device (/dev/ttyACM0, COM3) or pyserial URL (sim://greenhouse?speed=4); "
                        "several ports test several units at once, one fixture per port")
    p.add_argument("--baud", type=baud_rate, default=None,
                   help=f"baud rate (default {DEFAULT_BAUD}; no effect on socket:// URLs)")
    p.add_argument("--profile", metavar="F", required=True, help="profile TOML with the [limits] to check")
    add_polarity_arg(p)
    p.add_argument("--duration", metavar="S", type=seconds, default=3.0,
                   help="hands-off measuring time in seconds from the first frame (default %(default)s)")
    p.add_argument("--touch", action="store_true", help="then ask for each key in turn and check its SNR")
    p.add_argument("--touch-timeout", metavar="S", type=seconds, default=10.0,
                   help="with --touch: seconds to wait for each key (default %(default)s)")
    p.add_argument("--json", action="store_true", help="print the report as one JSON object")
    p.add_argument("--report", metavar="FILE.html", help="also write an HTML report with plots")
    p.add_argument("--unit", metavar="ID", action="append",
                   help="the unit's id: one per port in the ports' order, or one pattern such as A{n:03} "
                        "(default: the serial key of the board's info line)")
    p.add_argument("--unit-start", metavar="N", type=int, default=1,
                   help="the first {n} of a --unit pattern (default %(default)s)")
    p.add_argument("--results", metavar="FILE.sqlite",
                   help="append every unit's result, per channel and per check, to this SQLite database")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if len(args.port) > 1 or args.unit or args.results:
        from tui.headless.station import run_station

        return run_station(args)
    args.port = args.port[0]
    if args.report:
        from tui.report import check_report_path, require_matplotlib

        require_matplotlib()
        check_report_path(args.report)
    profile = load_profile_arg(args.profile)
    assert profile is not None  # --profile is required
    console = make_console(stderr=True)
    session = Session(profile, polarity=args.polarity)
    link = open_link(args.port, args.baud)
    origin = time.monotonic()
    probe = UnitProbe(session, origin)
    pipeline = probe_pipeline(link, probe, source=args.port)
    try:
        with StopFlag() as stop:
            rising = lambda: assume_rising(session, console.print)  # noqa: E731
            if not quiet_phase(pipeline, probe, args.duration, stop, rising) and not stop.stopped:
                elapsed_s = time.monotonic() - origin
                return quiet_broken_pipe(lambda: _dead_unit(args, elapsed_s), code_on_pipe=1)
            names = list(session.names)
            if profile.channels != session.channels:
                raise UserError(f"the board has {session.channels} channels, the profile "
                                f"{profile.channels}: use the profile made for this board")
            if args.touch:
                touch_phase(pipeline, probe, names, args.touch_timeout, stop, console.print)
            if stop.stopped:
                raise UserError("check interrupted: no verdict")
    finally:
        link.stop()
    assert session.engine is not None
    verdicts = evaluate(probe, profile.limits, names, session.engine.pol.tolist(), args.touch)
    report = _report(args, session, profile.limits, verdicts, time.monotonic() - origin)
    code = 0 if report["passed"] else 1
    # The verdict is the exit code even when the reader of the output went away (`| head`).
    quiet_broken_pipe(lambda: _show(args, report, verdicts, console), code_on_pipe=code)
    if args.report:
        from tui.report.check_report import write_check_report

        write_check_report(args.report, report, probe, session)
    return code


def _report(args: argparse.Namespace, session: Session, limits: Limits, verdicts: list[ChannelVerdict],
            elapsed_s: float) -> dict[str, Any]:
    """The JSON report (also what the HTML report is drawn from)."""
    keys = list(limits.__dataclass_fields__)
    warnings = []
    if all(getattr(limits, k) is None for k in keys):
        warnings.append("the profile has no [limits]: only stuck keys (and --touch) were checked")
    return {"type": "check", "t": round(elapsed_s, 3), "passed": all(v.passed for v in verdicts),
            "warnings": warnings, "port": args.port, "board": session.info.board if session.info else None,
            "serial": session.info.fields.get("serial") if session.info else None,
            "profile": args.profile, "duration_s": args.duration, "touch": args.touch,
            "limits": {k: getattr(limits, k) for k in keys}, "channels": [v.as_dict() for v in verdicts]}


def _show(args: argparse.Namespace, report: dict[str, Any], verdicts: list[ChannelVerdict],
          console: Console) -> int:
    if args.json:
        sys.stdout.write(json.dumps(report) + "\n")
        return 0
    _print_table(verdicts, args.touch)
    for warning in report["warnings"]:  # before the verdict line: a PASS with nothing checked says so
        console.print(f"warning: {warning}")
    failed = [v.name for v in verdicts if not v.passed]
    make_console().print("PASS: every channel passed" if report["passed"] else f"FAIL: {', '.join(failed)}")
    return 0


def _dead_unit(args: argparse.Namespace, elapsed_s: float) -> int:
    """Not one frame: a failed unit (or the wrong port or baud rate), reported like any failure."""
    from protocol.opening import has_baud_rate

    check = "the cable, the port and the baud rate" if has_baud_rate(args.port) else "the bridge and the URL"
    reason = f"no frames from {args.port} in {elapsed_s:.1f} s: a dead unit, or check {check}"
    if args.json:
        sys.stdout.write(json.dumps({"type": "check", "t": round(elapsed_s, 3), "passed": False,
                                     "port": args.port, "profile": args.profile, "reason": reason,
                                     "channels": []}) + "\n")
    else:
        make_console().print(f"FAIL: {reason}")
    return 1


def _print_table(verdicts: list[ChannelVerdict], touch: bool) -> None:
    out = make_console()
    rows = []
    for v in verdicts:
        row = v.as_dict()
        row["verdict"] = "PASS" if v.passed else "FAIL"
        row["reason"] = "; ".join(v.reasons) or "-"
        rows.append(row)
    columns = [("name", "key"), ("verdict", "verdict"), ("baseline", "baseline"), ("noise_pp", "noise pp"),
               ("noise_rms", "noise rms")]
    if touch:
        columns += [("signal", "signal"), ("snr", "SNR")]
    columns.append(("reason", "reason"))
    out.print(channel_table(rows, columns, plain=not out.is_terminal))
