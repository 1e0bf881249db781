"""`padtune lot FILE.sqlite`: a lot's yield, failures and per-channel distributions from a station's results.

Reads the results database `check --results` writes (`processing.results_db`); the statistics are
`processing.lot`'s. Prints tables, one JSON object with `--json`, and with `--report FILE.html` an HTML
page with inline SVG plots, written atomically. Exit 0, or 2 for a file that is not a results database.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from processing.lot import MEASURES, LotSummary, summarise
from processing.results_db import read_units, results_file
from protocol.errors import UserError
from tui.headless.output import channel_table, make_console
from tui.headless.ports import quiet_broken_pipe


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "lot", help="yield, failures and distributions of the units in a results database",
        description="Summarise a results database written by `check --results`: yield (each unit once, by "
        "its latest test; first-pass yield too), failures by check and by channel, and per channel the "
        "baseline, noise pp and SNR over the units (min, median, max, standard deviation).")
    p.add_argument("results", metavar="FILE.sqlite", help="results database written by check --results")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.add_argument("--report", metavar="FILE.html",
                   help="also write an HTML lot report with plots (a file; `-` is refused)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if args.report:
        from tui.report import check_report_path

        check_report_path(args.report)
    with results_file(args.results, create=False) as conn:
        summary = summarise(read_units(conn))
    if args.report:
        _write_report(args.report, summary, args.results)
    return quiet_broken_pipe(lambda: _show(args, summary))


def _write_report(path: str, summary: LotSummary, source: str) -> None:
    from processing.atomic import atomic_write_bytes
    from tui.render.lot_report import lot_html

    try:
        atomic_write_bytes(path, lot_html(summary, source).encode("utf-8"), keep_backup=False)
    except OSError as exc:
        raise UserError(f"--report {path}: cannot write it ({exc.strerror or exc}); nothing was replaced"
                        ) from None


def _show(args: argparse.Namespace, s: LotSummary) -> int:
    if args.json:
        sys.stdout.write(json.dumps(s.as_dict()) + "\n")
        return 0
    out = make_console()
    d = s.as_dict()
    fmt = lambda v: "-" if v is None else f"{v:.1f} %"  # noqa: E731
    out.print(f"{s.units} units in {s.tests} tests: {s.passed} of {s.judged} judged units passed, yield "
              f"{fmt(s.yield_pct)} (first pass {fmt(s.first_pass_yield_pct)}); {len(s.errors)} not tested",
              highlight=False)
    if s.failures_by_check:
        out.print("failures by check: " + ", ".join(f"{k} {n}" for k, n in s.failures_by_check.items()),
                  highlight=False)
    for u in d["failed_units"]:
        out.print(f"  FAIL {u['unit']} ({u['started_utc']}): {', '.join(u['channels']) or u['reason']}",
                  highlight=False, markup=False)
    for u in d["errors"]:
        out.print(f"  NOT TESTED {u['unit']} on {u['port']}: {u['reason']}", highlight=False, markup=False)
    rows: list[dict[str, Any]] = []
    for c in d["channels"]:
        row: dict[str, Any] = {"name": c["name"], "failed": c["failed_units"]}
        for m in MEASURES:
            dist = c[m]
            row[m] = "-" if dist is None else (f"{dist['median']:g} [{dist['min']:g}..{dist['max']:g}]"
                                               + (f" sd {dist['stdev']:.3g}" if dist["stdev"] is not None
                                                  else ""))
        rows.append(row)
    columns = [("name", "key"), ("failed", "failed units"), ("baseline", "baseline median [min..max]"),
               ("noise_pp", "noise pp"), ("snr", "SNR")]
    out.print(channel_table(rows, columns, plain=not out.is_terminal))
    return 0
