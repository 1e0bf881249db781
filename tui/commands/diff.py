"""`padtune diff A.toml B.toml`: every setting, limit, name, polarity, group and slider that differs.

A thin shell around `processing.profile_diff`: both profiles are loaded (and validated) first, so a bad
one is its own `file:key: problem` lines and exit 2; then their saved documents are compared. Exit 0
when they drive the board the same way, 1 when anything differs.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from processing.profile import profile_to_dict
from processing.profile_diff import ProfileDiff, diff_dict, diff_documents
from protocol.printable import printable
from tui.headless.ports import load_profile_arg, quiet_broken_pipe


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "diff", help="list every setting and limit that differs between two profiles",
        description="Compare two profiles channel by channel (matched by name): effective settings and "
        "limits, position and polarity, and the groups and sliders. Exit 0 when equal, 1 when they differ, "
        "2 for a missing or bad profile.")
    p.add_argument("a", metavar="A.toml", help="the first profile")
    p.add_argument("b", metavar="B.toml", help="the second profile")
    p.add_argument("--json", action="store_true", help="one JSON object: equal, differences, unmatched")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    return quiet_broken_pipe(lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    a, b = load_profile_arg(args.a), load_profile_arg(args.b)
    assert a is not None and b is not None  # both are required arguments
    diff = diff_documents(profile_to_dict(a), profile_to_dict(b))
    if args.json:
        sys.stdout.write(json.dumps({"a": args.a, "b": args.b, **diff_dict(diff)}) + "\n")
    else:
        sys.stdout.write(human_text(diff, args.a, args.b))
    sys.stdout.flush()
    return 0 if diff.equal else 1


def _shown(value: Any) -> str:
    if value is None:
        return "(not set)"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, list):
        return "[" + ", ".join(_shown(v) for v in value) + "]"
    if isinstance(value, str) and value == "":
        return '""'
    return printable(str(value), 200)  # a profile's board id is free text: no control codes on the terminal


_WHAT = {"profile": "profile", "channel": "channel", "group": "group", "slider": "slider"}


def human_text(diff: ProfileDiff, name_a: str, name_b: str) -> str:
    """`channel zone1  threshold_counts  100 -> 120` lines, grouped by item, then the unmatched ones."""
    if diff.equal:
        return f"{name_a} and {name_b} are the same (every channel's settings and limits, groups, sliders)\n"
    lines = [f"A = {printable(name_a)}", f"B = {printable(name_b)}"]
    width = max((len(d.key) for d in diff.differences), default=0)
    last = None
    for d in diff.differences:
        head = d.section if d.section == "profile" else f"{_WHAT[d.section]} {d.item}"
        if head != last:
            lines.append(head)
            last = head
        lines.append(f"  {d.key:<{width}}  A {_shown(d.a)}  B {_shown(d.b)}")
    for u in diff.unmatched:
        lines.append(f"{_WHAT[u.section]} {u.item}: only in {'A' if u.side == 'a' else 'B'}")
    n, m = len(diff.differences), len(diff.unmatched)
    lines.append(f"{n} difference{'' if n == 1 else 's'}" + (f", {m} only in one profile" if m else ""))
    return "\n".join(lines) + "\n"
