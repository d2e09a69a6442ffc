"""Read every table of a project database, for 'nothing changed' assertions."""
from __future__ import annotations

from pathlib import Path

import duckdb


def database_content(path: Path) -> dict[str, list[tuple]]:
    """All rows of all tables, sorted, so two snapshots compare equal iff the content is equal."""
    if not path.exists():
        return {}
    con = duckdb.connect(str(path), read_only=True)
    try:
        tables = [t for (t,) in con.execute("SELECT table_name FROM information_schema.tables "
                                              "WHERE table_schema = 'main' ORDER BY table_name").fetchall()]
        return {t: sorted(con.execute(f'SELECT * FROM "{t}"').fetchall(), key=repr) for t in tables}
    finally:
        con.close()


def query_frame(folder: Path, sql: str, params: list | None = None):
    """One read-only query against a project's database, as a pandas DataFrame."""
    con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
    try:
        return con.execute(sql, params or []).df()
    finally:
        con.close()
