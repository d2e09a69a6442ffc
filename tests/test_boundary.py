"""The core library never imports the UI (proved in a fresh interpreter)."""
from __future__ import annotations

import pkgutil
import subprocess
import sys
from pathlib import Path

import reval

ROOT = Path(__file__).resolve().parent.parent


def test_core_modules_do_not_load_textual() -> None:
    modules = [f"reval.{m.name}" for m in pkgutil.iter_modules(reval.__path__)]
    code = ("import sys, importlib\n"
            f"for m in {modules!r}: importlib.import_module(m)\n"
            "bad = sorted(k for k in sys.modules if k == 'textual' or k.startswith(('textual.', 'tui')))\n"
            "print(','.join(bad))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == ""
    assert len(modules) >= 8


def test_ui_holds_no_sql() -> None:
    for path in (ROOT / "tui").rglob("*.py"):
        text = path.read_text()
        assert "duckdb" not in text and "SELECT " not in text, path
