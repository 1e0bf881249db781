"""Builds the firmware test programs once per test session: the harness (`make firmware-harness`) and the
emitter probe, both under AddressSanitizer and UndefinedBehaviorSanitizer, into one temporary folder.

Tests skip (with the reason) when there is no C compiler; everything else that fails to build fails.
"""

from __future__ import annotations

import atexit
import os
import shutil
import subprocess
import tempfile
from functools import cache
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
FIRMWARE = ROOT / "devices" / "firmware"
CC = os.environ.get("CC", "cc")
WARN = ("-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic")
SANITIZE = ("-O1", "-g", "-fsanitize=address", "-fsanitize=undefined", "-fno-omit-frame-pointer",
            "-fno-sanitize-recover=all")
# A sanitizer finding ends the program with this code, so a test sees it as a failure, never as output.
SAN_ENV = {"ASAN_OPTIONS": "exitcode=86:detect_leaks=1",
           "UBSAN_OPTIONS": "halt_on_error=1:print_stacktrace=1"}


def require_cc() -> None:
    if shutil.which(CC) is None or shutil.which("make") is None:
        pytest.skip(f"no C compiler ({CC}) or make here")


@cache
def build_dir() -> Path:
    path = Path(tempfile.mkdtemp(prefix="padtune-fw-test-"))
    atexit.register(shutil.rmtree, path, True)
    return path


@cache
def harness() -> Path:
    """The harness, built by the Makefile with the sanitizers."""
    require_cc()
    out = build_dir()
    subprocess.run(["make", "-s", "firmware-harness", "FW_SAN=1", f"FW_BUILD={out}", f"CC={CC}"],
                   cwd=ROOT, check=True, capture_output=True, text=True)
    return out / "pt_harness"


@cache
def emit_probe() -> Path:
    """devices/firmware/harness/emit_probe.c over the emitter alone."""
    require_cc()
    out = build_dir() / "emit_probe"
    subprocess.run([CC, *WARN, *SANITIZE, "-o", str(out), str(FIRMWARE / "harness" / "emit_probe.c"),
                    str(FIRMWARE / "pt_emit.c")], check=True, capture_output=True, text=True)
    return out


def run(program: Path, args: list[str], stdin: bytes, timeout_s: float = 60) -> bytes:
    """Runs a test program to its end; returns stdout. A sanitizer report or a non-zero exit fails."""
    done = subprocess.run([str(program), *args], input=stdin, capture_output=True, timeout=timeout_s,
                          env={**os.environ, **SAN_ENV})
    assert b"Sanitizer" not in done.stderr and b"runtime error" not in done.stderr, done.stderr.decode()
    assert done.returncode == 0, done.stderr.decode()
    return done.stdout
