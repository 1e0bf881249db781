"""No two of padtune's modules import each other, directly or round a loop (issue 10: `processing.recording`
and `processing.recording_read` did, through a lookup on first use).

Imports are read with the stdlib `ast`, inside functions too (a deferred import hides a cycle, it does
not remove it); imports under `if TYPE_CHECKING:` are left out, since they never run. Cycles are the
strongly connected components of the import graph (Tarjan's algorithm, as in Cormen et al.,
"Introduction to Algorithms", 3rd ed., section 22.5: any component of more than one module is a cycle).
"""

from __future__ import annotations

import ast
import pathlib

ROOT = pathlib.Path(__file__).resolve().parent.parent
PACKAGES = ("protocol", "processing", "tui", "devices")


def _module_name(path: pathlib.Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _type_checking_nodes(tree: ast.AST) -> set[int]:
    hidden: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            hidden.update(id(n) for part in node.body for n in ast.walk(part))
    return hidden


def imports_of(path: pathlib.Path) -> set[str]:
    """Every module (and `module.name`, which may be a submodule) imported anywhere in the file."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    hidden = _type_checking_nodes(tree)
    out: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in hidden:
            continue
        if isinstance(node, ast.Import):
            out.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            out.add(node.module)
            out.update(f"{node.module}.{alias.name}" for alias in node.names)
    return out


def import_graph() -> dict[str, set[str]]:
    files = {_module_name(p): p for pkg in PACKAGES for p in (ROOT / pkg).rglob("*.py")}
    return {name: {m for m in imports_of(path) if m in files and m != name} for name, path in files.items()}


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (iterative Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    for root in sorted(graph):
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.append(member)
                    if member == node:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return found


def test_no_module_imports_itself_round_a_loop() -> None:
    assert cycles(import_graph()) == []


def test_the_cycle_finder_finds_a_loop_and_ignores_type_checking(tmp_path: pathlib.Path) -> None:
    # The check must be able to fail: a three-module loop is one component, a chain is none.
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": {"c"}, "c": set()}) == []
    sample = tmp_path / "m.py"
    sample.write_text("from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from tui import app\n"
                      "def f():\n    from processing import recording_read\n", encoding="utf-8")
    assert "tui.app" not in imports_of(sample) and "processing.recording_read" in imports_of(sample)
