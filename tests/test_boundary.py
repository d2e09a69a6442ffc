"""The architecture's boundaries, proved: the core never loads the UI, the app reaches the core only
through the service layer, and no module imports another in a circle."""
from __future__ import annotations

import ast
import pkgutil
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import reval

ROOT = Path(__file__).resolve().parent.parent


def _core_modules() -> list[str]:
    return sorted(m.name for m in pkgutil.walk_packages(reval.__path__, "reval.") if not m.name.endswith("__main__"))


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> Iterator[str]:
    """Every module a file imports (at any depth, lazy imports included, TYPE_CHECKING blocks excluded)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skip |= {id(n) for n in ast.walk(node)}
    package = _module_name(path) if path.name == "__init__.py" else _module_name(path).rpartition(".")[0]
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            yield from (alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parent = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join(parent + ([base] if base else []))
            for alias in node.names:
                yield f"{base}.{alias.name}"   # a submodule, or a name in `base` (resolved below)


def _graph() -> dict[str, set[str]]:
    files = {_module_name(p): p for top in ("reval", "tui") for p in (ROOT / top).rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, path in files.items():
        edges = set()
        for target in _imports(path):
            while target and target not in files:
                target = target.rpartition(".")[0]
            if target and target != name:
                edges.add(target)
        graph[name] = edges
    return graph


def test_core_modules_do_not_load_textual() -> None:
    modules = _core_modules()
    code = ("import sys, importlib\n"
            f"for m in {modules!r}: importlib.import_module(m)\n"
            "bad = sorted(k for k in sys.modules if k == 'textual' or k.startswith(('textual.', 'tui')))\n"
            "print(','.join(bad))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == ""
    assert len(modules) >= 30


def test_only_the_command_line_launches_the_app() -> None:
    graph = _graph()
    launching = sorted(m for m, edges in graph.items() if m.startswith("reval") and any(e.startswith("tui") for e in edges))
    assert launching == ["reval.cli.main"]


def test_the_app_reaches_the_core_only_through_the_service_layer() -> None:
    graph = _graph()
    for module, edges in graph.items():
        if module.startswith("tui"):
            core = sorted(e for e in edges if e.startswith("reval"))
            assert all(e == "reval.service" or e.startswith("reval.service.") for e in core), (module, core)


def test_no_module_imports_another_in_a_circle() -> None:
    graph = _graph()
    state: dict[str, int] = {}   # 1 = on the current path, 2 = done
    path: list[str] = []

    def visit(node: str) -> None:
        state[node] = 1
        path.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                cycle = path[path.index(nxt):] + [nxt]
                raise AssertionError("import cycle: " + " -> ".join(cycle))
            if nxt not in state:
                visit(nxt)
        path.pop()
        state[node] = 2

    for node in sorted(graph):
        if node not in state:
            visit(node)


def test_the_cycle_check_can_fail() -> None:
    """The walker resolves relative imports and sees lazy ones (a cycle hidden in a function is found)."""
    assert "reval.service.actions" in _graph()["reval.cli.main"]
    assert "reval.roll.batches" in _graph()["reval.service.actions"]        # imported inside a function
    assert "tui.jobs" in _graph()["tui.app"]                                  # a relative import


def test_ui_holds_no_sql() -> None:
    for path in (ROOT / "tui").rglob("*.py"):
        text = path.read_text()
        assert "duckdb" not in text and "SELECT " not in text, path
