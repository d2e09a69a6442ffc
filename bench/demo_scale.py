"""Time and size the Vellmarsh generator up to a million parcels; prints a table, writes JSON.

Run from the repository root: python bench/demo_scale.py
"""

from __future__ import annotations

import json
import os
import platform
import tempfile
import time
import tracemalloc
from pathlib import Path

from data_samples.demo_town import generate, write_project

SIZES = (20_000, 200_000, 1_000_000)
RESULTS = Path(__file__).with_name("results") / "demo_scale.json"


def measure(n_parcels: int) -> dict[str, float | int]:
    """Seconds to generate and to write a project, peak traced memory and frame sizes."""
    start = time.perf_counter()
    town = generate(n_parcels)
    seconds = time.perf_counter() - start
    frames_mb = sum(f.memory_usage(deep=True).sum() for f in (town.parcels, town.sales)) / 2**20
    sales, sale_ids = len(town.sales), town.sales["sale_id"].nunique()
    del town

    tracemalloc.start()
    generate(n_parcels)
    peak_mb = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()

    with tempfile.TemporaryDirectory() as folder:
        start = time.perf_counter()
        write_project(Path(folder), n_parcels=n_parcels)
        write_seconds = time.perf_counter() - start
        csv_mb = sum(p.stat().st_size for p in Path(folder).glob("*.csv")) / 2**20
    return {
        "parcels": n_parcels,
        "sale_rows": sales,
        "sales": sale_ids,
        "generate_seconds": round(seconds, 3),
        "peak_traced_mb": round(peak_mb, 1),
        "frames_mb": round(frames_mb, 1),
        "write_project_seconds": round(write_seconds, 3),
        "csv_mb": round(csv_mb, 1),
    }


def main() -> None:
    rows = [measure(n) for n in SIZES]
    header = list(rows[0])
    print(" | ".join(f"{h:>21}" for h in header))
    for row in rows:
        print(" | ".join(f"{row[h]:>21}" for h in header))
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    machine = {"python": platform.python_version(), "machine": platform.machine(), "cpus": os.cpu_count()}
    RESULTS.write_text(json.dumps({"machine": machine, "runs": rows}, indent=2) + "\n")
    print(f"written to {RESULTS}")


if __name__ == "__main__":
    main()
