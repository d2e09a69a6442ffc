"""Fixtures: small real projects on disk with real DuckDB databases (no mocks); helpers are in helpers.py."""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from helpers import fitted_demo_folder, write_project


@pytest.fixture
def small_project(tmp_path: Path) -> Path:
    return write_project(tmp_path / "proj")


@pytest.fixture(scope="session")
def demo_project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The shipped demo municipality, imported, sales prepared and prior-value studies stored (built once;
    tests that change it must copy it first with `copy_project`)."""
    from reval.service.actions import build_demo

    folder = tmp_path_factory.mktemp("demo")
    build_demo(folder, None)
    return folder


@pytest.fixture(scope="module")
def demo_writable(demo_project: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A copy of `demo_project` for the tests of one module that write (e.g. store a study)."""
    return Path(shutil.copytree(demo_project, tmp_path_factory.mktemp("demo-copy") / "p"))


@pytest.fixture(scope="session")
def fitted_demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The small demo built with every step (import, sales, fit, values staged) and its run id pinned."""
    return fitted_demo_folder(tmp_path_factory)


@pytest.fixture
def demo_copy(fitted_demo: Path, tmp_path: Path) -> Path:
    """A private copy of `fitted_demo` for a test that writes."""
    return Path(shutil.copytree(fitted_demo, tmp_path / "demo"))
