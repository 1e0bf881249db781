"""padtune's version: the installed package's metadata, else the `pyproject.toml` of the checkout it runs
from (`python -m tui.cli` in a clone that was never installed)."""

from __future__ import annotations

import tomllib
from importlib import metadata
from pathlib import Path

PYPROJECT = Path(__file__).resolve().parents[1] / "pyproject.toml"


def padtune_version(pyproject: Path = PYPROJECT) -> str:
    """The version string, such as "0.1.0"; "unknown" (with why) when neither source says."""
    try:
        return metadata.version("padtune")
    except metadata.PackageNotFoundError:
        pass  # not installed: running from a checkout
    try:
        project = tomllib.loads(pyproject.read_text(encoding="utf-8"))["project"]
        if project.get("name") == "padtune" and isinstance(project.get("version"), str):
            return str(project["version"])
    except (OSError, KeyError, TypeError, tomllib.TOMLDecodeError):
        pass  # unreadable or not padtune's: said below
    return "unknown (not installed, and no padtune pyproject.toml beside it)"
