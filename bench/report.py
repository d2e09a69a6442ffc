"""Report benchmark: time to write the ratio-study report (HTML and PDF) for generated demo municipalities.

Builds each project (import, sales, a fit without the reference models, which stores the model studies), then
times `actions.report` for model values (every study already stored: what a reviewer's report costs) in HTML
and PDF, and for prior values the first time (the prior groupings are studied and stored first) and again.
Prints a table and writes bench/results/report.json. Usage:
    python bench/report.py [--parcels 100000 1000000] [--no-fit] [--page-png docs/report_page.png]
(--no-fit: no run, so only the prior-value reports are timed: the parcel-level parts without the fit's cost)
(--page-png: also draw the first plots page of the first size's model report as a small PNG, the README's picture)
The target (issue 13) is a million parcels in under a minute.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import tempfile
import time
from pathlib import Path

from data_samples.demo_town import write_project
from reval.data.config import load_config
from reval.data.importer import run_import
from reval.data.sales import prepare_sales
from reval.data.store import open_store
from reval.model.run import fit_run
from reval.report.document import write_page_png
from reval.report.study_report import build_report
from reval.service import actions

RESULTS = Path(__file__).resolve().parent / "results" / "report.json"   # --no-fit: report_no_fit.json
PLOTS_PAGE = 3


def _timed(folder: Path, out: Path, values: str) -> tuple[float, int]:
    start = time.perf_counter()
    result = actions.report(folder, out, values)
    return time.perf_counter() - start, result["figures"]


def page_png(folder: Path, path: Path) -> None:
    """A page of the model report (the first page of plots on the demo's layout), as a small PNG."""
    config = load_config(folder)
    with open_store(config.database) as store:
        run = str(store.rows("app_latest_run")[0][0])
        doc, _ = build_report(store, config, "model_out_of_fold", run, run)
    write_page_png(doc, path, page=PLOTS_PAGE, dpi=60)


def measure(n_parcels: int, png: Path | None, fit: bool) -> dict[str, float | int]:
    row: dict[str, float | int] = {"parcels": n_parcels}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        start = time.perf_counter()
        write_project(folder, n_parcels=n_parcels)
        config = load_config(folder)
        row["sales"] = run_import(config).sales
        with open_store(config.database) as store:
            prepare_sales(store, config)
            if fit:
                fit_run(store, config, references=False)
        row["build_s"] = time.perf_counter() - start
        if fit:
            row["model_html_s"], row["figures"] = _timed(folder, folder / "model.html", "model")
            row["model_pdf_s"], _ = _timed(folder, folder / "model.pdf", "model")
        row["prior_html_first_s"], _ = _timed(folder, folder / "prior.html", "prior")
        row["prior_html_again_s"], row["prior_figures"] = _timed(folder, folder / "prior.html", "prior")
        row["prior_pdf_s"], _ = _timed(folder, folder / "prior.pdf", "prior")
        if png is not None and fit:
            page_png(folder, png)
        row["html_mb"] = (folder / "prior.html").stat().st_size / 1e6
        row["pdf_mb"] = (folder / "prior.pdf").stat().st_size / 1e6
    row["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return row


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--parcels", type=int, nargs="+", default=[100_000])
    parser.add_argument("--page-png", type=Path, default=None)
    parser.add_argument("--no-fit", action="store_true")
    args = parser.parse_args()
    rows = []
    for i, n in enumerate(args.parcels):
        rows.append(measure(n, args.page_png if i == 0 else None, not args.no_fit))
        print("  ".join(f"{k}={v:,.1f}" if isinstance(v, float) else f"{k}={v:,}" for k, v in rows[-1].items()),
              flush=True)
    out = RESULTS.with_name("report_no_fit.json") if args.no_fit else RESULTS
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps({"machine": {"platform": platform.platform(), "python": platform.python_version(),
                                               "cpus": os.cpu_count()}, "rows": rows}, indent=2))
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
