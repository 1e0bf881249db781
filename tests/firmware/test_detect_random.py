"""Random traces (hypothesis): the C library, through its binding, reports exactly what padtune's Python
reference (PlainEngine, groups, sliders) reports, frame by frame: events, deltas and states (as a hash)
and the final baselines. Settings reach their limits, polarity goes both ways, settings change and
channels re-baseline mid-stream, readings reach the 32-bit limits. A few traces also go through the C
runner under AddressSanitizer and UndefinedBehaviorSanitizer."""

from __future__ import annotations

import random

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from processing.groups import GroupSpec
from processing.settings import MAX_COUNTS, MAX_STUCK_FRAMES, ChannelSettings
from processing.slider import SliderSpec
from tests.firmware.detect_fixtures import firmware_lib, run_vector, sanitized_runner  # noqa: F401
from tests.vectors.vectors import Scenario, firmware_lines, reference_lines, vector_text

I32_MIN, I32_MAX = -(1 << 31), (1 << 31) - 1
SETTINGS = settings(
    max_examples=150,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)


def edge_or(lo: int, hi: int, *more: int) -> st.SearchStrategy[int]:
    """An integer in lo..hi, often one of the ends (or another value worth trying)."""
    return st.one_of(st.sampled_from([lo, hi, *more]), st.integers(lo, hi))


@st.composite
def channel_settings(draw) -> ChannelSettings:
    t = draw(edge_or(1, MAX_COUNTS, 2, 3, 30))
    slow = draw(edge_or(0, 16))
    period = draw(st.sampled_from([1, 2, 4, 8, 16, 32, 64, 128, 256]))
    return ChannelSettings(
        threshold_counts=t,
        hysteresis_counts=draw(edge_or(0, t - 1)),
        touch_debounce_frames=draw(edge_or(1, 255, 2, 3)),
        release_debounce_frames=draw(edge_or(1, 255, 2, 3)),
        baseline_slow_shift=slow,
        baseline_fast_shift=draw(edge_or(0, slow)),
        baseline_period_frames=period,
        stuck_timeout_frames=draw(
            st.one_of(st.sampled_from([0, 0, 1, 2, 5, MAX_STUCK_FRAMES]), st.integers(0, 60))
        ),
    )


@st.composite
def scenarios(draw) -> Scenario:
    channels = draw(st.integers(1, 5))
    first = draw(channel_settings())
    ss = [draw(st.one_of(st.just(first), channel_settings())) for _ in range(channels)]
    pol = [draw(st.sampled_from([1, -1])) for _ in range(channels)]
    chans = st.integers(0, channels - 1)
    groups = [
        GroupSpec(
            f"g{i}",
            tuple(draw(st.lists(chans, min_size=1, max_size=channels, unique=True))),
            draw(edge_or(0, MAX_COUNTS, 1, 5)),
        )
        for i in range(draw(st.integers(0, 2)))
    ]
    sliders = [
        SliderSpec(
            f"s{i}",
            tuple(draw(st.lists(chans, min_size=1, max_size=channels, unique=True))),
            draw(st.booleans()),
            draw(edge_or(2, 65535, 100)),
        )
        for i in range(draw(st.integers(0, 2)))
    ]
    # Readings: per channel a level, and segments during which each channel sits at an offset from it
    # (in units of its threshold, so touches happen) or at a 32-bit limit; a seeded noise on top.
    # Levels and thresholds often shared between channels, and noise often 0: equal deltas (ties in
    # groups and sliders) happen.
    shared = draw(st.sampled_from([I32_MIN, I32_MAX, 0, 1000]))
    levels = [
        draw(
            st.one_of(st.just(shared), st.sampled_from([I32_MIN, I32_MAX, 0]), st.integers(I32_MIN, I32_MAX))
        )
        for _ in range(channels)
    ]
    rng = random.Random(draw(st.integers(0, 2**32)))
    ops: list = []
    for _ in range(draw(st.integers(1, 12))):
        length = draw(st.integers(1, 60))
        offsets = []
        for c in range(channels):
            kind = draw(st.sampled_from(["idle", "touch", "half", "away", "limit"]))
            t = ss[c].threshold_counts
            offsets.append(
                {
                    "idle": 0,
                    "touch": pol[c] * 2 * t,
                    "half": pol[c] * (t - ss[c].hysteresis_counts),
                    "away": -pol[c] * 3 * t,
                    "limit": None,
                }[kind]
            )
        noise = draw(st.sampled_from([0, 0, 1, 3, 50]))
        limit = draw(st.sampled_from([I32_MIN, I32_MAX]))
        for _ in range(length):
            row = [
                limit if off is None else levels[c] + off + rng.randint(-noise, noise)
                for c, off in enumerate(offsets)
            ]
            ops.append(("frame", [min(I32_MAX, max(I32_MIN, r)) for r in row]))
        action = draw(st.sampled_from(["none", "none", "rebaseline", "rebaseline_all", "set", "polarity"]))
        c = draw(chans)
        if action == "rebaseline":
            ops.append(("rebaseline", c))
        elif action == "rebaseline_all":
            ops.append(("rebaseline", None))
        elif action == "set":
            ops.append(("set", c, draw(channel_settings())))
        elif action == "polarity":
            ops.append(("polarity", c, draw(st.sampled_from([1, -1]))))
    return Scenario(ss, pol, groups, sliders, ops)


@SETTINGS
@given(scn=scenarios())
def test_c_library_matches_the_python_reference_on_random_traces(firmware_lib, scn):  # noqa: F811
    assert firmware_lines(scn) == reference_lines(scn)


@settings(
    max_examples=12,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(scn=scenarios())
def test_random_traces_under_the_sanitizers(sanitized_runner, tmp_path_factory, scn):  # noqa: F811
    path = tmp_path_factory.mktemp("rand") / "trace.vec"
    path.write_text(vector_text(scn))
    assert run_vector(sanitized_runner, path) == reference_lines(scn)
