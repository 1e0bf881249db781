"""Shared helpers for the headless tests: run the CLI as a subprocess, make recordings from the sim."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from devices.simulator import SimBoard
from devices.touches import RAMP_S
from processing.recording import Mark, RecordingWriter, parse_raw_capture

ROOT = Path(__file__).resolve().parents[2]


def padtune(*args: str, timeout: float = 120, env: dict | None = None, **kw) -> subprocess.CompletedProcess:
    full_env = {**os.environ, "NO_COLOR": "1", "COLUMNS": "200", **(env or {})}
    return subprocess.run([sys.executable, "-m", "tui.cli", *args], capture_output=True, text=True,
                          timeout=timeout, cwd=ROOT, env=full_env, **kw)


def json_lines(text: str) -> list[dict]:
    return [json.loads(line) for line in text.splitlines() if line.strip()]


def sim_capture(seconds: float, board: str = "greenhouse", seed: int = 1, **kw) -> tuple[SimBoard, bytes]:
    sim = SimBoard(board, seed=seed, **kw)
    return sim, sim.run_for(seconds)


def write_recording(path: Path, data: bytes, marks: list[Mark] = ()) -> None:
    """A padtune CSV recording of a raw capture (frame n at n / rate s, exactly as the sim made it)."""
    rec = parse_raw_capture(data, str(path))
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0, source="sim://test") as writer:
        writer.write_events(rec.events)
        for m in marks:
            writer.mark(m.t_s, m.kind, m.channel, m.text)


def match_touches(touches: list[dict], truth: list, rate_hz: float, debounce_frames: int,
                  names: tuple[str, ...]) -> tuple[list, list]:
    """(unmatched truth contacts per pad, unexpected touches): a touch matches a contact of its pad when
    it comes after the contact's start and within the ramp plus the debounce (plus two frames)."""
    late_s = RAMP_S + (debounce_frames + 2) / rate_hz
    missing, used = [], set()
    for contact in truth:
        for pad in contact.names:
            if contact.kind == "water":
                continue
            hit = next((i for i, t in enumerate(touches) if i not in used and t["channel"] == pad
                        and contact.start_s <= t["t"] <= contact.start_s + late_s
                        + (contact.hold_s if contact.kind == "swipe" else 0.0)), None)
            if hit is None:
                missing.append((pad, contact.start_s))
            else:
                used.add(hit)
    extra = [t for i, t in enumerate(touches) if i not in used]
    return missing, extra
