"""`padtune export PROFILE --c-header OUT.h | --json OUT.json`: hand a tuned profile to the firmware.

`-` as the output writes to standard output (the export is the command's one result), so
`padtune export p.toml --c-header - > keys.h` and pipes work; messages stay on stderr.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from processing.atomic import NotRegularFile
from processing.export import c_header_text, export_c_header, export_json, json_text
from processing.profile import load_profile
from protocol.errors import UserError
from tui.dash import HELP_STDOUT, is_stdout


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("export", help="export a tuned profile as a C header or JSON for the firmware",
                              description="Export a tuned profile (TOML) as a C header or JSON. "
                              f"For either output, {HELP_STDOUT} (messages stay on stderr).")
    p.add_argument("profile", help="the profile file (TOML) to export")
    out = p.add_mutually_exclusive_group(required=True)
    out.add_argument("--c-header", metavar="OUT.h",
                     help=f"write a C header with one initialiser per channel ({HELP_STDOUT})")
    out.add_argument("--json", metavar="OUT.json", help=f"write the profile as JSON ({HELP_STDOUT})")
    p.set_defaults(func=run)


def _why(target: Path, exc: OSError) -> str:
    """What went wrong writing `target`, in words that say what to fix."""
    if isinstance(exc, NotRegularFile):
        return exc.strerror
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
    name = args.c_header or args.json
    source = Path(args.profile).name
    if is_stdout(name):
        text = c_header_text(profile, source) if args.c_header else json_text(profile, source)
        try:
            sys.stdout.write(text)
            sys.stdout.flush()
        except BrokenPipeError:  # the reader went away (`| head`): nothing more to say
            return 0
        except OSError as exc:  # stdout on a full disk (> /dev/full): said, not a success
            raise UserError(f"cannot write the export to standard output: {exc.strerror or exc}") from None
    else:
        target = Path(name)
        # os.path.realpath, not Path.resolve: a symlink loop at the target must reach the write's own
        # one-line refusal, not raise here.
        if os.path.realpath(target) == os.path.realpath(args.profile):
            raise UserError(f"{target}: refusing to overwrite the profile itself; choose another output file")
        try:
            if args.c_header:
                export_c_header(profile, target, source=source)
            else:
                export_json(profile, target, source=source)
        except OSError as exc:
            raise UserError(f"{target}: cannot write: {_why(target, exc)}") from None
        counts = ", ".join(_count(n, what) for n, what in ((profile.channels, "channel"),
                                                            (len(profile.groups), "group"),
                                                            (len(profile.sliders), "slider")))
        print(f"wrote {target} ({counts})")  # (on stdout the export is the whole output: nothing added)
    if profile.unmeasured():  # written from defaults by `tune --partial`: the firmware gets guesses there
        names = ", ".join(profile.names[c] for c in profile.unmeasured())
        print(f"padtune: warning: {names} marked measured = false in {args.profile}: their settings were "
              "not tuned on a touch; record them being touched and tune again before shipping",
              file=sys.stderr)
    return 0


def _count(n: int, what: str) -> str:
    return f"{n} {what}" if n == 1 else f"{n} {what}s"
