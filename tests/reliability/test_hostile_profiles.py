"""Every case of the hostile profiles corpus, run as a user would, judged by `tests/reliability/cases.py`."""

from __future__ import annotations

import pytest

from tests.reliability.cases import run_case
from tests.reliability.hostile_profiles import cases, kinds

CASES = cases()


def test_the_corpus_holds_fifty_kinds_or_more_with_unique_names():
    assert kinds() >= 50
    names = [case.name for case in CASES]
    assert len(set(names)) == len(names)


@pytest.mark.e2e
@pytest.mark.parametrize("case", CASES, ids=[case.name for case in CASES])
def test_hostile_profile(case, tmp_path):
    result = run_case(case, tmp_path)
    assert result.ok, f"{result.why}; stderr: {result.stderr[-600:]!r}"
