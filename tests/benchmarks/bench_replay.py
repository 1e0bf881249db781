"""Replay and tune throughput on large inputs: `padtune replay` as a subprocess, streaming in bounded memory.

Generated in a temporary folder (never in the repository):
- a 64-channel padtune CSV recording of a board at 1 kHz (`--quick`: 2 MB, else 200 MB) with an info
  row, a touch every 0.5 s on one key after another, and marks: synthetic frames written by
  `processing.recording.RecordingWriter`;
- a raw capture of protocol lines from the simulated 8 x 8 grid at 1 kHz (`devices.simulator`,
  `--quick`: 1 MB, else 20 MB).

Prints, measured in this one run: frames/s of `padtune replay FILE --json` (wall time of the whole process,
its start included) and the process's peak resident memory (`os.wait4`'s `ru_maxrss` of that child alone),
the raw capture's MB/s beside the same decoder's own MB/s on the same bytes in this process, and each
figure as a ratio to the goals of issue 13 (CSV: at least 50,000 frames/s and at most 300 MB peak; raw:
at least 20 MB/s); then the same for `padtune tune FILE -o X.toml --partial --json` on both files and on
a CSV a tenth as long (frames/s with its start, peak memory beside the same 300 MB bound, and the ratio of
the two CSVs' peaks: bounded memory does not grow with the file), and `tune` against the plain
whole-array tuning (tests/processing/tune_reference.py) on the shorter CSV: peak memory and time.
Never a pass/fail on time.

    python tests/benchmarks/bench_replay.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import os
import pathlib
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from devices.simulator import SimBoard  # noqa: E402
from processing.recording import RecordingWriter  # noqa: E402
from protocol.decoder import Decoder  # noqa: E402
from protocol.events import FrameBlock  # noqa: E402
from protocol.info import parse_info  # noqa: E402

CHANNELS = 64
RATE_HZ = 1000.0
GOAL_FPS = 50_000.0
GOAL_PEAK_MB = 300.0
GOAL_RAW_MB_S = 20.0
BLOCK_FRAMES = 1000


def write_csv(path: pathlib.Path, size_bytes: int, seed: int = 5) -> None:
    """A 64-channel recording of about `size_bytes`: noise, a touch every 0.5 s (one key after another,
    0.2 s long, 300 counts up), a mark pair around each touch."""
    rng = np.random.default_rng(seed)
    base = rng.integers(9000, 30000, size=CHANNELS)
    names = ",".join(f"k{c:02d}" for c in range(CHANNELS))
    info = parse_info({"proto": "1", "board": "bench64", "channels": str(CHANNELS), "rate": "1000",
                       "names": names, "polarity": "+"}, 0.0)
    now_s = [0.0]  # the writer's clock runs with the frames, so it hands rows to the file as it goes
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: now_s[0], source="bench", info=info) as w:
        w.write_events([info])
        start = 0
        while path.stat().st_size < size_bytes:
            idx = np.arange(start, start + BLOCK_FRAMES)
            readings = base + rng.integers(-6, 7, size=(BLOCK_FRAMES, CHANNELS))
            touched = (idx % 500) < 200
            key = (idx // 500) % CHANNELS
            readings[touched, key[touched]] += 300
            w.write_events([FrameBlock(idx / RATE_HZ, idx % 65536, readings.astype(np.int64), start)])
            for first in idx[idx % 500 == 0].tolist():
                name = f"k{(first // 500) % CHANNELS:02d}"
                w.mark(first / RATE_HZ, "touch-start", name, "")
                w.mark((first + 200) / RATE_HZ, "touch-end", name, "")
            now_s[0] = (start + BLOCK_FRAMES) / RATE_HZ
            w.maybe_flush()
            start += BLOCK_FRAMES


def write_raw(path: pathlib.Path, size_bytes: int) -> None:
    sim = SimBoard("grid64", seed=1)
    with open(path, "wb") as f:
        while f.tell() < size_bytes:
            f.write(sim.run_for(2.0))


def replay(path: pathlib.Path) -> tuple[float, float, int]:
    """(seconds, peak MB, frames) of one `padtune replay PATH --json` process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "replay", str(path), "--json"], cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
    assert proc.stdout is not None
    last = b""
    for line in proc.stdout:
        last = line
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"replay of {path.name} exited {proc.returncode}")
    summary = json.loads(last)
    return seconds, usage.ru_maxrss / 1024.0, int(summary["frames"])  # ru_maxrss: KiB on Linux


def tune(path: pathlib.Path) -> tuple[float, float, int]:
    """(seconds, peak MB, frames) of one `padtune tune PATH -o X.toml --partial --json` process."""
    out = path.with_name(path.stem + "-tuned.toml")
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "tune", str(path), "-o", str(out), "--partial",
                             "--json"], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
    assert proc.stdout is not None
    text = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    peak_mb = usage.ru_maxrss / 1024.0  # KiB on Linux: this child alone
    if proc.returncode != 0:
        raise SystemExit(f"tune of {path.name} exited {proc.returncode}")
    return seconds, peak_mb, int(json.loads(text)["frames"])


PLAIN_TUNE = """
import sys
from processing.recording import read_recording
from tests.processing.tune_reference import reference_tune
rec = read_recording(sys.argv[1])
t_s, _, readings = rec.arrays()
info = rec.info
reference_tune(t_s, readings, info.names, tuple(info.polarity) or (1,), info.rate_hz or 100.0, rec.marks)
print(len(t_s))
"""


def plain_tune(path: pathlib.Path) -> tuple[float, float, int]:
    """(seconds, peak MB, frames) of the plain whole-array tuning (tests/processing/tune_reference.py: the
    file read whole, every key's trace in memory) in a process of its own, on the same file."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", PLAIN_TUNE, str(path)], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.DEVNULL)
    assert proc.stdout is not None
    text = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"the plain tuning of {path.name} failed")
    return seconds, usage.ru_maxrss / 1024.0, int(text.split()[-1])


def decoder_mb_s(path: pathlib.Path) -> float:
    data = path.read_bytes()
    t0 = time.perf_counter()
    decoder = Decoder()
    for start in range(0, len(data), 1 << 20):
        decoder.feed(data[start:start + (1 << 20)], 0.0)
    return len(data) / 1e6 / (time.perf_counter() - t0)


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="small inputs (a few seconds)")
    args = ap.parse_args()
    csv_bytes = 2_000_000 if args.quick else 200_000_000
    raw_bytes = 1_000_000 if args.quick else 20_000_000
    folder = pathlib.Path(tempfile.mkdtemp(prefix="padtune-bench-replay-"))
    try:
        rec, raw = folder / "big.csv", folder / "grid64.raw"
        write_csv(rec, csv_bytes)
        write_raw(raw, raw_bytes)
        tiny = folder / "tiny.raw"
        tiny.write_bytes(raw.read_bytes()[:20_000])
        start_s = min(replay(tiny)[0] for _ in range(2))  # a process's start (imports) and end
        print(f"a replay of {tiny.stat().st_size:,} bytes takes {start_s:.2f} s (the process's start: "
              "figures below are given with it, then without it)")
        seconds, peak_mb, frames = replay(rec)
        size_mb = rec.stat().st_size / 1e6
        for what, s in (("with start", seconds), ("without", max(seconds - start_s, 1e-3))):
            fps = frames / s
            print(f"replay CSV {size_mb:.0f} MB, {CHANNELS} ch, {frames:,} frames, {what}: "
                  f"{fps:,.0f} frames/s ({fps / GOAL_FPS:.2f}x the goal of {GOAL_FPS:,.0f}), "
                  f"{size_mb / s:.1f} MB/s")
        print(f"replay CSV peak memory {peak_mb:.0f} MB ({peak_mb / GOAL_PEAK_MB:.2f} of the "
              f"{GOAL_PEAK_MB:.0f} MB bound, for a {size_mb:.0f} MB file)")
        seconds, peak_mb, frames = replay(raw)
        size_mb = raw.stat().st_size / 1e6
        decoder = decoder_mb_s(raw)
        for what, s in (("with start", seconds), ("without", max(seconds - start_s, 1e-3))):
            print(f"replay raw capture {size_mb:.1f} MB ({frames:,} frames), {what}: {size_mb / s:.1f} MB/s "
                  f"({size_mb / s / GOAL_RAW_MB_S:.2f}x the goal of {GOAL_RAW_MB_S:.0f} MB/s; the decoder "
                  f"alone: {decoder:.0f} MB/s, replay {size_mb / s / decoder:.2f} of it), "
                  f"{frames / s:,.0f} frames/s")
        print(f"replay raw capture peak memory {peak_mb:.0f} MB")
        tenth = folder / "tenth.csv"  # the same board, a tenth as long: bounded memory is the same peak
        write_csv(tenth, csv_bytes // 10)
        peaks = {}
        for path in (rec, tenth, raw):  # tune spools the frames to disk and goes through them by passes
            seconds, peak_mb, frames = tune(path)
            peaks[path] = peak_mb
            size_mb = path.stat().st_size / 1e6
            print(f"tune {path.suffix[1:]} {size_mb:.1f} MB ({frames:,} frames, {CHANNELS} ch): "
                  f"{frames / seconds:,.0f} frames/s with start, peak memory {peak_mb:.0f} MB "
                  f"({peak_mb / GOAL_PEAK_MB:.2f} of the {GOAL_PEAK_MB:.0f} MB bound)")
        print(f"tune peak memory, ten times the frames: {peaks[rec] / peaks[tenth]:.2f}x "
              f"({peaks[tenth]:.0f} -> {peaks[rec]:.0f} MB)")
        seconds_plain, peak_plain, frames = plain_tune(tenth)
        seconds, peak_mb, _ = tune(tenth)
        tenth_mb = tenth.stat().st_size / 1e6
        print(f"tune by passes against the plain whole-array tuning on the {tenth_mb:.0f} MB CSV "
              f"({frames:,} frames): peak memory {peak_mb:.0f} vs {peak_plain:.0f} MB "
              f"({peak_plain / peak_mb:.1f}x less), time {seconds:.1f} vs {seconds_plain:.1f} s "
              f"({seconds / seconds_plain:.2f}x)")
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
