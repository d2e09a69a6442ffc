"""Outlier-resistant fitting: Huber IRLS against statsmodels' RLM, deleted residuals against leave-one-out refits,
and a lone keyed error at the edge of the data."""

from types import SimpleNamespace

import numpy as np
import pytest
import statsmodels.api as sm

from reval.model.design import Block, DesignSpec
from reval.model.penalised import PenalisedLS
from reval.model.robust import Huber, huber_weights, mad_scale, own_weight_leverage, refine


def linear_data(seed: int = 6, n: int = 300) -> tuple[np.ndarray, np.ndarray]:
    """A linear model with heavy-tailed noise and a few gross errors, the case robust regression is for."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = 2.0 + X @ np.array([0.5, -1.0, 0.25]) + 0.3 * rng.standard_t(3, n)
    y[rng.choice(n, 12, replace=False)] += rng.choice([-4.0, 4.0], 12)
    return X, y


def test_reweighted_fit_without_penalty_equals_statsmodels_rlm() -> None:
    # Reference library: statsmodels RLM with the HuberT norm (t = 1.345) and its default scale, the MAD of the
    # residuals about 0 divided by 0.6745, re-estimated at every step (statsmodels.robust.robust_linear_model).
    # With no penalty and plain residuals our loop is the same IRLS; both iterate to convergence, so the
    # coefficients, weights and scale must agree to 1e-7.
    X, y = linear_data()
    n = len(y)
    blocks = [Block("(intercept)", np.ones((n, 1)), ()), Block("x", X, ())]
    ours = refine(PenalisedLS().fit(blocks, y), Huber(k=1.345, leverage=False), max_iter=500, tol=1e-13)
    ref = sm.RLM(y, sm.add_constant(X), M=sm.robust.norms.HuberT(t=1.345)).fit(maxiter=500, tol=1e-14)
    np.testing.assert_allclose(ours.smoother.coef_, ref.params, atol=1e-7)
    np.testing.assert_allclose(ours.weights, ref.weights, atol=1e-7)
    assert ours.scale == pytest.approx(ref.scale, rel=1e-7)
    assert (ours.weights < 1).sum() >= 12  # the planted errors are down-weighted


def test_huber_weights_and_scale_match_statsmodels() -> None:
    # statsmodels.robust.norms.HuberT.weights and statsmodels.robust.scale.mad(center=0).
    u = np.linspace(-6.0, 6.0, 121)
    np.testing.assert_allclose(huber_weights(u, 1.345), sm.robust.norms.HuberT(t=1.345).weights(u), atol=1e-15)
    r = np.random.default_rng(1).standard_t(4, 501)
    assert mad_scale(r) == pytest.approx(sm.robust.scale.mad(r, center=0), rel=1e-12)


def test_deleted_residuals_equal_leave_one_out_refits() -> None:
    # The leave-one-out identity of a linear smoother with fixed penalties: y_i - f_(-i)(x_i) = r_i / (1 - h_ii),
    # h_ii the hat matrix diagonal (Wood 2017, Generalized Additive Models, section 6.2; from memory). Checked with
    # weights by refitting without each of several rows.
    rng = np.random.default_rng(9)
    n = 150
    x = rng.uniform(0.0, 10.0, n)
    y = np.sin(x) + rng.normal(0.0, 0.2, n)
    w = rng.uniform(0.3, 1.0, n)
    feature = SimpleNamespace(name="x", kind="continuous", log=False, levels=())
    spec = DesignSpec.learn(x[:, None], [feature], n_basis=12)
    blocks = spec.blocks(x[:, None])
    fitted = PenalisedLS(lambdas=[3.0]).fit(blocks, y, weights=w)
    deleted = fitted.resid_ / (1.0 - fitted.leverage())
    for i in (0, 17, int(np.argmax(x)), int(np.argmin(x))):
        keep = np.arange(n) != i
        without = PenalisedLS(lambdas=[3.0]).fit([Block(b.term, b.columns[keep], b.penalties) for b in blocks],
                                                  y[keep], weights=w[keep])
        prediction = without.predict([Block(b.term, b.columns[i:i + 1], b.penalties) for b in blocks])[0]
        assert deleted[i] == pytest.approx(y[i] - prediction, rel=1e-6)


def test_the_leverage_after_one_weight_moves_is_exact() -> None:
    # Sherman-Morrison (textbook): moving one row's weight changes (X'WX + S) by a rank-one term, so its own
    # leverage after the move follows from its leverage factor before it; checked against a refit.
    rng = np.random.default_rng(4)
    x = rng.uniform(0.0, 10.0, 120)
    y = np.sin(x) + rng.normal(0.0, 0.2, 120)
    feature = SimpleNamespace(name="x", kind="continuous", log=False, levels=())
    spec = DesignSpec.learn(x[:, None], [feature], n_basis=12)
    before = PenalisedLS(lambdas=[2.0]).fit(spec.blocks(x[:, None]), y)
    for i, w in ((int(np.argmax(x)), 0.05), (7, 0.4)):
        weights = np.ones(len(y))
        weights[i] = w
        after = before.refit(weights)
        predicted = own_weight_leverage(before.leverage_factors(), np.ones(len(y)), weights)
        assert predicted[i] == pytest.approx(after.leverage()[i], rel=1e-9)


def edge_error_data() -> tuple[np.ndarray, np.ndarray, int]:
    """A smooth rising curve sampled at 200 points in [1, 10] and one sale far below the rest at x = 0.2,
    priced as if at x = 10: a living area keyed a tenth of the truth."""
    rng = np.random.default_rng(3)
    x = np.r_[rng.uniform(1.0, 10.0, 200), 0.2]
    y = np.log1p(x) + rng.normal(0.0, 0.1, 201)
    y[-1] = np.log1p(10.0)
    return x, y, 200


def test_a_lone_keyed_error_at_the_edge_is_judged_without_itself() -> None:
    # The spline bends to a lone sale at the edge, so its plain residual is small and Huber weights on it keep
    # the sale (masking); its deleted residual is not small, so it loses its weight. (Where it then lies outside
    # the range of the sales that count, the hierarchy clamps the curve: tests/test_keying_errors.py.)
    x, y, bad = edge_error_data()
    feature = SimpleNamespace(name="x", kind="continuous", log=False, levels=())
    spec = DesignSpec.learn(x[:, None], [feature], n_basis=12)
    smoother = PenalisedLS(gamma=1.4).fit(spec.blocks(x[:, None]), y)
    assert abs(smoother.predict(spec.blocks(np.array([[0.2]])))[0] - np.log1p(0.2)) > 1.0  # bent to the error
    plain = refine(smoother, Huber(leverage=False))
    deleted = refine(smoother, Huber())
    assert plain.weights[bad] > 0.5
    assert deleted.weights[bad] < 0.1
    assert deleted.residual[bad] > 1.5  # the price lies far above what the others say a tiny house is worth


def test_vouched_sales_keep_full_weight() -> None:
    x, y, bad = edge_error_data()
    feature = SimpleNamespace(name="x", kind="continuous", log=False, levels=())
    spec = DesignSpec.learn(x[:, None], [feature], n_basis=12)
    fixed = np.zeros(len(y), dtype=bool)
    fixed[bad] = True
    refined = refine(PenalisedLS(gamma=1.4).fit(spec.blocks(x[:, None]), y), Huber(), fixed=fixed)
    assert refined.weights[bad] == 1.0
    assert (refined.weights[~fixed] <= 1.0).all()
