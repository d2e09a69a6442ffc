"""Tests of the reference models: OLS design and pooling against statsmodels, same-fold
cross-validation, boosting determinism, permutation importance and the accuracy table."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from sklearn.preprocessing import PolynomialFeatures, StandardScaler

from reval.stats import ratio_stats
from reval.model.references import (
    ALL_SEGMENTS,
    GradientBoosting,
    HedonicOLS,
    PRODUCT_CAP,
    accuracy_table,
    compare_models,
    cross_validated_predictions,
    design_matrix,
    learn_design,
    permutation_importance,
    reference_factories,
)


@dataclass(frozen=True)
class Spec:
    name: str
    kind: str
    log: bool = False
    levels: tuple[str, ...] = ()


SPECS = [
    Spec("living_area", "continuous", log=True),
    Spec("age", "continuous"),
    Spec("quality", "ordinal", levels=("low", "fair", "good", "high")),
    Spec("roof", "categorical", levels=("shingle", "metal", "tile")),
    Spec("garage", "binary"),
]
TRUE = {"intercept": 10.5, "log(living_area)": 0.6, "age": -0.004, "quality": 0.08,
        "roof=metal": 0.05, "roof=tile": -0.03, "garage": 0.07}


def make_sales(n: int, rng: np.random.Generator) -> np.ndarray:
    """Feature matrix in the coding the models expect (codes 0..L-1, binary 0/1)."""
    return np.column_stack([
        rng.uniform(60, 300, n),
        rng.uniform(0, 90, n),
        rng.integers(0, 4, n),
        rng.integers(0, 3, n),
        rng.integers(0, 2, n),
    ]).astype(float)


def reference_design(X: np.ndarray) -> pd.DataFrame:
    """The hedonic design built independently with pandas (dummies with the first level dropped)."""
    frame = pd.DataFrame({"log(living_area)": np.log(X[:, 0]), "age": X[:, 1], "quality": X[:, 2]})
    roof = pd.Categorical.from_codes(X[:, 3].astype(int), categories=["shingle", "metal", "tile"])
    dummies = pd.get_dummies(roof, prefix="roof", prefix_sep="=", drop_first=True, dtype=float)
    return pd.concat([frame, dummies, pd.DataFrame({"garage": X[:, 4]})], axis=1)


def noise_free_price(X: np.ndarray) -> np.ndarray:
    design = reference_design(X)
    return TRUE["intercept"] + design.to_numpy() @ np.array([TRUE[c] for c in design.columns])


def test_noise_free_log_linear_prices_are_recovered_exactly():
    # Textbook OLS fact: with y exactly linear in a full-rank design, least squares returns the
    # generating coefficients (zero residual).
    rng = np.random.default_rng(1)
    X = make_sales(300, rng)
    y = noise_free_price(X)
    model = HedonicOLS(SPECS).fit(X, y, np.full(300, "Vellmarsh North"))
    got = model.coefficients("Vellmarsh North")
    assert list(model.fit_info_["fit"]) == ["own"]
    for name, value in TRUE.items():
        assert got[name] == pytest.approx(value, abs=1e-9)


def test_per_segment_coefficients_equal_statsmodels_on_an_independent_design():
    # Reference: statsmodels OLS and numpy lstsq on the design built with pandas get_dummies.
    rng = np.random.default_rng(2)
    X = make_sales(400, rng)
    y = noise_free_price(X) + rng.normal(0, 0.1, 400)
    segment = np.where(np.arange(400) < 250, "Harbour Flats", "Quarry Hill")
    model = HedonicOLS(SPECS).fit(X, y, segment)
    for name in ("Harbour Flats", "Quarry Hill"):
        rows = segment == name
        A = sm.add_constant(reference_design(X[rows]))
        expected = sm.OLS(y[rows], A).fit().params
        lstsq = np.linalg.lstsq(A.to_numpy(), y[rows], rcond=None)[0]
        got = model.coefficients(name)
        np.testing.assert_allclose(got.to_numpy(), expected.to_numpy(), rtol=0, atol=1e-9)
        np.testing.assert_allclose(got.to_numpy(), lstsq, rtol=0, atol=1e-9)
        assert list(got.index[1:]) == list(A.columns[1:])


def test_tiny_segment_is_pooled_with_segment_intercepts():
    # Frisch-Waugh-Lovell theorem: slopes from within-segment demeaning equal OLS with segment
    # dummies; reference fit is statsmodels OLS on [design, segment dummies] (no common intercept).
    rng = np.random.default_rng(3)
    X = make_sales(330, rng)
    segment = np.array(["Mill Lane"] * 150 + ["Reed Common"] * 170 + ["Saltgate"] * 10)
    shift = pd.Series(segment).map({"Mill Lane": 0.0, "Reed Common": 0.2, "Saltgate": -0.15}).to_numpy()
    y = noise_free_price(X) + shift + rng.normal(0, 0.05, 330)
    model = HedonicOLS(SPECS).fit(X, y, segment)
    info = model.fit_info_.set_index("segment")
    assert info.loc["Saltgate", "fit"] == "pooled"                 # 10 sales < 7 parameters + 10
    assert info.loc["Mill Lane", "fit"] == "own"
    assert model.pooled_segments_ == ("Saltgate",)
    dummies = pd.get_dummies(pd.Series(segment), dtype=float)
    A = pd.concat([reference_design(X), dummies], axis=1)
    reference = sm.OLS(y, A).fit()
    got = model.coefficients("Saltgate")
    np.testing.assert_allclose(got.iloc[1:].to_numpy(), reference.params.iloc[:6].to_numpy(), atol=1e-9)
    assert got["intercept"] == pytest.approx(reference.params["Saltgate"], abs=1e-9)
    tiny = segment == "Saltgate"
    np.testing.assert_allclose(model.predict(X[tiny], segment[tiny]), reference.predict(A[tiny]), atol=1e-9)


def test_unseen_segment_uses_the_sales_weighted_mean_intercept():
    # Common practice: a segment with no training sales gets the parent's average level.
    rng = np.random.default_rng(4)
    X = make_sales(200, rng)
    segment = np.array(["Mill Lane"] * 120 + ["Reed Common"] * 80)
    y = noise_free_price(X) + (segment == "Reed Common") * 0.3
    model = HedonicOLS(SPECS).fit(X, y, segment)
    got = model.predict(X[:5], np.full(5, "Fenwick End"))
    mean_shift = 0.3 * 80 / 200
    np.testing.assert_allclose(got, noise_free_price(X[:5]) + mean_shift, atol=1e-9)


def test_missing_values_take_training_median_and_mode():
    # Common practice: impute numeric features by the training median, categorical by the mode.
    rng = np.random.default_rng(5)
    X = make_sales(200, rng)
    X[:, 3] = np.where(np.arange(200) < 120, 2, X[:, 3])           # 'tile' is the clear mode
    y = noise_free_price(X) + rng.normal(0, 0.05, 200)
    segment = np.full(200, "Mill Lane")
    model = HedonicOLS(SPECS).fit(X, y, segment)
    gap = X[:3].copy()
    gap[:, [1, 3]] = np.nan
    filled = X[:3].copy()
    filled[:, 1], filled[:, 3] = np.median(X[:, 1]), 2
    np.testing.assert_allclose(model.predict(gap, segment[:3]), model.predict(filled, segment[:3]), atol=1e-12)


def test_quadratic_terms_match_scikit_learn_polynomial_features():
    # Reference: StandardScaler (population sd) + clip + sklearn PolynomialFeatures degree-2 terms.
    rng = np.random.default_rng(6)
    X = make_sales(250, rng)
    X[:5, 1] = 400.0                                                # beyond the cap after standardising
    design = learn_design(X, SPECS, quadratic=True)
    got = design_matrix(X, design)
    numeric = np.column_stack([np.log(X[:, 0]), X[:, 1], X[:, 2]])
    z = np.clip(StandardScaler().fit_transform(numeric), -PRODUCT_CAP, PRODUCT_CAP)
    second = PolynomialFeatures(degree=2, include_bias=False).fit_transform(z)[:, 3:]
    linear = reference_design(X).to_numpy()
    np.testing.assert_allclose(got, np.hstack([linear, second]), atol=1e-12)


def test_quadratic_model_pools_when_parameters_outgrow_the_sales():
    # 3 numeric terms -> 6 squares/products; 12 columns + intercept = 13 parameters need 23 sales.
    rng = np.random.default_rng(7)
    X = make_sales(220, rng)
    segment = np.array(["Mill Lane"] * 200 + ["Saltgate"] * 20)
    y = noise_free_price(X) + rng.normal(0, 0.05, 220)
    model = HedonicOLS(SPECS, quadratic=True).fit(X, y, segment)
    info = model.fit_info_.set_index("segment")
    assert info.loc["Saltgate", "fit"] == "pooled" and info.loc["Saltgate", "n_parameters"] == 13
    assert info.loc["Mill Lane", "fit"] == "own"
    assert "log(living_area)*age" in model.coefficients("Mill Lane").index


def test_out_of_fold_prediction_never_sees_its_own_sale():
    # Definition of k-fold cross-validation (Hastie, Tibshirani & Friedman, ESL 7.10): the
    # prediction for a row comes from a model fitted without the row's fold.
    rng = np.random.default_rng(8)
    X = make_sales(300, rng)
    y = noise_free_price(X) + rng.normal(0, 0.1, 300)
    segment = np.where(np.arange(300) % 3 == 0, "Harbour Flats", "Quarry Hill")
    folds = rng.permutation(np.arange(300) % 5)
    factory = lambda: HedonicOLS(SPECS)  # noqa: E731
    before = cross_validated_predictions(factory, X, y, segment, folds)
    changed = y.copy()
    changed[0] += 25.0
    after = cross_validated_predictions(factory, X, changed, segment, folds)
    same_fold = folds == folds[0]
    np.testing.assert_array_equal(after[same_fold], before[same_fold])
    # Per-segment OLS: the change reaches the other folds of row 0's segment, and nothing else.
    others = ~same_fold & (segment == segment[0])
    assert np.all(np.abs(after[others] - before[others]) > 1e-6)
    np.testing.assert_array_equal(after[segment != segment[0]], before[segment != segment[0]])


def make_boosting_data(rng: np.random.Generator, n: int = 1500) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    X = make_sales(n, rng)
    segment = rng.choice(["Mill Lane", "Reed Common", "Saltgate"], n)
    level = pd.Series(segment).map({"Mill Lane": 0.0, "Reed Common": 0.25, "Saltgate": -0.2}).to_numpy()
    y = 11 + 1.5 * np.log(X[:, 0] / 150) - 0.002 * X[:, 1] + level + rng.normal(0, 0.05, n)
    return X, y, segment


def test_gradient_boosting_is_deterministic_under_a_seed():
    # scikit-learn HistGradientBoostingRegressor: random_state fixes the result (its docs).
    rng = np.random.default_rng(9)
    X, y, segment = make_boosting_data(rng)
    X[rng.random(len(X)) < 0.05, 1] = np.nan
    first = GradientBoosting(SPECS, seed=7, max_iter=100).fit(X, y, segment).predict(X, segment)
    second = GradientBoosting(SPECS, seed=7, max_iter=100).fit(X, y, segment).predict(X, segment)
    np.testing.assert_array_equal(first, second)
    assert np.sqrt(np.mean((first - y) ** 2)) < 0.1                 # learned the signal (sd of y ~ 0.6)
    unseen = GradientBoosting(SPECS, seed=7, max_iter=100).fit(X, y, segment).predict(X[:3], np.full(3, "Fenwick End"))
    assert np.all(np.isfinite(unseen))


def test_many_segments_fall_back_to_a_numeric_segment_code():
    # scikit-learn: a categorical feature may have at most max_bins (255) categories.
    rng = np.random.default_rng(10)
    X = make_sales(900, rng)
    segment = np.array([f"block {i % 300}" for i in range(900)])
    y = noise_free_price(X) + (np.arange(900) % 300) / 300
    model = GradientBoosting(SPECS, seed=0, max_iter=20).fit(X, y, segment)
    assert model.segment_as_categorical_ is False
    assert np.all(np.isfinite(model.predict(X, segment)))


def test_permutation_importance_ranks_the_planted_feature_first():
    # Breiman (2001), Random Forests, permutation importance: shuffling the feature that carries
    # the signal hurts most; computed by sklearn.inspection.permutation_importance.
    rng = np.random.default_rng(11)
    X, _, segment = make_boosting_data(rng)
    y = 11 + 0.012 * X[:, 1] + 0.2 * np.log(X[:, 0] / 150) + rng.normal(0, 0.05, len(X))  # age planted
    model = GradientBoosting(SPECS, seed=0, max_iter=100).fit(X, y, segment)
    table = permutation_importance(model, X, y, segment, seed=0, n_repeats=5)
    assert list(table.columns) == ["feature", "importance_mean", "importance_std"]
    assert list(table["feature"].iloc[:2]) == ["age", "living_area"]
    assert set(table["feature"]) == {s.name for s in SPECS} | {"segment"}
    noise = table.set_index("feature").loc[["quality", "roof", "garage"], "importance_mean"]
    assert noise.abs().max() < 0.01


def test_accuracy_table_matches_ratio_stats_on_the_pooled_rows():
    # Ratio statistics are those of reval.ratio_stats (IAAO Standard on Ratio Studies definitions).
    rng = np.random.default_rng(12)
    X, y, segment = make_boosting_data(rng, n=600)
    folds = rng.integers(0, 4, 600)
    factories = reference_factories(SPECS, seed=0)
    factories["gradient_boosting"] = lambda: GradientBoosting(SPECS, seed=0, max_iter=50)
    predictions, seconds = compare_models(factories, X, y, segment, folds)
    table = accuracy_table(y, predictions, segment, seconds, n_boot=50)
    assert len(table) == 3 * 4                                      # 3 models x (all + 3 segments)
    for name, predicted in predictions.items():
        overall = table[(table["model"] == name) & (table["segment"] == ALL_SEGMENTS)].iloc[0]
        values, prices = np.exp(predicted), np.exp(y)
        r = ratio_stats.ratios(values, prices)
        assert overall["n"] == 600
        assert overall["cod"] == pytest.approx(ratio_stats.cod(r), rel=1e-12)
        assert overall["prd"] == pytest.approx(ratio_stats.prd(values, prices), rel=1e-12)
        assert overall["prb"] == pytest.approx(ratio_stats.prb(values, prices)[0], rel=1e-9)
        assert overall["median_ratio"] == pytest.approx(np.median(r), rel=1e-12)
        assert overall["rmse_log"] == pytest.approx(np.sqrt(np.mean((predicted - y) ** 2)), rel=1e-12)
        assert overall["cod_lo"] <= overall["cod"] <= overall["cod_hi"]
        assert overall["cv_seconds"] == seconds[name] > 0
        rows = table[(table["model"] == name) & (table["segment"] != ALL_SEGMENTS)]
        assert rows["n"].sum() == 600
