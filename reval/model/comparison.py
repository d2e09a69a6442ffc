"""Every model a user compares against, scored the same way: the same folds, the same sales, no trimming.

Each model has a stored id and a display name (reval.model.names). Out-of-fold predictions come from
`cross_validated_predictions` (each fold predicted by a fresh model fitted on the other folds), and
`accuracy_table` scores every model on all the sales it is given with reval.stats.ratio_stats: no
outlier trimming, so every model's figures cover exactly the same sales (the ratio study that gates
approval trims by its own rule; its COD is not comparable with these).
"""
from __future__ import annotations

import time
from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd
from sklearn.inspection import permutation_importance as sklearn_permutation_importance

from reval.model.additive_reference import PlainGAM
from reval.model.design import Feature
from reval.model.references import GradientBoosting, HedonicOLS, RandomForest, ReferenceModel, segment_groups
from reval.stats import ratio_stats

ALL_SEGMENTS = "(all)"  # segment label of the overall rows of the accuracy table


def reference_factories(specs: Sequence[Feature], seed: int = 0) -> dict[str, Callable[[], ReferenceModel]]:
    """The reference models by id, as factories for `cross_validated_predictions`."""
    return {
        "hedonic_ols": lambda: HedonicOLS(specs),
        "hedonic_ols_quadratic": lambda: HedonicOLS(specs, quadratic=True),
        "plain_gam": lambda: PlainGAM(specs),
        "gradient_boosting": lambda: GradientBoosting(specs, seed=seed),
        "random_forest": lambda: RandomForest(specs, seed=seed),
    }


def cross_validated_predictions(model_factory: Callable[[], ReferenceModel], X: np.ndarray, y: np.ndarray,
                                segment: np.ndarray, folds: np.ndarray,
                                fold_targets: Mapping[int, np.ndarray] | None = None) -> np.ndarray:
    """Out-of-fold predicted log price for every row: each fold is predicted by a fresh model
    fitted on all the other folds (on `fold_targets[fold]` when given: the fold's own time adjustment,
    predictions returned against y as in reval.model.hierarchy.out_of_fold)."""
    folds = np.asarray(folds)
    if len(folds) != len(y):
        raise ValueError("folds must give one fold id per row")
    segment = np.asarray(segment)
    out = np.empty(len(y))
    for fold in np.unique(folds):
        held = folds == fold
        target = y if fold_targets is None else np.asarray(fold_targets[int(fold)], dtype=float)
        model = model_factory().fit(X[~held], target[~held], segment[~held])
        out[held] = model.predict(X[held], segment[held]) + (y - target)[held]
    return out


def compare_models(factories: Mapping[str, Callable[[], ReferenceModel]], X: np.ndarray, y: np.ndarray,
                   segment: np.ndarray, folds: np.ndarray, fold_targets: Mapping[int, np.ndarray] | None = None
                   ) -> tuple[dict[str, np.ndarray], dict[str, float]]:
    """Out-of-fold predictions of each model on the same folds, and the wall-clock seconds each took."""
    predictions, seconds = {}, {}
    for name, factory in factories.items():
        start = time.perf_counter()
        predictions[name] = cross_validated_predictions(factory, X, y, segment, folds, fold_targets)
        seconds[name] = time.perf_counter() - start
    return predictions, seconds


def permutation_importance(model: ReferenceModel, X: np.ndarray, y: np.ndarray, segment: np.ndarray,
                           seed: int, n_repeats: int = 5) -> pd.DataFrame:
    """Rise in RMSE of log price when one feature (or the segment) is shuffled, by
    sklearn.inspection.permutation_importance; most important first."""
    names = [s.name for s in model.specs]
    frame = pd.DataFrame(np.asarray(X, dtype=float), columns=names)
    frame["segment"] = np.asarray(segment).astype(str)

    def score(fitted: ReferenceModel, data: pd.DataFrame, target: np.ndarray) -> float:
        predicted = fitted.predict(data[names].to_numpy(dtype=float), data["segment"].to_numpy())
        return -float(np.sqrt(np.mean((target - predicted) ** 2)))

    result = sklearn_permutation_importance(model, frame, np.asarray(y, dtype=float), scoring=score,
                                            n_repeats=n_repeats, random_state=seed)
    table = pd.DataFrame({"feature": frame.columns, "importance_mean": result.importances_mean,
                          "importance_std": result.importances_std})
    return table.sort_values("importance_mean", ascending=False, ignore_index=True)


def _accuracy_row(y: np.ndarray, predicted: np.ndarray, n_boot: int, seed: int) -> dict[str, float]:
    study = ratio_stats.ratio_study(np.exp(predicted), np.exp(y), n_boot=n_boot, seed=seed)
    return {
        "n": study.n,
        "rmse_log": float(np.sqrt(np.mean((predicted - y) ** 2))),
        "median_ratio": study.median_ratio,
        "cod": study.cod,
        "cod_lo": study.cod_ci[0],
        "cod_hi": study.cod_ci[1],
        "prd": study.prd,
        "prb": study.prb,
    }


def accuracy_table(y: np.ndarray, predictions: Mapping[str, np.ndarray], segment: np.ndarray,
                   seconds: Mapping[str, float] | None = None, *, n_boot: int = 200,
                   seed: int = 0) -> pd.DataFrame:
    """Per model, one overall row ("(all)") and one row per segment: n, RMSE of log price and the
    ratio study (reval.stats.ratio_stats, untrimmed) of exp(prediction) / exp(y), with a seeded
    bootstrap CI for the COD; `cv_seconds` is the model's cross-validation time when given."""
    y = np.asarray(y, dtype=float)
    names, _, rows = segment_groups(segment)
    records = []
    for model, predicted in predictions.items():
        predicted = np.asarray(predicted, dtype=float)
        for name, idx in [(ALL_SEGMENTS, np.arange(len(y))), *zip(names, rows)]:
            records.append({"model": model, "segment": str(name),
                            **_accuracy_row(y[idx], predicted[idx], n_boot, seed),
                            "cv_seconds": (seconds or {}).get(model, np.nan)})
    return pd.DataFrame(records)
