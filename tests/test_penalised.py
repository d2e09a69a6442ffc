"""Penalised least squares: against pygam, statsmodels OLS, the explicit hat matrix, and per-column refits."""

from types import SimpleNamespace

import numpy as np
import pytest
import statsmodels.api as sm
from pygam import LinearGAM, s

from reval.model.design import Block, DesignSpec
from reval.model.penalised import PenalisedLS, _Problem, stack


def feature(name: str, kind: str = "continuous", log: bool = False, levels: tuple[str, ...] = ()) -> SimpleNamespace:
    return SimpleNamespace(name=name, kind=kind, log=log, levels=levels)


def smooth_data(n: int = 400, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.0, 10.0, n)
    return x, np.sin(x) + 0.1 * x + rng.normal(0.0, 0.3, n)


@pytest.mark.parametrize("lam", [0.1, 1.0, 30.0])
def test_single_smooth_matches_pygam(lam: float) -> None:
    # Reference library: pygam LinearGAM with s(0, n_splines=20, lam) uses the same P-spline (equally
    # spaced cubic B-splines over the data range, second-difference penalty) and an intercept. Our
    # curve is centred (sum-to-zero), which spans the same space and leaves the penalty unchanged,
    # so fitted values and edf must agree; pygam adds a sqrt(machine eps) ridge, hence 1e-6.
    x, y = smooth_data()
    ours = DesignSpec.learn(x[:, None], [feature("x")], n_basis=20)
    model = PenalisedLS(lambdas=[lam]).fit(ours.blocks(x[:, None]), y)
    ref = LinearGAM(s(0, n_splines=20, lam=lam)).fit(x[:, None], y)
    fitted = model.design_ @ model.coef_
    np.testing.assert_allclose(fitted, ref.predict(x[:, None]), atol=1e-6)
    assert model.edf_ == pytest.approx(ref.statistics_["edof"], abs=1e-6)


def test_unpenalised_fit_is_ols() -> None:
    # Reference library: with no penalty the estimator is OLS; statsmodels gives coefficients, sigma^2
    # and the covariance sigma^2 (X'X)^-1 (Wood 2017: the Bayesian covariance reduces to it).
    rng = np.random.default_rng(4)
    X = rng.normal(size=(200, 3))
    y = 1.0 + X @ np.array([0.5, -1.0, 2.0]) + rng.normal(0.0, 0.5, 200)
    blocks = [Block("(intercept)", np.ones((200, 1)), ()), Block("x", X, ())]
    ours = PenalisedLS().fit(blocks, y)
    ref = sm.OLS(y, sm.add_constant(X)).fit()
    np.testing.assert_allclose(ours.coef_, ref.params, atol=1e-8)
    np.testing.assert_allclose(ours.cov_, ref.cov_params(), rtol=1e-6)
    assert ours.sigma2_ == pytest.approx(ref.scale, rel=1e-8)
    assert ours.edf_ == pytest.approx(4.0, abs=1e-6)


@pytest.mark.parametrize("gamma", [1.0, 1.4])
def test_gcv_edf_and_covariance_match_the_explicit_hat_matrix(gamma: float) -> None:
    # Definitions (Wood 2017, sections 6.1-6.2): H = X (X'X + S)^-1 X', edf = tr H,
    # GCV = n RSS / (n - gamma tr H)^2 (gamma = 1 is plain GCV; Kim & Gu 2004 for gamma > 1),
    # Bayesian covariance sigma^2 (X'X + S)^-1 with sigma^2 = RSS / (n - tr H).
    x, y = smooth_data(300, seed=5)
    spec = DesignSpec.learn(x[:, None], [feature("x")], n_basis=15)
    blocks = spec.blocks(x[:, None])
    model = PenalisedLS(gamma=gamma).fit(blocks, y)
    X, _, _ = stack(blocks)
    S = np.zeros((X.shape[1], X.shape[1]))
    S[1:, 1:] = model.lambdas_[0] * blocks[1].penalties[0]
    A = X.T @ X + S
    H = X @ np.linalg.solve(A, X.T)
    rss = float(np.sum((y - H @ y) ** 2))
    n = len(y)
    assert model.edf_ == pytest.approx(np.trace(H), rel=1e-6)
    assert model.gcv_ == pytest.approx(n * rss / (n - gamma * np.trace(H)) ** 2, rel=1e-6)
    np.testing.assert_allclose(model.cov_, rss / (n - np.trace(H)) * np.linalg.inv(A), rtol=1e-5, atol=1e-12)


def test_gcv_choice_is_the_minimum_over_a_fine_grid() -> None:
    # The search must land within the grid's resolution of the GCV minimum of a single smooth.
    x, y = smooth_data(300, seed=6)
    spec = DesignSpec.learn(x[:, None], [feature("x")], n_basis=20)
    blocks = spec.blocks(x[:, None])
    chosen = PenalisedLS().fit(blocks, y).gcv_
    fine = [PenalisedLS(lambdas=[lam]).fit(blocks, y).gcv_ for lam in np.logspace(-4, 6, 81)]
    assert chosen <= min(fine) * (1 + 1e-3)


@pytest.mark.parametrize("n", [200, 15])
def test_gcv_along_a_line_matches_the_explicit_hat_matrix(n: int) -> None:
    # Definitions (Wood 2017, sections 6.1-6.2): with A = X'X + sum_j lam_j S_j, H = X A^-1 X',
    # GCV = n RSS / (n - gamma tr H)^2. The search scores a whole line of one penalty (or of all together)
    # from one factorisation; every point must equal the direct computation, also with fewer rows than
    # columns (n = 15 on 23 columns), where X'X is singular and a small penalty leaves no degrees of freedom.
    rng = np.random.default_rng(11)
    X = rng.uniform(0.0, 1.0, (n, 2))
    y = np.sin(5 * X[:, 0]) + X[:, 1] + rng.normal(0.0, 0.2, n)
    spec = DesignSpec.learn(X, [feature("a"), feature("b")], n_basis=12, deviation=True)
    blocks = spec.blocks(X)
    design, _, penalties = stack(blocks)
    p = design.shape[1]
    gram = design.T @ design
    jitter = 1e-9 * np.trace(gram) / p * np.eye(p)
    problem = _Problem(gram, design.T @ y, float(y @ y), n, penalties, jitter, 1.4)
    full = np.zeros((len(penalties), p, p))
    for i, pen in enumerate(penalties):
        full[i, pen.cols, pen.cols] = pen.matrix

    def direct(lambdas: np.ndarray) -> float:
        A = gram + jitter + np.tensordot(lambdas, full, axes=1)
        H = design @ np.linalg.solve(A, design.T)
        rss = float(np.sum((y - H @ y) ** 2))
        dof = n - 1.4 * np.trace(H)
        return n * rss / dof**2 if dof > 0 else np.inf  # no residual degrees of freedom left: ruled out

    rho = np.array([-3.0, 0.0, 2.5])
    fixed = rng.uniform(0.5, 5.0, len(penalties))
    fixed[2] = 0.0
    direction = np.zeros(len(penalties))
    direction[2] = 3.0
    expected = [direct(fixed + 10.0**r * direction) for r in rho]
    np.testing.assert_allclose(problem.line(fixed, direction, rho), expected, rtol=1e-7)
    together = np.ones(len(penalties))
    expected = [direct(10.0**r * together) for r in rho]
    np.testing.assert_allclose(problem.line(np.zeros(len(penalties)), together, rho), expected, rtol=1e-7)


def test_infinite_penalty_leaves_a_straight_line() -> None:
    # Eilers & Marx (1996): as lambda grows, a second-difference P-spline tends to a straight line
    # (the penalty's null space); after centring that is one effective degree of freedom.
    x, y = smooth_data(300, seed=7)
    spec = DesignSpec.learn(x[:, None], [feature("x")], n_basis=20)
    model = PenalisedLS(lambdas=[1e10]).fit(spec.blocks(x[:, None]), y)
    assert model.edf_terms_["x"] == pytest.approx(1.0, abs=1e-3)
    grid = np.linspace(0.5, 9.5, 30)
    curve = spec.term_columns("x", grid) @ model.coef_[model.slices_["x"]]
    np.testing.assert_allclose(np.diff(curve, 2), 0.0, atol=1e-5)


def test_residualise_matches_per_candidate_refits() -> None:
    # docs/model.md, section 1, point 6: Z - HZ with the one factorisation equals refitting the smoother to each
    # column (H does not depend on the response); measured there to 4e-13 (the speed-up is measured by
    # bench/model_speed.py).
    rng = np.random.default_rng(8)
    n = 1500
    X = np.column_stack([rng.uniform(0, 1, n), rng.uniform(0, 1, n), rng.integers(0, 4, n)])
    feats = [feature("a"), feature("b"), feature("q", "ordinal", levels=("w", "x", "y", "z"))]
    spec = DesignSpec.learn(X, feats, n_basis=12)
    blocks = spec.blocks(X)
    y = np.sin(4 * X[:, 0]) + X[:, 1] ** 2 + 0.1 * X[:, 2] + rng.normal(0, 0.2, n)
    model = PenalisedLS().fit(blocks, y)
    Z = rng.normal(size=(n, 60)) + X[:, :1]
    shared = model.residualise(Z)
    refits = np.column_stack(
        [Z[:, j] - PenalisedLS(lambdas=model.lambdas_).fit(blocks, Z[:, j]).predict(blocks) for j in range(Z.shape[1])]
    )
    np.testing.assert_allclose(shared, refits, atol=1e-10)


def test_offset_is_subtracted_before_fitting() -> None:
    # Fitting y with offset o equals fitting y - o with no offset (definition of an offset).
    x, y = smooth_data(200, seed=9)
    spec = DesignSpec.learn(x[:, None], [feature("x")], n_basis=10)
    blocks = spec.blocks(x[:, None])
    offset = 0.3 * x
    a = PenalisedLS(lambdas=[2.0]).fit(blocks, y, offset)
    b = PenalisedLS(lambdas=[2.0]).fit(blocks, y - offset)
    np.testing.assert_allclose(a.coef_, b.coef_, atol=1e-12)
    np.testing.assert_allclose(a.predict(blocks, offset), b.predict(blocks) + offset, atol=1e-12)


# ---------------------------------------------------------------- design blocks


def design_data(n: int = 500, seed: int = 10) -> tuple[np.ndarray, list[SimpleNamespace]]:
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.lognormal(7.0, 0.4, n), rng.integers(0, 4, n), rng.integers(0, 3, n),
                         rng.integers(0, 2, n)])
    X[:5, 0] = 0.0  # e.g. no lot: handled by the log floor
    X[5:20, 1] = np.nan
    feats = [feature("area", log=True), feature("grade", "ordinal", levels=("a", "b", "c", "d")),
             feature("kind", "categorical", levels=("p", "q", "r")), feature("pool", "binary")]
    return X.astype(float), feats


def test_every_term_averages_zero_over_the_training_rows() -> None:
    # Sum-to-zero identifiability constraint (Wood 2017, section 5.4.1): each block's columns have
    # mean zero over the training rows, so the intercept is the mean fitted value.
    X, feats = design_data()
    spec = DesignSpec.learn(X, feats, n_basis=10)
    blocks = spec.blocks(X)
    assert [b.term for b in blocks] == ["(intercept)", "area", "grade", "kind", "pool"]
    for b in blocks[1:]:
        np.testing.assert_allclose(b.columns.mean(axis=0), 0.0, atol=1e-12)
    widths = {b.term: b.columns.shape[1] for b in blocks}
    assert widths == {"(intercept)": 1, "area": 9, "grade": 3, "kind": 2, "pool": 1}
    assert blocks[0].penalties == () and blocks[4].penalties == ()  # intercept and binary unpenalised


def test_imputation_log_floor_and_clamping_follow_the_training_rows() -> None:
    X, feats = design_data()
    spec = DesignSpec.learn(X, feats, n_basis=10)
    area, grade, kind, pool = spec.transforms
    assert area.impute == np.median(X[:, 0])  # training median (no missing areas here)
    assert grade.impute in (0.0, 1.0, 2.0, 3.0)  # an ordinal is imputed with a level
    assert kind.impute == np.bincount(X[:, 2].astype(int)).argmax()  # most frequent level
    positive = X[X[:, 0] > 0, 0]
    assert area.log_floor == positive.min()
    T = spec.transformed(X)
    np.testing.assert_allclose(T[:5, 0], np.log(positive.min()))
    assert not np.isnan(T).any()
    beyond = spec.term_columns("area", np.array([X[:, 0].max() * 10, X[:, 0].max()]))
    np.testing.assert_array_equal(beyond[0], beyond[1])  # clamped to the training range


def test_products_are_capped_and_categorical_refused() -> None:
    # docs/model.md, section 1, point 4: standardised values are capped at +/-2.5 before forming products.
    X, feats = design_data()
    spec = DesignSpec.learn(X, feats, n_basis=10)
    Z = spec.standardised(X)
    assert Z.max() <= 2.5 and Z.min() >= -2.5
    extreme = X[:1].copy()
    extreme[0, 0] = 1e9
    np.testing.assert_allclose(spec.products(extreme, [("area", "pool")]), 2.5 * spec.standardised(extreme)[:, 3:4])
    with pytest.raises(ValueError, match="categorical"):
        spec.products(X, [("area", "kind")])


def test_a_deviation_design_is_penalised_in_every_direction() -> None:
    # A deviation shrinks toward zero: the summed penalties must be positive definite (Marra & Wood
    # 2011 double penalty for curves; ridge on intercept and binary columns).
    X, feats = design_data()
    spec = DesignSpec.learn(X, feats, n_basis=8, deviation=True)
    for b in spec.blocks(X, [("area", "pool")]):
        total = sum(b.penalties)
        assert np.linalg.eigvalsh(total).min() > 1e-8, b.term
