"""The plain additive reference model: one pygam LinearGAM for the whole jurisdiction.

Log price = intercept + a smooth curve per continuous feature (on the log scale where the feature
spec says log) + one effect per level of every ordinal, categorical and yes/no feature + one effect
per segment. No pooling, no interactions, no per-segment curves: what a practitioner gets from pygam
with its defaults, to show what reval's structure adds.

Smoothing is pygam's own selection: `LinearGAM.gridsearch` with no grid tries its default 11
penalties, lam = 10**-3 ... 10**3 evenly on the log scale, the same lam for every term at each step,
and keeps the fit with the lowest GCV score (pygam uses GCV when the scale is unknown, as for a
Gaussian model; pygam 0.12 API, `GAM.gridsearch` docstring). Curves are pygam's default P-splines
(20 cubic B-splines, second-difference penalty); level effects get pygam's ridge penalty.
With more than SEARCH_ROWS training sales the grid is searched on a random SEARCH_ROWS of them (fixed seed)
and the chosen lam is then fitted on all of them: each grid point is a full PIRLS fit on a dense design (a
column per segment), so at 200,000 sales and 300 segments the search alone ran for the better part of an
hour per run. GCV on fewer rows leans to somewhat more smoothing; below SEARCH_ROWS nothing changes.

Ordinal features enter as factor terms, not curves: their levels are codes whose spacing means
nothing in value (a step from "fair" to "average" need not be worth a step from "good" to "very
good"), a factor assumes no spacing and no monotone shape, and a cubic spline with 20 basis
functions over five or six codes is determined mostly by its penalty. On the demo and Ames the two choices gave
the same COD to within 0.01 (docs/reference-models.md).

Handled like the other references: missing values take the training median (continuous, ordinal)
or mode (categorical, yes/no); log features are floored at the smallest positive training value;
continuous values are clamped to their training range (a spline extrapolates); a level or segment
unseen in training gets the training-sales-weighted mean effect of its term (the OLS reference's
rule for an unseen segment).
"""
from __future__ import annotations

from typing import Sequence

import numpy as np
from pygam import LinearGAM, f, intercept, s
from pygam.terms import TermList

from reval.model.design import Feature
from reval.model.references import check_inputs, learn_design, transformed

SEGMENT = -1  # position of the segment among the model's columns (after the features)
SEARCH_ROWS = 20_000  # most training sales the smoothing search runs on (our choice; see the module docstring)


class PlainGAM:
    """pygam LinearGAM over the whole jurisdiction, segment as a factor; smoothing by pygam's GCV grid search."""

    def __init__(self, specs: Sequence[Feature], *, n_splines: int = 20, search_rows: int = SEARCH_ROWS) -> None:
        self.specs = specs
        self.n_splines = n_splines
        self.search_rows = search_rows

    def fit(self, X: np.ndarray, y: np.ndarray, segment: np.ndarray) -> "PlainGAM":
        X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
        check_inputs(X, segment, len(self.specs), y)
        self.design_ = learn_design(X, self.specs, quadratic=False)
        Z = transformed(X, self.design_.fill, self.design_.log_floor, self.specs)
        self.smooth_ = [spec.kind == "continuous" for spec in self.specs] + [False]
        self.lo_, self.hi_ = Z.min(axis=0), Z.max(axis=0)
        raw = np.column_stack([Z, np.zeros(len(Z))])
        self.levels_ = [np.unique(raw[:, j]) if not smooth else np.empty(0) for j, smooth in enumerate(self.smooth_)]
        self.levels_[SEGMENT] = np.unique(np.asarray(segment).astype(str))
        M, _ = self._columns(Z, segment)
        # A column constant in training carries nothing: it is left out (the OLS reference drops it too).
        self.used_ = [j for j in range(M.shape[1]) if np.ptp(M[:, j]) > 0]
        self.gam_ = self._fitted(M[:, self.used_], y)
        self.unseen_shift_ = self._unseen_shifts(M[:, self.used_])
        return self

    def _terms(self) -> TermList:
        """Fresh pygam terms (a term keeps the knots of the data it was first fitted on)."""
        terms = [s(i, n_splines=self.n_splines) if self.smooth_[j] else f(i) for i, j in enumerate(self.used_)]
        return TermList(*terms) if terms else intercept

    def _fitted(self, M: np.ndarray, y: np.ndarray) -> LinearGAM:
        """pygam's GCV grid search, on a fixed random `search_rows` of the sales when there are more, then the
        chosen penalties fitted on every sale."""
        if len(y) <= self.search_rows:
            return LinearGAM(self._terms()).gridsearch(M, y, progress=False)
        rows = np.sort(np.random.default_rng(0).choice(len(y), self.search_rows, replace=False))
        searched = LinearGAM(self._terms()).gridsearch(M[rows], y[rows], progress=False)
        return LinearGAM(self._terms(), lam=searched.lam).fit(M, y)

    def _columns(self, Z: np.ndarray, segment: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Model columns (continuous clamped to the training range, levels as dense training codes, then
        the segment) and a mask of the cells whose level was not seen in training (coded 0)."""
        codes = [*Z.T, np.asarray(segment).astype(str)]
        M = np.empty((len(Z), len(codes)))
        unseen = np.zeros(M.shape, dtype=bool)
        for j, values in enumerate(codes):
            if self.smooth_[j]:
                M[:, j] = np.clip(values, self.lo_[j], self.hi_[j])
                continue
            levels = self.levels_[j]
            at = np.minimum(np.searchsorted(levels, values), len(levels) - 1)
            unseen[:, j] = levels[at] != values
            M[:, j] = np.where(unseen[:, j], 0, at)
        return M, unseen

    def _unseen_shifts(self, M: np.ndarray) -> np.ndarray:
        """Per model term: what to add to a row whose level is unseen (coded 0) to give it the
        training-sales-weighted mean effect of the term instead of level 0's effect."""
        shifts = np.zeros(len(self.used_))
        for i, j in enumerate(self.used_):
            if self.smooth_[j]:
                continue
            grid = np.zeros((len(self.levels_[j]), len(self.used_)))
            grid[:, i] = np.arange(len(self.levels_[j]))
            effect = self.gam_.partial_dependence(term=i, X=grid)
            shifts[i] = effect[M[:, i].astype(int)].mean() - effect[0]
        return shifts

    def predict(self, X: np.ndarray, segment: np.ndarray) -> np.ndarray:
        """Predicted log price."""
        if not hasattr(self, "gam_"):
            raise RuntimeError("PlainGAM is not fitted; call fit first")
        X = np.asarray(X, dtype=float)
        check_inputs(X, segment, len(self.specs))
        Z = transformed(X, self.design_.fill, self.design_.log_floor, self.specs)
        M, unseen = self._columns(Z, segment)
        return self.gam_.predict(M[:, self.used_]) + unseen[:, self.used_] @ self.unseen_shift_
