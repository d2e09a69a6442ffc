"""The demo's planted keying errors (data_samples/demo_town.py: a living area a tenth or ten times the truth, a price
with a digit too many, too few or swapped, ...) barely move the model: its curves and every parcel's value stay
close to those of a fit without the erroneous sales. The same checks fail for least squares without shape rules."""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from reval.model.hierarchy import FittedHierarchy, fit_hierarchy, typical_value
from reval.model.settings import ModelSettings

demo_town = pytest.importorskip("data_samples.demo_town")

SHAPED = ("living_area", "lot_size", "quality", "condition", "bathrooms")  # as data_samples/demo/reval.toml
CURVE_BAND = 0.08  # log value: each curve of a segment with >= THICK sales, over its parcels' 5-95 % range
THICK = 15  # Lyskeld Point's 5 sales make its deviation jump with any change in its market area (not tested)
VALUE_P99 = 0.05  # 99 % of parcels' log values move by less than this
VALUE_MAX = 0.30  # and none by more: the worst is the town's largest house, whose genuine sale shares the thin
#                   top of the living-area range with a condominium keyed at 8,010 sq ft


def features(robust: bool) -> list[SimpleNamespace]:
    kinds = [("living_area", "continuous", True, ()), ("lot_size", "continuous", False, ()),
             ("year_built", "continuous", False, ()), ("quality", "ordinal", False, demo_town.QUALITY_LEVELS),
             ("condition", "ordinal", False, demo_town.CONDITION_LEVELS), ("bathrooms", "continuous", False, ()),
             ("garage_spaces", "continuous", False, ()), ("style", "categorical", False, demo_town.STYLE_LEVELS),
             ("waterfront", "binary", False, ())]
    return [SimpleNamespace(name=n, kind=k, log=log, levels=levels,
                            shape="increasing" if robust and n in SHAPED else "free") for n, k, log, levels in kinds]


def matrix(frame: pd.DataFrame) -> np.ndarray:
    return np.column_stack([frame[f.name].cat.codes.to_numpy(float) if f.kind in ("ordinal", "categorical")
                            else frame[f.name].to_numpy(float) for f in features(False)])


@pytest.fixture(scope="module")
def town() -> SimpleNamespace:
    town = demo_town.generate()
    sales = town.sales[(town.sales.validity == "valid") & ~town.sales.sale_id.duplicated(keep=False)]
    data = sales.merge(town.parcels, on="parcel_id")
    y = np.log(data.sale_price.to_numpy(float)) - demo_town.true_log_index(data.sale_date.to_numpy("datetime64[D]"))
    parcels = town.parcels
    return SimpleNamespace(
        X=matrix(data), y=y, segment=data.neighbourhood.astype(str).to_numpy(),
        market_area=data.market_area.astype(str).to_numpy(),
        planted=data.sale_id.isin(town.planted_errors.sale_id).to_numpy(),
        planted_kind=data.sale_id.map(dict(zip(town.planted_errors.sale_id, town.planted_errors.kind))).dropna().to_numpy(),
        X_parcels=matrix(parcels), parcel_segment=parcels.neighbourhood.astype(str).to_numpy(),
        parcel_area=parcels.market_area.astype(str).to_numpy(),
        areas=dict(zip(parcels.neighbourhood.astype(str), parcels.market_area.astype(str))))


def with_and_without(t: SimpleNamespace, robust: bool) -> tuple[FittedHierarchy, FittedHierarchy]:
    settings = ModelSettings(loss="huber" if robust else "squared")
    keep = ~t.planted
    return (fit_hierarchy(t.X, t.y, t.segment, t.market_area, features(robust), settings, segments=t.areas),
            fit_hierarchy(t.X[keep], t.y[keep], t.segment[keep], t.market_area[keep], features(robust), settings,
                          segments=t.areas))


def curve_gap(t: SimpleNamespace, a: FittedHierarchy, b: FittedHierarchy) -> float:
    """The largest difference between the two fits' curves of any segment with >= THICK sales: each feature
    varied over its parcels' 5-95 % range at the segment's typical parcel, both curves anchored at the start."""
    counts = pd.Series(t.segment).value_counts()
    worst = 0.0
    for name in counts.index[counts >= THICK]:
        rows = t.parcel_segment == name
        base = np.array([typical_value(t.X_parcels[rows, j], f.kind) for j, f in enumerate(features(False))])
        for j, f in enumerate(features(False)):
            if f.kind == "categorical":
                continue
            x = t.X_parcels[rows, j]
            grid = np.linspace(*np.percentile(x, [5, 95]), 40) if f.kind == "continuous" else np.unique(x)
            G = np.tile(base, (len(grid), 1))
            G[:, j] = grid
            where = (np.full(len(grid), name), np.full(len(grid), t.areas[name]))
            ca, cb = a.predict(G, *where), b.predict(G, *where)
            worst = max(worst, float(np.abs((ca - ca[0]) - (cb - cb[0])).max()))
    return worst


def value_moves(t: SimpleNamespace, a: FittedHierarchy, b: FittedHierarchy) -> np.ndarray:
    where = (t.parcel_segment, t.parcel_area)
    return np.abs(a.predict(t.X_parcels, *where) - b.predict(t.X_parcels, *where))


def test_keying_errors_barely_move_the_robust_shaped_model(town: SimpleNamespace) -> None:
    with_errors, without = with_and_without(town, robust=True)
    assert curve_gap(town, with_errors, without) < CURVE_BAND
    moves = value_moves(town, with_errors, without)
    assert np.quantile(moves, 0.99) < VALUE_P99
    assert moves.max() < VALUE_MAX
    # The keyed prices and areas are down-weighted; a lot size or year built keyed wrong hardly changes what the
    # model expects the price to be (the lot curve is flat there, old houses recover value), so those two are not.
    weights = with_errors.sale_weights
    assert weights is not None
    by_kind = dict(zip(town.planted_kind, weights.weight[town.planted]))
    harmless = {"lot_size_extra_zero", "year_built_transposed"}
    assert len(by_kind) == 8
    assert all(w < 0.25 for kind, w in by_kind.items() if kind not in harmless)


def test_least_squares_without_shape_rules_fails_the_same_checks(town: SimpleNamespace) -> None:
    # The finding (issue 10): one sale of a 304 sq ft house priced as a 3,045 sq ft one bent a segment's curve and
    # moved its parcel's value from about 170,000 to 740,000.
    with_errors, without = with_and_without(town, robust=False)
    assert curve_gap(town, with_errors, without) > CURVE_BAND
    moves = value_moves(town, with_errors, without)
    assert np.quantile(moves, 0.99) > VALUE_P99
    assert moves.max() > 1.0
