"""Runs every `bench_*.py` beside this file in turn (`make bench`). Each prints its own ratios.

Pass `--quick` to run each with small sizes (the test suite does this so the benchmarks cannot rot).
"""

from __future__ import annotations

import pathlib
import subprocess
import sys


def main() -> int:
    here = pathlib.Path(__file__).parent
    failed = 0
    for bench in sorted(here.glob("bench_*.py")):
        print(f"== {bench.stem}", flush=True)
        rc = subprocess.call([sys.executable, str(bench), *sys.argv[1:]])
        if rc != 0:
            print(f"!! {bench.stem} exited {rc}", flush=True)
            failed += 1
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
