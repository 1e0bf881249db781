"""Runs every case of the hostile output targets corpus (tests/reliability/hostile_targets.py) as a user
would: padtune as a subprocess in an empty folder, judged by tests/reliability/cases.py."""

from __future__ import annotations

import pytest

from tests.reliability.cases import run_case
from tests.reliability.hostile_targets import cases

pytestmark = pytest.mark.e2e
CASES = cases()


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_hostile_target(case, tmp_path):
    result = run_case(case, tmp_path)
    assert result.ok, f"{case.name}: {result.why}; exit {result.exit_code}; stderr: {result.stderr!r}"


def test_the_corpus_covers_every_kind_of_target():
    names = " ".join(c.name for c in CASES)
    for kind in ("dev-null", "dev-full", "fifo", "socket", "folder", "dash:", "symlink-loop", "dangling",
                 "stale-temporaries", "sim-link"):
        assert kind in names, kind
    assert len(CASES) >= 45
