"""Speed of the model's numerics (timings kept out of the test suite): the shared-factorisation residualiser
against per-candidate refits, and 5-fold out-of-fold predictions on the Ames sales.

Run: python -m bench.model_speed   (prints a table, writes bench/results/model_speed.json)
"""
from __future__ import annotations

import json
import platform
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np
from threadpoolctl import threadpool_limits

from reval.model.design import DesignSpec
from reval.model.hierarchy import out_of_fold
from reval.model.penalised import PenalisedLS
from reval.model.settings import ModelSettings

RESULTS = Path(__file__).resolve().parent / "results" / "model_speed.json"


def residualise_speedup() -> dict[str, float]:
    """Best-of-three time of Z - HZ with one factorisation vs refitting the smoother per column (60 columns)."""
    rng = np.random.default_rng(8)
    n = 1500
    X = np.column_stack([rng.uniform(0, 1, n), rng.uniform(0, 1, n), rng.integers(0, 4, n)])
    feats = [SimpleNamespace(name="a", kind="continuous", log=False, levels=()),
             SimpleNamespace(name="b", kind="continuous", log=False, levels=()),
             SimpleNamespace(name="q", kind="ordinal", log=False, levels=("w", "x", "y", "z"))]
    spec = DesignSpec.learn(X, feats, n_basis=12)
    blocks = spec.blocks(X)
    y = np.sin(4 * X[:, 0]) + X[:, 1] ** 2 + 0.1 * X[:, 2] + rng.normal(0, 0.2, n)
    model = PenalisedLS().fit(blocks, y)
    Z = rng.normal(size=(n, 60)) + X[:, :1]
    with threadpool_limits(limits=1):   # one BLAS thread: time the algorithm, not the machine's scheduler
        shared = min(_seconds(lambda: model.residualise(Z)) for _ in range(3))
        refit = _seconds(lambda: [PenalisedLS(lambdas=model.lambdas_).fit(blocks, Z[:, j]).predict(blocks)
                                  for j in range(Z.shape[1])])
    return {"shared_seconds": shared, "refit_seconds": refit, "speedup": refit / shared}


def ames_out_of_fold() -> dict[str, float]:
    """CPU and wall seconds of 5-fold out-of-fold predictions on the Ames normal sales."""
    from data_samples.ames_data import ames_inputs

    X, y, segment, market_area, features = ames_inputs()
    settings = ModelSettings(folds=5)
    start, cpu = time.perf_counter(), time.process_time()
    out_of_fold(X, y, segment, market_area, features, settings)
    return {"wall_seconds": time.perf_counter() - start, "cpu_seconds": time.process_time() - cpu, "sales": len(y)}


def _seconds(work: object) -> float:
    start = time.perf_counter()
    work()  # type: ignore[operator]
    return time.perf_counter() - start


def main() -> None:
    r, a = residualise_speedup(), ames_out_of_fold()
    result = {"machine": f"{platform.processor() or platform.machine()}, {platform.system()}, "
                         f"Python {platform.python_version()}", "residualise": r, "ames_5_fold": a}
    print("| measurement | value |\n| --- | --- |")
    print(f"| residualise 60 candidates: shared factorisation | {r['shared_seconds'] * 1000:.1f} ms |")
    print(f"| residualise 60 candidates: one refit each | {r['refit_seconds'] * 1000:.1f} ms ({r['speedup']:.0f}x) |")
    print(f"| Ames {a['sales']} sales, 5-fold out-of-fold | {a['wall_seconds']:.1f} s wall, {a['cpu_seconds']:.1f} s CPU |")
    RESULTS.parent.mkdir(exist_ok=True)
    RESULTS.write_text(json.dumps(result, indent=2))


if __name__ == "__main__":
    main()
