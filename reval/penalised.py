"""Penalised least squares with an offset, smoothing penalties chosen by GCV, and a shared-factorisation residualiser.

Minimises ||y - offset - X b||^2 + sum_j lam_j b' S_j b. Every quantity the search needs
(coefficients, residual sum of squares, effective degrees of freedom) is computed from the
p x p Gram matrix X'X and X'(y - offset), so one GCV evaluation costs a p x p Cholesky
factorisation whatever the number of sales. GCV = n RSS / (n - gamma edf)^2 (Craven & Wahba 1979;
Wood 2017, section 6.2.3); gamma > 1 (Kim & Gu 2004 suggest 1.4) counters GCV's undersmoothing
in small samples. The posterior covariance sigma^2 (X'X + S)^-1 is the Bayesian one
of Wood (2017, section 6.10), which gives curve bands with good frequentist coverage.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy.linalg import cho_factor, cho_solve
from scipy.linalg.lapack import dpotrf, dpotrs, dtrtrs

from .design import Block

LOG10_GRID = np.linspace(-4.0, 6.0, 21)  # global multiplier of the normalised penalties
LINE_STEP = 1.0  # log10 step of the per-penalty line search
LOG10_BOUNDS = (-6.0, 8.0)
JITTER = 1e-9  # relative ridge keeping X'X + S positive definite when a column is empty (e.g. an unsold level)
TIE = 1e-9  # a smaller penalty must beat the current GCV by this relative margin, so ties favour smoothing


@dataclass(frozen=True)
class Penalty:
    """One smoothing penalty: the block it acts on (as a column slice) and its matrix."""

    term: str
    cols: slice
    matrix: np.ndarray


def stack(blocks: Sequence[Block]) -> tuple[np.ndarray, dict[str, slice], list[Penalty]]:
    """Design matrix, column slice per term, and the list of penalties of a list of blocks."""
    slices: dict[str, slice] = {}
    penalties: list[Penalty] = []
    start = 0
    for b in blocks:
        cols = slice(start, start + b.columns.shape[1])
        slices[b.term] = cols
        penalties.extend(Penalty(b.term, cols, s) for s in b.penalties)
        start = cols.stop
    return np.hstack([b.columns for b in blocks]), slices, penalties


class PenalisedLS:
    """Penalised least-squares smoother; `lambdas` fixes the penalties (one per penalty matrix), else GCV
    (with edf inflated by `gamma`) picks them."""

    def __init__(self, *, lambdas: Sequence[float] | None = None, line_search_passes: int = 1,
                 gamma: float = 1.0) -> None:
        self.lambdas = lambdas
        self.line_search_passes = line_search_passes
        self.gamma = gamma

    def fit(self, blocks: Sequence[Block], y: np.ndarray, offset: np.ndarray | None = None) -> PenalisedLS:
        """Fit to y - offset; store coefficients, covariance, edf, GCV and the Cholesky factor."""
        X, slices, penalties = stack(blocks)
        y = np.asarray(y, dtype=float)
        target = y if offset is None else y - np.asarray(offset, dtype=float)
        n, p = X.shape
        if target.shape != (n,):
            raise ValueError(f"y has shape {target.shape}, the design has {n} rows")
        gram = X.T @ X
        xty = X.T @ target
        scale = np.array([_penalty_scale(gram, pen) for pen in penalties])
        jitter = JITTER * max(float(np.trace(gram)) / p, 1e-12) * np.eye(p)
        problem = _Problem(gram, xty, float(target @ target), n, penalties, jitter, self.gamma)
        if self.lambdas is None:
            lambdas = scale * 10.0 ** _search(problem, scale, self.line_search_passes)
        else:
            lambdas = np.asarray(self.lambdas, dtype=float)
            if lambdas.shape != (len(penalties),):
                raise ValueError(f"expected {len(penalties)} lambdas, got {lambdas.shape}")
        chol = cho_factor(problem.system(lambdas), lower=True)
        coef = cho_solve(chol, xty)
        influence = cho_solve(chol, gram)
        edf_cols = np.diag(influence)
        resid = target - X @ coef
        rss = float(resid @ resid)
        edf = float(edf_cols.sum())
        dof = n - edf
        self.coef_ = coef
        self.chol_ = chol
        self.design_ = X
        self.slices_ = slices
        self.lambdas_ = lambdas
        self.penalty_terms_ = [pen.term for pen in penalties]
        self.edf_ = edf
        self.edf_terms_ = {term: float(edf_cols[s].sum()) for term, s in slices.items()}
        self.rss_ = rss
        self.sigma2_ = rss / dof if dof > 0 else float("nan")
        gdof = n - self.gamma * edf
        self.gcv_ = n * rss / gdof**2 if gdof > 0 else float("inf")
        self.cov_ = self.sigma2_ * cho_solve(chol, np.eye(p))
        self.n_ = n
        return self

    def predict(self, blocks: Sequence[Block], offset: np.ndarray | None = None) -> np.ndarray:
        """Fitted values for new rows built by the same design (plus their offset)."""
        X, _, _ = stack(blocks)
        out = X @ self.coef_
        return out if offset is None else out + offset

    def residualise(self, Z: np.ndarray) -> np.ndarray:
        """Z - H Z for every column of Z with the one stored factorisation, H = X (X'X + S)^-1 X'."""
        Z = np.asarray(Z, dtype=float)
        return Z - self.design_ @ cho_solve(self.chol_, self.design_.T @ Z)


def _penalty_scale(gram: np.ndarray, pen: Penalty) -> float:
    """Put penalties on the scale of their block's Gram matrix, so one multiplier suits all terms."""
    g = np.linalg.norm(gram[pen.cols, pen.cols])
    s = np.linalg.norm(pen.matrix)
    return g / s if g > 0 and s > 0 else 1.0


class _Problem:
    """The p x p quantities GCV needs, with the penalties stored on their joint support so one product sums them.

    edf = tr((X'X + S)^-1 X'X) = ||L^-1 R'||_F^2 with L L' = X'X + S and R'R = X'X (R from the eigenvectors of
    X'X, computed once), so an evaluation needs one Cholesky factorisation and one triangular solve.
    """

    def __init__(self, gram: np.ndarray, xty: np.ndarray, yty: float, n: int, penalties: list[Penalty],
                 jitter: np.ndarray, gamma: float) -> None:
        self.gram, self.xty, self.yty, self.n, self.gamma = gram, xty, yty, n, gamma
        self.base = gram + jitter
        p = gram.shape[0]
        slabs = np.zeros((len(penalties), p, p))
        for i, pen in enumerate(penalties):
            slabs[i, pen.cols, pen.cols] = pen.matrix
        self.support = np.flatnonzero(np.any(slabs != 0, axis=0))  # the penalised entries of the p x p system
        self.values = slabs.reshape(len(penalties), p * p)[:, self.support]
        vals, vecs = np.linalg.eigh(gram)
        self.root = np.asfortranarray(vecs * np.sqrt(np.maximum(vals, 0.0)))  # R' with R'R = X'X

    def system(self, lambdas: np.ndarray) -> np.ndarray:
        out = self.base.copy()
        out.flat[self.support] += lambdas @ self.values
        return out

    def gcv(self, lambdas: np.ndarray) -> float:
        chol, info = dpotrf(self.system(lambdas), lower=1, clean=0, overwrite_a=1)
        if info != 0:
            return float("inf")
        coef, _ = dpotrs(chol, self.xty, lower=1)
        rss = max(self.yty - 2 * coef @ self.xty + coef @ self.gram @ coef, 0.0)
        half, _ = dtrtrs(chol, self.root, lower=1)
        edf = float(np.einsum("ij,ij->", half, half))
        dof = self.n - self.gamma * edf
        return self.n * rss / dof**2 if dof > 1e-8 else float("inf")


def _search(problem: _Problem, scale: np.ndarray, passes: int) -> np.ndarray:
    """log10 multipliers of the normalised penalties: a global grid, then a line search per penalty.

    The line search steps one decade up, or else down, from the current value and keeps going
    while GCV improves; a smaller penalty must win by a margin, so ties favour smoothing.
    """
    k = problem.values.shape[0]
    if k == 0:
        return np.zeros(0)
    score = lambda rho: problem.gcv(scale * 10.0**rho)  # noqa: E731
    best_rho, best = np.full(k, LOG10_GRID[-1]), score(np.full(k, LOG10_GRID[-1]))
    for g in LOG10_GRID[::-1][1:]:
        value = score(np.full(k, g))
        if value < best * (1 - TIE):
            best_rho, best = np.full(k, g), value
    for _ in range(passes if k > 1 else 0):
        for j in range(k):
            for step in (LINE_STEP, -LINE_STEP):
                moved = False
                while LOG10_BOUNDS[0] < best_rho[j] + step < LOG10_BOUNDS[1]:
                    trial = best_rho.copy()
                    trial[j] += step
                    value = score(trial)
                    if not value < best * (1 - TIE):
                        break
                    best_rho, best, moved = trial, value, True
                if moved:
                    break
    return best_rho
