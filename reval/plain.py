"""Plain Python values for JSON and screens: numbers with None for missing, rows as dicts of Python scalars.

JSON has no NaN, and the screens test for None only, so every missing number leaves the core as None.
"""
from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pandas is imported by the callers that have frames; the app's start-up avoids it
    import pandas as pd


Record = dict[str, Any]   # one row of a named query, as Store.records returns it


def number(x: Any) -> float | None:
    """A float, or None for a missing value (None, NaN, NA, a masked entry)."""
    if x is None or getattr(x, "mask", False):
        return None
    try:
        value = float(x)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(value) else value


def scalar(x: Any) -> Any:
    """A Python scalar: numpy scalars unwrapped, NaN and NaT as None."""
    if hasattr(x, "item") and not isinstance(x, (list, tuple, dict)) and getattr(x, "ndim", 0) == 0:
        x = x.item()
    if isinstance(x, float) and math.isnan(x):
        return None
    if type(x).__name__ in ("NaTType", "NAType"):
        return None
    return x


def records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """JSON-ready rows of a frame: numpy scalars as Python values, NaN/NaT/NA as None."""
    return [{k: scalar(v) for k, v in row.items()} for row in frame.astype(object).to_dict("records")]
