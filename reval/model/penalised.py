"""Penalised least squares with an offset and row weights, smoothing penalties chosen by GCV, and a
shared-factorisation residualiser.

Minimises sum_i w_i (y_i - offset_i - x_i'b)^2 + sum_j lam_j b' S_j b (weights default to 1; with them every
quantity below is that of the rows scaled by sqrt(w), as in Wood 2017, section 6.2.3). Every quantity the search needs
(coefficients, residual sum of squares, effective degrees of freedom) is computed from the
p x p Gram matrix X'X and X'(y - offset), so the search costs nothing per sale; one Cholesky
factorisation scores a whole line of penalty values (see `_Problem`). GCV = n RSS / (n - gamma edf)^2 (Craven & Wahba 1979;
Wood 2017, section 6.2.3); gamma > 1 (Kim & Gu 2004 suggest 1.4) counters GCV's undersmoothing
in small samples. The posterior covariance sigma^2 (X'X + S)^-1 is the Bayesian one
of Wood (2017, section 6.10), which gives curve bands with good frequentist coverage.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np
from scipy.linalg import cho_factor, cho_solve, solve_triangular
from scipy.linalg.lapack import dgesdd, dpotrf, dpstrf, dtrtrs
from scipy.optimize import nnls

from reval.model.design import Block

LOG10_GRID = np.linspace(-4.0, 6.0, 21)  # global multiplier of the normalised penalties
LINE_STEP = 1.0  # log10 step of the per-penalty line search
LOG10_BOUNDS = (-6.0, 8.0)  # open interval the line search stays in
JITTER = 1e-9  # relative ridge keeping X'X + S positive definite when a column is empty (e.g. an unsold level)
TIE = 1e-9  # a smaller penalty must beat the current GCV by this relative margin, so ties favour smoothing
CONSTRAINT_TOL = 1e-10  # relative to the size of the constrained differences: what counts as a violation


@dataclass(frozen=True)
class Penalty:
    """One smoothing penalty: the block it acts on (as a column slice), its matrix and, if known, a root of it."""

    term: str
    cols: slice
    matrix: np.ndarray
    root: np.ndarray | None = None


def column_slices(blocks: Sequence[Block]) -> tuple[dict[str, slice], int]:
    """Column slice of each term in the stacked design, and its width."""
    slices: dict[str, slice] = {}
    start = 0
    for b in blocks:
        slices[b.term] = slice(start, start + b.columns.shape[1])
        start += b.columns.shape[1]
    return slices, start


def stack(blocks: Sequence[Block]) -> tuple[np.ndarray, dict[str, slice], list[Penalty]]:
    """Design matrix, column slice per term, and the list of penalties of a list of blocks."""
    slices, _ = column_slices(blocks)
    penalties = [Penalty(b.term, slices[b.term], s, b.roots[i] if b.roots else None)
                 for b in blocks for i, s in enumerate(b.penalties)]
    return np.hstack([b.columns for b in blocks]), slices, penalties


@dataclass(frozen=True)
class LinearConstraint:
    """Inequalities on the coefficients: matrix @ b + floor >= 0 (a shape rule, reval.model.shape). They act at
    fixed smoothing penalties: GCV chooses the penalties of the unconstrained fit."""

    matrix: np.ndarray
    floor: np.ndarray


class PenalisedLS:
    """Penalised (weighted) least-squares smoother; `lambdas` fixes the penalties (one per penalty matrix), else
    GCV (with edf inflated by `gamma`) picks them."""

    def __init__(self, *, lambdas: Sequence[float] | np.ndarray | None = None, line_search_passes: int = 1,
                 gamma: float = 1.0) -> None:
        self.lambdas = lambdas
        self.line_search_passes = line_search_passes
        self.gamma = gamma

    def fit(self, blocks: Sequence[Block], y: np.ndarray, offset: np.ndarray | None = None,
            weights: np.ndarray | None = None, constraint: LinearConstraint | None = None) -> PenalisedLS:
        """Fit to y - offset, each row weighted by `weights` (X'WX and X'Wy; none = all 1), the coefficients held
        to `constraint`; store coefficients, covariance, edf, GCV and the Cholesky factor."""
        X, slices, penalties = stack(blocks)
        y = np.asarray(y, dtype=float)
        target = y if offset is None else y - np.asarray(offset, dtype=float)
        n, p = X.shape
        if target.shape != (n,):
            raise ValueError(f"y has shape {target.shape}, the design has {n} rows")
        w = _checked_weights(weights, n)
        gram, xty, yty = _weighted_products(X, target, w)
        jitter = JITTER * max(float(np.trace(gram)) / max(p, 1), 1e-12)
        if self.lambdas is None:
            scale = np.array([_penalty_scale(gram, pen) for pen in penalties])
            problem = _Problem(gram, xty, yty, n, penalties, jitter * np.eye(p), self.gamma)
            lambdas = scale * 10.0 ** _search(problem, scale, self.line_search_passes)
        else:
            lambdas = np.asarray(self.lambdas, dtype=float)
            if lambdas.shape != (len(penalties),):
                raise ValueError(f"expected {len(penalties)} lambdas, got {lambdas.shape}")
        self.design_, self.target_, self.slices_, self.penalties_ = X, target, slices, penalties
        self.constraint_ = constraint
        return self._solve(w, gram, xty, lambdas)

    def refit(self, weights: np.ndarray | None) -> PenalisedLS:
        """The same design, target, penalties and constraint with new row weights (one factorisation, no GCV
        search): a step of iteratively reweighted least squares."""
        out = PenalisedLS(lambdas=self.lambdas_, line_search_passes=self.line_search_passes, gamma=self.gamma)
        out.design_, out.target_, out.slices_, out.penalties_ = self.design_, self.target_, self.slices_, self.penalties_
        out.constraint_ = self.constraint_
        w = _checked_weights(weights, len(self.target_))
        old = np.ones(len(self.target_)) if self.weights_ is None else self.weights_
        change = (np.ones(len(old)) if w is None else w) - old
        moved = np.flatnonzero(change)
        if len(moved) > len(old) // 2:  # most rows moved: recompute X'WX and X'Wy
            gram, xty, _ = _weighted_products(self.design_, self.target_, w)
        else:  # IRLS moves few weights per step: update both by the rows that moved
            rows = self.design_[moved]
            scaled = rows * change[moved, None]
            gram = self.gram_ + scaled.T @ rows
            xty = self.xty_ + scaled.T @ self.target_[moved]
        return out._solve(w, gram, xty, self.lambdas_, self.active_)

    def _solve(self, w: np.ndarray | None, gram: np.ndarray, xty: np.ndarray, lambdas: np.ndarray,
               active: np.ndarray | None = None) -> PenalisedLS:
        """Coefficients and residuals at fixed penalties; the inverse, edf and covariance follow when first asked
        for (a reweighting step needs none of them)."""
        X, target, penalties = self.design_, self.target_, self.penalties_
        p = X.shape[1]
        system = gram + JITTER * max(float(np.trace(gram)) / max(p, 1), 1e-12) * np.eye(p)
        for lam, pen in zip(lambdas, penalties):
            system[pen.cols, pen.cols] += lam * pen.matrix
        chol = cho_factor(system, lower=True)
        coef = cho_solve(chol, xty)
        self.active_ = None
        if self.constraint_ is not None:
            coef, self.active_ = _constrained(chol[0], coef, self.constraint_, active)
        resid = target - X @ coef
        self.coef_ = coef
        self.chol_ = chol
        self.gram_ = gram
        self.xty_ = xty
        self.weights_ = w
        self.resid_ = resid
        self.lambdas_ = lambdas
        self.penalty_terms_ = [pen.term for pen in penalties]
        self.rss_ = float(resid @ resid) if w is None else float(w @ resid**2)
        self.n_ = X.shape[0]
        return self

    @cached_property
    def inverse_(self) -> np.ndarray:
        return np.asarray(cho_solve(self.chol_, np.eye(self.design_.shape[1])))

    @cached_property
    def _edf_columns(self) -> np.ndarray:
        return np.einsum("ij,ji->i", self.inverse_, self.gram_)  # diagonal of (X'WX + S)^-1 X'WX

    @property
    def edf_(self) -> float:
        return float(self._edf_columns.sum())

    @property
    def edf_terms_(self) -> dict[str, float]:
        return {term: float(self._edf_columns[s].sum()) for term, s in self.slices_.items()}

    @property
    def sigma2_(self) -> float:
        dof = self.n_ - self.edf_
        return self.rss_ / dof if dof > 0 else float("nan")

    @property
    def gcv_(self) -> float:
        gdof = self.n_ - self.gamma * self.edf_
        return self.n_ * self.rss_ / gdof**2 if gdof > 0 else float("inf")

    @property
    def cov_(self) -> np.ndarray:
        return self.sigma2_ * self.inverse_

    def predict(self, blocks: Sequence[Block], offset: np.ndarray | None = None) -> np.ndarray:
        """Fitted values for new rows built by the same design (plus their offset)."""
        X, _, _ = stack(blocks)
        out = X @ self.coef_
        return out if offset is None else out + offset

    def leverage(self) -> np.ndarray:
        """Diagonal of the hat matrix H = X (X'WX + S)^-1 X'W: how much each row's fitted value follows its own y."""
        h = self.leverage_factors()
        return h if self.weights_ is None else h * self.weights_

    def leverage_factors(self) -> np.ndarray:
        """x_i' (X'WX + S)^-1 x_i for every row: its leverage before its own weight is applied."""
        half = solve_triangular(self.chol_[0], self.design_.T, lower=True, check_finite=False)  # L^-1 X'
        return np.einsum("ij,ij->j", half, half)

    def residualise(self, Z: np.ndarray) -> np.ndarray:
        """Z - H Z for every column of Z with the one stored factorisation, H = X (X'WX + S)^-1 X'W."""
        Z = np.asarray(Z, dtype=float)
        WZ = Z if self.weights_ is None else Z * self.weights_[:, None]
        return Z - self.design_ @ cho_solve(self.chol_, self.design_.T @ WZ)


def _constrained(chol: np.ndarray, free: np.ndarray, constraint: LinearConstraint,
                 start: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """The coefficients minimising the same objective subject to matrix @ b + floor >= 0, and the inequalities used.

    With A = L L' the system matrix and b0 the free solution, z = L'(b - b0) turns the problem into least
    distance programming: min ||z|| subject to (C L^-T) z >= -(C b0 + floor), solved by non-negative least
    squares (Lawson & Hanson 1974, Solving Least Squares Problems, algorithm LDP of chapter 23). Only the
    inequalities found violated so far (and those of `start`, a previous fit's) enter, since most hold anyway; the
    set grows until the solution violates none. Should the inequalities contradict each other (they do not when
    the parent layers obey them), the free solution is kept.
    """
    slack = constraint.matrix @ free + constraint.floor
    tolerance = CONSTRAINT_TOL * max(float(np.abs(constraint.floor).max(initial=0.0)), float(np.abs(slack).max()), 1e-12)
    working = slack < -tolerance
    if not working.any():
        return free, working
    if start is not None:
        working |= start
    while True:
        rows = solve_triangular(chol, constraint.matrix[working].T, lower=True, check_finite=False)  # (C L^-T)'
        system = np.vstack([rows, -slack[None, working]])
        target = np.zeros(system.shape[0])
        target[-1] = 1.0
        u, _ = nnls(system, target, maxiter=50 * system.shape[1])
        r = system @ u - target
        if abs(r[-1]) < 1e-12:
            return free, np.zeros(len(slack), dtype=bool)
        coef = free + solve_triangular(chol, -r[:-1] / r[-1], lower=True, trans="T", check_finite=False)
        violated = constraint.matrix @ coef + constraint.floor < -tolerance
        if not (violated & ~working).any():
            return coef, working
        working |= violated


def _checked_weights(weights: np.ndarray | None, n: int) -> np.ndarray | None:
    if weights is None:
        return None
    w = np.asarray(weights, dtype=float)
    if w.shape != (n,) or not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ValueError(f"weights must be {n} finite non-negative numbers")
    return w


def _weighted_products(X: np.ndarray, target: np.ndarray, w: np.ndarray | None) -> tuple[np.ndarray, np.ndarray, float]:
    """X'WX, X'Wy and y'Wy (W = diag(w); the identity when w is None)."""
    if w is None:
        return X.T @ X, X.T @ target, float(target @ target)
    root = np.sqrt(w)
    Xw, tw = X * root[:, None], target * root
    return Xw.T @ Xw, Xw.T @ tw, float(tw @ tw)


def _penalty_scale(gram: np.ndarray, pen: Penalty) -> float:
    """Put penalties on the scale of their block's Gram matrix, so one multiplier suits all terms."""
    g = np.linalg.norm(gram[pen.cols, pen.cols])
    s = np.linalg.norm(pen.matrix)
    return float(g / s) if g > 0 and s > 0 else 1.0


def _embedded_root(pen: Penalty, p: int) -> np.ndarray:
    """E (p x rank) with E E' = the penalty placed in the p x p system (zero outside its block); the block's own
    root when it has one (surplus columns are harmless: they add zero singular values to each line's SVD)."""
    if pen.root is not None:
        out = np.zeros((p, pen.root.shape[1]))
        out[pen.cols] = pen.root
        return out
    vals, vecs = np.linalg.eigh(pen.matrix)
    keep = vals > 1e-12 * max(float(vals.max(initial=0.0)), 1e-300)
    out = np.zeros((p, int(keep.sum())))
    out[pen.cols] = vecs[:, keep] * np.sqrt(vals[keep])
    return out


def _gram_root(gram: np.ndarray) -> np.ndarray:
    """R' (p x rank) with R'R = X'X, from a pivoted Cholesky factorisation (Higham 2002, section 10.3), so
    its width is the rank: a segment with fewer sales than columns gets a narrow one."""
    factor, piv, rank, _ = dpstrf(gram, lower=1)
    root = np.empty((gram.shape[0], rank), order="F")
    root[piv - 1] = np.tril(factor[:, :rank])
    return root


class _Problem:
    """The p x p quantities GCV needs, able to score a whole line of penalties from one factorisation.

    Along a line A(t) = A0 + t E E' (one penalty, or all of them together, scaled by t), with
    L L' = A0 and L^-1 E = Q diag(s) V' (thin SVD), A(t)^-1 = L^-T (I - Q diag(phi) Q') L^-1 with
    phi = t s^2 / (1 + t s^2): the Demmler-Reinsch diagonalisation (Wood 2017, section 5.1.2), here for
    a penalty of low rank. Then edf = tr(A^-1 X'X) and RSS = y'y - 2 b'X'y + b'X'X b cost O(p rank) per
    t after one Cholesky factorisation and two triangular solves.
    """

    def __init__(self, gram: np.ndarray, xty: np.ndarray, yty: float, n: int, penalties: list[Penalty],
                 jitter: np.ndarray, gamma: float) -> None:
        self.gram, self.xty, self.yty, self.n, self.gamma = gram, xty, yty, n, gamma
        self.base = gram + jitter
        p = gram.shape[0]
        entries = []  # each penalty's non-zero entries: positions in the flattened p x p system, and values
        for pen in penalties:
            block = np.arange(p)[pen.cols]
            where = (block[:, None] * p + block).ravel()
            values = np.asarray(pen.matrix, dtype=float).ravel()
            entries.append((where[values != 0], values[values != 0]))
        self.support = np.unique(np.concatenate([w for w, _ in entries] + [np.zeros(0, dtype=np.intp)]))  # penalised
        self.values = np.zeros((len(penalties), len(self.support)))
        for i, (where, values) in enumerate(entries):
            self.values[i, np.searchsorted(self.support, where)] = values
        roots = [_embedded_root(pen, p) for pen in penalties]
        self.bounds = np.cumsum([0] + [r.shape[1] for r in roots])  # columns of each E_j among the roots
        self.owner = np.repeat(np.arange(len(roots)), np.diff(self.bounds))  # penalty of each column
        width = int(self.bounds[-1])
        # [E_1 ... E_k | R' | X'y], Fortran-ordered for LAPACK: a line writes its scaled roots just before R'
        # (the last columns of the roots' slot) and solves them and [R' | X'y] with L in one call
        self.roots = np.hstack(roots) if roots else np.zeros((p, 0))
        data = np.column_stack([_gram_root(gram), xty])
        self.work = np.empty((p, width + data.shape[1]), order="F")
        self.work[:, width:] = data
        self.width = width

    def system(self, lambdas: np.ndarray) -> np.ndarray:
        out = self.base.copy()
        out.reshape(-1)[self.support] += lambdas @ self.values  # a view: faster than .flat
        return out

    def line(self, fixed: np.ndarray, direction: np.ndarray, rho: np.ndarray) -> np.ndarray:
        """GCV at penalties fixed + 10**rho * direction, for every rho (both vectors one entry per penalty)."""
        chol, info = dpotrf(self.system(fixed), lower=1, clean=0, overwrite_a=1)
        if info != 0:
            return np.full(len(rho), np.inf)
        moving = np.flatnonzero(direction > 0)
        if len(moving) == 1:  # one penalty: its roots are a slice
            j = moving[0]
            roots, root_scale = self.roots[:, self.bounds[j]:self.bounds[j + 1]], np.sqrt(direction[j])
        else:
            cols = np.flatnonzero(direction[self.owner] > 0)
            roots, root_scale = self.roots[:, cols], np.sqrt(direction[self.owner[cols]])
        r = roots.shape[1]
        np.multiply(roots, root_scale, out=self.work[:, self.width - r:self.width])
        solved, _ = dtrtrs(chol, self.work[:, self.width - r:], lower=1)  # [L^-1 E | L^-1 R' | L^-1 X'y]
        half, z = solved[:, r:-1], solved[:, -1]  # L^-1 R' (so L^-1 X'X L^-T = half half') and L^-1 X'y
        q, sv = np.zeros((len(z), 0)), np.zeros(0)
        if r:
            q, sv, _, _ = dgesdd(solved[:, :r], compute_uv=1, full_matrices=0, overwrite_a=1)
        proj = q.T @ half
        a = q.T @ z
        t = 10.0 ** np.asarray(rho, dtype=float)
        ts2 = np.outer(sv**2, t)
        phi = ts2 / (1.0 + ts2)
        edf = float(np.einsum("ij,ij->", half, half)) - np.einsum("ij,ij->i", proj, proj) @ phi
        explained = float(z @ z) - (a * a) @ phi  # b'X'y
        fitted = (half.T @ z)[:, None] - proj.T @ (phi * a[:, None])  # R b, so ||R b||^2 = b'X'X b
        rss = np.maximum(self.yty - 2.0 * explained + np.einsum("ij,ij->j", fitted, fitted), 0.0)
        dof = self.n - self.gamma * edf
        safe = np.where(dof > 1e-8, dof, 1.0)
        return np.where(dof > 1e-8, self.n * rss / safe**2, np.inf)


def _scan(values: np.ndarray, best: float) -> tuple[int, float]:
    """Scan a grid from its largest penalty down, moving only when GCV beats the best so far by TIE (so ties
    favour smoothing); the index chosen (-1 for none) and its GCV."""
    chosen = -1
    for i in range(len(values) - 1, -1, -1):
        if values[i] < best * (1 - TIE):
            chosen, best = i, float(values[i])
    return chosen, best


def _climb(values: np.ndarray, best: float) -> tuple[int, float]:
    """Walk along values while each beats the best so far by TIE; the index reached (-1 for none) and its GCV."""
    reached = -1
    for i, value in enumerate(values):
        if not value < best * (1 - TIE):
            break
        reached, best = i, float(value)
    return reached, best


def _search(problem: _Problem, scale: np.ndarray, passes: int) -> np.ndarray:
    """log10 multipliers of the normalised penalties: a global grid, then a line search per penalty.

    The line search steps one decade up, or else down, from the current value and keeps going
    while GCV improves; a smaller penalty must win by a margin, so ties favour smoothing. The
    global grid and each penalty's whole line of decade steps are scored from one factorisation.
    """
    k = len(scale)
    if k == 0:
        return np.zeros(0)
    i, best = _scan(problem.line(np.zeros(k), scale, LOG10_GRID), np.inf)
    rho = np.full(k, LOG10_GRID[i if i >= 0 else len(LOG10_GRID) - 1])  # the largest if every GCV is infinite
    for _ in range(passes if k > 1 else 0):
        for j in range(k):
            fixed = scale * 10.0**rho
            fixed[j] = 0.0
            direction = np.zeros(k)
            direction[j] = scale[j]
            up = rho[j] + LINE_STEP * np.arange(1, np.ceil((LOG10_BOUNDS[1] - rho[j]) / LINE_STEP))
            down = rho[j] - LINE_STEP * np.arange(1, np.ceil((rho[j] - LOG10_BOUNDS[0]) / LINE_STEP))
            values = problem.line(fixed, direction, np.concatenate([up, down]))
            for steps, scores in ((up, values[: len(up)]), (down, values[len(up):])):
                i, best = _climb(scores, best)
                if i >= 0:
                    rho[j] = steps[i]
                    break
    return rho
