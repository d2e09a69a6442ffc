"""Scale benchmark: import, sales preparation and fit on generated demo municipalities of growing size.

Prints a table and writes bench/results/pipeline_scale.json. Usage:
    python bench/pipeline_scale.py [--parcels 20000 200000 1000000] [--no-fit]
Peak memory is the process's maximum resident set size (includes DuckDB's own memory).
"""
from __future__ import annotations

import argparse
import json
import platform
import resource
import tempfile
import time
from pathlib import Path

from data_samples.demo_town import write_project
from reval.data.config import load_config
from reval.model.run import fit_run
from reval.data.importer import run_import
from reval.data.sales import prepare_sales
from reval.data.store import open_store

RESULTS = Path(__file__).resolve().parent / "results" / "pipeline_scale.json"


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def measure(n_parcels: int, fit: bool) -> dict[str, float]:
    row: dict[str, float] = {"parcels": n_parcels}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        write_project(folder, n_parcels=n_parcels)
        config = load_config(folder)
        start = time.perf_counter()
        result = run_import(config)
        row["import_s"] = time.perf_counter() - start
        row["sales"] = result.sales
        with open_store(config.database) as store:
            start = time.perf_counter()
            prepare_sales(store, config)
            row["sales_step_s"] = time.perf_counter() - start
            if fit:
                start = time.perf_counter()
                fit_run(store, config, references=False)
                row["fit_s"] = time.perf_counter() - start
        row["database_mb"] = (folder / "reval.duckdb").stat().st_size / 1e6
    row["peak_rss_mb"] = _peak_mb()
    return row


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--parcels", type=int, nargs="+", default=[20_000, 200_000])
    parser.add_argument("--no-fit", action="store_true")
    args = parser.parse_args()
    rows = []
    for n in args.parcels:
        rows.append(measure(n, not args.no_fit))
        print("  ".join(f"{k}={v:,.1f}" if isinstance(v, float) else f"{k}={v:,}" for k, v in rows[-1].items()),
              flush=True)
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"machine": {"platform": platform.platform(), "python": platform.python_version()},
                                   "rows": rows}, indent=2))
    print(f"wrote {RESULTS}")


if __name__ == "__main__":
    main()
