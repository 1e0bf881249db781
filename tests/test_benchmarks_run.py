"""Every benchmark still runs (quick sizes). Speed itself is judged by `make bench`, never here."""

import pathlib
import subprocess
import sys

import pytest

BENCHES = sorted((pathlib.Path(__file__).parent / "benchmarks").glob("bench_*.py"))


@pytest.mark.parametrize("bench", BENCHES, ids=[b.stem for b in BENCHES])
def test_benchmark_runs_quick(bench):
    out = subprocess.run([sys.executable, str(bench), "--quick"], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr[-2000:]
    assert "x" in out.stdout  # every benchmark prints at least one ratio
