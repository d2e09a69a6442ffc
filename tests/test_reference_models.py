"""Tests of the reference models: OLS design and pooling against statsmodels, same-fold
cross-validation, boosting determinism, permutation importance and the accuracy table."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from pygam import LinearGAM, f, s
from sklearn.preprocessing import PolynomialFeatures, StandardScaler

from reval.stats import ratio_stats
from reval.model.additive_reference import PlainGAM
from reval.model.comparison import (
    ALL_SEGMENTS,
    accuracy_table,
    compare_models,
    cross_validated_predictions,
    permutation_importance,
    reference_factories,
)
from reval.model.references import (
    GradientBoosting,
    HedonicOLS,
    PRODUCT_CAP,
    RandomForest,
    design_matrix,
    learn_design,
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
    assert len(table) == 5 * 4                                      # 5 models x (all + 3 segments)
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


# ---------------------------------------------------------------- plain additive model (pygam) and random forest

SEGMENT_LEVEL = {"Mill Lane": 0.0, "Reed Common": 0.25, "Saltgate": -0.2}


def additive_truth(X: np.ndarray, segment: np.ndarray) -> np.ndarray:
    """A smooth additive log price: curves in log living area and age, level effects for quality, roof,
    garage and the segment (no interactions, so an additive model can recover it)."""
    quality = np.array([0.0, 0.05, 0.12, 0.25])[X[:, 2].astype(int)]
    roof = np.array([0.0, 0.05, -0.03])[X[:, 3].astype(int)]
    return (11 + 0.7 * np.log(X[:, 0] / 150) + 0.15 * np.sin(X[:, 1] / 15) + quality + roof + 0.07 * X[:, 4]
            + pd.Series(segment).map(SEGMENT_LEVEL).to_numpy())


def additive_sales(rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    X = make_sales(n, rng)
    segment = rng.choice(list(SEGMENT_LEVEL), n)
    truth = additive_truth(X, segment)
    return X, truth + rng.normal(0, 0.05, n), segment, truth


def direct_pygam_columns(X: np.ndarray, segment: np.ndarray) -> np.ndarray:
    """The same columns written by hand: log living area, age, the level codes and the segment's code."""
    codes = np.searchsorted(np.array(sorted(SEGMENT_LEVEL)), segment)
    return np.column_stack([np.log(X[:, 0]), X[:, 1], X[:, 2], X[:, 3], X[:, 4], codes])


def test_plain_gam_recovers_an_additive_truth_and_equals_a_direct_pygam_fit():
    # Reference library: pygam LinearGAM with s() for the curves and f() for the levels and the segment,
    # smoothing chosen by its own gridsearch (GCV over its default grid). Same columns, same terms, same
    # grid: the same fit, so predictions agree to floating-point order (1e-8).
    rng = np.random.default_rng(13)
    X, y, segment, _ = additive_sales(rng, 1500)
    model = PlainGAM(SPECS).fit(X, y, segment)
    direct = LinearGAM(s(0) + s(1) + f(2) + f(3) + f(4) + f(5))
    scores = direct.gridsearch(direct_pygam_columns(X, segment), y, return_scores=True, progress=False)
    fresh, _, fresh_segment, fresh_truth = additive_sales(np.random.default_rng(14), 500)
    fresh[:, 0] = np.clip(fresh[:, 0], X[:, 0].min(), X[:, 0].max())   # inside the training range: no clamping
    fresh[:, 1] = np.clip(fresh[:, 1], X[:, 1].min(), X[:, 1].max())
    fresh_truth = additive_truth(fresh, fresh_segment)
    np.testing.assert_allclose(model.predict(fresh, fresh_segment),
                               direct.predict(direct_pygam_columns(fresh, fresh_segment)), atol=1e-8)
    assert model.gam_.statistics_["GCV"] == pytest.approx(min(scores.values()), rel=1e-12)   # GCV's choice
    # The truth is recovered: the error against the noise-free prices is a fraction of the noise (sd 0.05).
    assert np.sqrt(np.mean((model.predict(fresh, fresh_segment) - fresh_truth) ** 2)) < 0.015


def test_plain_gam_unseen_levels_get_the_mean_effect_and_missing_values_the_training_fill():
    # Same rule as the OLS reference (common practice): an unseen segment gets the sales-weighted mean
    # segment effect; a missing value takes the training median (numeric) or mode (categorical).
    rng = np.random.default_rng(15)
    X, y, segment, _ = additive_sales(rng, 1200)
    model = PlainGAM(SPECS).fit(X, y, segment)
    direct = LinearGAM(s(0) + s(1) + f(2) + f(3) + f(4) + f(5)).gridsearch(direct_pygam_columns(X, segment), y,
                                                                        progress=False)
    names = sorted(SEGMENT_LEVEL)
    grid = np.zeros((3, 6))
    grid[:, 5] = np.arange(3)
    effect = direct.partial_dependence(term=5, X=grid)
    counts = np.array([np.sum(segment == n) for n in names])
    row = X[:4]
    gap = model.predict(row, np.full(4, "Fenwick End")) - model.predict(row, np.full(4, names[0]))
    np.testing.assert_allclose(gap, effect @ counts / counts.sum() - effect[0], atol=1e-8)
    missing = row.copy()
    missing[:, [1, 3]] = np.nan
    filled = row.copy()
    filled[:, 1] = np.median(X[:, 1])
    filled[:, 3] = np.bincount(X[:, 3].astype(int)).argmax()
    np.testing.assert_allclose(model.predict(missing, segment[:4]), model.predict(filled, segment[:4]), atol=1e-12)


def test_random_forest_is_seeded_and_treats_unseen_levels_as_missing():
    # scikit-learn RandomForestRegressor: random_state fixes the forest; since 1.4 it routes missing values.
    rng = np.random.default_rng(16)
    X, y, segment, _ = additive_sales(rng, 1000)
    X[rng.random(1000) < 0.05, 1] = np.nan
    first = RandomForest(SPECS, seed=3).fit(X, y, segment)
    np.testing.assert_array_equal(first.predict(X, segment), RandomForest(SPECS, seed=3).fit(X, y, segment).predict(X, segment))
    assert np.sqrt(np.mean((first.predict(X, segment) - y) ** 2)) < 0.1            # learned the signal (sd of y ~ 0.5)
    seen = X[:, 3] != 2
    model = RandomForest(SPECS, seed=3).fit(X[seen], y[seen], segment[seen])   # roof 'tile' never seen
    tile, gap = X[:5].copy(), X[:5].copy()
    tile[:, 3], gap[:, 3] = 2, np.nan
    np.testing.assert_array_equal(model.predict(tile, segment[:5]), model.predict(gap, segment[:5]))
    np.testing.assert_array_equal(model.predict(X[:5], np.full(5, "Fenwick End")),
                                  model.predict(X[:5], np.full(5, "Quarry Hill")))


@pytest.mark.parametrize("model", ["plain_gam", "random_forest"])
def test_new_references_never_see_the_fold_they_predict(model: str):
    # Definition of k-fold cross-validation (Hastie, Tibshirani & Friedman, ESL 7.10): changing the held-out
    # fold's prices must leave that fold's predictions exactly as they were, and change the others'.
    rng = np.random.default_rng(17)
    X, y, segment, _ = additive_sales(rng, 600)
    folds = rng.permutation(np.arange(600) % 5)
    factory = reference_factories(SPECS, seed=0)[model]
    before = cross_validated_predictions(factory, X, y, segment, folds)
    changed = np.where(folds == 2, y + rng.normal(0, 1.0, 600), y)
    after = cross_validated_predictions(factory, X, changed, segment, folds)
    np.testing.assert_array_equal(after[folds == 2], before[folds == 2])
    assert np.mean(np.abs(after[folds != 2] - before[folds != 2]) > 1e-9) > 0.9


def test_plain_gam_on_many_sales_searches_its_smoothing_on_a_subsample_and_fits_every_sale():
    # pygam (reference library): the grid search on the fixed random subsample chooses lam; the model then
    # fitted at that lam on every sale equals a direct pygam fit at that lam on all the rows (1e-8).
    rng = np.random.default_rng(16)
    X, y, segment, _ = additive_sales(rng, 1500)
    model = PlainGAM(SPECS, search_rows=400).fit(X, y, segment)
    rows = np.sort(np.random.default_rng(0).choice(len(y), 400, replace=False))
    searched = LinearGAM(s(0) + s(1) + f(2) + f(3) + f(4) + f(5)).gridsearch(
        direct_pygam_columns(X, segment)[rows], y[rows], progress=False)
    direct = LinearGAM(s(0) + s(1) + f(2) + f(3) + f(4) + f(5), lam=searched.lam).fit(direct_pygam_columns(X, segment), y)
    assert model.gam_.statistics_["n_samples"] == len(y)
    assert model.gam_.lam == searched.lam
    np.testing.assert_allclose(model.predict(X, segment), direct.predict(direct_pygam_columns(X, segment)), atol=1e-8)
    # Below the limit nothing changes: the search runs on every sale.
    assert PlainGAM(SPECS, search_rows=1500).fit(X, y, segment).gam_.statistics_["GCV"] == pytest.approx(
        PlainGAM(SPECS).fit(X, y, segment).gam_.statistics_["GCV"], rel=1e-12)
