"""Time to first paint of the segments overview on the demo, beyond Python's own start-up.

Two measures, each the median of several trials:
  in-process    from creating the app to the overview table filled with the segments (the app's own work:
                its data read in a worker, the table built and drawn headless), imports already done;
  fresh process wall time of a new interpreter that imports the app, paints the filled overview and exits,
                minus the wall time of a bare `python -c pass` (so: imports + the app's own work).
Prints a table and writes bench/results/app_startup.json. Target: < 1 s.

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
asyncio.run(first_paint(Path({folder!r})))
"""


async def first_paint(folder: Path) -> float:
    """Seconds from creating the app to its overview table holding every segment, drawn once."""
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
        elapsed = time.perf_counter() - start
        if app.messages:
            raise RuntimeError(f"the app reported: {app.messages[-1]}")
    return elapsed


def wall(args: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(args, check=True, cwd=ROOT, capture_output=True)
    return time.perf_counter() - start


def measure(folder: Path, trials: int) -> dict[str, object]:
    in_process = [asyncio.run(first_paint(folder)) for _ in range(trials)]
    bare = [wall([sys.executable, "-c", "pass"]) for _ in range(trials)]
    child = CHILD.format(root=str(ROOT), folder=str(folder))
    fresh = [wall([sys.executable, "-c", child]) for _ in range(trials)]
    return {
        "in_process_s": {"median": statistics.median(in_process), "first": in_process[0], "all": in_process},
        "fresh_process_beyond_python_s": {"median": statistics.median(fresh) - statistics.median(bare),
                                          "all": fresh, "bare_python_median": statistics.median(bare)},
    }


def demo_folder(parcels: int | None) -> Path:
    from reval.commands import build_demo

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
    from reval.app_service import overview

    segments = len(overview(folder)["segments"])
    result = measure(folder, args.trials)
    inproc, fresh = result["in_process_s"], result["fresh_process_beyond_python_s"]
    print(f"App start-up on {folder} ({segments} segments), {args.trials} trials, terminal {SIZE[0]}x{SIZE[1]}")
    print(f"{'measure':<44}{'median s':>10}{'target':>8}")
    print(f"{'in-process: app created -> overview filled':<44}{inproc['median']:>10.3f}{'< 1':>8}")  # type: ignore[index]
    print(f"{'fresh process beyond bare python':<44}{fresh['median']:>10.3f}{'':>8}")  # type: ignore[index]
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps({"folder": str(folder), "segments": segments, "trials": args.trials,
                                   "terminal": list(SIZE), "python": platform.python_version(),
                                   "machine": platform.machine(), **result}, indent=2), encoding="utf-8")
    print(f"wrote {RESULTS.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
