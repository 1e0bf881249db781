"""The dependency direction of the design card holds: tui -> processing -> protocol; devices -> protocol.

Checked by reading every module's imports with the stdlib `ast`, so a stray import (even inside a
function) fails here before it tangles the layers.
"""

import ast
import pathlib

import pytest

ROOT = pathlib.Path(__file__).resolve().parent.parent

# What each package may NOT import (first component of the module name).
FORBIDDEN = {
    "protocol": {"processing", "tui", "devices"},
    "processing": {"tui", "devices"},
    "devices": {"tui", "processing"},
}
# Pure cores carry no Textual import: they are shared with the headless paths and tested without a screen.
NO_TEXTUAL = ("protocol", "processing", "devices")


def imported_roots(path: pathlib.Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    roots: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            roots.add(node.module.split(".")[0])
    return roots


def modules_of(package: str) -> list[pathlib.Path]:
    return sorted((ROOT / package).rglob("*.py"))


@pytest.mark.parametrize("package", sorted(FORBIDDEN))
def test_package_imports_point_one_way(package):
    offenders = []
    for path in modules_of(package):
        bad = imported_roots(path) & FORBIDDEN[package]
        if bad:
            offenders.append(f"{path.relative_to(ROOT)} imports {sorted(bad)}")
    assert not offenders, "\n".join(offenders)


@pytest.mark.parametrize("package", NO_TEXTUAL)
def test_pure_layers_do_not_import_textual(package):
    offenders = [
        str(p.relative_to(ROOT)) for p in modules_of(package) if "textual" in imported_roots(p)
    ]
    assert not offenders, offenders


def test_the_checker_sees_a_forbidden_import(tmp_path):
    # The check itself must be able to fail: a module that imports tui is caught.
    sample = tmp_path / "m.py"
    sample.write_text("def f():\n    from tui import app\n", encoding="utf-8")
    assert "tui" in imported_roots(sample)
