"""The one way a front-end opens a project: its validated config and its database, for reading or writing."""
from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from reval.data.config import Config, load_config
from reval.data.store import Store, latest_version, open_store


@contextmanager
def open_project(folder: Path, *, write: bool = False) -> Iterator[tuple[Config, Store]]:
    """The project's config and its store; a reader gets a read-only store brought to the current schema
    first (the forward migrations every writing step applies). A writer holds the project's lock until the
    block ends and first finishes or cleans an interrupted export; a project another process holds is waited
    for (reval.data.lock), then a UserError naming that process, never a DuckDB traceback."""
    config = load_config(folder)
    store = open_store(config.database, read_only=not write, memory_mb=config.memory_mb)
    if not write and store.version() < latest_version():
        store.close()
        open_store(config.database, memory_mb=config.memory_mb).close()
        store = open_store(config.database, read_only=True, memory_mb=config.memory_mb)
    try:
        yield config, store
    finally:
        store.close()
