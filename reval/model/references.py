"""Reference models fitted on the same folds as the main model, to show what interpretability costs.

A log-linear hedonic regression per segment (OLS), the same with squares and pairwise products of
the numeric terms, gradient boosting and a random forest over the whole jurisdiction with the
segment as one more feature (the plain additive model with pygam is in additive_reference.py; the
comparison itself in comparison.py). All share one estimator shape, `ReferenceModel`. Segment
intercepts are fitted by within-segment demeaning (Frisch-Waugh-Lovell theorem), so a pooled fit
never builds an n x segments dummy matrix.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Protocol, Sequence

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import sparse
from statsmodels.tools.sm_exceptions import SingularMatrixWarning
from sklearn.ensemble import HistGradientBoostingRegressor, RandomForestRegressor

from reval.model.design import PRODUCT_CAP, Feature

EXTRA_SALES = 10        # a segment gets its own OLS only if n_sales >= n_parameters + EXTRA_SALES
MAX_CATEGORIES = 255    # HistGradientBoosting's limit on a categorical feature's levels (max_bins)


class ReferenceModel(Protocol):
    """Estimator shape shared by the reference models (and accepted by the cross-validation)."""

    specs: Sequence[Feature]

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "ReferenceModel": ...

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray: ...


# ---------------------------------------------------------------- hedonic design


@dataclass(frozen=True, eq=False)  # eq=False: ndarray fields make field-wise == ambiguous
class Design:
    """How raw features become regression columns; learned from training rows only."""

    specs: tuple[Feature, ...]
    fill: np.ndarray        # per feature: training median (continuous, ordinal) or mode (categorical, binary)
    log_floor: np.ndarray   # per feature: smallest positive training value (log features), else NaN
    centre: np.ndarray      # per numeric term: training mean (quadratic designs)
    scale: np.ndarray       # per numeric term: training standard deviation, 1 where constant
    quadratic: bool


def _is_numeric(spec: Feature) -> bool:
    return spec.kind in ("continuous", "ordinal")


def fill_values(X: np.ndarray, specs: Sequence[Feature]) -> np.ndarray:
    """Training medians for continuous and ordinal features, modes for categorical and binary ones."""
    fill = np.empty(len(specs))
    for j, spec in enumerate(specs):
        seen = X[~np.isnan(X[:, j]), j]
        if seen.size == 0:
            raise ValueError(f"feature '{spec.name}' has no values in the training sales")
        if _is_numeric(spec):
            fill[j] = np.median(seen)
        else:
            levels, counts = np.unique(seen, return_counts=True)
            fill[j] = levels[np.argmax(counts)]
    return fill


def transformed(X: np.ndarray, fill: np.ndarray, log_floor: np.ndarray, specs: Sequence[Feature]) -> np.ndarray:
    """Imputed features, log-transformed where the spec says so (clamped at the training floor)."""
    Z = np.where(np.isnan(X), fill, X)
    logged = np.array([s.log for s in specs], dtype=bool)
    Z[:, logged] = np.log(np.maximum(Z[:, logged], log_floor[logged]))
    return Z


def learn_design(X: np.ndarray, specs: Sequence[Feature], quadratic: bool) -> Design:
    """Learn imputation values, log floors and standardisation from training rows."""
    for j, spec in enumerate(specs):
        if spec.kind == "categorical":
            codes = X[~np.isnan(X[:, j]), j]
            if len(spec.levels) < 2 or np.any((codes < 0) | (codes >= len(spec.levels)) | (codes % 1 != 0)):
                raise ValueError(f"categorical '{spec.name}' needs levels and integer codes 0..{len(spec.levels) - 1}")
    fill = fill_values(X, specs)
    log_floor = np.full(len(specs), np.nan)
    for j, spec in enumerate(specs):
        if spec.log:
            positive = X[X[:, j] > 0, j]
            if positive.size == 0:
                raise ValueError(f"log feature '{spec.name}' has no positive training values")
            log_floor[j] = positive.min()
    numeric = [j for j, s in enumerate(specs) if _is_numeric(s)]
    terms = transformed(X, fill, log_floor, specs)[:, numeric]
    scale = terms.std(axis=0)
    return Design(tuple(specs), fill, log_floor, terms.mean(axis=0), np.where(scale > 0, scale, 1.0), quadratic)


def design_names(design: Design) -> list[str]:
    """Column names of `design_matrix`, in order."""
    names: list[str] = []
    numeric: list[str] = []
    for spec in design.specs:
        if spec.kind == "categorical":
            names += [f"{spec.name}={level}" for level in spec.levels[1:]]
        else:
            names.append(f"log({spec.name})" if spec.log else spec.name)
            numeric += names[-1:] if _is_numeric(spec) else []
    if design.quadratic:
        pairs = np.triu_indices(len(numeric))
        names += [f"{numeric[a]}^2" if a == b else f"{numeric[a]}*{numeric[b]}" for a, b in zip(*pairs)]
    return names


def design_matrix(X: np.ndarray, design: Design) -> np.ndarray:
    """Regression columns (no intercept): linear terms, categorical dummies (first level dropped)
    and, for quadratic designs, squares and pairwise products of standardised capped numeric terms."""
    Z = transformed(X, design.fill, design.log_floor, design.specs)
    blocks = []
    for j, spec in enumerate(design.specs):
        if spec.kind == "categorical":
            blocks.append((Z[:, j, None] == np.arange(1, len(spec.levels))).astype(float))
        else:
            blocks.append(Z[:, j, None])
    if design.quadratic:
        numeric = [j for j, s in enumerate(design.specs) if _is_numeric(s)]
        S = np.clip((Z[:, numeric] - design.centre) / design.scale, -PRODUCT_CAP, PRODUCT_CAP)
        a, b = np.triu_indices(len(numeric))
        blocks.append(S[:, a] * S[:, b])
    return np.hstack(blocks) if blocks else np.empty((len(X), 0))


# ---------------------------------------------------------------- OLS with group intercepts


@dataclass(frozen=True, eq=False)
class GroupOLS:
    """Slopes shared by all groups and one intercept per group; `columns` are the design columns used."""

    columns: np.ndarray
    slopes: np.ndarray
    intercepts: np.ndarray
    counts: np.ndarray

    @property
    def n_parameters(self) -> int:
        return len(self.columns) + len(self.intercepts)


def _group_means(values: np.ndarray, group: np.ndarray, n_groups: int) -> np.ndarray:
    """Per-group means of the rows of `values` (n x q), via a sparse group-by-row indicator."""
    n = len(group)
    indicator = sparse.csr_matrix((np.ones(n), (group, np.arange(n))), shape=(n_groups, n))
    counts = np.asarray(indicator.sum(axis=1)).ravel()
    return (indicator @ values) / counts[:, None]


def varying_columns(M: np.ndarray, group: np.ndarray, n_groups: int) -> np.ndarray:
    """Columns of M that vary within at least one group (others are absorbed by the intercepts)."""
    within = M - _group_means(M, group, n_groups)[group]
    size = np.abs(M).max(axis=0, initial=0.0) + 1.0
    return np.flatnonzero(np.abs(within).max(axis=0, initial=0.0) > 1e-9 * size)


def fit_group_ols(M: np.ndarray, y: np.ndarray, group: np.ndarray, n_groups: int) -> GroupOLS:
    """OLS of y on M with one intercept per group, by demeaning within groups (Frisch-Waugh-Lovell).

    The slopes equal those of OLS on [M, group dummies]; each intercept is the group's mean
    residual. Columns constant within every group are dropped first.
    """
    columns = varying_columns(M, group, n_groups)
    design = np.column_stack([M[:, columns], y])
    means = _group_means(design, group, n_groups)
    within = design - means[group]
    with warnings.catch_warnings():
        # A rank-deficient design (e.g. a feature constant in one class) is expected here: statsmodels'
        # pseudo-inverse gives the minimum-norm slopes, which predict the same fitted values.
        warnings.simplefilter("ignore", SingularMatrixWarning)
        slopes = sm.OLS(within[:, -1], within[:, :-1]).fit().params if len(columns) else np.empty(0)
    intercepts = means[:, -1] - means[:, :-1] @ slopes
    return GroupOLS(columns, np.asarray(slopes), intercepts, np.bincount(group, minlength=n_groups))


def segment_groups(segment: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[np.ndarray]]:
    """Distinct segments, each row's segment index, and the row indices of each segment."""
    names, inverse = np.unique(np.asarray(segment).astype(str), return_inverse=True)
    order = np.argsort(inverse, kind="stable")
    bounds = np.searchsorted(inverse[order], np.arange(len(names) + 1))
    return names, inverse, [order[bounds[i]:bounds[i + 1]] for i in range(len(names))]


def check_inputs(X: np.ndarray, segment: np.ndarray, n_features: int, y: np.ndarray | None = None) -> None:
    if X.ndim != 2 or X.shape[1] != n_features:
        raise ValueError(f"X must have {n_features} feature columns, got shape {X.shape}")
    if len(segment) != len(X) or (y is not None and len(y) != len(X)):
        raise ValueError("X, y and segment must have the same number of rows")
    if y is not None and not np.all(np.isfinite(y)):
        raise ValueError("y (log time-adjusted price) must be finite")


MAX_CONDITION = 1e6  # common practice: beyond this, OLS slopes of a segment are too unstable to trust


def _well_conditioned(D: np.ndarray) -> bool:
    """Whether the standardised segment design is far enough from collinear for its own OLS."""
    if D.shape[1] == 0:
        return True
    centred = D - D.mean(axis=0)
    scale = centred.std(axis=0)
    return bool(np.all(scale > 0) and np.linalg.cond(centred / scale) < MAX_CONDITION)


class HedonicOLS:
    """Log-linear hedonic regression per segment (OLS); thin segments share one pooled OLS.

    A segment gets its own fit when n_sales >= n_parameters + 10 and its design is not near-collinear
    (condition number below MAX_CONDITION); otherwise (and for segments
    unseen in training) values come from one jurisdiction-wide OLS with segment intercepts.
    `quadratic=True` adds squares and pairwise products of the numeric terms.
    """

    def __init__(self, specs: Sequence[Feature], *, quadratic: bool = False) -> None:
        self.specs = specs
        self.quadratic = quadratic

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "HedonicOLS":
        X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
        check_inputs(X, segment, len(self.specs), y)
        self.design_ = learn_design(X, self.specs, self.quadratic)
        self.columns_ = design_names(self.design_)
        M = design_matrix(X, self.design_)
        names, inverse, rows = segment_groups(segment)
        self.pooled_ = fit_group_ols(M, y, inverse, len(names))
        self.pooled_range_ = (M.min(axis=0), M.max(axis=0))
        self.segment_fits_: dict[str, GroupOLS] = {}
        self.segment_ranges_: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        info = []
        for name, idx in zip(names, rows):
            fit = fit_group_ols(M[idx], y[idx], np.zeros(len(idx), dtype=int), 1)
            own = len(idx) >= fit.n_parameters + EXTRA_SALES and _well_conditioned(M[idx][:, fit.columns])
            if own:
                self.segment_fits_[name] = fit
                self.segment_ranges_[name] = (M[idx].min(axis=0), M[idx].max(axis=0))
            info.append((name, len(idx), fit.n_parameters, "own" if own else "pooled"))
        self.segment_names_ = names
        self.fit_info_ = pd.DataFrame(info, columns=["segment", "n_sales", "n_parameters", "fit"])
        self.pooled_segments_ = tuple(self.fit_info_.loc[self.fit_info_["fit"] == "pooled", "segment"])
        return self

    def coefficients(self, segment: str) -> pd.Series:
        """Intercept and slopes used for `segment` (its own fit, or the pooled one with its intercept)."""
        fit, intercept = self._fit_for(segment)
        names = ["intercept"] + [self.columns_[c] for c in fit.columns]
        return pd.Series(np.r_[intercept, fit.slopes], index=names, name=segment)

    def _fit_for(self, segment: str) -> tuple[GroupOLS, float]:
        """The fit and intercept for a segment: its own, its pooled intercept, or (unseen) the
        sales-weighted mean of the pooled intercepts."""
        if segment in self.segment_fits_:
            fit = self.segment_fits_[segment]
            return fit, float(fit.intercepts[0])
        pooled = self.pooled_
        known = np.flatnonzero(self.segment_names_ == segment)
        if known.size:
            return pooled, float(pooled.intercepts[known[0]])
        return pooled, float(pooled.intercepts @ pooled.counts / pooled.counts.sum())

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        """Predicted log price, each design column clamped to its fit's training range; a segment
        unseen in training gets the sales-weighted mean intercept."""
        if not hasattr(self, "pooled_"):
            raise RuntimeError("HedonicOLS is not fitted; call fit first")
        X = np.asarray(X, dtype=float)
        check_inputs(X, segment, len(self.specs))
        out = np.empty(len(X))
        names, _, rows = segment_groups(segment)
        for name, idx in zip(names, rows):
            fit, intercept = self._fit_for(name)
            # Clamp each column to the range its fit was trained on: a polynomial extrapolates wildly
            # (seen on Ames: one quadratic per-segment prediction 900 log units off).
            lo, hi = self.segment_ranges_.get(name, self.pooled_range_)
            design = np.clip(design_matrix(X[idx], self.design_), lo, hi)
            out[idx] = intercept + design[:, fit.columns] @ fit.slopes
        return out


# ---------------------------------------------------------------- gradient boosting


def ranks_by_mean(labels: np.ndarray, y: np.ndarray) -> dict[str, int]:
    """Rank of each distinct label (a segment, a level code) by its training mean log price, so the
    rank is meaningful as a number."""
    names, inverse = np.unique(np.asarray(labels).astype(str), return_inverse=True)
    means = np.bincount(inverse, weights=y) / np.bincount(inverse)
    return {str(names[i]): rank for rank, i in enumerate(np.argsort(means, kind="stable"))}


class GradientBoosting:
    """HistGradientBoosting on the whole jurisdiction, segment as one more (categorical) feature.

    Fixed hyper-parameters and no early stopping, so a seed fixes the result. Segments unseen
    in training are passed as missing. With more than 255 segments the segment code (ordered
    by mean log price) is used as a numeric feature instead; `segment_as_categorical_` says which.
    """

    def __init__(self, specs: Sequence[Feature], *, seed: int = 0, learning_rate: float = 0.1,
                 max_iter: int = 200, max_leaf_nodes: int = 31, min_samples_leaf: int = 20,
                 l2_regularization: float = 1.0) -> None:
        self.specs = specs
        self.seed = seed
        self.learning_rate = learning_rate
        self.max_iter = max_iter
        self.max_leaf_nodes = max_leaf_nodes
        self.min_samples_leaf = min_samples_leaf
        self.l2_regularization = l2_regularization

    def _matrix(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        codes = pd.Series(np.asarray(segment).astype(str)).map(self.segment_codes_).to_numpy(dtype=float)
        return np.column_stack([X, codes])

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "GradientBoosting":
        X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
        check_inputs(X, segment, len(self.specs), y)
        self.segment_codes_ = ranks_by_mean(segment, y)
        self.segment_as_categorical_ = len(self.segment_codes_) <= MAX_CATEGORIES
        categorical = [s.kind == "categorical" for s in self.specs] + [self.segment_as_categorical_]
        self.estimator_ = HistGradientBoostingRegressor(
            learning_rate=self.learning_rate, max_iter=self.max_iter, max_leaf_nodes=self.max_leaf_nodes,
            min_samples_leaf=self.min_samples_leaf, l2_regularization=self.l2_regularization,
            categorical_features=np.array(categorical), early_stopping=False, random_state=self.seed,
        ).fit(self._matrix(X, segment), y)
        return self

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        """Predicted log price."""
        if not hasattr(self, "estimator_"):
            raise RuntimeError("GradientBoosting is not fitted; call fit first")
        X = np.asarray(X, dtype=float)
        check_inputs(X, segment, len(self.specs))
        return self.estimator_.predict(self._matrix(X, segment))


# ---------------------------------------------------------------- random forest


def _level_ranks(codes: np.ndarray, y: np.ndarray, n_levels: int) -> np.ndarray:
    """Per level code 0..n_levels-1: its rank by training mean log price, NaN for a level not seen."""
    known = ~np.isnan(codes)
    order = ranks_by_mean(codes[known].astype(int), y[known])
    rank = np.full(n_levels, np.nan)
    rank[np.array(list(order), dtype=int)] = list(order.values())
    return rank


class RandomForest:
    """scikit-learn RandomForestRegressor on the whole jurisdiction, the segment as one more feature.

    Breiman's forest (Machine Learning 45, 2001): fully grown trees (scikit-learn's default leaf of
    one sale) and a third of the features tried at each split (Breiman's and R randomForest's choice
    for regression); scikit-learn's default 100 trees. Seeded, one thread. The segment and each
    categorical feature enter as one code ordered by training mean log price: for a regression tree,
    ordering the levels by mean response and splitting them as if ordered finds the best split into
    two groups of levels (Breiman, Friedman, Olshen & Stone 1984, Classification and Regression
    Trees; from memory); one global order only approximates that in each node. Missing values go to
    the trees as missing (scikit-learn >= 1.4 forests route them), and so does a segment or level
    unseen in training.
    """

    def __init__(self, specs: Sequence[Feature], *, seed: int = 0, n_estimators: int = 100,
                 min_samples_leaf: int = 1, max_features: float = 1 / 3) -> None:
        self.specs = specs
        self.seed = seed
        self.n_estimators = n_estimators
        self.min_samples_leaf = min_samples_leaf
        self.max_features = max_features

    def _matrix(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        codes = pd.Series(np.asarray(segment).astype(str)).map(self.segment_codes_).to_numpy(dtype=float)
        M = np.column_stack([X, codes])
        for j, rank in self.level_ranks_.items():
            known = ~np.isnan(X[:, j])
            M[:, j] = np.nan
            M[known, j] = rank[X[known, j].astype(int)]
        return M

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "RandomForest":
        X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
        check_inputs(X, segment, len(self.specs), y)
        self.segment_codes_ = ranks_by_mean(segment, y)
        self.level_ranks_ = {j: _level_ranks(X[:, j], y, len(spec.levels))
                             for j, spec in enumerate(self.specs) if spec.kind == "categorical"}
        self.estimator_ = RandomForestRegressor(
            n_estimators=self.n_estimators, min_samples_leaf=self.min_samples_leaf,
            max_features=self.max_features, random_state=self.seed, n_jobs=1,
        ).fit(self._matrix(X, segment), y)
        return self

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        """Predicted log price."""
        if not hasattr(self, "estimator_"):
            raise RuntimeError("RandomForest is not fitted; call fit first")
        X = np.asarray(X, dtype=float)
        check_inputs(X, segment, len(self.specs))
        return self.estimator_.predict(self._matrix(X, segment))
