"""The append-only audit log: reval only ever inserts events, never updates or deletes them."""
from __future__ import annotations

import getpass
import json
from typing import Any

import duckdb

from reval.clock import utc_now
from reval.data.store import sql_text


def current_user() -> str:
    """The operating-system user, recorded as 'who' on every event."""
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


def record_event(con: duckdb.DuckDBPyConnection, kind: str, detail: dict[str, Any] | None = None,
                 segment: str | None = None, run_id: str | None = None) -> None:
    """Append one event; call it inside the transaction of the step it records."""
    con.execute(sql_text("insert_event"),
                [utc_now(), current_user(), kind, segment, run_id, json.dumps(detail or {}, sort_keys=True, default=str)])
