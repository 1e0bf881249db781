"""`padtune tune FILE -o PROFILE`: suggested threshold, hysteresis and debounce per key from a recording.

The touched stretches come from the recording's marks (touch-start/touch-end per key, quiet-start/
quiet-end) or, without marks, are found in the deltas. The result is written as a profile (atomic,
the old file kept as .bak) and printed as a table, with the reason behind every suggestion or refusal.
A key the recording did not measure is never written as if it had been: the table and stderr name it,
and without `--partial` nothing is written and the exit code is 1; with it the profile marks the key
(`measured = false`) and the exit code is 0.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from processing.atomic import NotRegularFile, refuse_non_regular
from processing.frame_spool import FrameSpool, spool_frames
from processing.profile import Profile, save_profile
from processing.recording_read import open_recording
from processing.settings import LIMIT_KEYS
from processing.suggest import Refusal
from processing.tuning import KeyResult, TuneResult, limits_from_result, tune_recording, with_limits
from protocol.errors import UserError
from protocol.printable import printable
from tui.dash import refuse_dash
from tui.headless.output import channel_table, make_console
from tui.headless.ports import frame_rate, load_profile_arg, percentage, quiet_broken_pipe
from tui.headless.runner import warn_on_stderr
from tui.headless.tuning import CROSSTALK_RULE, crosstalk_rows, result_rows


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "tune", help="suggest settings per key from a recording and write a profile",
        description="Measure noise and touch signal of every key in a recording (marks, or touches found "
        "in the data), suggest threshold, hysteresis and debounce with their reasons, write the profile "
        "and print a table. Keys without a usable touch keep their settings and say why; then nothing is "
        "written and the exit code is 1, unless --partial writes them marked measured = false. A recording "
        "of any length is measured in bounded memory: its frames are spooled to an unnamed temporary file "
        "in TMPDIR (about 4 bytes per reading) while tune runs.")
    p.add_argument("file", metavar="FILE", help="recording (CSV) or raw capture of protocol lines")
    p.add_argument("-o", "--output", metavar="PROFILE", required=True,
                   help="profile TOML to write (a file; `-` is refused: the results table goes to standard "
                   "output)")
    p.add_argument("--profile", metavar="F",
                   help="start from this profile (groups, sliders, limits, other settings are kept)")
    p.add_argument("--report", metavar="FILE.html",
                   help="also write an HTML report with plots (a file; `-` is refused)")
    p.add_argument("--json", action="store_true", help="print the results as one JSON object")
    p.add_argument("--rate", metavar="HZ", type=frame_rate,
                   help="the board's frame rate, for a raw capture without info line or a recording whose "
                   "info gives none (else measured from its host times)")
    p.add_argument("--limits", action="store_true",
                   help="also set the profile's production limits from this recording of a good unit: "
                        "each channel's own baseline range and noise limits, one SNR floor (see README)")
    p.add_argument("--partial", action="store_true",
                   help="write the profile even if some keys were not measured (they are marked "
                        "measured = false and keep their settings); without it such a run writes nothing "
                        "and exits 1")
    p.add_argument("--baseline-margin", metavar="PCT", type=percentage, default=20.0,
                   help="with --limits: widen each channel's baseline range by PCT %% of its own count "
                        "(default 20)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    refuse_dash("-o", args.output, "tune writes the profile to a file (its results table goes to standard "
                "output)")
    out = Path(args.output)
    try:  # before the recording is read: a device, FIFO or socket at the name is never replaced
        refuse_non_regular(out)
    except NotRegularFile as exc:
        raise UserError(f"{out}: {exc.strerror}") from None
    if out.suffix.lower() != ".toml":
        raise UserError(f"{out}: a profile is a TOML file; end the name in .toml")
    if out.is_dir():
        raise UserError(f"{out}: is a folder; give the profile's file name")
    for given in (args.output, args.report):
        if given is not None and _same_file(given, args.file):  # never lose what was recorded
            raise UserError(f"{given}: is the recording being tuned; write the profile or the report to "
                            "another file")
    if args.report:
        from tui.report import check_report_path, require_matplotlib

        require_matplotlib()
        check_report_path(args.report)
    base = load_profile_arg(args.profile)
    with _spooled(args.file, args.rate) as rec:  # the frames stay on disk until everything is measured
        return _tune(args, out, rec, base)


def _tune(args: argparse.Namespace, out: Path, rec: FrameSpool, base: Profile | None) -> int:
    if args.rate is None:
        _say_if_the_clock_jumped(rec)
    result = tune_recording(rec, base, rate_hz=args.rate)
    if rec.truncated:  # measured without it: say so, as replay does
        warn_on_stderr(f"{printable(rec.path)}: the last line was cut short (the writer was stopped mid-row) "
                       "and was dropped; the rows before it were measured")
    if args.limits:
        common, own = limits_from_result(result, args.baseline_margin / 100)
        result.profile = with_limits(result.profile, common, own)
    missing = result.unmeasured()
    if missing and not args.partial:  # the table and the reasons, but no profile that looks tuned
        quiet_broken_pipe(lambda: _show(args, result, None, rec.truncated), code_on_pipe=1)
        _say_unmeasured(missing, written=False)
        return 1
    page = None
    if args.report:  # drawn before anything is saved: a failure here leaves no new profile behind
        from tui.report.tune_report import build_tune_report

        page = build_tune_report(result)
    save_profile(result.profile, out)
    if page is not None:
        from tui.report.html import write_page

        write_page(args.report, page)
    code = quiet_broken_pipe(lambda: _show(args, result, out, rec.truncated))
    if missing:
        _say_unmeasured(missing, written=True)
    return code


@contextmanager
def _spooled(path: str, rate_hz: float | None) -> Iterator[FrameSpool]:
    """The recording's frames, decoded once and spooled to an unnamed temporary file (TMPDIR) that tuning
    goes through as often as it needs: memory holds a piece of it, never the recording."""
    with open_recording(path, rate_hz) as stream:
        try:
            spool = spool_frames(stream)
        except OSError as exc:
            raise UserError(f"{stream.where}: cannot read: {exc.strerror}") from None
    with spool:
        yield spool


def _say_if_the_clock_jumped(rec: FrameSpool) -> None:
    """A recording that states no rate is tuned at the rate its host times give over the whole recording;
    when that is far from the rate frame to frame (the host's clock jumped or stood still), say so: the
    debounces and the baseline's half-second windows would be counted at the wrong rate."""
    if rec.info is not None and rec.info.rate_hz:
        return
    whole, step = rec.rate_hz, rec.step_rate_hz()
    if whole and step and not 0.5 <= whole / step <= 2.0:
        warn_on_stderr(f"{printable(rec.path)}: its host times jump: {whole:.4g} Hz over the whole "
                       f"recording, {step:.4g} Hz frame to frame; tuned at {whole:.4g} Hz: give --rate HZ "
                       "(the board's frame rate) to tune at that")


def _same_file(a: str, b: str) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet): not the same file
        return False


def _say_unmeasured(missing: list[KeyResult], written: bool) -> None:
    """One line on stderr per unmeasured key, then what was (not) done about them."""
    for k in missing:
        why = k.outcome.reason if isinstance(k.outcome, Refusal) else "no suggestion"
        print(f"padtune: {k.name}: not measured: {why}", file=sys.stderr)
    names = ", ".join(k.name for k in missing)
    if written:
        print(f"padtune: {names} written with unmeasured settings, marked measured = false (--partial)",
              file=sys.stderr)
    else:
        print(f"padtune: not measured: {names}; no profile written. Record those keys being touched, "
              "or give --partial to write them marked measured = false", file=sys.stderr)


def _show(args: argparse.Namespace, result: TuneResult, out: Path | None, truncated: bool = False) -> int:
    if args.json:
        limits = {k: getattr(result.profile.limits, k) for k in LIMIT_KEYS}
        rows = result_rows(result)
        for row, c in zip(rows, range(len(rows)), strict=True):
            own = result.profile.limits_for(c)
            row["limits"] = {k: getattr(own, k) for k in LIMIT_KEYS}  # type: ignore[typeddict-unknown-key]
        sys.stdout.write(json.dumps({"type": "tune", "source": result.source,
                                     "profile": str(out) if out is not None else None,
                                     "from_marks": result.from_marks, "rate_hz": result.rate_hz,
                                     "frames": result.frames, "truncated": truncated, "limits": limits,
                                     "unmeasured": [k.name for k in result.unmeasured()],
                                     "channels": rows, "crosstalk": crosstalk_rows(result)}) + "\n")
    else:
        print_result(result, out)
    return 0


def print_result(result: TuneResult, out: Path | None) -> None:
    console = make_console()
    plain = not console.is_terminal
    rows = [dict(row, measured="yes" if row["measured"] else "NO") for row in result_rows(result)]
    columns = [("name", "key"), ("measured", "measured"), ("touches", "touches"), ("noise_pp", "noise pp"),
               ("noise_rms", "noise rms"), ("noise_touched_pp", "touched pp"), ("crosstalk_pct", "xtalk %"),
               ("signal", "signal"), ("snr_pp", "SNR pp"), ("snr_rms", "SNR rms"), ("verdict", "verdict"),
               ("threshold", "threshold"), ("hysteresis", "hyst"), ("touch_debounce", "touch db"),
               ("release_debounce", "release db")]
    how = "from the recording's marks" if result.from_marks else "found in the deltas"
    console.print(channel_table(rows, columns, title=f"{result.source}: {result.frames} frames at "
                                f"{result.rate_hz:g} Hz, touches {how}", plain=plain))
    for row in rows:
        console.print(f"{row['name']}: verdict {row['verdict']} from {row['basis']}; noise while touched "
                      f"{row['noise_touched_pp'] if row['noise_touched_pp'] is not None else '-'} pp"
                      + (f" ({row['touched_tone']})" if row["touched_tone"] else ""))
        if row["refusal"]:
            console.print(f"{row['name']}: no suggestion: {row['refusal']}")
        for key, reason in row["reasons"].items():
            console.print(f"{row['name']} {key}: {reason}")
    neighbours: dict[str, list[str]] = {}
    for x in crosstalk_rows(result):
        if x["flagged"]:
            console.print(f"crosstalk flagged: touching {x['source']} moves {x['target']} by {x['shift']:+g} "
                          f"counts, {x['share_pct']:g}% of its threshold")
        if x["slider"] is not None:
            share = f" ({x['share_pct']:g}%)" if x["share_pct"] is not None else ""
            neighbours.setdefault(x["slider"], []).append(f"{x['pair']} {x['shift']:+g}{share}")
    for slider, pairs in neighbours.items():
        console.print(f"slider neighbours in {slider} (not crosstalk, not flagged): {', '.join(pairs)}")
    console.print("SNR = median touched delta / untouched noise (pp or RMS); verdict from SNR pp "
                  "(common practice: below 5 weak, 5-10 marginal, above 10 solid)")
    console.print(CROSSTALK_RULE + "; noise while touched: the touch level removed by a 0.2 s running median")
    limits = [f"{k} {getattr(result.profile.limits, k)}" for k in LIMIT_KEYS
              if getattr(result.profile.limits, k) is not None]
    if limits:
        console.print("production limits ([limits]): " + ", ".join(limits))
    for c, name in enumerate(result.profile.names):
        if c in result.profile.channel_limits:
            console.print(f"{name} limits: {result.profile.limits_for(c).describe()}")
    if out is not None:
        console.print(f"profile written to {out}")
    else:
        console.print("no profile written: some keys were not measured (see above)")
