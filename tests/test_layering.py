"""The dependency direction of the design card holds: tui -> processing -> protocol; devices -> protocol,
and inside tui the app above its screens, screens above widgets, widgets above renderables.

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


# Inside tui, what each part may NOT import (module name prefixes): renderables are plain rich, widgets
# draw with renderables, screens compose widgets, and the app (global keys) sits on the screens.
TUI_FORBIDDEN = {
    "tui/render": ("tui.widgets", "tui.screens", "tui.app", "textual"),
    "tui/widgets": ("tui.screens", "tui.app"),
    "tui/screens": ("tui.app",),
}
# The front end's pure logic (editing, wording, file checks, log lines): no Textual, no widget or screen,
# so it is tested without a pilot.
PURE_TUI = ("tui/editor.py", "tui/edits.py", "tui/fields.py", "tui/words.py", "tui/files.py",
            "tui/log_feed.py", "tui/describe.py")


def imported_modules(path: pathlib.Path) -> set[str]:
    """Every module `path` imports, dotted, wherever the import stands (a function's too)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
    return names


def imported_roots(path: pathlib.Path) -> set[str]:
    return {name.split(".")[0] for name in imported_modules(path)}


def breaks(names: set[str], forbidden: tuple[str, ...]) -> list[str]:
    return sorted(n for n in names if any(n == f or n.startswith(f + ".") for f in forbidden))


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


@pytest.mark.parametrize("part", sorted(TUI_FORBIDDEN))
def test_inside_tui_screens_stand_above_widgets_above_renderables(part):
    offenders = []
    for path in sorted((ROOT / part).rglob("*.py")):
        bad = breaks(imported_modules(path), TUI_FORBIDDEN[part])
        if bad:
            offenders.append(f"{path.relative_to(ROOT)} imports {bad}")
    assert not offenders, "\n".join(offenders)


@pytest.mark.parametrize("module", PURE_TUI)
def test_the_front_ends_pure_logic_has_no_textual_widget_or_screen(module):
    bad = breaks(imported_modules(ROOT / module), ("textual", "tui.widgets", "tui.screens", "tui.app"))
    assert not bad, f"{module} imports {bad}"


def test_the_inner_checker_sees_a_widget_imported_by_a_renderable(tmp_path):
    sample = tmp_path / "r.py"
    sample.write_text("from tui.widgets.channel_table import ChannelTable\n", encoding="utf-8")
    assert breaks(imported_modules(sample), TUI_FORBIDDEN["tui/render"]) == [
        "tui.widgets.channel_table", "tui.widgets.channel_table.ChannelTable"]
    assert breaks({"tui.widgetsmith"}, ("tui.widgets",)) == []  # a prefix is a whole module name
