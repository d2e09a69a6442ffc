"""Turn a feature matrix into penalised model blocks, with every transformation learned on training rows only.

A `DesignSpec` records what it learned (imputation values, log floors, ranges, standardisation,
identifiability constraints) so that parcels being valued are treated exactly like the sales the
model saw: the same imputation, the same clamping to the training range, the same centring.

Identifiability: every curve and level effect is constrained to average zero over the training
rows (the sum-to-zero constraint of Wood 2017, section 5.4.1). The constraint vector c (column
means of the basis) is absorbed by reparametrising with an orthonormal basis Z of its null space
(QR of c), so a block's columns are B Z and its penalty Z' S Z. The intercept is then the average
fitted log value and each term says how a parcel differs from the average one.

A deviation design (market area or segment on top of a parent offset) is penalised toward zero
in every direction: its intercept, binary and interaction columns get a ridge, and each curve gets
a second penalty on the null space of its wiggliness penalty (the straight line), the double
penalty of Marra & Wood (2011, Computational Statistics & Data Analysis 55(7)).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cached_property
from typing import Protocol, Sequence

import numpy as np

from reval.model.splines import bspline_basis, cubic_pieces, difference_matrix
from reval.states import FEATURE_SHAPES

INTERCEPT = "(intercept)"
PRODUCT_CAP = 2.5  # standardised values are capped at +/- this before forming products (docs/model.md, section 1, point 4)
Pair = tuple[str, str]


class Feature(Protocol):
    """What the models need to know about a feature (read-only; reval.data.config.FeatureSpec fits)."""

    @property
    def name(self) -> str: ...

    @property
    def kind(self) -> str: ...

    @property
    def log(self) -> bool: ...

    @property
    def levels(self) -> tuple[str, ...]: ...


def shape_of(feature: Feature) -> str:
    """A feature's shape rule: its `shape` attribute when it has one (reval.config.FeatureSpec does), else free."""
    shape = str(getattr(feature, "shape", "free"))
    if shape not in FEATURE_SHAPES:
        raise ValueError(f"feature {feature.name!r}: shape must be one of {', '.join(FEATURE_SHAPES)}, got {shape!r}")
    if shape != "free" and feature.kind not in ("continuous", "ordinal"):
        raise ValueError(f"feature {feature.name!r}: only continuous and ordinal features take a shape rule")
    return shape


@dataclass(frozen=True)
class Block:
    """One model term: its columns and the penalty matrices that act on its coefficients (none = unpenalised), with
    a square root R of each (R R' = the matrix) when the design knows one, which spares the fit a decomposition."""

    term: str
    columns: np.ndarray
    penalties: tuple[np.ndarray, ...]
    roots: tuple[np.ndarray, ...] = ()


@dataclass(frozen=True)
class FeatureTransform:
    """Everything learned about one feature from the training rows."""

    name: str
    kind: str
    log: bool
    n_levels: int
    impute: float
    log_floor: float
    raw_lo: float
    raw_hi: float
    lo: float
    hi: float
    mean: float
    sd: float
    constraint: np.ndarray  # orthonormal null-space basis Z of the sum-to-zero constraint (m x m-1)
    shape: str = "free"  # "increasing", "decreasing" or "free" (reval.model.shape)

    @property
    def constant(self) -> bool:
        return self.constraint.shape[1] == 0


def sum_to_zero_basis(column_means: np.ndarray) -> np.ndarray:
    """Orthonormal basis of {b : c'b = 0}, from the QR decomposition of c (Wood 2017, section 1.8.1): for one
    column the Q factor is the Householder reflection H = I - 2 v v' / v'v, v = c + sign(c_1) ||c|| e_1, whose
    first column is parallel to c, so its other columns are the basis (built directly, without LAPACK's QR)."""
    c = np.asarray(column_means, dtype=float)
    if not np.any(c):
        return np.zeros((c.shape[0], 0))
    v = c.copy()
    v[0] += np.copysign(np.linalg.norm(c), c[0])
    return np.eye(len(c))[:, 1:] - np.outer(v, v[1:]) * (2.0 / (v @ v))


def _codes(values: np.ndarray, n_levels: int) -> np.ndarray:
    """Level numbers 0..n_levels-1 of a level feature's values (rounded, clamped)."""
    return np.clip(np.rint(values), 0, n_levels - 1).astype(np.intp)


def _indicators(values: np.ndarray, n_levels: int) -> np.ndarray:
    out = np.zeros((values.shape[0], n_levels))
    out[np.arange(values.shape[0]), _codes(values, n_levels)] = 1.0
    return out


def _null_space(penalty: np.ndarray) -> np.ndarray:
    """Orthonormal basis N of the null space of a penalty; N N' is the projector the double penalty uses."""
    vals, vecs = np.linalg.eigh(penalty)
    return vecs[:, vals < 1e-9 * max(vals.max(), 1.0)]


@dataclass(frozen=True)
class DesignSpec:
    """Learned transformations for a list of features, able to build blocks for any rows."""

    transforms: tuple[FeatureTransform, ...]
    n_basis: int
    deviation: bool

    @classmethod
    def learn(
        cls,
        X: np.ndarray,
        features: Sequence[Feature],
        n_basis: int,
        *,
        deviation: bool = False,
        scale_from: DesignSpec | None = None,
    ) -> DesignSpec:
        """Learn imputation, transforms, ranges, standardisation and constraints from training rows X.

        Missing values are imputed with `typical_value` of the training rows. A log feature uses
        log(max(x, f)) where f is the smallest positive training value, so zeros (e.g. no lot for a
        condominium) map to the bottom of the observed range instead of minus infinity. `scale_from` (the parent's spec)
        supplies the log floor and the standardisation, so a deviation's products and curves are on
        the parent's scale and interaction coefficients add up along the hierarchy.
        """
        X = np.asarray(X, dtype=float)
        if X.ndim != 2 or X.shape[1] != len(features):
            raise ValueError(f"X must have one column per feature ({len(features)}), got shape {X.shape}")
        if X.shape[0] == 0:
            raise ValueError("cannot learn a design from zero rows")
        like = scale_from.transforms if scale_from is not None else None
        kinds = [f.kind for f in features]
        # Fortran order keeps every column contiguous, so each per-column reduction below (median, min, max, mean,
        # sd) equals the one on that column alone, bit for bit, at one call for all features
        filled = np.array(X, order="F")
        missing = np.isnan(filled)
        impute = _typical_values(filled, missing, kinds)
        np.copyto(filled, impute, where=missing)
        logs = np.array([bool(f.log) and f.kind == "continuous" for f in features], dtype=bool)
        if like is not None:
            floors = np.array([t.log_floor for t in like])
        else:
            smallest = np.where(filled > 0, filled, np.inf).min(axis=0)
            floors = np.where(np.isfinite(smallest), smallest, 1.0)
        T = filled.copy(order="F")
        T[:, logs] = np.log(np.maximum(filled[:, logs], floors[logs]))
        sds, means = T.std(axis=0), T.mean(axis=0)
        raw_lo, raw_hi, lo, hi = filled.min(axis=0), filled.max(axis=0), T.min(axis=0), T.max(axis=0)
        learned: list[FeatureTransform] = []
        varying: list[int] = []  # the features that vary over the rows, which get a sum-to-zero constraint
        for j, f in enumerate(features):
            if f.kind not in ("continuous", "ordinal", "categorical", "binary"):
                raise ValueError(f"feature {f.name!r}: unknown kind {f.kind!r}")
            n_levels = len(f.levels) if f.kind in ("ordinal", "categorical") else (2 if f.kind == "binary" else 0)
            sd = float(sds[j])
            mean, scale = (like[j].mean, like[j].sd) if like is not None else (float(means[j]), sd if sd > 0 else 1.0)
            t = FeatureTransform(
                f.name, f.kind, bool(logs[j]), n_levels, float(impute[j]), float(floors[j]), float(raw_lo[j]),
                float(raw_hi[j]), float(lo[j]), float(hi[j]), mean, scale, np.zeros((0, 0)), shape_of(f),
            )
            if sd == 0:
                width = n_basis if f.kind == "continuous" else max(n_levels, 1)
                t = replace(t, constraint=np.zeros((width, 0)))
            elif f.kind in ("ordinal", "categorical") and n_levels < 2:
                raise ValueError(f"feature {f.name!r}: a {f.kind} feature needs its levels listed")
            else:
                varying.append(j)
            learned.append(t)
        column_means = _column_means([learned[j] for j in varying], T[:, varying], n_basis)
        for j, c in zip(varying, column_means):
            learned[j] = replace(learned[j], constraint=sum_to_zero_basis(c))
        return cls(tuple(learned), n_basis, deviation)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(t.name for t in self.transforms)

    @cached_property
    def _positions(self) -> dict[str, int]:
        return {t.name: j for j, t in enumerate(self.transforms)}

    def index(self, feature: str) -> int:
        try:
            return self._positions[feature]
        except KeyError:
            raise ValueError(f"unknown feature {feature!r}") from None

    @cached_property
    def _scaling(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Imputation values, which features are logged, and their log floors, one entry per feature."""
        return (np.array([t.impute for t in self.transforms]), np.array([t.log for t in self.transforms], dtype=bool),
                np.array([t.log_floor for t in self.transforms]))

    def impute(self, X: np.ndarray) -> np.ndarray:
        """Copy of X with missing values replaced by the training imputation values."""
        X = np.array(X, dtype=float, copy=True)
        np.copyto(X, self._scaling[0], where=np.isnan(X))
        return X

    def transformed(self, X: np.ndarray) -> np.ndarray:
        """Imputed features on the modelling scale (log where requested, with the log floor)."""
        T = self.impute(X)
        _, logs, floors = self._scaling
        T[:, logs] = np.log(np.maximum(T[:, logs], floors[logs]))
        return T

    def term_columns(self, feature: str, x: np.ndarray) -> np.ndarray:
        """Columns of one feature's block for raw values x (imputed and clamped like training rows)."""
        j = self.index(feature)
        t = self.transforms[j]
        x = np.asarray(x, dtype=float).copy()
        x[np.isnan(x)] = t.impute
        if t.log:
            x = np.log(np.maximum(x, t.log_floor))
        return _raw_columns([t], x[:, None], self.n_basis)[0] @ t.constraint

    def feature_columns(self, X: np.ndarray, names: Sequence[str]) -> dict[str, np.ndarray]:
        """The block columns of some non-constant features for raw rows X (one basis evaluation for all)."""
        used = [self.index(name) for name in names]
        T = self.transformed(X)[:, used]
        raw = _raw_columns([self.transforms[j] for j in used], T, self.n_basis)
        return {self.transforms[j].name: cols @ self.transforms[j].constraint for j, cols in zip(used, raw)}

    def blocks(self, X: np.ndarray, pairs: Sequence[Pair] = ()) -> list[Block]:
        """The intercept, one block per non-constant feature, then one product column per pair."""
        T = self.transformed(X)
        n = T.shape[0]
        ridge = (np.eye(1),) if self.deviation else ()
        out = [Block(INTERCEPT, np.ones((n, 1)), ridge, ridge)]
        used = [j for j, t in enumerate(self.transforms) if not t.constant]
        raw = _raw_columns([self.transforms[j] for j in used], T[:, used], self.n_basis)
        for j, cols in zip(used, raw):
            t = self.transforms[j]
            penalties = self._penalties[j]
            out.append(Block(t.name, cols @ t.constraint, tuple(m for m, _ in penalties), tuple(r for _, r in penalties)))
        if len(pairs):
            prods = self.products(X, pairs)
            for i, (a, b) in enumerate(pairs):
                out.append(Block(f"{a}:{b}", prods[:, i : i + 1], ridge, ridge))
        return out

    @cached_property
    def _penalties(self) -> tuple[tuple[tuple[np.ndarray, np.ndarray], ...], ...]:
        """(matrix, root) of every penalty of every feature's block, built once per spec (blocks are built per fit
        and per prediction)."""
        return tuple(() if t.constant else self._feature_penalties(t) for t in self.transforms)

    def _feature_penalties(self, t: FeatureTransform) -> tuple[tuple[np.ndarray, np.ndarray], ...]:
        z = t.constraint
        if t.kind == "continuous":
            root = z.T @ difference_matrix(self.n_basis, 2).T  # Z'D', so root root' = Z'D'DZ
            wiggle = root @ root.T
            if not self.deviation:
                return ((wiggle, root),)
            null = _null_space(wiggle)
            return ((wiggle, root), (null @ null.T, null))
        if t.kind == "ordinal":
            root = z.T @ difference_matrix(t.n_levels, 1).T
            return ((root @ root.T, root),)
        if t.kind == "categorical":
            return ((z.T @ z, z.T),)
        return ((np.eye(1), np.eye(1)),) if self.deviation else ()

    def standardised(self, X: np.ndarray) -> np.ndarray:
        """Features standardised with the training mean and sd on the modelling scale, capped at +/-2.5."""
        T = self.transformed(X)
        mean = np.array([t.mean for t in self.transforms])
        sd = np.array([t.sd for t in self.transforms])
        return np.clip((T - mean) / sd, -PRODUCT_CAP, PRODUCT_CAP)

    def products(self, X: np.ndarray, pairs: Sequence[Pair]) -> np.ndarray:
        """(n, len(pairs)) products of capped standardised features; categorical features are refused."""
        Z = self.standardised(X)
        out = np.empty((Z.shape[0], len(pairs)))
        for i, (a, b) in enumerate(pairs):
            for name in (a, b):
                if self.transforms[self.index(name)].kind == "categorical":
                    raise ValueError(f"interaction {a}:{b}: categorical feature {name!r} has no product term")
            out[:, i] = Z[:, self.index(a)] * Z[:, self.index(b)]
        return out

    def shape_grids(self, n_points: int) -> tuple[np.ndarray, list[tuple[str, str, int]]]:
        """Raw rows where the shape rules are checked, one column per feature, and the shaped features as (name,
        shape, points used). A shaped curve's column runs evenly over its training range on the modelling scale
        (log features on the log scale), an ordinal feature's over its levels (the first n_levels rows); other
        columns hold the imputation value."""
        grid = np.tile(np.array([t.impute for t in self.transforms]), (n_points, 1))
        shaped = []
        for j, t in enumerate(self.transforms):
            if t.shape == "free" or t.constant:
                continue
            if t.kind == "continuous":
                points = np.linspace(t.lo, t.hi, n_points)
                grid[:, j], used = (np.exp(points) if t.log else points), n_points
            else:
                grid[:, j], used = np.minimum(np.arange(n_points), t.n_levels - 1), min(t.n_levels, n_points)
            shaped.append((t.name, t.shape, used))
        return grid, shaped

    def grid(self, feature: str, n_points: int = 50) -> np.ndarray:
        """Raw values spanning the training range of a feature, for drawing its curve."""
        t = self.transforms[self.index(feature)]
        if t.kind == "continuous":
            return np.linspace(t.raw_lo, t.raw_hi, n_points)
        return np.arange(t.n_levels, dtype=float)


def typical_value(x: np.ndarray, kind: str) -> float:
    """The value a typical parcel has: median (continuous), lower median (ordinal, so it is a level),
    or most frequent value (categorical, binary); missing values are ignored (0 if all are missing)."""
    seen = x[~np.isnan(x)]
    if seen.size == 0:
        return 0.0
    if kind == "continuous":
        return float(np.median(seen))
    if kind == "ordinal":
        return float(np.quantile(seen, 0.5, method="lower"))
    vals, counts = np.unique(seen, return_counts=True)
    return float(vals[np.argmax(counts)])


def _typical_values(X: np.ndarray, missing: np.ndarray, kinds: Sequence[str]) -> np.ndarray:
    """`typical_value` of every column of X; the complete continuous and the complete ordinal columns each in one
    call (a median along an axis is the median of each column alone)."""
    out = np.empty(X.shape[1])
    complete = np.logical_not(missing.any(axis=0)).tolist()
    batched = {"continuous": lambda A: np.median(A, axis=0),
               "ordinal": lambda A: np.quantile(A, 0.5, axis=0, method="lower")}
    for kind, typical in batched.items():
        cols = [j for j, k in enumerate(kinds) if k == kind and complete[j]]
        if cols:
            out[cols] = typical(X[:, cols])
    for j, kind in enumerate(kinds):
        if kind not in batched or not complete[j]:
            out[j] = typical_value(X[:, j], kind)
    return out


def _column_means(ts: Sequence[FeatureTransform], T: np.ndarray, n_basis: int) -> list[np.ndarray]:
    """Means over the rows of each feature's unconstrained columns (those of `_raw_columns`) without building them:
    a B-spline column's sum accumulates its row's non-zero values in row order (np.bincount), as the sum down the
    dense column does, and an indicator's is its level's count."""
    n = T.shape[0]
    curves = [i for i, t in enumerate(ts) if t.kind == "continuous"]
    means: dict[int, np.ndarray] = {}
    if curves:
        first, values = cubic_pieces(_unit(ts, curves, T).ravel(order="F"), n_basis)
        bins = (np.repeat(np.arange(len(curves)) * n_basis, n) + first)[:, None] + np.arange(4)
        sums = np.bincount(bins.ravel(), values.ravel(), minlength=len(curves) * n_basis)
        means = {i: sums[k * n_basis:(k + 1) * n_basis] / n for k, i in enumerate(curves)}
    return [means[i] if i in means else np.bincount(_codes(T[:, i], t.n_levels), minlength=t.n_levels) / n
            for i, t in enumerate(ts)]


def _unit(ts: Sequence[FeatureTransform], curves: Sequence[int], T: np.ndarray) -> np.ndarray:
    """The curves' columns of T clamped to their training ranges and mapped onto [0, 1]."""
    lo = np.array([ts[i].lo for i in curves])
    hi = np.array([ts[i].hi for i in curves])
    return (np.clip(T[:, curves], lo, hi) - lo) / np.where(hi > lo, hi - lo, 1.0)


def _raw_columns(ts: Sequence[FeatureTransform], T: np.ndarray, n_basis: int) -> list[np.ndarray]:
    """Unconstrained columns of several features (T: one column each, on the modelling scale): B-splines, or
    level indicators (binary = two levels). Equally spaced knots make a B-spline basis invariant to an affine
    map of x, so every curve is evaluated in one call on [0, 1] after mapping [lo, hi] onto it."""
    n = T.shape[0]
    curves = [i for i, t in enumerate(ts) if t.kind == "continuous"]
    splines: dict[int, np.ndarray] = {}
    if curves:
        basis = bspline_basis(_unit(ts, curves, T).ravel(order="F"), 0.0, 1.0, n_basis)
        splines = {i: basis[k * n : (k + 1) * n] for k, i in enumerate(curves)}
    return [splines[i] if i in splines else _indicators(T[:, i], t.n_levels) for i, t in enumerate(ts)]
