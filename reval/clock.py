"""The one clock every stored timestamp comes from: UTC, stored without a zone (DuckDB TIMESTAMP)."""
from __future__ import annotations

import datetime as dt


def utc_now() -> dt.datetime:
    """Now in UTC, as a naive datetime (the database's TIMESTAMP columns hold UTC)."""
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)
