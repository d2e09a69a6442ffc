"""The one way a front-end opens a project: its validated config and its database, for reading or writing."""
from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import duckdb

from reval.data.config import Config, load_config
from reval.data.store import Store, latest_version, open_store
from reval.errors import UserError


@contextmanager
def open_project(folder: Path, *, write: bool = False) -> Iterator[tuple[Config, Store]]:
    """The project's config and its store; a reader gets a read-only store brought to the current schema
    first (the forward migrations every writing step applies). A database held by another process is a
    UserError, not a DuckDB traceback."""
    config = load_config(folder)
    try:
        store = open_store(config.database, read_only=not write)
        if not write and store.version() < latest_version():
            store.close()
            open_store(config.database).close()
            store = open_store(config.database, read_only=True)
    except duckdb.IOException as exc:
        raise UserError(f"{config.database} is in use by another reval process; try again when it ends "
                        f"({exc})") from None
    try:
        yield config, store
    finally:
        store.close()
