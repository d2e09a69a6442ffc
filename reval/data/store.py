"""The project's embedded DuckDB database: the one place that opens connections and loads SQL files.

SQL lives in `sql/`: `schema.sql` (version 1), `migrations/NNN_name.sql` (forward migrations, applied in
order) and `queries/NAME.sql` (named queries, always run with bound parameters).
"""
from __future__ import annotations

import functools
import re
import threading
import time
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator, Sequence

import duckdb

from reval.data import lock, publish
from reval.errors import UserError
from reval.plain import scalar

if TYPE_CHECKING:  # pandas loads with DuckDB's .df(); importing it here would slow every start-up
    import pandas as pd

SQL_DIR = Path(__file__).resolve().parents[2] / "sql"
DEFAULT_MEMORY_MB = 1024   # [files] memory_mb's default (reval/data/config.py): DuckDB's own default is 80% of RAM
_MIGRATION = re.compile(r"^(\d{3})_[a-z0-9_]+\.sql$")


@functools.cache
def sql_text(name: str) -> str:
    """The text of `sql/queries/NAME.sql` (or `sql/NAME.sql` for schema files)."""
    path = SQL_DIR / "queries" / f"{name}.sql"
    if not path.exists():
        path = SQL_DIR / f"{name}.sql"
    return path.read_text(encoding="utf-8")


def _statements(con: duckdb.DuckDBPyConnection, name: str) -> list[Any]:
    return con.extract_statements(sql_text(name))


def _used(statement: Any, params: Sequence[Any] | dict[str, Any] | None) -> Sequence[Any] | dict[str, Any] | None:
    """The parameters one statement names (a named dict is cut to its names; positional ones pass as they are)."""
    if not statement.named_parameters:
        return None
    if isinstance(params, dict):
        return {k: v for k, v in params.items() if k in statement.named_parameters}
    return params


def migrations() -> list[tuple[int, Path]]:
    """Forward migrations as (version, file), in version order."""
    found = [(int(m.group(1)), p) for p in (SQL_DIR / "migrations").glob("*.sql") if (m := _MIGRATION.match(p.name))]
    return sorted(found)


def latest_version() -> int:
    return max([1, *(v for v, _ in migrations())])


def _connect(path: Path, read_only: bool, wait: float) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection, retried while another process holds DuckDB's own file lock (a reader during a
    write, or a writer during a read) for up to `wait` seconds; then a UserError naming the holder."""
    deadline = time.monotonic() + wait
    while True:
        try:
            return duckdb.connect(str(path), read_only=read_only)
        except duckdb.IOException as exc:
            if "lock" not in str(exc).lower():
                raise UserError(f"{path}: cannot open the database: {exc}") from None
            if time.monotonic() >= deadline:
                raise lock.in_use(path, wait) from None
            time.sleep(lock.POLL)


class _InProcess:
    """Which DuckDB configuration this process holds each database file open with. DuckDB refuses a read-only
    connection to a file this process already holds read-write (and the reverse), so a reader that comes while
    this process writes joins the writer's database (read-write configuration, no writer lock, reading only
    committed data: DuckDB's MVCC), and a writer waits until this process's read-only connections close.
    This is what lets the app read its screens while its own fit runs."""

    def __init__(self) -> None:
        self.changed = threading.Condition()
        self.read_write: dict[Path, int] = {}
        self.read_only: dict[Path, int] = {}

    def reader(self, path: Path) -> bool:
        """Reserve a reading connection; True when it must join a read-write one."""
        with self.changed:
            joined = self.read_write.get(path, 0) > 0
            counts = self.read_write if joined else self.read_only
            counts[path] = counts.get(path, 0) + 1
            return joined

    def writer(self, path: Path, wait: float) -> None:
        """Reserve a writing connection, once this process's read-only ones are closed (they are short)."""
        with self.changed:
            if not self.changed.wait_for(lambda: self.read_only.get(path, 0) == 0, timeout=max(wait, 1.0)):
                raise UserError(f"{path}: this process is still reading the database; try again.")
            self.read_write[path] = self.read_write.get(path, 0) + 1

    def release(self, path: Path, read_write: bool) -> None:
        with self.changed:
            counts = self.read_write if read_write else self.read_only
            counts[path] -= 1
            if not counts[path]:
                del counts[path]
            self.changed.notify_all()


_IN_PROCESS = _InProcess()


class Store:
    """An open project database. Use `transaction()` around every step that writes.

    A writing store holds the project's writer lock (reval.data.lock) until it is closed, brings the schema
    up to date and finishes or cleans an interrupted export (reval.data.publish); a reader opens DuckDB
    read-only (or joins this process's own writing connection, see _InProcess). Both wait up to `wait` seconds
    (default: lock.wait_seconds()) for another process."""

    def __init__(self, path: Path | str, read_only: bool = False, wait: float | None = None,
                 memory_mb: int = DEFAULT_MEMORY_MB) -> None:
        self.path = Path(path)
        self.read_only = read_only
        wait = lock.wait_seconds() if wait is None else wait
        self._locked = False
        self._key: Path | None = self.path.resolve()
        if not read_only:
            lock.acquire(self.path, wait)
            self._locked = True
            try:
                _IN_PROCESS.writer(self._key, wait)
            except BaseException:
                self._key = None
                self._release()
                raise
            self._read_write = True
        else:
            self._read_write = _IN_PROCESS.reader(self._key)
        try:
            self.con = _connect(self.path, read_only and not self._read_write, wait)
        except BaseException:
            self._release()
            raise
        self._depth = 0
        try:
            self.run("session_settings", {"memory_limit": f"{memory_mb}MB"})
            if not read_only:
                self.upgrade()
                publish.recover(self)
        except BaseException:
            self.close()
            raise

    def close(self) -> None:
        try:
            self.con.close()
        finally:
            self._release()

    def _release(self) -> None:
        """Give back this store's place among the process's connections, and the writer lock if held."""
        if self._key is not None:
            _IN_PROCESS.release(self._key, self._read_write)
            self._key = None
        if self._locked:
            self._locked = False
            lock.release(self.path)

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def transaction(self) -> Iterator[duckdb.DuckDBPyConnection]:
        """All or nothing: commit when the outermost block ends normally, roll back on any exception.
        A nested block joins the enclosing transaction, so a step can combine smaller writing steps."""
        if self._depth:
            self._depth += 1
            try:
                yield self.con
            finally:
                self._depth -= 1
            return
        self.con.begin()
        self._depth = 1
        try:
            yield self.con
        except BaseException:
            self.con.rollback()
            raise
        finally:
            self._depth = 0
        self.con.commit()

    def version(self) -> int:
        exists = self.con.execute(
            "SELECT count(*) FROM information_schema.tables WHERE table_name = 'schema_version'"
        ).fetchone()
        if not exists or exists[0] == 0:
            return 0
        row = self.con.execute("SELECT max(version) FROM schema_version").fetchone()
        return int(row[0]) if row and row[0] is not None else 0

    def upgrade(self) -> None:
        """Create the schema on a new database and apply any forward migrations, each in one transaction."""
        current = self.version()
        if current == 0:
            with self.transaction() as con:
                con.execute(sql_text("schema"))
            current = 1
        for version, path in migrations():
            if version > current:
                with self.transaction() as con:
                    con.execute(path.read_text(encoding="utf-8"))
                    con.execute("INSERT INTO schema_version (version) VALUES (?)", [version])

    def run(self, name: str, params: Sequence[Any] | dict[str, Any] | None = None) -> duckdb.DuckDBPyConnection:
        """Execute the named query file with bound parameters; a file may hold several statements, each
        given the parameters it uses (DuckDB binds parameters only for single statements)."""
        statements = _statements(self.con, name)
        for statement in statements[:-1]:
            self.con.execute(statement, _used(statement, params))
        return self.con.execute(statements[-1], _used(statements[-1], params))

    def insert(self, name: str, frame: pd.DataFrame) -> None:
        """Run an insert query that reads the DataFrame as `staged_frame` (columns matched by name)."""
        if frame.empty:
            return
        self.con.register("staged_frame", frame)
        try:
            self.run(name)
        finally:
            self.con.unregister("staged_frame")

    def frame(self, name: str, params: Sequence[Any] | dict[str, Any] | None = None) -> pd.DataFrame:
        """The named query's result as a pandas DataFrame."""
        return self.run(name, params).df()

    def rows(self, name: str, params: Sequence[Any] | dict[str, Any] | None = None) -> list[tuple[Any, ...]]:
        return self.run(name, params).fetchall()

    def records(self, name: str, params: Sequence[Any] | dict[str, Any] | None = None) -> list[dict[str, Any]]:
        """The named query's rows as dicts of plain Python values (NaN as None), without pandas."""
        cursor = self.run(name, params)
        columns = [d[0] for d in cursor.description or ()]
        return [dict(zip(columns, (scalar(v) for v in row))) for row in cursor.fetchall()]


def open_store(database: Path, read_only: bool = False, memory_mb: int = DEFAULT_MEMORY_MB) -> Store:
    """Open (creating and upgrading if needed) the database at `database`, holding at most `memory_mb` MB."""
    if read_only and not database.exists():
        raise UserError(f"{database}: no database yet; run `reval import` first")
    return Store(database, read_only=read_only, memory_mb=memory_mb)
