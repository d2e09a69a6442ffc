"""Select a few pairwise interactions on top of a fitted main-effect smoother (Robinson's double residual).

Both the target (y - offset) and every candidate product are residualised on the main-effect
smoother with its one stored factorisation; the selection then works on those residuals, so a
product is kept only for what it explains beyond the additive curves (Robinson 1988,
Econometrica 56(4); for a linear nuisance this is the Frisch-Waugh-Lovell theorem).

The "lasso" rule screens candidates with the Lasso path and keeps only what a t-test confirms: the
first K candidates to enter the path (all m of them when the sales allow ten residual degrees of
freedom per candidate) are fitted jointly by OLS on the double residuals, and a pair is kept when
its p-value times m (Bonferroni over every candidate looked at) is below alpha. The t-tests use
n - edf - K residual degrees of freedom, edf being the smoother's (which holds the intercept). Why not a
cross-validated Lasso alone: it kept noise pairs or was unstable (docs/model.md, section 4).
"""

from __future__ import annotations

import warnings
from itertools import combinations
from typing import Sequence

import numpy as np
import statsmodels.api as sm
from scipy.stats import t as student_t
from sklearn import config_context
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import lars_path

from reval.model.design import Feature, Pair
from reval.model.penalised import PenalisedLS

DF_PER_CANDIDATE = 10  # residual degrees of freedom per candidate tested jointly (common practice: ten per term)
MIN_RESIDUAL_SD = 1e-8  # candidates the smoother explains completely carry no information


def candidate_pairs(features: Sequence[Feature], candidates: str | Sequence[Sequence[str]] = "all") -> list[Pair]:
    """All pairs of non-categorical features in feature order, or a validated explicit list."""
    kinds = {f.name: f.kind for f in features}
    if isinstance(candidates, str):
        if candidates != "all":
            raise ValueError(f'interaction candidates must be "all" or a list of pairs, got {candidates!r}')
        usable = [f.name for f in features if f.kind != "categorical"]
        return list(combinations(usable, 2))
    pairs: list[Pair] = []
    for pair in candidates:
        a, b = pair
        for name in (a, b):
            if name not in kinds:
                raise ValueError(f"interaction candidate {a}:{b}: unknown feature {name!r}")
            if kinds[name] == "categorical":
                raise ValueError(f"interaction candidate {a}:{b}: categorical feature {name!r} has no product term")
        if a == b:
            raise ValueError(f"interaction candidate {a}:{b} pairs a feature with itself")
        pairs.append((a, b))
    return pairs


def double_residuals(smoother: PenalisedLS, target: np.ndarray, products: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Residuals of the target and of every candidate product on the main-effect smoother, scaled by the root
    of the smoother's row weights, so OLS on them is the weighted fit (Frisch-Waugh-Lovell for weighted least
    squares: the theorem applied to the rows scaled by sqrt(w))."""
    both = smoother.residualise(np.column_stack([target, products]))
    if smoother.weights_ is not None:
        both *= np.sqrt(smoother.weights_)[:, None]
    return both[:, 0], both[:, 1:]


def select_interactions(
    smoother: PenalisedLS,
    target: np.ndarray,
    products: np.ndarray,
    pairs: Sequence[Pair],
    *,
    rule: str,
    max_interactions: int,
    alpha: float = 0.05,
) -> list[Pair]:
    """Pairs chosen by `rule` ("lasso", "significance" or "none"), strongest first, at most `max_interactions`.

    `target` is y - offset and `products` the candidate columns for the same rows the smoother was fitted on.
    Under "lasso", `alpha` is the familywise level of this one selection (Bonferroni over the candidates).
    """
    if rule not in ("lasso", "significance", "none"):
        raise ValueError(f"unknown interaction rule {rule!r}")
    if rule == "none" or max_interactions == 0 or len(pairs) == 0:
        return []
    ry, rz = double_residuals(smoother, target, products)
    sd = rz.std(axis=0)
    usable = np.flatnonzero(sd > MIN_RESIDUAL_SD * max(1.0, float(products.std(axis=0).max())))
    if usable.size == 0:
        return []
    rz = (rz[:, usable] - rz[:, usable].mean(axis=0)) / sd[usable]
    if rule == "lasso":
        strength = _lasso_ols_strength(ry, rz, smoother.edf_, alpha / len(pairs))
    else:
        strength = _significance_strength(ry, rz, alpha)
    order = np.lexsort((usable, -strength))  # strongest first; ties by candidate order
    chosen = [usable[i] for i in order if strength[i] > 0][:max_interactions]
    return [(pairs[i][0], pairs[i][1]) for i in chosen]


def _lasso_ols_strength(ry: np.ndarray, rz: np.ndarray, edf: float, level: float) -> np.ndarray:
    """|t| of the candidates whose joint-OLS p-value is below `level`, 0 otherwise; the first K to enter the
    Lasso path are tested, K = (n - edf) / DF_PER_CANDIDATE at most (all candidates when that allows)."""
    n, m = rz.shape
    k = min(m, int((n - edf) // DF_PER_CANDIDATE))
    strength = np.zeros(m)
    if k < 1:
        return strength
    if k < m:
        # near-collinear candidates: LARS drops them, which is what we want; the arguments are ours, so scikit-learn's
        # checks of them (a tenth of the selection's time) are skipped
        with warnings.catch_warnings(), config_context(skip_parameter_validation=True):
            warnings.simplefilter("ignore", ConvergenceWarning)
            _, active, _ = lars_path(rz, ry, method="lasso", max_iter=k)
        screened = np.sort(np.asarray(active, dtype=np.intp))
    else:
        screened = np.arange(m)
    Z = rz[:, screened]
    coef, _, rank, _ = np.linalg.lstsq(Z, ry, rcond=None)
    dof = n - edf - len(screened)
    if rank < len(screened) or dof < 1:
        return strength
    resid = ry - Z @ coef
    se = np.sqrt(float(resid @ resid) / dof * np.diag(np.linalg.inv(Z.T @ Z)))
    tval = np.abs(coef / se)
    keep = 2 * student_t.sf(tval, dof) < level
    strength[screened[keep]] = tval[keep]
    return strength


def _significance_strength(ry: np.ndarray, rz: np.ndarray, alpha: float) -> np.ndarray:
    """Backward elimination by OLS p-value at level alpha; strength = |t| for survivors, 0 otherwise.

    Elimination needs a full-rank start with residual degrees of freedom to spare: when candidates
    are many for the sales, the third of n most correlated with the target are kept (sure independence
    screening, Fan & Lv 2008, JRSS B 70(5)), and a candidate linearly dependent on stronger ones is dropped.
    """
    n, m = rz.shape
    order = np.argsort(-np.abs(rz.T @ ry), kind="stable")[: max(1, (n - 1) // 3)]
    r_diag = np.abs(np.diag(np.linalg.qr(rz[:, order], mode="r")))
    alive = sorted(order[r_diag > 1e-8 * r_diag.max()].tolist())
    strength = np.zeros(m)
    while alive:
        fit = sm.OLS(ry, sm.add_constant(rz[:, alive], has_constant="add")).fit()
        p = np.asarray(fit.pvalues)[1:]
        worst = int(np.argmax(p))
        if p[worst] <= alpha:
            strength[alive] = np.abs(np.asarray(fit.tvalues)[1:])
            break
        del alive[worst]
    return strength
