"""Fingerprint of the demo's figures, to show that a refactoring changed no number.

Builds the shipped demo with every step (`reval demo --headless`) in a temporary folder with the code of
the given checkout, then hashes what a user would see: every parcel's estimate, every sale's in-sample
and out-of-fold value, every stored ratio-study group (run ids masked), every staged roll value and how
each segment was modelled. Two checkouts with the same fingerprint give the same figures.

Run: python -m bench.demo_figures [CHECKOUT ...]   (default: this one; writes bench/results/demo_figures.json)
"""
from __future__ import annotations

import argparse
import hashlib
import json
import subprocess
import sys
import tempfile
from pathlib import Path

import duckdb

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "demo_figures.json"
QUERIES = {
    "estimates": "SELECT parcel_id, round(market_value, 6) FROM parcel_estimates ORDER BY parcel_id",
    "sales": "SELECT sale_id, parcel_id, round(oof_log, 9), round(insample_log, 9) FROM sale_predictions ORDER BY 1, 2",
    "studies": "SELECT regexp_replace(study_id, 'run-[0-9-]+', 'RUN'), group_name, n, n_trimmed, round(median_ratio, 9), "
               "round(cod, 9), round(prd, 9), round(prb, 9), verdicts FROM study_groups ORDER BY 1, 2",
    "roll": "SELECT parcel_id, market_value, land_value, improvement_value, assessed_value, flags FROM roll_values "
            "ORDER BY parcel_id",
    "segment_models": "SELECT segment, kind, n_sales, round(edf_deviation, 9), interactions FROM segment_models ORDER BY 1",
}


def fingerprint(checkout: Path) -> dict[str, str]:
    """sha256 per kind of figure of the demo built with the code in `checkout`."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "demo"
        code = ("import sys; sys.path.insert(0, sys.argv[1]); from reval.cli import main; "
                "sys.exit(main(['demo', sys.argv[2], '--headless']))")
        subprocess.run([sys.executable, "-c", code, str(checkout), str(folder)], check=True, cwd=checkout,
                       capture_output=True)
        con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
        try:
            return {name: hashlib.sha256(json.dumps(con.execute(sql).fetchall(), default=str).encode()).hexdigest()
                    for name, sql in QUERIES.items()}
        finally:
            con.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("checkouts", nargs="*", type=Path, default=[ROOT])
    args = parser.parse_args()
    prints = {str(c): fingerprint(c.resolve()) for c in args.checkouts}
    print("| checkout | " + " | ".join(QUERIES) + " |\n|" + " --- |" * (len(QUERIES) + 1))
    for checkout, hashes in prints.items():
        print(f"| {checkout} | " + " | ".join(h[:12] for h in hashes.values()) + " |")
    if len(prints) > 1:
        same = len({json.dumps(h, sort_keys=True) for h in prints.values()}) == 1
        print("identical figures" if same else "FIGURES DIFFER")
    RESULTS.parent.mkdir(exist_ok=True)
    RESULTS.write_text(json.dumps(prints, indent=2))


if __name__ == "__main__":
    main()
