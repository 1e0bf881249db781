"""Fixtures of the firmware detector tests: the library compiled once per test session, and the vector
runner compiled once with the host-test flags and the sanitizers.

Imported by the `tests/firmware/test_detect*.py` modules (`from tests.firmware.detect_fixtures import *`
would hide them from ruff; they import the names). The build goes to a session temp directory through
`PADTUNE_CACHE_DIR`, so subprocesses started by the tests (the CLI) load the same library.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
FIRMWARE = ROOT / "devices" / "firmware"
STRICT = ("-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic")
SANITIZE = (
    "-fsanitize=address,undefined",
    "-fno-sanitize-recover=undefined",
    "-fno-omit-frame-pointer",
    "-g",
    "-O1",
)


def have_cc() -> bool:
    return shutil.which("cc") is not None


needs_cc = pytest.mark.skipif(not have_cc(), reason="no C compiler (cc) on this machine")


@pytest.fixture(scope="session")
def firmware_lib(tmp_path_factory):
    """The C library built for this session (the binding's own build, into a session cache)."""
    if not have_cc():
        pytest.skip("no C compiler (cc) on this machine")
    cache = tmp_path_factory.mktemp("fwcache")
    old = os.environ.get("PADTUNE_CACHE_DIR")
    os.environ["PADTUNE_CACHE_DIR"] = str(cache)
    from devices.firmware import clib

    path = clib.library_path()
    clib.load()
    yield path
    if old is None:
        os.environ.pop("PADTUNE_CACHE_DIR", None)
    else:
        os.environ["PADTUNE_CACHE_DIR"] = old


@pytest.fixture(scope="session")
def sanitized_runner(tmp_path_factory) -> Path:
    """tests/firmware/vector_runner.c with the library, -std=c99 -Wall -Wextra -Werror -pedantic, under
    AddressSanitizer and UndefinedBehaviorSanitizer (an error aborts with a report on stderr)."""
    if not have_cc():
        pytest.skip("no C compiler (cc) on this machine")
    out = tmp_path_factory.mktemp("runner") / "vector_runner"
    sources = [
        FIRMWARE / "pt_detect.c",
        FIRMWARE / "pt_groups.c",
        ROOT / "tests" / "firmware" / "vector_runner.c",
    ]
    done = subprocess.run(
        ["cc", *STRICT, *SANITIZE, f"-I{FIRMWARE}", *map(str, sources), "-o", str(out)],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    return out


def run_vector(runner: Path, path: Path) -> list[str]:
    env = {
        **os.environ,
        "ASAN_OPTIONS": "detect_leaks=1:abort_on_error=0",
        "UBSAN_OPTIONS": "print_stacktrace=1:halt_on_error=1",
    }
    done = subprocess.run([str(runner), str(path)], capture_output=True, text=True, timeout=120, env=env)
    assert done.returncode == 0 and not done.stderr, done.stderr[-3000:]
    return done.stdout.splitlines()
