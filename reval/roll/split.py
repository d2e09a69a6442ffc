"""A value split into currency parts, one per model term, that add up to it exactly (for a board or an owner).

The model values a parcel as exp(base + sum of log parts). A reader wants currency: the base gets
exp(base) and the rest is shared in proportion to the log parts, i.e. each part times the logarithmic
mean L(value, base) of the value and the base: the log-mean Divisia split (Ang 2004, "Decomposition
analysis for policymaking in energy", Energy Policy 32:1131-1139), which leaves no residual and stays
finite when the parts cancel. Parts are then rounded to whole units by the largest-remainder method; for two
parts that is rounding the first half up, which is how sql/queries/roll_insert_values.sql splits the assessed
value into land and improvement set-based (tests/test_caps.py checks it against `apportion`).
numpy is imported inside the functions: the app's overview, which imports this module's callers, starts
faster without it.
"""
from __future__ import annotations

import math
from typing import TYPE_CHECKING, TypedDict

if TYPE_CHECKING:
    import numpy as np


class SplitPart(TypedDict):
    term: str
    log: float
    currency: int
    exact: float


class ValueSplit(TypedDict):
    value: int
    base: int
    base_log: float
    parts: list[SplitPart]


def apportion(amounts: np.ndarray, total: int) -> np.ndarray:
    """Whole-unit parts of `total` near `amounts` that add up to it exactly (largest-remainder method)."""
    import numpy as np

    amounts = np.asarray(amounts, dtype=float)
    floors = np.floor(amounts)
    short = round(total - floors.sum())
    order = np.argsort(-(amounts - floors), kind="stable")
    floors[order[:short]] += 1
    return floors.astype(np.int64)


def value_split(base_log: float, contributions: dict[str, float]) -> ValueSplit:
    """Split the value exp(base_log + sum of contributions) into a base and one currency part per term."""
    import numpy as np

    terms = list(contributions)
    logs = np.array([contributions[t] for t in terms], dtype=float)
    log_value = base_log + logs.sum()
    value, base = math.exp(log_value), math.exp(base_log)
    gap = log_value - base_log
    log_mean = base if abs(gap) < 1e-12 else (value - base) / gap
    exact = np.concatenate([[base], logs * log_mean])
    rounded = apportion(exact, round(value))
    return {"value": round(value), "base": int(rounded[0]), "base_log": base_log,
            "parts": [{"term": t, "log": float(c), "currency": int(v), "exact": float(e)}
                      for t, c, v, e in zip(terms, logs, rounded[1:], exact[1:])]}
