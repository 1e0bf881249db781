"""The checked-in vectors (tests/vectors/*.vec, expectations from padtune's PlainEngine): the C library
gives the same lines through the Python binding and through the C runner under the sanitizers, and the
vectors still are what the reference says (so they cannot rot into checking the C against itself)."""

from __future__ import annotations

import pytest

from tests.firmware.detect_fixtures import firmware_lib, run_vector, sanitized_runner  # noqa: F401
from tests.vectors import generate
from tests.vectors.vectors import firmware_lines, parse, reference_lines, vector_files

VECTORS = vector_files()


def test_every_scenario_has_its_checked_in_vector():
    assert {p.stem for p in VECTORS} == set(generate.SCENARIOS)


@pytest.mark.parametrize("path", VECTORS, ids=lambda p: p.stem)
def test_vector_is_what_the_python_reference_gives(path):
    scn, expected = parse(path.read_text().splitlines())
    assert reference_lines(scn) == expected


def test_generator_writes_the_checked_in_files_unchanged():
    assert generate.main(["--check"]) == 0


@pytest.mark.parametrize("path", VECTORS, ids=lambda p: p.stem)
def test_binding_prints_the_vector(firmware_lib, path):  # noqa: F811
    scn, expected = parse(path.read_text().splitlines())
    assert firmware_lines(scn) == expected


@pytest.mark.parametrize("path", VECTORS, ids=lambda p: p.stem)
def test_c_runner_under_sanitizers_prints_the_vector(sanitized_runner, path):  # noqa: F811
    _, expected = parse(path.read_text().splitlines())
    assert run_vector(sanitized_runner, path) == expected


def test_vectors_reach_every_event_kind_and_the_32_bit_limits():
    text = "\n".join(p.read_text() for p in VECTORS)
    kinds = {
        line.split()[2] for line in text.splitlines() if line.startswith("= ") and line.split()[1].isdigit()
    }
    assert kinds == {"touch", "release", "stuck", "rebaselined", "group", "slider"}
    assert "touch 0 4294967295" in text  # a delta of 2^32 - 1: int32 minimum to maximum
    assert str(-(1 << 31)) in text and str((1 << 31) - 1) in text
