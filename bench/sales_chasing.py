"""How often the sales-chasing check (reval/roll/review.py) flags honest values, and how often it catches
planted chasing, on the demo municipality fitted by reval.

Builds the shipped demo with every step (`reval demo --headless` in a temporary folder), reads each
segment's staged values, their value changes and the sales, then plants chasing in memory: a share of a
segment's sold parcels gets its sale price (time-adjusted, or as sold) as its value, rounded like the roll,
every other parcel keeps reval's value. Each (share, kind) is drawn 20 times per segment. Prints a table and
writes bench/results/sales_chasing.json.

Run: python -m bench.sales_chasing
"""
from __future__ import annotations

import json
import platform
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from reval.data.config import load_config
from reval.data.store import open_store
from reval.roll.review import sales_chasing
from reval.service.actions import build_demo

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "sales_chasing.json"
SHARES = (0.0, 0.1, 0.2, 0.3, 0.5, 1.0)
DRAWS = 20


def _inputs(folder: Path) -> tuple[pd.DataFrame, pd.DataFrame, dict[int, str], int, float, float]:
    """Value changes per parcel, the sales per batch (with parcel ids), batch -> segment, and the limits."""
    config = load_config(folder)
    with open_store(config.database, read_only=True) as store:
        batches = store.frame("review_batches", {"segment": None})
        ids = batches["batch_id"].tolist()
        changes = store.con.execute(
            """SELECT v.batch_id, v.parcel_id, v.market_value, v.prior_value,
                      v.parcel_id IN (SELECT parcel_id FROM sale_qualification WHERE qualified) AS sold
               FROM roll_values v WHERE list_contains(?, v.batch_id) AND v.prior_value > 0""", [ids]).df()
        sales = store.frame("review_sales", {"batch_ids": ids})
        parcels = store.con.execute("SELECT sale_id, parcel_id FROM adjusted_sales").df()
    sales = sales.merge(parcels.groupby("sale_id").first().reset_index(), on="sale_id")  # single-parcel sales here
    return (changes, sales, dict(zip(batches["batch_id"], batches["segment"])), config.standards.min_sales,
            config.standards.cod_min, config.assessment.rounding)


def measure() -> pd.DataFrame:
    rng = np.random.default_rng(2026)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "demo"
        build_demo(folder, None)
        changes, sales, segments, min_sales, cod_min, rounding = _inputs(folder)
    rows = []
    for batch_id, segment in segments.items():
        moved = changes[changes["batch_id"] == batch_id]
        sold_sales = sales[sales["batch_id"] == batch_id].reset_index(drop=True)
        for kind in ("time-adjusted", "as sold"):
            target = sold_sales["adjusted_price" if kind == "time-adjusted" else "sale_price"].to_numpy(float)
            for share in SHARES:
                flagged = []
                for _ in range(1 if share in (0.0, 1.0) else DRAWS):
                    chased = rng.random(len(sold_sales)) < share
                    value = np.where(chased, np.round(target / rounding) * rounding, sold_sales["roll_value"])
                    planted = sold_sales.assign(roll_value=value)
                    new = dict(zip(planted["parcel_id"], value))
                    market = moved["parcel_id"].map(new).fillna(moved["market_value"]).to_numpy(float)
                    out = sales_chasing(market / moved["prior_value"].to_numpy(float), moved["sold"].to_numpy(bool),
                                        min_sales, planted, cod_min, rounding)
                    if out["status"] == "too_few_sales":
                        break
                    flagged.append(out["flagged"])
                if flagged:
                    rows.append({"segment": segment, "sales": len(sold_sales), "kind": kind, "share": share,
                                 "flag_rate": float(np.mean(flagged))})
    return pd.DataFrame(rows)


def main() -> None:
    table = measure()
    summary = (table.groupby(["kind", "share"])
               .agg(segments=("segment", "size"), mean_flag_rate=("flag_rate", "mean"),
                    segments_always_flagged=("flag_rate", lambda x: int((x == 1.0).sum())),
                    lowest_flag_rate=("flag_rate", "min"))
               .reset_index())
    print(summary.to_string(index=False, float_format=lambda v: f"{v:.2f}"))
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"machine": {"platform": platform.platform(), "python": platform.python_version()},
                                   "draws": DRAWS, "summary": summary.to_dict("records"),
                                   "per_segment": table.to_dict("records")}, indent=2))
    print(f"wrote {RESULTS}")


if __name__ == "__main__":
    main()
