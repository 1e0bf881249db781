"""`padtune export PROFILE --c-header OUT.h | --json OUT.json`: hand a tuned profile to the firmware."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from processing.export import export_c_header, export_json
from processing.profile import load_profile
from protocol.errors import UserError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("export", help="export a tuned profile as a C header or JSON for the firmware",
                              description="Export a tuned profile (TOML) as a C header or JSON.")
    p.add_argument("profile", help="the profile file (TOML) to export")
    out = p.add_mutually_exclusive_group(required=True)
    out.add_argument("--c-header", metavar="OUT.h", help="write a C header with one initialiser per channel")
    out.add_argument("--json", metavar="OUT.json", help="write the profile as JSON")
    p.set_defaults(func=run)


def _why(target: Path, exc: OSError) -> str:
    """What went wrong writing `target`, in words that say what to fix."""
    folder = target.parent
    if not folder.is_dir():
        return f"the folder {folder} does not exist"
    if target.is_dir():
        return "it is a folder; name a file"
    if isinstance(exc, PermissionError):
        return "permission denied; choose a folder you can write to"
    return exc.strerror or str(exc)


def run(args: argparse.Namespace) -> int:
    profile = load_profile(args.profile)  # ProfileError: one `file:key: problem` line each, exit 2
    target = Path(args.c_header or args.json)
    if target.resolve() == Path(args.profile).resolve():
        raise UserError(f"{target}: refusing to overwrite the profile itself; choose another output file")
    try:
        if args.c_header:
            export_c_header(profile, target, source=Path(args.profile).name)
        else:
            export_json(profile, target, source=Path(args.profile).name)
    except OSError as exc:
        raise UserError(f"{target}: cannot write: {_why(target, exc)}") from None
    counts = ", ".join(_count(n, what) for n, what in ((profile.channels, "channel"),
                                                        (len(profile.groups), "group"),
                                                        (len(profile.sliders), "slider")))
    print(f"wrote {target} ({counts})")
    if profile.unmeasured():  # written from defaults by `tune --partial`: the firmware gets guesses there
        names = ", ".join(profile.names[c] for c in profile.unmeasured())
        print(f"padtune: warning: {names} marked measured = false in {args.profile}: their settings were "
              "not tuned on a touch; record them being touched and tune again before shipping",
              file=sys.stderr)
    return 0


def _count(n: int, what: str) -> str:
    return f"{n} {what}" if n == 1 else f"{n} {what}s"
