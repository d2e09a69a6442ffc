"""Time to first paint of the segments overview on the demo, beyond Python's own start-up.

Three measures, each the median of several trials:
  in-process    from creating the app to the overview table filled with the segments (the app's own work:
                its data read in a worker, the table built and drawn headless), imports already done;
  fresh process from launching a new interpreter to the overview filled (imports + the app's own work),
                minus the time a bare interpreter takes from launch to running its first line: the target;
  fresh wall    the whole run of that interpreter including its exit, minus a bare `python -c pass`.
Prints a table and writes bench/results/app_startup.json. Target: < 1 s (fresh process).

Usage: python bench/app_startup.py [--folder DIR] [--parcels N] [--trials 5]
Without --folder the shipped demo is built (every step, a few minutes) in a temporary folder.
"""
from __future__ import annotations

import argparse
import asyncio
import json
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "app_startup.json"
SIZE = (100, 32)
CHILD = """
import asyncio, sys
from pathlib import Path
sys.path.insert(0, {root!r})
from bench.app_startup import first_paint
print(asyncio.run(first_paint(Path({folder!r})))[1])
"""
BARE = "import time; print(time.time())"


async def first_paint(folder: Path) -> tuple[float, float]:
    """Seconds from creating the app to its overview table holding every segment, drawn once; and the
    wall-clock time (epoch seconds) at that moment."""
    from textual.widgets import DataTable

    from tui.app import RevalApp

    start = time.perf_counter()
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        while True:
            await app.workers.wait_for_complete()
            await pilot.pause()
            tables = app.screen.query("#segments")
            if tables and tables.first(DataTable).row_count > 0:
                break
        elapsed, filled_at = time.perf_counter() - start, time.time()
        if app.messages:
            raise RuntimeError(f"the app reported: {app.messages[-1]}")
    return elapsed, filled_at


def launch(code: str) -> tuple[float, float]:
    """Run `python -c code`: seconds from launch to the wall-clock time it prints last, and to its exit."""
    start = time.time()
    done = subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT, capture_output=True, text=True)
    end = time.time()
    return float(done.stdout.split()[-1]) - start, end - start


def measure(folder: Path, trials: int) -> dict[str, object]:
    in_process = [asyncio.run(first_paint(folder))[0] for _ in range(trials)]
    bare_ready, bare_wall = zip(*(launch(BARE) for _ in range(trials)))
    filled, wall = zip(*(launch(CHILD.format(root=str(ROOT), folder=str(folder))) for _ in range(trials)))
    return {
        "in_process_s": {"median": statistics.median(in_process), "first": in_process[0], "all": in_process},
        "fresh_to_overview_beyond_python_s": {"median": statistics.median(filled) - statistics.median(bare_ready),
                                              "all": list(filled), "bare_python_median": statistics.median(bare_ready)},
        "fresh_process_beyond_python_s": {"median": statistics.median(wall) - statistics.median(bare_wall),
                                          "all": list(wall), "bare_python_median": statistics.median(bare_wall)},
    }


def demo_folder(parcels: int | None) -> Path:
    from reval.service.actions import build_demo

    folder = Path(tempfile.mkdtemp(prefix="reval-bench-")) / "demo"
    build_demo(folder, parcels)
    return folder


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--folder", type=Path, help="an already built project (default: build the demo)")
    parser.add_argument("--parcels", type=int, default=None, help="generate this many parcels (default: shipped)")
    parser.add_argument("--trials", type=int, default=5)
    args = parser.parse_args()
    sys.path.insert(0, str(ROOT))
    folder = args.folder.resolve() if args.folder else demo_folder(args.parcels)
    from reval.service.views import overview

    segments = len(overview(folder)["segments"])
    result = measure(folder, args.trials)
    print(f"App start-up on {folder} ({segments} segments), {args.trials} trials, terminal {SIZE[0]}x{SIZE[1]}")
    print(f"{'measure':<58}{'median s':>10}{'target':>8}")
    for key, label, target in (("in_process_s", "in-process: app created -> overview filled", ""),
                               ("fresh_to_overview_beyond_python_s",
                                "fresh process: launch -> overview filled, beyond python", "< 1"),
                               ("fresh_process_beyond_python_s", "fresh process wall incl. exit, beyond python", "")):
        print(f"{label:<58}{result[key]['median']:>10.3f}{target:>8}")  # type: ignore[index]
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"folder": str(folder), "segments": segments, "trials": args.trials,
                                   "terminal": list(SIZE), "python": platform.python_version(),
                                   "machine": platform.machine(), **result}, indent=2), encoding="utf-8")
    print(f"wrote {RESULTS.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
