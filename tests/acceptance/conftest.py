"""One pool of runs for the acceptance tests: several `padtune monitor` runs at once, each run once.

A test names the runs it reads with `@pytest.mark.scenarios("name", ...)` and gets them from the
`outcome` fixture. At the first request every run named by a selected test is started in a small thread
pool (each run is mostly waiting on its board's clock), so the whole set takes about as long as its few
longest runs, and `-k` selects only what it needs.
"""

from __future__ import annotations

from concurrent.futures import Future, ThreadPoolExecutor

import pytest

from tests.acceptance.runs import Outcome, run_scenario
from tests.acceptance.scenarios import SCENARIOS

WORKERS = 6  # runs at once: a padtune start costs about 0.6 s of CPU, the runs themselves little


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "scenarios(*names): the acceptance runs a test reads (conftest.py)")


class Pool:
    def __init__(self, names: list[str], folder) -> None:
        self.folder = folder
        self.executor = ThreadPoolExecutor(max_workers=WORKERS, thread_name_prefix="acceptance")
        self.futures: dict[str, Future] = {}
        for name in names:
            self.submit(name)

    def submit(self, name: str) -> Future:
        if name not in self.futures:
            self.futures[name] = self.executor.submit(run_scenario, SCENARIOS[name], self.folder)
        return self.futures[name]

    def get(self, name: str) -> Outcome:
        return self.submit(name).result()


def _length_s(sc) -> float:
    if sc.duration_s is not None:
        return sc.duration_s
    return sc.board.frames / sc.board.rate_hz if sc.board is not None else 0.0


@pytest.fixture(scope="session")
def acceptance_pool(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory):
    wanted: list[str] = []
    for item in request.session.items:
        marker = item.get_closest_marker("scenarios")
        if marker is not None:
            wanted += [n for n in marker.args if n not in wanted]
    wanted.sort(key=lambda n: -_length_s(SCENARIOS[n]))  # the longest first: the pool ends sooner
    pool = Pool(wanted, tmp_path_factory.mktemp("acceptance"))
    yield pool
    pool.executor.shutdown(wait=True, cancel_futures=True)


@pytest.fixture
def outcome(acceptance_pool: Pool):
    return acceptance_pool.get
