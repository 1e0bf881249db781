"""Property tests (hypothesis): the simulator's promises hold for any cuts, inputs and fault plans."""

import argparse
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from devices.faults import FaultPlan
from devices.simulator import SimBoard
from protocol.decoder import Decoder
from protocol.errors import UserError
from protocol.events import FrameBlock
from tui.commands.estimate import build_input, register
from tui.commands.estimate import estimate as run_estimate

REFERENCE = {}


def reference(seed: int, faults: tuple[str, ...]) -> bytes:
    key = (seed, faults)
    if key not in REFERENCE:
        REFERENCE[key] = SimBoard("greenhouse", seed=seed, faults=FaultPlan.parse(faults)).run_for(6.0)
    return REFERENCE[key]


@settings(max_examples=25, deadline=None)
@given(cuts=st.lists(st.floats(0.001, 2.0), min_size=1, max_size=8), seed=st.sampled_from([0, 7]),
       faults=st.sampled_from([(), ("drop:0.05", "garble:0.03", "junk:0.02", "reset@2", "width:8@4")]))
def test_same_seed_same_bytes_however_time_is_cut(cuts, seed, faults):
    board = SimBoard("greenhouse", seed=seed, faults=FaultPlan.parse(faults))
    data = b""
    total = 0.0
    for cut in cuts:
        if total + cut > 6.0:
            break
        data += board.run_for(cut)
        total += cut
    data += board.run_for(6.0 - total)
    assert data == reference(seed, faults)


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=40))
def test_fault_items_parse_or_say_why(text):
    try:
        FaultPlan.parse([text])
    except UserError as exc:
        assert "\n" not in str(exc)


@settings(max_examples=100, deadline=None)
@given(st.binary(max_size=600))
def test_any_host_bytes_are_survived(data):
    board = SimBoard("greenhouse", seed=1)
    board.write(data)
    assert len(board._commands) <= 256  # a host that never ends a line cannot grow memory
    d = Decoder()
    d.feed(board.run_for(0.2), 0.0)
    assert d.stats.garbled == d.stats.bad_checksum == 0  # replies are well-formed lines


@pytest.mark.parametrize("board", ["greenhouse", "pumphouse", "grid64"])
def test_readings_stay_inside_the_methods_range(board):
    # A wildly noisy pad and a shorted one still give readings the method can produce: 0..max_count.
    names = SimBoard(board).spec.names
    b = SimBoard(board, seed=3, faults=FaultPlan.parse([f"noisy:{names[0]}:1000", f"short:{names[1]}"]))
    d = Decoder()
    blocks = [e for e in d.feed(b.run_for(2.0), 0.0) if isinstance(e, FrameBlock)]
    assert d.stats.frames > 0 and d.stats.garbled == 0
    for block in blocks:
        assert block.readings.min() >= 0 and block.readings.max() <= b.spec.method.max_count


def _leaves(data, path=()):
    """Every (path, value) of a parsed TOML document, lists and tables included."""
    yield path, data
    if isinstance(data, dict):
        for k, v in data.items():
            yield from _leaves(v, (*path, k))
    elif isinstance(data, list):
        for i, v in enumerate(data):
            yield from _leaves(v, (*path, i))


def _replaced(data, path, value):
    if not path:
        return value
    head, rest = path[0], path[1:]
    if isinstance(data, dict):
        return {**data, head: _replaced(data[head], rest, value)}
    return [(_replaced(v, rest, value) if i == head else v) for i, v in enumerate(data)]


TOML_VALUES = st.one_of(st.none(), st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True),
                        st.text(max_size=12), st.lists(st.integers(0, 3), max_size=3),
                        st.dictionaries(st.sampled_from(["name", "x", "pad"]), st.integers(0, 3), max_size=2))


@settings(max_examples=300, deadline=None)
@given(data=st.data())
def test_any_one_changed_value_in_a_board_file_loads_or_says_why(data):
    # Whatever one value of a bundled board is changed to (any TOML type, or removed), reading the file
    # either gives a board or a one-line UserError: never another exception.
    import tomllib

    from devices.boards import BOARDS_DIR, _Parser

    name = data.draw(st.sampled_from(["greenhouse", "pumphouse", "grid64"]))
    doc = tomllib.loads((BOARDS_DIR / f"{name}.toml").read_text())
    paths = [p for p, _ in _leaves(doc) if p]
    path = data.draw(st.sampled_from(paths))
    value = data.draw(TOML_VALUES)
    changed = _replaced(doc, path, value)
    if value is None and isinstance(path[-1], str):  # None stands for "the key is left out"
        parent = changed
        for k in path[:-1]:
            parent = parent[k]
        del parent[path[-1]]
    try:
        _Parser(f"{name}.toml").board(changed, source="test")
    except UserError as exc:
        assert "\n" not in str(exc)


ESTIMATE_FLOATS = ("--pad-diameter-mm", "--parasitic-pf", "--thickness-mm", "--air-gap-mm", "--finger-mm",
                   "--body-pf", "--noise-pf", "--noise-counts", "--hum-pf")


@settings(max_examples=300, deadline=None)
@given(values=st.dictionaries(st.sampled_from(ESTIMATE_FLOATS), st.floats(), max_size=4),
       method=st.sampled_from(["charge_time", "charge_share", "oscillator"]),
       sets=st.lists(st.tuples(st.sampled_from(["r_ohm", "timer_mhz", "sample_pf", "adc_bits", "timing_pf",
                                                "gate_ms", "vdd_v", "threshold_v"]),
                               st.floats()), max_size=2))
def test_any_estimate_options_give_finite_json_or_one_line(values, method, sets):
    # Whatever numbers a designer types, `padtune estimate --json` prints strict JSON (no NaN or
    # Infinity, which json.dumps(allow_nan=False) refuses) or refuses the input in one line.
    parser = argparse.ArgumentParser()
    register(parser.add_subparsers())
    argv = ["estimate", "--material", "acrylic", "--thickness-mm", "3", "--method", method]
    for option, value in values.items():
        argv += [f"{option}={value!r}"]
    for key, value in sets:
        argv += ["--set", f"{key}={value!r}"]
    args = parser.parse_args(argv)
    try:
        result = run_estimate(build_input(args))
    except UserError as exc:
        assert "\n" not in str(exc)
        return
    json.dumps(result.as_dict(), allow_nan=False)
