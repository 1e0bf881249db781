"""`make reliability`: every part of the reliability suite, one table of figures, exit 1 when any figure
is out of bounds (issue 13, "Deliver 3"). Not part of `make test`, which runs each part's quick version
(`tests/reliability/test_quick.py`).

    python tests/reliability/run.py [--quick] [--only PART ...]

A part that raises is reported as a figure out of bounds (its error in the notes), and the rest still run.
"""

from __future__ import annotations

import argparse
import importlib
import os
import platform
import sys
import time
import traceback
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script: the project's packages and tests import from its root
    sys.path.insert(0, str(ROOT))

from tests.reliability.figures import Figure, failed, table  # noqa: E402

# In the order they run: cheap first, so a broken build shows fast.
PARTS = ("fuzz", "save_kill", "record_kill", "replug", "hostile", "flood", "soak")


def run_part(name: str, quick: bool) -> tuple[list[Figure], float]:
    start = time.perf_counter()
    try:
        module = importlib.import_module(f"tests.reliability.part_{name}")
        figures = module.run(quick)
        if not figures:
            figures = [failed(f"{name}: figures", "the part returned none")]
    except Exception as exc:  # reported as a figure out of bounds; the other parts still run
        last = traceback.format_exception_only(exc)[-1].strip()
        figures = [failed(f"{name}: ran", f"raised {last}")]
    return figures, time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="padtune's reliability suite: a table of figures.")
    parser.add_argument("--quick", action="store_true",
                        help="the short version of every part (as in make test)")
    parser.add_argument("--only", nargs="+", choices=PARTS, metavar="PART",
                        help=f"run only these parts ({', '.join(PARTS)})")
    args = parser.parse_args(argv)
    os.environ.setdefault("NO_COLOR", "1")
    started = time.time()
    load = os.getloadavg()
    print(f"padtune reliability suite, {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime(started))}, "
          f"{os.cpu_count()} cores, load {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}, "
          f"Python {platform.python_version()}{', quick' if args.quick else ''}", flush=True)
    figures: list[Figure] = []
    for name in args.only or PARTS:
        part, seconds = run_part(name, args.quick)
        bad = sum(1 for f in part if not f.ok)
        print(f"  {name}: {seconds:.1f} s, {len(part)} figures, {bad} out of bounds", flush=True)
        figures += part
    total = time.time() - started
    out = [f for f in figures if not f.ok]
    print()
    print(table(figures))
    print()
    print(f"{len(figures)} figures, {len(out)} out of bounds, in {total:.0f} s "
          f"(load at the end {os.getloadavg()[0]:.2f})")
    return 1 if out else 0


if __name__ == "__main__":
    sys.exit(main())
