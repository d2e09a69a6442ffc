"""Reading the imported data set as arrays: sales and parcels with a dense feature matrix."""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np
import pandas as pd

from reval.data.config import FeatureSpec
from reval.data.store import Store


@dataclass(frozen=True)
class SalesData:
    """Qualified sales (one row per sale and parcel) and their parcels' features (NaN = missing)."""

    frame: pd.DataFrame
    X: np.ndarray
    features: tuple[FeatureSpec, ...]

    def in_fit(self, multi_parcel: bool) -> np.ndarray:
        """Rows a model (and the market trend) is fitted on: single-parcel sales, and the parcels of
        multi-parcel sales only when asked (`[sales] multi_parcel_in_fit`): a package price is not the
        price of one of its parcels."""
        return multi_parcel | (self.frame["n_parcels"].to_numpy() == 1)

    def fit_price(self, column: str) -> np.ndarray:
        """A price column as the fit reads it: each parcel of a package gets its share of the one price."""
        return self.frame[column].to_numpy(float) * self.frame["price_share"].to_numpy(float)

    def rows(self, keep: np.ndarray) -> SalesData:
        return SalesData(self.frame[keep].reset_index(drop=True), self.X[keep], self.features)


def feature_specs(store: Store) -> tuple[FeatureSpec, ...]:
    """The features as imported (the database, not the config, is the truth for stored codes)."""
    specs = []
    for row in store.frame("feature_list").itertuples():
        levels = tuple(row.levels) if isinstance(row.levels, (list, tuple, np.ndarray)) else ()
        rng = None if pd.isna(row.range_lo) else (float(row.range_lo), float(row.range_hi))
        specs.append(FeatureSpec(name=row.name, column=row.name, kind=row.kind, log=bool(row.log), levels=levels,
                                 range=rng))
    return tuple(specs)


def with_shapes(features: tuple[FeatureSpec, ...], declared: Sequence[FeatureSpec]) -> tuple[FeatureSpec, ...]:
    """The imported features with the shape rules the config declares now: a modelling choice, read at fit
    time, so changing one needs no re-import."""
    shapes = {f.name: f.shape for f in declared}
    return tuple(replace(f, shape=shapes.get(f.name, "free")) for f in features)


def dense_matrix(values: np.ndarray | pd.Series, n_features: int) -> np.ndarray:
    """Reshape a (row, feature)-ordered value column into an (n, k) float matrix with NaN for missing."""
    flat = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return flat.reshape(-1, n_features) if n_features else np.empty((len(flat), 0))


def qualified_sales(store: Store) -> SalesData:
    """The qualified sales with their features, in a fixed order."""
    features = feature_specs(store)
    frame = store.frame("qualified_sales")
    values = store.run("qualified_sales_features").fetchnumpy()["value"]
    return SalesData(frame, dense_matrix(values, len(features)), features)


def all_parcels(store: Store, features: tuple[FeatureSpec, ...]) -> tuple[pd.DataFrame, np.ndarray]:
    """Every parcel (id, segment, market area) and its dense feature matrix, in parcel id order."""
    frame = store.frame("all_parcels")
    values = store.run("all_parcel_features").fetchnumpy()["value"]
    return frame, dense_matrix(values, len(features))
