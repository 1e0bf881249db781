"""kill -9 during recording: `padtune record sim://greenhouse` killed at random moments loses at most
250 ms of board time, and the file always replays.

What the board had sent by the kill is known from the simulated board's clock: it sends frame n at n /
rate seconds of board time, counted from when the port opened (speed 1). The recording says when that was
(`start_utc` plus the `connected` row's t_s, or earlier if a row came sooner than that would allow: the
earliest moment is taken, so the loss is never under-counted), the parent notes the wall time of the kill,
and the last whole data row's sequence number says how far the file got. The loss is the board time of
the frames due by the kill that the file does not hold. Then `padtune replay FILE --json` must exit 0 and
count as many frames as the file has whole rows.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import os
import random
import signal
import subprocess
import tempfile
import time
from pathlib import Path

from tests.reliability.figures import Figure, at_most, equal, info, with_note
from tests.reliability.procs import padtune, padtune_argv, padtune_env, wait_for

FULL_TRIALS = 20
QUICK_TRIALS = 2
LOSS_BOUND_MS = 250.0  # the recording format's promise (README, "Recordings"): rows reach the OS every 0.25 s


def _parse(path: Path) -> dict:
    """start epoch, connected t_s, rate, and (t_s, seq) of every whole data row."""
    text = path.read_bytes().decode("utf-8", "replace")
    whole = text[: text.rfind("\n") + 1]  # a partial last line (cut by the kill) is not a row
    start, connected, rate, rows, header = None, None, None, [], False
    for line in whole.splitlines():
        if line.startswith("# start_utc="):
            stamp = dt.datetime.strptime(line.split("=", 1)[1], "%Y-%m-%dT%H:%M:%S.%fZ")
            start = stamp.replace(tzinfo=dt.UTC).timestamp()
        elif line.startswith("# link ") and "state=connected" in line and connected is None:
            connected = float(line.split("t_s=", 1)[1].split()[0])
        elif line.startswith("# info ") and " rate=" in line:
            rate = float(line.split(" rate=", 1)[1].split()[0])
        elif line.startswith("t_s,"):
            header = True
        elif header and line and not line.startswith("#"):
            t_s, seq = line.split(",", 2)[:2]
            rows.append((float(t_s), int(seq)))
    return {"start": start, "connected": connected, "rate": rate, "rows": rows}


def _trial(folder: Path, seed: int, rng: random.Random) -> dict:
    out = folder / f"rec{seed}.csv"
    proc = subprocess.Popen(padtune_argv("record", f"sim://greenhouse?seed={seed}", "-o", str(out)),
                            cwd=folder, env=padtune_env(), stdin=subprocess.DEVNULL,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        started = wait_for(lambda: out.exists() and out.stat().st_size > 600, proc=proc)
        if not started:
            return {"problem": f"seed {seed}: no rows before the deadline "
                               f"({proc.stderr.read().decode() if proc.poll() is not None else 'running'})"}
        time.sleep(rng.uniform(0.0, 1.5))
        killed_at = time.time()
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        proc.stderr.close()
    rec = _parse(out)
    if rec["start"] is None or rec["connected"] is None or not rec["rows"] or not rec["rate"]:
        return {"problem": f"seed {seed}: the recording lacks its head or rows"}
    rate = rec["rate"]
    # The board's clock started at the open: no later than `connected`, nor than any row allows.
    opened = min(rec["connected"], *(t - seq / rate for t, seq in rec["rows"]))
    due = math.floor((killed_at - rec["start"] - opened) * rate)  # the last frame sent by the kill
    last_seq = rec["rows"][-1][1]
    loss_ms = max(0, due - last_seq) / rate * 1e3
    replay = padtune("replay", str(out), "--json", cwd=folder)
    frames = None
    for line in replay.stdout.splitlines():
        if '"summary"' in line:
            frames = json.loads(line).get("frames")
    return {"loss_ms": loss_ms, "replay_exit": replay.returncode, "rows": len(rec["rows"]),
            "replayed": frames, "replay_err": replay.stderr.strip()[:200]}


def run(quick: bool) -> list[Figure]:
    trials = QUICK_TRIALS if quick else FULL_TRIALS
    rng = random.Random(5)
    losses, failed_replays, short_replays, problems = [], 0, 0, []
    with tempfile.TemporaryDirectory(prefix="padtune-reckill-") as tmp:
        for trial in range(trials):
            result = _trial(Path(tmp), trial + 1, rng)
            if "problem" in result:
                problems.append(result["problem"])
                continue
            losses.append(result["loss_ms"])
            if result["replay_exit"] != 0:
                failed_replays += 1
                problems.append(f"seed {trial + 1}: replay exit {result['replay_exit']}: "
                                f"{result['replay_err']}")
            elif result["replayed"] != result["rows"]:
                short_replays += 1
                problems.append(f"seed {trial + 1}: replay counted {result['replayed']} frames of "
                                f"{result['rows']} rows")
    worst = max(losses) if losses else float("nan")
    unmeasured = len(problems) - failed_replays - short_replays
    figures = [
        info("record kill: trials", trials),
        equal("record kill: trials that could not be measured", unmeasured, 0),
        at_most("record kill: board time lost, worst", round(worst, 1), LOSS_BOUND_MS, "ms", timed=True),
        info("record kill: board time lost, median", round(sorted(losses)[len(losses) // 2], 1) if losses
             else "none", "ms"),
        equal("record kill: replays that failed (exit != 0)", failed_replays, 0),
        equal("record kill: replays with fewer frames than rows", short_replays, 0),
    ]
    if not losses:
        figures[2] = Figure(figures[2].name, "none", "ms", figures[2].bound, False, timed=True)
    return with_note(figures, problems[0] if problems else "")
