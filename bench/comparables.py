"""Comparable sales on the demo: how often the range the adjusted comparables indicate brackets the model value.

Builds the shipped demo municipality (20,000 parcels) in a temporary folder (or uses `--project DIR`, already
fitted), draws a seeded sample of parcels that have a model value, and for each takes the comparable grid of
`reval parcel` (the [comparables] settings in force). Prints the share whose range (lowest to highest adjusted
price) brackets the model value, with the spread and adjustments, and writes bench/results/comparables.json.

Reading: an adjusted price is the subject's model value divided by that comparable's in-sample sales ratio, so
the range brackets the model value when the chosen sales' ratios straddle 1; with k independent sales each
equally likely above or below, that happens with probability 1 - 2 x 0.5^k (0.9375 for k = 5).
"""
from __future__ import annotations

import argparse
import json
import tempfile
import time
from pathlib import Path

import numpy as np

from reval.roll.comparables import comparable_grid
from reval.service.actions import build_demo
from reval.service.project import open_project
from reval.service.views import latest_run

RESULTS = Path(__file__).resolve().parent / "results" / "comparables.json"


def measure(folder: Path, n: int, seed: int) -> dict[str, object]:
    with open_project(folder) as (config, store):
        run_id = latest_run(store)
        assert run_id is not None, "the project has no run: `reval fit` first"
        parcels = sorted(r[0] for r in store.rows("all_parcels"))
        sample = np.random.default_rng(seed).choice(np.array(parcels, dtype=object), size=min(n, len(parcels)),
                                                    replace=False)
        start = time.perf_counter()
        grids = [comparable_grid(store, config, run_id, str(p)) for p in sample]
        seconds = time.perf_counter() - start
    found = [g for g in grids if g["comparables"]]
    low = np.array([g["low"] for g in found], dtype=float)
    high = np.array([g["high"] for g in found], dtype=float)
    indicated = np.array([g["indicated_value"] for g in found], dtype=float)
    model = np.array([g["model_value"] for g in found], dtype=float)
    columns = [c for g in found for c in g["comparables"]]
    return {
        "parcels": len(grids), "with_comparables": len(found), "k": config.comparables.k,
        "bracketing_share": float(np.mean([bool(g["brackets"]) for g in found])),
        "median_spread": float(np.median((high - low) / model)),
        "median_indicated_over_model": float(np.median(indicated / model)),
        "median_gross_adjustment": float(np.median([c["gross_percent"] for c in columns])),
        "median_abs_net_adjustment": float(np.median([abs(c["net_percent"]) for c in columns])),
        "share_over_max_gross": float(np.mean([c["over_max_gross"] for c in columns])),
        "share_same_segment": float(np.mean([g["searched"] == "segment" for g in found])),
        "seconds_per_parcel": seconds / len(grids), "seed": seed,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--project", type=Path, help="a fitted project (default: build the demo)")
    parser.add_argument("--sample", type=int, default=2000)
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.project
        if folder is None:
            folder = Path(tmp) / "demo"
            build_demo(folder, None)
        result = measure(folder, args.sample, args.seed)
    for key, value in result.items():
        print(f"{key:30} {value:.4g}" if isinstance(value, float) else f"{key:30} {value}")
    RESULTS.parent.mkdir(exist_ok=True)
    RESULTS.write_text(json.dumps(result, indent=2) + "\n")


if __name__ == "__main__":
    main()
