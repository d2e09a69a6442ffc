"""Shape rules: monotone curves on a fine grid, agreement with the free fit on a monotone truth, scikit-learn's
isotonic regression, and the total curve of every segment in the hierarchy."""

from types import SimpleNamespace

import numpy as np
import pytest
from sklearn.isotonic import IsotonicRegression

from reval.model.design import DesignSpec
from reval.model.hierarchy import fit_hierarchy
from reval.model.penalised import PenalisedLS, column_slices
from reval.model.settings import ModelSettings
from reval.model.shape import shape_constraint

FINE = 2000  # grid points where monotonicity is checked
SLACK = 1e-5  # the rule is imposed at 64 points per curve; between them a wrong-way step of at most this much log
#               value (a thousandth of a percent) may remain where layers with different knots add up


def feature(shape: str, kind: str = "continuous", levels: tuple[str, ...] = ()) -> SimpleNamespace:
    return SimpleNamespace(name="x", kind=kind, log=False, levels=levels, shape=shape)


def one_curve(x: np.ndarray, y: np.ndarray, shape: str, lambdas: list[float] | None = None) -> tuple[DesignSpec, PenalisedLS]:
    spec = DesignSpec.learn(x[:, None], [feature(shape)], n_basis=12)
    blocks = spec.blocks(x[:, None])
    constraint = shape_constraint(spec, *column_slices(blocks))
    return spec, PenalisedLS(lambdas=lambdas, gamma=1.4).fit(blocks, y, constraint=constraint)


def curve(spec: DesignSpec, model: PenalisedLS, grid: np.ndarray) -> np.ndarray:
    return spec.term_columns("x", grid) @ model.coef_[model.slices_["x"]]


@pytest.mark.parametrize("shape, sign", [("increasing", 1.0), ("decreasing", -1.0)])
def test_a_shaped_curve_never_turns_on_a_fine_grid(shape: str, sign: float) -> None:
    # Truth rises, then stays flat; a few sales at the thin right edge are keyed low, so the free fit swings the
    # wrong way there (checked below, so the test can fail) where the shaped one flattens.
    rng = np.random.default_rng(12)
    x = np.r_[rng.uniform(0.0, 8.0, 300), rng.uniform(9.0, 10.0, 5)]
    y = sign * (0.1 * np.minimum(x, 3.0) - np.where(x > 9.0, 0.5, 0.0)) + rng.normal(0.0, 0.1, len(x))
    grid = np.linspace(0.0, 10.0, FINE)
    spec, free = one_curve(x, y, "free", lambdas=[0.05])
    assert (sign * np.diff(curve(spec, free, grid))).min() < -1e-3
    spec, shaped = one_curve(x, y, shape, lambdas=[0.05])
    edge = curve(spec, shaped, np.array([8.0, 10.0]))
    assert sign * (edge[1] - edge[0]) == pytest.approx(0.0, abs=0.01)  # flat at the edge, not swinging
    assert (sign * np.diff(curve(spec, shaped, grid))).min() >= -SLACK


def test_on_a_monotone_truth_the_shaped_and_free_fits_agree() -> None:
    rng = np.random.default_rng(5)
    x = rng.uniform(0.0, 10.0, 500)
    y = np.log1p(x) + rng.normal(0.0, 0.1, 500)
    grid = np.linspace(0.0, 10.0, 200)
    spec, free = one_curve(x, y, "free")
    _, shaped = one_curve(x, y, "increasing")
    assert np.abs(curve(spec, shaped, grid) - curve(spec, free, grid)).max() < 0.01


def test_an_ordinal_rule_without_penalty_is_isotonic_regression() -> None:
    # Reference library: scikit-learn's IsotonicRegression is the least-squares non-decreasing fit of y on x; for
    # x taking a few levels it fits the level means, pooling adjacent violators. With no penalty our ordinal
    # effect under the rule is the same problem (intercept + one effect per level), so the fitted values agree
    # (to 1e-6: our system carries a 1e-9 relative ridge).
    rng = np.random.default_rng(8)
    level = rng.integers(0, 6, 400).astype(float)
    truth = np.array([0.0, 0.1, 0.08, 0.25, 0.24, 0.4])  # two small reversals, which the data may or may not show
    y = truth[level.astype(int)] + rng.normal(0.0, 0.1, 400)
    spec = DesignSpec.learn(level[:, None], [feature("increasing", "ordinal", tuple("abcdef"))], n_basis=12)
    blocks = spec.blocks(level[:, None])
    model = PenalisedLS(lambdas=[0.0]).fit(blocks, y, constraint=shape_constraint(spec, *column_slices(blocks)))
    ours = model.design_ @ model.coef_
    reference = IsotonicRegression().fit(level, y).predict(level)
    np.testing.assert_allclose(ours, reference, atol=1e-6)
    free = PenalisedLS(lambdas=[0.0]).fit(blocks, y)
    assert np.abs(free.design_ @ free.coef_ - reference).max() > 1e-3  # the data do reverse: the rule acts


def test_a_continuous_rule_tracks_isotonic_regression() -> None:
    # scikit-learn's IsotonicRegression on a one-feature case with a monotone truth: our monotone P-spline is
    # smooth where isotonic regression is a staircase, so they agree to within the noise (mean absolute gap
    # below a third of the noise sd) and the spline is the closer to the truth.
    rng = np.random.default_rng(2)
    x = rng.uniform(0.0, 10.0, 600)
    truth = 0.3 * np.tanh(x - 5.0)
    y = truth + rng.normal(0.0, 0.1, 600)
    spec, shaped = one_curve(x, y, "increasing")
    ours = shaped.design_ @ shaped.coef_
    iso = IsotonicRegression().fit(x, y).predict(x)
    assert np.mean(np.abs(ours - iso)) < 0.1 / 3
    assert np.sqrt(np.mean((ours - truth) ** 2)) < np.sqrt(np.mean((iso - truth) ** 2))


FEATURES = [SimpleNamespace(name="area", kind="continuous", log=True, levels=(), shape="increasing"),
            SimpleNamespace(name="grade", kind="ordinal", log=False, levels=("low", "mid", "high", "top"),
                            shape="increasing")]


def town(seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Two market areas, segments with steep, flat and thin living-area slopes; one segment's data turn down."""
    rng = np.random.default_rng(seed)
    sizes = {"a1": 300, "a2": 200, "a3": 12, "b1": 250, "b2": 40}
    seg = np.repeat(list(sizes), list(sizes.values()))
    ma = np.where(np.char.startswith(seg.astype(str), "a"), "A", "B")
    n = len(seg)
    area = np.exp(rng.normal(np.log(1600), 0.35, n))
    grade = rng.integers(0, 4, n).astype(float)
    slope = np.select([seg == "a1", seg == "a2"], [0.9, 0.25], 0.6)
    u = np.log(area / 1600)
    dip = np.where(seg == "b2", -1.2 * np.maximum(u - 0.3, 0.0), 0.0)  # b2's largest houses sell for less
    y = 12.0 + slope * u + dip + 0.07 * grade + rng.normal(0.0, 0.1, n)
    return np.column_stack([area, grade]), y, seg.astype(str), ma


def test_every_segments_total_curve_obeys_the_rule_and_a_flatter_segment_keeps_its_slope() -> None:
    # The rule holds for the sum of the layers (jurisdiction + market area + segment), not for each layer: segment
    # a2's true slope (0.25) is far below its market area's, so its deviation must be free to decrease.
    X, y, seg, ma = town(4)
    settings = ModelSettings(folds=5, interaction_rule="none", loss="squared")  # the rule alone (Huber would
    model = fit_hierarchy(X, y, seg, ma, FEATURES, settings)  # also discount b2's few large sales)
    for name in ("a1", "a2", "a3", "b1", "b2"):
        c = model.curves(name, "area", n_points=FINE)
        assert np.diff(c.effect.to_numpy()).min() >= -SLACK, name
        levels = model.curves(name, "grade")
        assert np.diff(levels.effect.to_numpy()).min() >= -SLACK, name
    flat = model.curves("a2", "area", n_points=50)
    slope = np.polyfit(np.log(flat.x / 1600), flat.effect, 1)[0]
    assert slope == pytest.approx(0.25, abs=0.1)
    free = [SimpleNamespace(**{**vars(f), "shape": "free"}) for f in FEATURES]
    loose = fit_hierarchy(X, y, seg, ma, free, settings)
    effect = loose.curves("b2", "area", n_points=FINE).effect.to_numpy()
    assert (np.maximum.accumulate(effect) - effect).max() > 0.02  # the free curve turns down: the rule acted
