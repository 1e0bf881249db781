"""Write the detector test vectors `tests/vectors/*.vec` from padtune's Python reference.

    .venv/bin/python -m tests.vectors.generate          # rewrite every vector
    .venv/bin/python -m tests.vectors.generate --check  # exit 1 if a checked-in vector differs

Each scenario below is small (a few hundred frames) and aims at one part of ALGORITHM.md; the readings
are invented (a seeded random walk plus scripted touches). The expectations come from
`processing.reference.PlainEngine` with the Python groups and sliders (tests/vectors/vectors.py), never
from the C library they check.
"""

from __future__ import annotations

import random
import sys
from collections.abc import Callable

from processing.groups import GroupSpec
from processing.settings import ChannelSettings
from processing.slider import SliderSpec
from tests.vectors.vectors import HERE, Scenario, vector_text

I32_MIN, I32_MAX = -(1 << 31), (1 << 31) - 1


def _noise(rng: random.Random, level: int, amp: int) -> int:
    return level + rng.randint(-amp, amp)


def _touches(
    rng: random.Random,
    frames: int,
    channels: int,
    level: list[int],
    pol: list[int],
    signal: list[int],
    presses: list[tuple[int, int, int]],
    amp: int = 3,
) -> list[list[int]]:
    """Frames of noisy readings with presses (channel, start, length) that move a channel by its signal."""
    out = []
    for f in range(frames):
        row = [_noise(rng, level[c], amp) for c in range(channels)]
        for ch, start, length in presses:
            if start <= f < start + length:
                row[ch] += pol[ch] * signal[ch]
        out.append(row)
    return out


def basic() -> Scenario:
    rng = random.Random(11)
    s = ChannelSettings(
        threshold_counts=30,
        hysteresis_counts=8,
        touch_debounce_frames=3,
        release_debounce_frames=2,
        baseline_slow_shift=6,
        baseline_fast_shift=2,
        baseline_period_frames=16,
    )
    frames = _touches(
        rng,
        400,
        3,
        [1000, 2500, 700],
        [1, 1, 1],
        [45, 60, 33],
        [(0, 40, 60), (1, 90, 5), (1, 150, 120), (2, 200, 2), (2, 260, 50), (0, 300, 3)],
    )
    # A slow drift on channel 2 the baseline follows (toward touch, slowly) and a step away (fast).
    for f in range(100, 400):
        frames[f][2] += (f - 100) // 20
    for f in range(330, 400):
        frames[f][0] -= 40
    return Scenario(
        [s] * 3,
        [1, 1, 1],
        ops=[("frame", r) for r in frames],
        comment="touches, debounce, a bounce, the hysteresis band, drift and a step away from touch",
    )


def negative() -> Scenario:
    rng = random.Random(12)
    s = ChannelSettings(
        threshold_counts=20,
        hysteresis_counts=5,
        touch_debounce_frames=2,
        release_debounce_frames=2,
        baseline_slow_shift=4,
        baseline_fast_shift=1,
        baseline_period_frames=8,
    )
    pol = [-1, -1, 1]
    frames = _touches(
        rng,
        360,
        3,
        [-5000, 30000, 0],
        pol,
        [35, 25, 40],
        [(0, 30, 40), (1, 60, 80), (2, 100, 30), (0, 200, 50), (1, 250, 30)],
    )
    ops = [("frame", r) for r in frames]
    ops.insert(120, ("polarity", 2, -1))  # turned round mid-stream: it re-baselines
    ops.insert(180, ("rebaseline", None))  # all, while channel 1 is touched
    ops.insert(230, ("polarity", 2, 1))
    ops.insert(270, ("rebaseline", 0))  # one, while it is touched
    return Scenario([s] * 3, pol, ops=ops, comment="negative polarity, polarity set mid-stream, re-baselines")


def stuck() -> Scenario:
    rng = random.Random(13)
    a = ChannelSettings(
        threshold_counts=25,
        hysteresis_counts=10,
        touch_debounce_frames=1,
        release_debounce_frames=1,
        baseline_period_frames=4,
        stuck_timeout_frames=50,
    )
    b = ChannelSettings(
        threshold_counts=25,
        hysteresis_counts=0,
        touch_debounce_frames=4,
        release_debounce_frames=6,
        baseline_period_frames=1,
        stuck_timeout_frames=1,
    )
    frames = _touches(rng, 300, 2, [4000, 4000], [1, 1], [40, 40], [(0, 20, 200), (1, 30, 20), (1, 100, 9)])
    return Scenario(
        [a, b],
        [1, 1],
        ops=[("frame", r) for r in frames],
        comment="the stuck timeout (long hold, timeout 1), debounce 1 and period 1",
    )


def limits() -> Scenario:
    rng = random.Random(14)
    hi = ChannelSettings(
        threshold_counts=1 << 24,
        hysteresis_counts=(1 << 24) - 1,
        touch_debounce_frames=255,
        release_debounce_frames=255,
        baseline_slow_shift=16,
        baseline_fast_shift=16,
        baseline_period_frames=256,
        stuck_timeout_frames=(1 << 31) - 1,
    )
    lo = ChannelSettings(
        threshold_counts=1,
        hysteresis_counts=0,
        touch_debounce_frames=1,
        release_debounce_frames=1,
        baseline_slow_shift=0,
        baseline_fast_shift=0,
        baseline_period_frames=1,
        stuck_timeout_frames=0,
    )
    mid = ChannelSettings(
        threshold_counts=1000,
        hysteresis_counts=999,
        touch_debounce_frames=2,
        release_debounce_frames=2,
        baseline_slow_shift=16,
        baseline_fast_shift=0,
        baseline_period_frames=256,
    )
    ops: list = []
    for f in range(900):
        pick = rng.random()
        r0 = I32_MAX if 300 <= f < 600 else I32_MIN  # the widest swing: deltas of 2^32 - 1, both ways
        r1 = rng.choice([I32_MIN, I32_MAX, 0, -1, 1]) if pick < 0.3 else rng.randint(-3, 3)
        r2 = I32_MIN + rng.randint(0, 2000) if f < 450 else I32_MAX - rng.randint(0, 2000)
        r3 = I32_MAX - 2 * (f % 7)
        ops.append(("frame", [r0, r1, r2, r3]))
    ops.insert(600, ("set", 2, lo))
    ops.insert(700, ("set", 3, hi))
    grp = [GroupSpec("g0", (0, 1, 3), 0), GroupSpec("g1", (3, 0), 1 << 24)]
    sl = [SliderSpec("s0", (0, 1, 2, 3), False, 65535), SliderSpec("s1", (3, 2, 1, 0), True, 65535)]
    return Scenario(
        [hi, lo, mid, mid],
        [1, -1, -1, 1],
        groups=grp,
        sliders=sl,
        ops=ops,
        comment="settings and readings at their limits: int32 extremes, T 1 and 2^24, shifts 0 and 16, "
        "period 1 and 256, debounce 1 and 255",
    )


def groups() -> Scenario:
    rng = random.Random(15)
    s = ChannelSettings(
        threshold_counts=30,
        hysteresis_counts=10,
        touch_debounce_frames=2,
        release_debounce_frames=2,
        baseline_period_frames=16,
    )
    frames = _touches(
        rng,
        400,
        5,
        [800] * 5,
        [1] * 5,
        [50, 55, 50, 120, 40],
        [
            (0, 20, 100),
            (1, 50, 100),
            (2, 60, 20),
            (3, 200, 40),
            (4, 210, 60),
            (0, 300, 50),
            (1, 300, 50),
            (2, 300, 50),
        ],
        amp=2,
    )
    for f in range(300, 350):  # equal deltas: the member listed first wins, a winner keeps a tie
        frames[f][0] = frames[f][1] = frames[f][2] = 860
    grp = [GroupSpec("g0", (0, 1, 2), 0), GroupSpec("g1", (2, 1, 0), 6), GroupSpec("g2", (3, 4), 1 << 24)]
    return Scenario(
        [s] * 5,
        [1] * 5,
        groups=grp,
        ops=[("frame", r) for r in frames],
        comment="exclusive groups: margins 0, 6 and 2^24, ties, member order",
    )


def sliders() -> Scenario:
    rng = random.Random(16)
    s = ChannelSettings(
        threshold_counts=20,
        hysteresis_counts=6,
        touch_debounce_frames=1,
        release_debounce_frames=2,
        baseline_period_frames=32,
    )
    ops: list = []
    for f in range(500):
        row = [_noise(rng, 1200, 2) for _ in range(6)]
        if 20 <= f < 220:  # a finger sliding over pads 0..5
            x = (f - 20) / 40
            for p in range(6):
                row[p] += max(0, int(60 - 45 * abs(p - x)))
        if 300 <= f < 420:  # the wheel: around and past the seam
            x = ((f - 300) / 12) % 6
            for p in range(6):
                d = min(abs(p - x), 6 - abs(p - x))
                row[p] += max(0, int(60 - 45 * d))
        ops.append(("frame", row))
    sl = [
        SliderSpec("s0", (0, 1, 2, 3, 4, 5), False, 100),
        SliderSpec("s1", (0, 1, 2, 3, 4, 5), True, 65535),
        SliderSpec("s2", (5, 4, 3), False, 2),
        SliderSpec("s3", (2,), True, 360),
        SliderSpec("s4", (2,), False, 7),
        SliderSpec("s5", (1, 3), True, 1000),
    ]
    return Scenario(
        [s] * 6,
        [1] * 6,
        sliders=sl,
        ops=ops,
        comment="sliders and wheels: resolution 2 to 65535, one and two pads, the wheel's seam",
    )


def live_settings() -> Scenario:
    rng = random.Random(17)
    s = ChannelSettings(
        threshold_counts=40,
        hysteresis_counts=10,
        touch_debounce_frames=3,
        release_debounce_frames=3,
        baseline_period_frames=16,
    )
    frames = _touches(rng, 300, 2, [500, 900], [1, 1], [60, 60], [(0, 30, 60), (1, 40, 100), (0, 200, 40)])
    for f in range(150, 300):
        frames[f][1] += (f - 150) // 10
    ops = [("frame", r) for r in frames]
    ops.insert(
        35,
        (
            "set",
            0,
            ChannelSettings(
                threshold_counts=50,
                hysteresis_counts=30,
                touch_debounce_frames=1,
                release_debounce_frames=9,
                baseline_period_frames=4,
            ),
        ),
    )
    ops.insert(
        107,
        (
            "set",
            1,
            ChannelSettings(
                threshold_counts=70,
                hysteresis_counts=5,
                baseline_period_frames=64,
                baseline_slow_shift=2,
                baseline_fast_shift=1,
                stuck_timeout_frames=30,
            ),
        ),
    )
    ops.insert(171, ("set", 1, s))
    return Scenario([s, s], [1, 1], ops=ops, comment="settings changed live mid-period and mid-touch")


SCENARIOS: dict[str, Callable[[], Scenario]] = {
    "basic": basic,
    "negative": negative,
    "stuck": stuck,
    "limits": limits,
    "groups": groups,
    "sliders": sliders,
    "live_settings": live_settings,
}
HEADER = "padtune detector test vector: {name}, written by tests/vectors/generate.py from PlainEngine.\n"


def main(argv: list[str]) -> int:
    check = "--check" in argv
    differ = []
    for name, build in SCENARIOS.items():
        scn = build()
        scn.comment = HEADER.format(name=name) + scn.comment
        text = vector_text(scn)
        path = HERE / f"{name}.vec"
        if check:
            if not path.exists() or path.read_text() != text:
                differ.append(path.name)
        else:
            path.write_text(text)
    if differ:
        print("vectors differ from the reference: " + ", ".join(differ), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
