"""Outlier-resistant fitting: Huber's loss on log price by iteratively reweighted penalised least squares.

Least squares lets one keyed error (a price with a zero too many, a living area a tenth of the truth) pull
a curve as far as it likes; Huber's loss (Huber 1964, Annals of Mathematical Statistics 35(1)) is
quadratic for residuals within k scale units and linear beyond, which iteratively reweighted least
squares (IRLS) fits by giving each sale the weight min(1, k / |u|), u = residual / scale. k = 1.345 keeps 95 %
of least squares' efficiency when the noise is normal (Huber's and statsmodels' HuberT default). The
scale is the median absolute residual / 0.6745 (Phi^-1(3/4)), as statsmodels' RLM estimates it; with no
penalty and plain residuals this loop is RLM's (tests/test_robust.py checks it against statsmodels).

Masking by leverage: a spline bends to a lone sale at the edge of the data, so its own residual is small and
plain Huber weights would keep it (docs/model.md, section 7). The weights are therefore judged on the deleted
residual e_i = r_i / (1 - h_ii), h_ii the diagonal of the hat matrix X (X'WX + S)^-1 X'W: exactly the residual
the sale would have if it were left out of the fit at the same penalties (the leave-one-out identity of linear
smoothers; tests/test_robust.py checks it against refits), i.e. how far its price lies from the value the
model gives it without it. A sale the model can only fit by bending to it thus gets a large residual and a
small weight. Huber's weights never reach 0, so where such a sale is alone its small weight can still pull the
curve; reval.model.hierarchy therefore lets only sales of weight >= 0.5 span a layer's curves.

Each step refits at the smoothing penalties GCV chose for the starting weights, keeping the smoother's shape
constraint (reval.model.shape); the leverage is that of the unconstrained fit at those weights.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reval.model.penalised import PenalisedLS

HUBER_K = 1.345  # Huber's tuning constant (95 % efficiency at the normal)
MAD_NORMAL = 0.6744897501960817  # Phi^-1(3/4): the median absolute value of a standard normal
MAX_ITER = 30  # refits at most (each is one factorisation)
WEIGHT_TOL = 1e-2  # stop when no weight moves by more than this
MIN_RESIDUAL_SHARE = 1e-3  # 1 - h is floored here, so a sale fitted exactly by its own column stays finite


@dataclass(frozen=True)
class Huber:
    """Huber's loss: tuning constant `k`; `scale` fixed, or None to re-estimate it from each step's residuals;
    `leverage` judges sales on deleted residuals (False: plain residuals, as statsmodels' RLM)."""

    k: float = HUBER_K
    scale: float | None = None
    leverage: bool = True


@dataclass(frozen=True)
class Refined:
    """The final smoother of the loop, the weights it used, the residuals they were judged on and the scale."""

    smoother: PenalisedLS
    weights: np.ndarray
    residual: np.ndarray
    scale: float
    iterations: int


def huber_weights(u: np.ndarray, k: float = HUBER_K) -> np.ndarray:
    """psi(u) / u for Huber's loss: 1 within k, k / |u| beyond (statsmodels.robust.norms.HuberT.weights)."""
    a = np.abs(np.asarray(u, dtype=float))
    return np.where(a <= k, 1.0, k / np.maximum(a, 1e-300))


def mad_scale(residual: np.ndarray) -> float:
    """Median absolute residual / Phi^-1(3/4): a robust estimate of the noise sd (statsmodels' mad, center 0)."""
    return float(np.median(np.abs(residual))) / MAD_NORMAL


def own_weight_leverage(factors: np.ndarray, start: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Each row's leverage after its weight moved from `start` to `weights`, the others' held (Sherman-Morrison):
    with q = x'A^-1 x at the start, x'(A + (w - w0) x x')^-1 x = q / (1 + (w - w0) q), times w."""
    return weights * factors / (1.0 + (weights - start) * factors)


def refine(smoother: PenalisedLS, huber: Huber | None, *, fixed: np.ndarray | None = None,
           max_iter: int = MAX_ITER, tol: float = WEIGHT_TOL) -> Refined:
    """Iterate Huber weights at the smoother's penalties until no weight moves by more than `tol`.

    `fixed` marks rows whose weight stays 1 (sales an analyst has vouched for). Without a loss this returns the
    smoother as it is. The weights start from the smoother's own (its prior weights). The leverage is computed
    once, at the start; later steps follow each row's own weight exactly and neglect how the other rows' new
    weights change it (`own_weight_leverage`), which spares a pass over all rows and columns per step and keeps
    a lone sale's leverage high however low its weight falls.
    """
    n = len(smoother.target_)
    start = np.ones(n) if smoother.weights_ is None else smoother.weights_
    weights = start
    if huber is None:
        return Refined(smoother, weights, smoother.resid_, float("nan"), 0)
    factors = smoother.leverage_factors() if huber.leverage else np.zeros(n)
    for iteration in range(max_iter + 1):
        share = 1.0 - own_weight_leverage(factors, start, weights)
        residual = smoother.resid_ / np.maximum(share, MIN_RESIDUAL_SHARE)
        scale = huber.scale if huber.scale is not None else mad_scale(residual)
        new = huber_weights(residual / scale, huber.k) if scale > 0 else np.ones(n)
        if fixed is not None:
            new = np.where(fixed, 1.0, new)
        settled = float(np.max(np.abs(new - weights), initial=0.0)) <= tol
        if (iteration > 0 and settled) or iteration == max_iter:
            return Refined(smoother, weights, residual, scale, iteration)
        weights = new
        smoother = smoother.refit(weights)
    raise AssertionError("unreachable")
