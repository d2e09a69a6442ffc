"""A plausible model run written straight into a demo project's database, for tests of what follows a fit.

Each parcel's estimate is its TRUE market value from the demo generator (data_samples.demo_town,
true_log_value of its recorded features) times lognormal noise; a qualified sale's in-sample log value is
its parcel's log estimate and its out-of-fold log value adds more noise, as a held-out model's would.
Options bend the run for tests: `scale` multiplies a segment's estimates (a level failure), `chase` values
a segment the sales-chasing way (sold parcels at their time-adjusted price, unsold left at prior value).
"""
from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from data_samples.demo_town import true_log_value



def _created(order: int) -> dt.datetime:
    """A creation time after any run already in the project (e.g. one the demo build fitted), `order` minutes on,
    so the fixture run is the newest and `reval value` picks it by default."""
    return dt.datetime.now() + dt.timedelta(minutes=1 + order)


def insert_run(folder: Path, run_id: str, seed: int, *, noise_sd: float = 0.05, oof_sd: float = 0.04,
               scale: dict[str, float] | None = None, chase: tuple[str, ...] = (), order: int = 0) -> str:
    """Insert runs, parcel_estimates and sale_predictions rows for `run_id`; `order` spaces creation times."""
    rng = np.random.default_rng(seed)
    parcels = pd.read_csv(folder / "parcels.csv", dtype={"parcel_id": str})
    con = duckdb.connect(str(folder / "reval.duckdb"))
    try:
        stored = con.execute("SELECT parcel_id, segment, prior_value FROM parcels").df()
        sales = con.execute("SELECT sale_id, parcel_id, adjusted_price FROM adjusted_sales").df()
        frame = stored.merge(parcels.drop(columns=["prior_value"]), on="parcel_id", validate="one_to_one")
        log_value = true_log_value(frame) + rng.normal(0.0, noise_sd, len(frame))
        for segment, factor in (scale or {}).items():
            log_value[(frame["segment"] == segment).to_numpy()] += np.log(factor)
        chased = frame["segment"].isin(chase).to_numpy()
        price = sales.groupby("parcel_id")["adjusted_price"].mean()
        sold_price = frame["parcel_id"].map(price).to_numpy(float)
        log_value[chased] = np.log(np.where(np.isnan(sold_price), frame["prior_value"], sold_price))[chased]
        estimates = pd.DataFrame({"run_id": run_id, "parcel_id": frame["parcel_id"], "segment": frame["segment"],
                                  "log_value": log_value, "market_value": np.exp(log_value)})
        insample = sales["parcel_id"].map(dict(zip(frame["parcel_id"], log_value))).to_numpy(float)
        predictions = pd.DataFrame({"run_id": run_id, "sale_id": sales["sale_id"], "parcel_id": sales["parcel_id"],
                                    "fold": rng.integers(0, 5, len(sales)).astype(np.int16),
                                    "insample_log": insample,
                                    "oof_log": insample + rng.normal(0.0, oof_sd, len(sales))})
        con.begin()
        con.execute("INSERT INTO runs VALUES (?, ?, 'fixture', 'fixture', ?, 5, '{}', ?, '{}')",
                    [run_id, _created(order), seed,
                     json.dumps({"numpy": np.__version__, "source": "tests/run_fixture.py"})])
        con.register("estimates_frame", estimates)
        con.register("predictions_frame", predictions)
        con.execute("INSERT INTO parcel_estimates SELECT * FROM estimates_frame")
        con.execute("INSERT INTO sale_predictions SELECT * FROM predictions_frame")
        con.commit()
    finally:
        con.close()
    return run_id


def set_assessment(folder: Path, lines: str) -> None:
    """Replace the config's [assessment] section (and its [[assessment.caps]]) with `lines`, so a test states
    every assessment rule it relies on, whatever the shipped demo config holds."""
    path = folder / "reval.toml"
    kept, inside = [], False
    for line in path.read_text(encoding="utf-8").splitlines():
        header = line.strip().startswith("[")
        if header:
            inside = line.strip() in ("[assessment]", "[[assessment.caps]]")
        if not inside:
            kept.append(line)
    path.write_text("\n".join(kept) + f"\n\n[assessment]\n{lines}", encoding="utf-8")


def insert_prior_run(folder: Path, run_id: str, factor: float, *, order: int = 0, missing_prior: float = 100_000.0) -> str:
    """A run for any project: every estimate is the prior value (or `missing_prior`) times `factor`."""
    con = duckdb.connect(str(folder / "reval.duckdb"))
    try:
        con.begin()
        con.execute("INSERT INTO runs VALUES (?, ?, 'fixture', 'fixture', 0, 5, '{}', '{}', '{}')",
                    [run_id, _created(order)])
        con.execute("""INSERT INTO parcel_estimates
                       SELECT ?, parcel_id, segment, ln(coalesce(prior_value, ?) * ?), coalesce(prior_value, ?) * ?
                       FROM parcels""", [run_id, missing_prior, factor, missing_prior, factor])
        con.execute("""INSERT INTO sale_predictions
                       SELECT ?, a.sale_id, a.parcel_id, 0, e.log_value, e.log_value FROM adjusted_sales a
                       JOIN parcel_estimates e ON e.parcel_id = a.parcel_id AND e.run_id = ?""", [run_id, run_id])
        con.commit()
    finally:
        con.close()
    return run_id


def roll_project(demo_project: Path, target: Path, assessment: str | None = "", **run: object) -> Path:
    """A copy of the demo project with one fixture run 'run-a' (seed 1). The [assessment] section uses the
    demo's land schedule plus the `assessment` lines; with None it is empty (no schedule, defaults)."""
    import shutil

    shutil.copytree(demo_project, target)
    set_assessment(target, "" if assessment is None else f'land_schedule = "land_schedule.csv"\n{assessment}')
    insert_run(target, "run-a", 1, **run)  # type: ignore[arg-type]
    return target
