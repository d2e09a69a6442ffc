"""The stress variants of the demo generator: reproducible, each with its planted property, importable with its own
config, and an oracle scored on exactly the sales the models are. (The default demo staying byte-identical is
tests/test_demo_town.py::test_shipped_csvs_equal_a_fresh_generation.)"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from threadpoolctl import threadpool_limits

from data_samples.demo_town import (
    BINARY_FEATURES,
    BINARY_INTERACTIONS,
    DEFAULT_TRUTH_VARIANTS,
    FREE,
    KNOWN_FORM_VARIANTS,
    KEYED_SHARE,
    MISSING_FEATURES,
    NOISE_SD,
    THIN_SEGMENTS,
    VARIANTS,
    WINDOW_START,
    DemoTown,
    binary_effects,
    generate,
    known_form,
    oracle_log_values,
    recorded_log_values,
    true_log_index,
    true_log_values,
    variant_config,
    write_project,
)
from reval.data.config import load_config
from reval.data.dataset import SalesData, qualified_sales
from reval.data.importer import run_import
from reval.data.sales import prepare_sales
from reval.data.store import open_store
from reval.model.comparison import accuracy_table
from reval.stats import ratio_stats

N = 6_000
SEED = 7


@pytest.fixture(scope="module")
def towns() -> dict[str | None, DemoTown]:
    return {v: generate(N, seed=SEED, variant=v) for v in (None, *VARIANTS)}


def _clean_sales(town: DemoTown) -> pd.DataFrame:
    """Valid single-parcel sales in the window with no planted error, joined to their parcel's truth."""
    s = town.sales.copy()
    s["truth"] = true_log_values(town).loc[s["parcel_id"]].to_numpy()
    s["multi"] = s["sale_id"].duplicated(keep=False)
    clean = (s["validity"] == "valid") & ~s["multi"] & (s["sale_date"] >= pd.Timestamp(str(WINDOW_START)))
    return s[clean & ~s["sale_id"].isin(town.planted_errors["sale_id"])]


def _residual(town: DemoTown) -> np.ndarray:
    s = _clean_sales(town)
    return np.log(s["sale_price"].to_numpy(float)) - s["truth"].to_numpy() - true_log_index(s["sale_date"], town.variant)


@pytest.mark.parametrize("variant", VARIANTS)
def test_a_variant_is_reproducible_by_seed(variant: str, towns: dict[str | None, DemoTown]) -> None:
    again, other = generate(N, seed=SEED, variant=variant), generate(N, seed=SEED + 1, variant=variant)
    pd.testing.assert_frame_equal(towns[variant].parcels, again.parcels)
    pd.testing.assert_frame_equal(towns[variant].sales, again.sales)
    pd.testing.assert_series_equal(true_log_values(towns[variant]), true_log_values(again))
    assert not towns[variant].sales.equals(other.sales)
    assert towns[variant].parcels["property_class"].isin(["single_family", "townhouse", "condominium"]).all()


def test_every_variant_prices_valid_sales_from_its_truth(towns: dict[str | None, DemoTown]) -> None:
    for variant in (None, *VARIANTS):
        r = _residual(towns[variant])
        # Prices are the truth times the market level times noise of sd NOISE_SD (to rounding to 100).
        assert abs(np.median(r)) < 0.02, variant
        assert 0.6 * NOISE_SD < stats.iqr(r) / 1.349 < 1.4 * NOISE_SD, variant


def test_heavy_tails_have_student_t_noise(towns: dict[str | None, DemoTown]) -> None:
    # Excess kurtosis: 0 for normal noise, infinite in theory for Student t with 3 degrees of freedom.
    assert abs(stats.kurtosis(_residual(towns[None]))) < 0.6
    assert stats.kurtosis(_residual(towns["heavy_tails"])) > 2.0
    assert np.std(_residual(towns["heavy_tails"])) == pytest.approx(NOISE_SD, rel=0.35)


def test_keying_errors_key_two_percent_of_valid_prices(towns: dict[str | None, DemoTown]) -> None:
    town, base = towns["keying_errors"], towns[None]
    keyed = town.planted_errors[town.planted_errors["kind"].str.startswith("price_keyed")]
    eligible = len(_clean_sales(town)) + len(keyed)
    assert len(keyed) == round(KEYED_SHARE * eligible) and keyed["sale_id"].is_unique
    assert set(keyed["kind"]) == {"price_keyed_extra_digit", "price_keyed_missing_digit", "price_keyed_swapped_digits"}
    prices = town.sales.drop_duplicates("sale_id").set_index("sale_id")["sale_price"]
    before = base.sales.drop_duplicates("sale_id").set_index("sale_id")["sale_price"].loc[prices.index]
    changed = prices.index[prices.to_numpy() != before.to_numpy()]
    assert sorted(changed) == sorted(keyed["sale_id"])
    assert (prices.loc[keyed["sale_id"]].to_numpy() == keyed["recorded"].to_numpy()).all()
    ratio = keyed["recorded"] / keyed["correct"]
    assert ((ratio > 1.3) | (ratio < 0.77)).all()      # gross errors, not noise
    assert (town.sales.loc[town.sales["sale_id"].isin(keyed["sale_id"]), "validity"] == "valid").all()


def test_thin_has_forty_segments_of_one_to_ten_sales(towns: dict[str | None, DemoTown]) -> None:
    town = towns["thin"]
    thin = town.parcels[town.parcels["neighbourhood"].astype(str).str.startswith("THN")]
    assert thin["neighbourhood"].nunique() == THIN_SEGMENTS
    assert thin.groupby("neighbourhood", observed=True)["market_area"].nunique().eq(1).all()
    sold = town.sales.merge(thin, on="parcel_id")
    counts = sold.groupby("neighbourhood", observed=True)["sale_id"].nunique()
    assert len(counts) == THIN_SEGMENTS and counts.between(1, 10).all() and counts.nunique() > 3
    assert (sold["validity"] == "valid").all() and (sold["sale_date"] >= pd.Timestamp(str(WINDOW_START))).all()
    shift = (true_log_values(town) - true_log_values(towns[None]).loc[town.parcels["parcel_id"]]).loc[thin["parcel_id"]]
    assert shift.groupby(thin["neighbourhood"].to_numpy()).nunique().eq(1).all() and shift.std() > 0.03


def _unplanted_built(town: DemoTown) -> pd.DataFrame:
    """The built parcels with no planted feature error (their recorded features are the correct ones)."""
    wrong = town.planted_errors.loc[town.planted_errors["column"] != "sale_price", "parcel_id"]
    parcels = town.parcels
    return parcels[(parcels["property_class"] != "vacant_land") & ~parcels["parcel_id"].isin(wrong)]


@pytest.mark.parametrize("variant", KNOWN_FORM_VARIANTS)
def test_the_known_form_spans_the_truth(variant: str | None, towns: dict[str | None, DemoTown]) -> None:
    # The benchmark's known-form floor is a fit of the truth's form; least squares of the true log values on its
    # regressors leaves no residual, so the form cannot drift from _log_value (or a variant's additions) unnoticed.
    town = towns[variant]
    parcels = _unplanted_built(town)
    truth = true_log_values(town).loc[parcels["parcel_id"]].to_numpy()
    form = known_form(parcels, variant)
    assert form.columns.shape == (len(parcels), len(form.group))

    def residual(columns: np.ndarray, target: np.ndarray = truth) -> float:
        with threadpool_limits(limits=1):   # threads on a busy machine make these small solves many times slower
            coef, *_ = np.linalg.lstsq(columns, target, rcond=None)
        return float(np.max(np.abs(target - columns @ coef)))

    assert residual(form.columns) < 1e-9
    # Each feature term is needed: without any one the truth leaves the span, so the check can fail. (The market
    # areas' levels and the common slope are also spanned by the neighbourhoods' and may go.)
    neighbourhood = form.columns[:, form.group != FREE]
    terms = [j for j in np.flatnonzero(form.group == FREE) if residual(neighbourhood, form.columns[:, j]) > 1e-6]
    assert len(terms) >= 20
    for j in terms:
        assert residual(np.delete(form.columns, j, axis=1)) > 1e-4, j


def test_missing_has_no_known_form(towns: dict[str | None, DemoTown]) -> None:
    assert "missing" not in KNOWN_FORM_VARIANTS
    with pytest.raises(ValueError, match="no known form"):
        known_form(_unplanted_built(towns["missing"]), "missing")
    with pytest.raises(ValueError, match="vacant lots"):
        known_form(towns[None].parcels, None)


@pytest.mark.parametrize("variant", DEFAULT_TRUTH_VARIANTS)
def test_the_truth_at_recorded_features_differs_only_where_a_feature_error_was_planted(
        variant: str | None, towns: dict[str | None, DemoTown]) -> None:
    town = towns[variant]
    truth, recorded = true_log_values(town), recorded_log_values(town)
    wrong = town.planted_errors.loc[town.planted_errors["column"] != "sale_price", "parcel_id"]
    moved = truth.index[np.abs(truth.to_numpy() - recorded.to_numpy()) > 1e-12]
    assert sorted(moved) == sorted(wrong) and len(wrong) == 5
    sold = town.sales["parcel_id"]
    np.testing.assert_array_equal(oracle_log_values(town, sold, recorded=True), recorded.loc[sold].to_numpy())
    with pytest.raises(ValueError, match="truth of its own"):
        recorded_log_values(towns["thin"])


def test_one_date_puts_every_sale_on_one_day(towns: dict[str | None, DemoTown]) -> None:
    assert towns["one_date"].sales["sale_date"].nunique() == 1
    assert towns[None].sales["sale_date"].nunique() > 100


def test_turning_market_rises_then_falls_over_ten_years(towns: dict[str | None, DemoTown]) -> None:
    dates = towns["turning_market"].sales["sale_date"]
    assert (dates.max() - dates.min()).days > 9.5 * 365
    days = pd.date_range(dates.min(), dates.max(), freq="D").to_numpy()
    index = true_log_index(days, "turning_market")
    top = int(np.argmax(index))
    assert index[top] - index[0] > 0.2 and index[top] - index[-1] > 0.05   # a rise, a turn, then a fall
    assert 0.2 < top / len(days) < 0.9
    assert np.argmax(true_log_index(days)) > len(days) - 5                # the default market only rises here


def test_missing_leaves_a_fifth_out_of_exactly_two_features(towns: dict[str | None, DemoTown]) -> None:
    parcels = towns["missing"].parcels
    config = tomllib.loads(variant_config("missing"))
    features = {f["name"]: f for f in config["features"]}
    share = {name: float((parcels[name].isna() | parcels[name].astype("object").isin(
        [float(c) for c in f.get("missing", [])])).mean()) for name, f in features.items()}
    assert sorted(k for k, v in share.items() if v > 0) == sorted(MISSING_FEATURES)
    assert all(share[name] == pytest.approx(0.20, abs=1e-9) for name in MISSING_FEATURES)
    assert features["bathrooms"]["missing"] == [0]
    base = towns[None].parcels
    built = base["property_class"].isin(["single_family", "townhouse", "condominium"])
    assert (base.loc[built, "bathrooms"] > 0).all()                      # a house has at least one bathroom


def test_binary_interactions_enter_the_truth(towns: dict[str | None, DemoTown]) -> None:
    town = towns["binary_interactions"]
    added = true_log_values(town) - true_log_values(towns[None]).loc[town.parcels["parcel_id"]].to_numpy()
    errors = town.planted_errors
    recorded_right = ~town.parcels["parcel_id"].isin(errors.loc[errors["column"] != "sale_price", "parcel_id"])
    assert (~recorded_right).sum() == 5            # the truth of those is from their correct, not recorded, features
    np.testing.assert_allclose(added.to_numpy()[recorded_right], binary_effects(town.parcels)[recorded_right],
                               atol=1e-12)
    assert set(BINARY_FEATURES) <= set(town.parcels.columns)
    low = {"living_area": 1600.0, "lot_size": 0.0}               # where each continuous partner's term is 0
    high = {"living_area": 1600.0 * np.e, "lot_size": 3000.0 * (np.e - 1)}   # ... and where it is 1
    for a, b, coefficient in BINARY_INTERACTIONS:
        grid = pd.DataFrame({name: [0.0] * 4 for name in (*BINARY_FEATURES, "waterfront")})
        grid = grid.assign(living_area=1600.0, lot_size=0.0)
        grid[a] = [0.0, 1.0, 0.0, 1.0]
        grid[b] = [low.get(b, 0.0), low.get(b, 0.0), high.get(b, 1.0), high.get(b, 1.0)]
        e = binary_effects(grid)
        assert coefficient != 0 and e[3] - e[2] - e[1] + e[0] == pytest.approx(coefficient), (a, b)


def _imported(folder: Path, variant: str) -> tuple[DemoTown, SalesData]:
    town = write_project(folder, n_parcels=N, seed=SEED, variant=variant)
    config = load_config(folder)
    run_import(config)
    with open_store(config.database) as store:
        prepare_sales(store, config)
        sales = qualified_sales(store)
    return town, sales


@pytest.mark.parametrize("variant", VARIANTS)
def test_a_variant_imports_with_its_config(variant: str, tmp_path: Path) -> None:
    _, sales = _imported(tmp_path, variant)
    names = [f.name for f in sales.features]
    frame = sales.frame
    assert len(frame) > 500 and frame["adjusted_price"].notna().all()
    if variant == "missing":
        X = sales.X
        missing = {name for j, name in enumerate(names) if np.isnan(X[:, j]).any()}
        assert missing == set(MISSING_FEATURES)
    if variant == "binary_interactions":
        assert set(BINARY_FEATURES) <= set(names)
    if variant == "thin":
        counts = frame[frame["segment"].str.startswith("THN")].groupby("segment").size()
        assert len(counts) == THIN_SEGMENTS and counts.between(1, 10).all()
    if variant == "one_date":
        assert frame["sale_date"].nunique() == 1
    if variant == "turning_market":                   # the config's 120-month window keeps all ten years
        assert (frame["sale_date"].max() - frame["sale_date"].min()).days > 9.5 * 365


def test_the_oracle_is_scored_on_the_models_sales(tmp_path: Path) -> None:
    town, sales = _imported(tmp_path, "heavy_tails")
    frame = sales.frame
    fit = frame[sales.in_fit(False)].reset_index(drop=True)
    oracle = oracle_log_values(town, fit["parcel_id"])
    assert len(oracle) == len(fit)
    # Aligned sale by sale: reversing the sales reverses the oracle.
    np.testing.assert_array_equal(oracle_log_values(town, fit["parcel_id"][::-1]), oracle[::-1])
    y = np.log(fit["adjusted_price"].to_numpy(float))
    table = accuracy_table(y, {"oracle": oracle, "model": y + 0.01}, fit["segment"].to_numpy(str), n_boot=10)
    overall = table[table["segment"] == "(all)"].set_index("model")
    assert overall.loc["oracle", "n"] == overall.loc["model", "n"] == len(fit)
    # The same COD straight from the generator's values and the imported adjusted prices.
    truth = np.exp(true_log_values(town).loc[fit["parcel_id"]].to_numpy())
    assert overall.loc["oracle", "cod"] == pytest.approx(ratio_stats.cod(truth / fit["adjusted_price"].to_numpy()))
    with pytest.raises(ValueError, match="no true value"):
        oracle_log_values(town, ["not-a-parcel"])
