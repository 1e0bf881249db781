"""`padtune --version`: the installed version as a subprocess, and the checkout's pyproject.toml when the
package is not installed. The reference is pyproject.toml itself, read here with the stdlib `tomllib`."""

from __future__ import annotations

import tomllib
from importlib import metadata
from pathlib import Path

import pytest

from tests.headless.helpers import ROOT, padtune
from tui import version

PROJECT_VERSION = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]["version"]


def test_version_as_a_subprocess() -> None:
    out = padtune("--version")
    assert out.returncode == 0, out.stderr
    assert out.stdout == f"padtune {PROJECT_VERSION}\n" and out.stderr == ""


def test_a_checkout_that_is_not_installed_reads_its_pyproject(monkeypatch: pytest.MonkeyPatch,
                                                              tmp_path: Path) -> None:
    def not_installed(name: str) -> str:
        raise metadata.PackageNotFoundError(name)

    monkeypatch.setattr(version.metadata, "version", not_installed)
    assert version.padtune_version() == PROJECT_VERSION
    other = tmp_path / "pyproject.toml"
    other.write_text('[project]\nname = "something-else"\nversion = "9.9"\n', encoding="utf-8")
    assert version.padtune_version(other).startswith("unknown")
    other.write_text("[project\n", encoding="utf-8")  # damaged: still one answer, no traceback
    assert version.padtune_version(other).startswith("unknown")
    assert version.padtune_version(tmp_path / "missing.toml").startswith("unknown")
