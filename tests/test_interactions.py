"""Interaction selection on double residuals: Frisch-Waugh-Lovell, Robinson (1988), and planted pairs."""

from types import SimpleNamespace

import numpy as np
import pytest
import statsmodels.api as sm

from reval.model.design import Block, DesignSpec
from reval.model.interactions import candidate_pairs, double_residuals, select_interactions
from reval.model.penalised import PenalisedLS


def feature(name: str, kind: str = "continuous", levels: tuple[str, ...] = ()) -> SimpleNamespace:
    return SimpleNamespace(name=name, kind=kind, log=False, levels=levels)


def test_frisch_waugh_lovell_with_a_linear_nuisance() -> None:
    # Frisch-Waugh-Lovell theorem (Frisch & Waugh 1933; Lovell 1963): the coefficient of d from
    # regressing the residual of y on the residual of d (both on W) equals its coefficient in the
    # full OLS of y on [1, W, d]. Reference: statsmodels OLS.
    rng = np.random.default_rng(11)
    n = 300
    W = rng.normal(size=(n, 4))
    d = W @ np.array([0.5, -0.2, 0.0, 1.0]) + rng.normal(size=n)
    y = 2.0 + W @ np.array([1.0, 0.3, -0.7, 0.2]) + 0.8 * d + rng.normal(size=n)
    nuisance = PenalisedLS().fit([Block("(intercept)", np.ones((n, 1)), ()), Block("w", W, ())], y)
    ry, rd = double_residuals(nuisance, y, d[:, None])
    theta = float(rd[:, 0] @ ry / (rd[:, 0] @ rd[:, 0]))
    full = sm.OLS(y, np.column_stack([np.ones(n), W, d])).fit()
    assert theta == pytest.approx(full.params[-1], abs=1e-8)


def test_robinson_double_residual_removes_the_bias_of_a_linear_control() -> None:
    # Robinson (1988, Econometrica 56(4)): in y = d theta + g(z) + e with d correlated with a
    # non-linear g(z), partialling both y and d out on a smoother in z is consistent for theta,
    # while OLS of y on d and a linear z is biased. Tolerances chosen for n = 3000, noise sd 0.5.
    rng = np.random.default_rng(12)
    n, theta = 3000, 0.5
    z = rng.uniform(-2.0, 2.0, n)
    g = 1.5 * np.sin(2.0 * z) + z**2
    d = np.sin(2.0 * z) + 0.5 * z**2 + rng.normal(0.0, 0.5, n)
    y = theta * d + g + rng.normal(0.0, 0.5, n)
    spec = DesignSpec.learn(z[:, None], [feature("z")], n_basis=20)
    smoother = PenalisedLS().fit(spec.blocks(z[:, None]), y)
    ry, rd = double_residuals(smoother, y, d[:, None])
    robinson = float(rd[:, 0] @ ry / (rd[:, 0] @ rd[:, 0]))
    naive = sm.OLS(y, sm.add_constant(np.column_stack([d, z]))).fit().params[1]
    assert abs(robinson - theta) < 0.05
    assert abs(naive - theta) > 0.5


def planted(seed: int = 13, n: int = 2000) -> tuple[np.ndarray, np.ndarray, list[SimpleNamespace]]:
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.uniform(0, 1, n), rng.uniform(0, 1, n), rng.uniform(0, 1, n), rng.integers(0, 2, n)])
    feats = [feature("a"), feature("b"), feature("c"), feature("w", "binary")]
    za, zb = (X[:, 0] - 0.5) / np.sqrt(1 / 12), (X[:, 1] - 0.5) / np.sqrt(1 / 12)
    y = np.sin(3 * X[:, 0]) + X[:, 1] ** 2 + 0.5 * X[:, 2] + 0.2 * X[:, 3] + 0.15 * za * zb + rng.normal(0, 0.3, n)
    return X, y, feats


@pytest.mark.parametrize("rule", ["lasso", "significance"])
def test_selection_finds_the_planted_pair_and_not_a_null_one(rule: str) -> None:
    # Simulation with a known truth: only a:b interacts (product of standardised a and b, 0.15 on the
    # log scale, noise sd 0.3, n = 2000); the strongest selected pair must be a:b and c:w must be out.
    X, y, feats = planted()
    spec = DesignSpec.learn(X, feats, n_basis=10)
    smoother = PenalisedLS().fit(spec.blocks(X), y)
    pairs = candidate_pairs(feats)
    chosen = select_interactions(
        smoother, y, spec.products(X, pairs), pairs, rule=rule, max_interactions=4
    )
    assert chosen[0] == ("a", "b")
    assert ("c", "w") not in chosen


def test_lasso_rule_keeps_the_pairs_a_bonferroni_corrected_ols_t_test_keeps() -> None:
    # Frisch-Waugh-Lovell (coefficients and residuals of the partialled regression equal the full OLS's)
    # with an unpenalised linear nuisance: the joint t-tests on the double residuals must be those of
    # statsmodels OLS of y on [1, W, Z], and a pair is kept iff p * m < alpha (Bonferroni), strongest |t| first.
    rng = np.random.default_rng(15)
    n, m = 400, 6
    W = rng.normal(size=(n, 2))
    Z = rng.normal(size=(n, m)) + 0.3 * W[:, :1]
    y = W @ np.array([1.0, -0.5]) + Z @ np.array([0.25, 0.0, 0.12, 0.0, 0.0, 0.08]) + rng.normal(0.0, 1.0, n)
    nuisance = PenalisedLS().fit([Block("(intercept)", np.ones((n, 1)), ()), Block("w", W, ())], y)
    pairs = [(f"p{j}", "q") for j in range(m)]
    chosen = select_interactions(nuisance, y, Z, pairs, rule="lasso", max_interactions=m, alpha=0.05)
    ref = sm.OLS(y, np.column_stack([np.ones(n), W, Z])).fit()
    t, p = np.abs(ref.tvalues[3:]), ref.pvalues[3:]
    expected = [pairs[j] for j in np.argsort(-t) if p[j] * m < 0.05]
    assert chosen == expected
    assert 0 < len(expected) < m  # the data leave both kept and rejected pairs, so the check can fail


def test_selection_is_deterministic_and_respects_the_cap_and_none() -> None:
    X, y, feats = planted(seed=14)
    spec = DesignSpec.learn(X, feats, n_basis=10)
    smoother = PenalisedLS().fit(spec.blocks(X), y)
    pairs = candidate_pairs(feats)
    prods = spec.products(X, pairs)

    def run(rule: str, cap: int) -> list[tuple[str, str]]:
        return select_interactions(smoother, y, prods, pairs, rule=rule, max_interactions=cap)

    assert run("lasso", 4) == run("lasso", 4)
    assert run("lasso", 1) == [("a", "b")]
    assert run("none", 4) == []


def test_candidates_exclude_categorical_and_check_explicit_lists() -> None:
    feats = [feature("a"), feature("k", "categorical", ("x", "y")), feature("b"), feature("w", "binary")]
    assert candidate_pairs(feats) == [("a", "b"), ("a", "w"), ("b", "w")]
    assert candidate_pairs(feats, [["b", "a"]]) == [("b", "a")]
    with pytest.raises(ValueError, match="unknown feature 'zz'"):
        candidate_pairs(feats, [["a", "zz"]])
    with pytest.raises(ValueError, match="categorical"):
        candidate_pairs(feats, [["a", "k"]])
