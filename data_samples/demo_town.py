"""Vellmarsh: a seeded, fictional municipality for demos, tests and benchmarks.

Every name is invented; the coordinates lie in an empty stretch of the South Pacific so that
no real place is implied. The same seed always gives the same town, at any size.

The town has 22 neighbourhoods in 4 market areas and three property classes of built parcels
(single_family, townhouse, condominium; condominiums are "apartment" style with lot_size 0). After them
come, from a random stream of their own (so the built parcels, their sales and ids are those of a town
without them), 120 vacant lots (class vacant_land: lot size, waterfront, no building; 24 of them sold)
spread over the neighbourhoods with houses, and 6 institutional parcels (a hall, a chapel: built, never
sold) in Gaulden Terrace; the demo's reval.toml values the first by the land schedule and leaves the
second for a manual value. At the default
20,000 parcels it has about 4,100 sales dated 2023-01-01 .. 2025-12-31 plus about 30 dated 2022
(outside the 36-month window). Three neighbourhoods are thin on purpose: Torvel Hollow has no
qualified sale (two non-arm's-length ones), Lyskeld Point 5 and Gaulden Terrace 15; the others
have 60-400. Counts scale in proportion to `n_parcels`. Above about 73,000 parcels the geography grows
too: one neighbourhood per about 3,300 parcels (about 300 in 25 market areas at a million), each new
one a perturbed copy of one of the 22 recipes (thin ones included) with a generated fictional name.

Market value follows a known TRUE function of the features in log space, so a fitted model can be
scored on how well it recovers it:

    log value = market-area intercept + neighbourhood shift
                + size_slope[neighbourhood] * area(living_area) + age(year_built) + lot(lot_size)
                + quality + condition + bathrooms + garage_spaces + style + waterfront
                + 0.05 * ln(living_area / 1600) * (quality index - 2)
                + 0.0008 * (age - 50) * (condition index - 2)
                + 0.10 * waterfront * ln(1 + lot_size / 3000)

where the quality index runs 0 (low) .. 5 (excellent) and the condition index 0 (poor) .. 4
(very_good). `true_curve` returns each main-effect shape centred so that its mean over the
built parcels of the default demo (`generate()`, i.e. data_samples/demo/parcels.csv) is 0. The
living-area shape is that of a neighbourhood with size_slope 1, and every shape holds at the
reference point of its interaction partner, where the interaction term vanishes: quality
"average" for living_area, 1,600 sq ft for quality, condition "average" for year_built, age 50
for condition, no waterfront for lot_size and lot_size 0 for waterfront.

A valid sale's price is exp(true log value + true_log_index(sale date) + N(0, noise_sd)); a
non-arm's-length sale is priced at 60-85% of that. A multi-parcel sale lists each parcel under
one sale id with the package price (the parcels' summed value times one noise draw). Eight
data-entry errors that pass the declared ranges are planted on valid single-parcel sales and
listed in `DemoTown.planted_errors`; the true value of a planted parcel is the one computed from
its correct, not its recorded, features.

The prior value is an older roll: about 0.9 of market value, regressive (slope < 1 on log value
around 350,000), with neighbourhood-specific level, slope and scatter so that some neighbourhoods
pass a ratio study on it and some fail. It is written twice: `prior_market_value`, and
`prior_assessed_value` = the same figure, because Vellmarsh assessed at full market value without
caps on its prior roll (derived, so no random draw changes). `new_construction` is "yes" for a
house built in the year before the valuation date (after the prior roll), from year_built.

A vacant lot's true value is the land value the default town's land schedule gives its lot (the schedule is
the market for land, at every size and seed); its prior value is about 0.9 of that.

Land schedule (land_schedule.csv, one or two rows per neighbourhood, from the built parcels): for a parcel with
lot_size > 0, land value = base_land_value * (lot_size / base_lot_size) ** size_exponent using the
neighbourhood's row with base_lot_size > 0 (size_exponent 0.3-0.6). The row with base_lot_size 0
(size_exponent 0) gives every parcel with lot_size 0 (condominium units) the flat
base_land_value.

Stress variants (`generate(..., variant=NAME)`, `--variant NAME`; VARIANTS): the built town with one stress
planted from a random stream of its own, for benchmarks on data reval was not tuned on: Student-t sale noise,
2 % keyed prices, 40 thin segments, one sale date, a turning ten-year market, 20 % missing in two features,
interacting yes/no features. Each carries its truth (`true_log_values`); see "stress variants" below.

For benchmarks: `known_form` gives regressors whose span holds the truth (its form with the coefficients unknown, for
a fit on the sales: how close any estimator could come to the oracle), `recorded_log_values` the truth at the
features as recorded (planted feature errors left in).
"""

from __future__ import annotations

import argparse
import shutil
from dataclasses import dataclass, replace
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd

VALUATION_DATE = np.datetime64("2026-01-01", "D")
VALUATION_YEAR = 2026.0
WINDOW_START = np.datetime64("2023-01-01", "D")
EARLY_START = np.datetime64("2022-01-01", "D")
DEFAULT_PARCELS = 20_000
DEFAULT_SEED = 2026
MIN_PARCELS = 2_000
NOISE_SD = 0.10
CONFIG_PATH = Path(__file__).with_name("demo") / "reval.toml"

PROPERTY_CLASSES = ("single_family", "townhouse", "condominium", "vacant_land", "institutional")
VACANT, INSTITUTIONAL = 3, 4   # codes of the classes appended after the built parcels (see `_appended`)
QUALITY_LEVELS = ("low", "fair", "average", "good", "very_good", "excellent")
CONDITION_LEVELS = ("poor", "fair", "average", "good", "very_good")
STYLE_LEVELS = ("one_storey", "two_storey", "split_level", "apartment")
VALIDITY_CODES = ("valid", "related_parties", "forced_sale", "partial_interest", "not_open_market")
INVALID_SHARES = (0.35, 0.25, 0.15, 0.25)
TRUE_INTERACTIONS: tuple[tuple[str, str], ...] = (
    ("living_area", "quality"),
    ("year_built", "condition"),
    ("lot_size", "waterfront"),
)

# Log-value intercept of each market area at the reference features (1,600 sq ft, no lot, ...).
MARKET_AREA_INTERCEPTS = {"centre": 12.60, "orrimead": 12.55, "ymberwater": 12.70, "falvenby": 12.40}
QUALITY_EFFECTS = np.array([-0.30, -0.15, 0.0, 0.12, 0.25, 0.40])
CONDITION_EFFECTS = np.array([-0.20, -0.09, 0.0, 0.05, 0.10])
STYLE_EFFECTS = np.array([0.0, 0.03, -0.04, -0.10])
WATERFRONT_PREMIUM = 0.22
INTERACTION_EFFECTS = (0.05, 0.0008, 0.10)   # of the TRUE_INTERACTIONS products (`_interaction_terms`)
PRIOR_PIVOT = np.log(350_000.0)

# Market trend: steady growth with a dip centred on mid-2024 (years relative to the valuation date).
INDEX_GROWTH = 0.06
INDEX_DIP = 0.045
INDEX_DIP_CENTRE = -1.5
INDEX_DIP_WIDTH = 0.35

# Extra sales at the default size: multi-parcel packages and 2022 sales outside the window.
MULTI_PARCEL_SALES = 6
EARLY_SALES = 30

# Appended at the default size, from their own random stream: vacant lots (some sold) and institutional parcels.
VACANT_LOTS = 120
VACANT_SALES = 24
INSTITUTIONAL_PARCELS = 6
INSTITUTIONAL_NEIGHBOURHOOD = "GAUL"
APPENDED_STREAM = 1                # the appended parcels' generator: default_rng([seed, APPENDED_STREAM])


@dataclass(frozen=True)
class Neighbourhood:
    """One neighbourhood's recipe; counts are at the default 20,000 parcels."""

    id: str
    name: str
    market_area: str
    parcels: int
    valid_sales: int
    invalid_sales: int
    class_mix: tuple[float, float, float]  # single_family, townhouse, condominium
    area_median: float  # single-family living area, sq ft
    lot_median: float  # single-family lot size, sq ft
    built: tuple[float, float]  # mean and sd of year built
    quality: float  # mean latent quality index, 0 = low .. 5 = excellent
    waterfront: float  # share of parcels on the water
    shift: float  # log-value deviation from the market area
    size_slope: float  # multiplier on the living-area curve
    prior: tuple[float, float, float]  # old roll: level, slope on log value, log scatter
    land_exponent: float
    centre: tuple[float, float]  # latitude, longitude


N = Neighbourhood
NEIGHBOURHOODS: tuple[Neighbourhood, ...] = (
    N("TAML", "Tamlin Yard", "centre", 1400, 230, 35, (0.0, 0.0, 1.0), 1700, 5000, (1995, 15), 2.6,
      0.0, 0.05, 1.0, (0.93, 0.90, 0.07), 0.50, (-41.195, -137.455)),
    N("CORV", "Corvel Square", "centre", 900, 140, 22, (0.7, 0.3, 0.0), 1900, 4000, (1905, 15), 2.6,
      0.0, 0.08, 0.75, (0.80, 0.88, 0.08), 0.55, (-41.205, -137.445)),
    N("HESK", "Heskett Lanes", "centre", 1300, 240, 38, (0.9, 0.05, 0.05), 1300, 5500, (1952, 6), 1.7,
      0.0, -0.08, 1.0, (0.91, 0.88, 0.20), 0.50, (-41.212, -137.470)),
    N("MIRB", "Mirrenby", "centre", 1100, 190, 30, (0.6, 0.2, 0.2), 1600, 5000, (1970, 20), 2.2,
      0.0, 0.0, 1.0, (0.93, 0.90, 0.07), 0.50, (-41.188, -137.430)),
    N("GAUL", "Gaulden Terrace", "centre", 160, 15, 2, (0.5, 0.5, 0.0), 2100, 3500, (1890, 12), 3.0,
      0.0, 0.10, 1.0, (0.92, 0.90, 0.08), 0.55, (-41.200, -137.420)),
    N("PELL", "Pellow Mews", "centre", 700, 120, 18, (0.1, 0.9, 0.0), 1500, 2500, (2005, 8), 2.4,
      0.0, 0.0, 1.0, (0.95, 0.92, 0.06), 0.55, (-41.218, -137.440)),
    N("ASKR", "Askerholt", "orrimead", 1200, 220, 34, (0.95, 0.05, 0.0), 1700, 7000, (1978, 10), 2.1,
      0.0, -0.02, 1.0, (0.94, 0.90, 0.07), 0.45, (-41.130, -137.480)),
    N("BRIN", "Brindlecote", "orrimead", 1500, 300, 46, (0.9, 0.1, 0.0), 1800, 7500, (1988, 10), 2.3,
      0.0, 0.0, 1.0, (0.93, 0.40, 0.08), 0.45, (-41.140, -137.455)),
    N("DUNW", "Dunwarrow", "orrimead", 900, 150, 24, (1.0, 0.0, 0.0), 1500, 8000, (1962, 10), 1.9,
      0.0, -0.05, 1.0, (0.92, 0.90, 0.07), 0.45, (-41.120, -137.430)),
    N("FENL", "Fenlowe Park", "orrimead", 1300, 250, 38, (0.85, 0.15, 0.0), 1900, 6500, (1998, 8), 2.5,
      0.0, 0.03, 1.0, (0.94, 0.90, 0.06), 0.45, (-41.150, -137.420)),
    N("ISTR", "Istrell Heights", "orrimead", 800, 130, 20, (1.0, 0.0, 0.0), 2800, 15000, (1985, 15), 3.6,
      0.0, 0.12, 1.3, (0.90, 0.88, 0.08), 0.40, (-41.110, -137.470)),
    N("QUOR", "Quorrin Fields", "orrimead", 1700, 400, 62, (0.75, 0.2, 0.05), 2100, 6000, (2014, 7), 2.6,
      0.0, 0.02, 1.0, (0.92, 0.90, 0.06), 0.45, (-41.125, -137.400)),
    N("LYSK", "Lyskeld Point", "ymberwater", 90, 5, 1, (1.0, 0.0, 0.0), 3000, 20000, (1975, 25), 3.8,
      0.6, 0.20, 1.0, (0.90, 0.88, 0.09), 0.35, (-41.175, -137.315)),
    N("MARW", "Marrowfen Shore", "ymberwater", 600, 95, 15, (0.9, 0.0, 0.1), 2200, 10000, (1968, 18), 2.8,
      0.3, 0.06, 1.2, (0.91, 0.88, 0.08), 0.40, (-41.190, -137.325)),
    N("NESH", "Neshby Cove", "ymberwater", 1000, 180, 28, (0.7, 0.1, 0.2), 1700, 6000, (1985, 15), 2.4,
      0.08, 0.0, 1.0, (0.93, 0.90, 0.07), 0.45, (-41.205, -137.335)),
    N("OSSL", "Osslemere Bank", "ymberwater", 850, 140, 22, (0.85, 0.15, 0.0), 1800, 7000, (1935, 20), 2.3,
      0.05, -0.03, 1.0, (0.92, 0.90, 0.08), 0.45, (-41.220, -137.340)),
    N("SALL", "Sallowick", "ymberwater", 700, 110, 17, (0.8, 0.0, 0.2), 1600, 6500, (1958, 12), 2.0,
      0.02, -0.06, 1.0, (1.12, 0.90, 0.07), 0.45, (-41.235, -137.330)),
    N("TORV", "Torvel Hollow", "falvenby", 70, 0, 2, (1.0, 0.0, 0.0), 2000, 60000, (1950, 35), 2.2,
      0.0, -0.05, 1.0, (0.90, 0.88, 0.10), 0.30, (-41.285, -137.580)),
    N("UDDE", "Uddenshaw", "falvenby", 1000, 170, 26, (1.0, 0.0, 0.0), 1500, 9000, (1965, 15), 1.8,
      0.0, -0.08, 1.0, (0.93, 0.90, 0.07), 0.40, (-41.260, -137.540)),
    N("VARL", "Varlow Common", "falvenby", 1100, 190, 30, (0.85, 0.15, 0.0), 1600, 8000, (1992, 12), 2.1,
      0.0, -0.04, 1.0, (0.94, 0.90, 0.06), 0.40, (-41.270, -137.520)),
    N("WHIN", "Whinsey Downs", "falvenby", 450, 60, 10, (1.0, 0.0, 0.0), 2600, 45000, (1982, 20), 3.0,
      0.0, 0.05, 0.85, (0.90, 0.88, 0.09), 0.30, (-41.290, -137.560)),
    N("YARR", "Yarrowdene", "falvenby", 1180, 200, 30, (0.9, 0.1, 0.0), 1400, 7000, (1948, 18), 1.8,
      0.0, -0.10, 1.0, (0.93, 0.90, 0.07), 0.40, (-41.255, -137.505)),
)
del N

NEIGHBOURHOOD_IDS = tuple(n.id for n in NEIGHBOURHOODS)
MARKET_AREAS = tuple(MARKET_AREA_INTERCEPTS)

# Above the default size the town grows more neighbourhoods (one per about PARCELS_PER_NEIGHBOURHOOD
# parcels), NEIGHBOURHOODS_PER_AREA of them to each new market area. Neighbourhood i beyond the 22 is
# a perturbed copy of recipe i mod 22 (so thin ones recur), drawn from its own seed: the recipes do not
# depend on the town's size or seed, and the default town is unchanged.
PARCELS_PER_NEIGHBOURHOOD = 3_300
NEIGHBOURHOODS_PER_AREA = 14
_NAME_HEADS = ("Ael", "Bram", "Cor", "Dun", "Esk", "Fal", "Gor", "Hal", "Isk", "Jor", "Kel", "Lor",
               "Mar", "Nor", "Oss", "Pel", "Quen", "Ros", "Sel", "Tam", "Ulv", "Var", "Wen", "Yar")
_NAME_TAILS = ("ow", "ey", "en", "ith", "ock", "ame", "ere", "isk")
_NAME_KINDS = ("Rise", "Green", "Reach", "Fold", "Hollow", "Mews", "Heights", "Common", "Fields",
               "Bank", "Shore", "Park", "Lanes", "Downs")
_AREA_ENDINGS = ("mead", "water", "by", "holt", "wick", "dale", "ford", "stow")


@dataclass(frozen=True)
class Geography:
    """The neighbourhood recipes of one town and its market areas' intercepts, as arrays."""

    neighbourhoods: tuple[Neighbourhood, ...]
    intercepts: dict[str, float]

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(n.id for n in self.neighbourhoods)

    @property
    def market_areas(self) -> tuple[str, ...]:
        return tuple(self.intercepts)

    def column(self, field: str) -> np.ndarray:
        """One numeric field of the neighbourhood table, indexed by neighbourhood number."""
        return np.array([getattr(n, field) for n in self.neighbourhoods], dtype=float)

    def rows(self, field: str) -> np.ndarray:
        """One tuple field of the neighbourhood table as a 2-D array."""
        return np.array([getattr(n, field) for n in self.neighbourhoods], dtype=float)

    @property
    def market_area_of(self) -> np.ndarray:
        return np.array([self.market_areas.index(n.market_area) for n in self.neighbourhoods])

    @property
    def base(self) -> np.ndarray:
        return np.array([self.intercepts[n.market_area] + n.shift for n in self.neighbourhoods])

    @property
    def busy(self) -> np.ndarray:
        """Neighbourhoods with enough sales to host multi-parcel sales, 2022 sales and planted errors."""
        return self.column("valid_sales") >= 60


def neighbourhood_count(n_parcels: int) -> int:
    """22 up to the default size and beyond, then one per about PARCELS_PER_NEIGHBOURHOOD parcels."""
    return max(len(NEIGHBOURHOODS), round(n_parcels / PARCELS_PER_NEIGHBOURHOOD))


def _generated_name(i: int) -> str:
    """A fictional name for neighbourhood i (i >= 22), unique across every index below 2,688."""
    combos = len(_NAME_HEADS) * len(_NAME_TAILS) * len(_NAME_KINDS)
    k = int(np.random.default_rng(9_401).permutation(combos)[(i - len(NEIGHBOURHOODS)) % combos])
    head, rest = divmod(k, len(_NAME_TAILS) * len(_NAME_KINDS))
    tail, kind = divmod(rest, len(_NAME_KINDS))
    return f"{_NAME_HEADS[head]}{_NAME_TAILS[tail]} {_NAME_KINDS[kind]}"


def _generated_area(a: int) -> tuple[str, float, tuple[float, float]]:
    """Name, log-value intercept and centre of market area a (a >= 4), from its own seed."""
    rng = np.random.default_rng((7_103, a))
    combos = len(_NAME_HEADS) * len(_AREA_ENDINGS)
    head, ending = divmod(int(np.random.default_rng(3_301).permutation(combos)[a % combos]), len(_AREA_ENDINGS))
    name = f"{_NAME_HEADS[head].lower()}{_AREA_ENDINGS[ending]}"
    ring, step = divmod(a - len(MARKET_AREAS), 6)
    angle = 2 * np.pi * step / 6 + 0.5 * ring
    centre = (-41.2 + (0.2 + 0.12 * ring) * np.sin(angle), -137.45 + (0.25 + 0.15 * ring) * np.cos(angle))
    return name, float(np.round(rng.uniform(12.35, 12.75), 3)), centre


def _generated_neighbourhood(i: int) -> Neighbourhood:
    """Neighbourhood i (i >= 22): a perturbed copy of recipe i mod 22 in market area 4 + (i-22) // 14."""
    template = NEIGHBOURHOODS[i % len(NEIGHBOURHOODS)]
    area = len(MARKET_AREAS) + (i - len(NEIGHBOURHOODS)) // NEIGHBOURHOODS_PER_AREA
    area_name, _, (lat, lon) = _generated_area(area)
    rng = np.random.default_rng((5_519, i))
    level, slope, scatter = template.prior
    name = _generated_name(i)
    return replace(
        template,
        id=f"{name[:3].upper()}{i:03d}",
        name=name,
        market_area=area_name,
        shift=float(np.round(template.shift + rng.normal(0.0, 0.05), 3)),
        prior=(float(np.round(level * rng.uniform(0.95, 1.05), 3)), slope, scatter),
        centre=(float(np.round(lat + rng.normal(0.0, 0.03), 3)), float(np.round(lon + rng.normal(0.0, 0.03), 3))),
    )


@lru_cache(maxsize=8)
def geography(n_neighbourhoods: int = len(NEIGHBOURHOODS)) -> Geography:
    """The first `n_neighbourhoods` recipes (the 22 of the default town, then generated ones)."""
    extra = tuple(_generated_neighbourhood(i) for i in range(len(NEIGHBOURHOODS), n_neighbourhoods))
    intercepts = dict(MARKET_AREA_INTERCEPTS)
    for n in extra:
        if n.market_area not in intercepts:
            area = len(MARKET_AREAS) + (int(n.id[3:]) - len(NEIGHBOURHOODS)) // NEIGHBOURHOODS_PER_AREA
            intercepts[n.market_area] = _generated_area(area)[1]
    return Geography(NEIGHBOURHOODS + extra, intercepts)


def _geography_of(ids: object) -> Geography:
    """The geography that holds every neighbourhood id given (generated ids end in their index)."""
    labels = pd.unique(pd.Series(np.asarray(ids, dtype=object)).astype(str))
    index = [int(x[3:]) for x in labels if x not in NEIGHBOURHOOD_IDS and x[3:].isdigit()]
    return geography(max([len(NEIGHBOURHOODS) - 1, *index]) + 1)


@dataclass(frozen=True)
class DemoTown:
    """A generated town: parcels, sales, land schedule and the planted data-entry errors."""

    parcels: pd.DataFrame
    sales: pd.DataFrame
    land_schedule: pd.DataFrame
    planted_errors: pd.DataFrame
    variant: str | None = None         # the stress variant (None: the default town)
    truth: pd.Series | None = None     # a variant's true log value at the valuation date, by parcel id


# ---- the true value function ---------------------------------------------------------------


def _log_area(living_area: np.ndarray) -> np.ndarray:
    return np.log(np.asarray(living_area, dtype=float) / 1600.0)


def _log_lot(lot_size: np.ndarray) -> np.ndarray:
    return np.log1p(np.asarray(lot_size, dtype=float) / 3000.0)


def _area_curve(living_area: np.ndarray) -> np.ndarray:
    u = _log_area(living_area)
    return 0.55 * u - 0.08 * u * u


def _age_curve(year_built: np.ndarray) -> np.ndarray:
    age = VALUATION_YEAR - np.asarray(year_built, dtype=float)
    return -0.32 * (1.0 - np.exp(-age / 35.0)) + 0.18 / (1.0 + np.exp(-(age - 95.0) / 12.0))


def _lot_curve(lot_size: np.ndarray) -> np.ndarray:
    return 0.09 * _log_lot(lot_size)


def _bathroom_curve(bathrooms: np.ndarray) -> np.ndarray:
    return 0.035 * np.asarray(bathrooms, dtype=float)


def _garage_curve(garage_spaces: np.ndarray) -> np.ndarray:
    g = np.asarray(garage_spaces, dtype=float)
    return 0.05 * np.minimum(g, 2.0) + 0.015 * np.maximum(g - 2.0, 0.0)


def _codes(values: object, levels: tuple[str, ...], name: str) -> np.ndarray:
    """Integer codes of labels (strings or categoricals); unknown labels are an error."""
    codes = np.asarray(pd.Categorical(values, categories=list(levels)).codes, dtype=np.intp)
    if (codes < 0).any():
        raise ValueError(f"{name}: labels outside {levels}")
    return codes


_MAIN_EFFECTS = {
    "living_area": _area_curve,
    "lot_size": _lot_curve,
    "year_built": _age_curve,
    "quality": lambda x: QUALITY_EFFECTS[_codes(x, QUALITY_LEVELS, "quality")],
    "condition": lambda x: CONDITION_EFFECTS[_codes(x, CONDITION_LEVELS, "condition")],
    "bathrooms": _bathroom_curve,
    "garage_spaces": _garage_curve,
    "style": lambda x: STYLE_EFFECTS[_codes(x, STYLE_LEVELS, "style")],
    "waterfront": lambda x: WATERFRONT_PREMIUM * np.asarray(x, dtype=float),
}


def _log_value(
    geo: Geography,
    nb: np.ndarray,
    living_area: np.ndarray,
    lot_size: np.ndarray,
    year_built: np.ndarray,
    quality: np.ndarray,
    condition: np.ndarray,
    bathrooms: np.ndarray,
    garage_spaces: np.ndarray,
    style: np.ndarray,
    waterfront: np.ndarray,
) -> np.ndarray:
    """True log market value from neighbourhood index, numeric features and level codes."""
    return (
        geo.base[nb]
        + geo.column("size_slope")[nb] * _area_curve(living_area)
        + _age_curve(year_built)
        + _lot_curve(lot_size)
        + QUALITY_EFFECTS[quality]
        + CONDITION_EFFECTS[condition]
        + _bathroom_curve(bathrooms)
        + _garage_curve(garage_spaces)
        + STYLE_EFFECTS[style]
        + WATERFRONT_PREMIUM * waterfront
        + sum(effect * term for effect, term in zip(INTERACTION_EFFECTS, _interaction_terms(
            living_area, lot_size, year_built, quality, condition, waterfront)))
    )


def _interaction_terms(living_area: np.ndarray, lot_size: np.ndarray, year_built: np.ndarray, quality: np.ndarray,
                       condition: np.ndarray, waterfront: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The products of the TRUE_INTERACTIONS pairs, in that order (their coefficients: INTERACTION_EFFECTS); each
    vanishes at its pair's reference point (1,600 sq ft or quality "average", age 50 or condition "average", no
    waterfront or no lot)."""
    return (_log_area(living_area) * (quality - 2),
            (VALUATION_YEAR - np.asarray(year_built, dtype=float) - 50.0) * (condition - 2),
            np.asarray(waterfront, dtype=float) * _log_lot(lot_size))


def _vacant_log_value(geo: Geography, nb: np.ndarray, lot_size: np.ndarray) -> np.ndarray:
    """True log market value of vacant lots: the default town's land schedule (see the module docstring); a
    generated neighbourhood takes its recipe's row, moved by its difference in log-value level from the recipe."""
    sized = _vacant_schedule()
    recipe = nb % len(NEIGHBOURHOODS)
    level = geo.base[nb] - geo.base[recipe]
    return (level + np.log(sized["base_land_value"].to_numpy(float)[recipe])
            + sized["size_exponent"].to_numpy(float)[recipe]
            * np.log(lot_size / sized["base_lot_size"].to_numpy(float)[recipe]))


@lru_cache(maxsize=1)
def _vacant_schedule() -> pd.DataFrame:
    """The default town's land schedule rows for lots, one per neighbourhood in order (a neighbourhood without
    houses, which gets no vacant lot, borrows the first row)."""
    schedule = _built(DEFAULT_PARCELS, DEFAULT_SEED, NOISE_SD).land_schedule
    sized = schedule[schedule["base_lot_size"] > 0].set_index("neighbourhood")
    return sized.reindex(list(NEIGHBOURHOOD_IDS)).fillna(sized.iloc[0]).reset_index()


def true_log_value(parcels: pd.DataFrame) -> np.ndarray:
    """True log market value at the valuation date of each parcel, from its recorded features (a vacant lot's from
    its neighbourhood and lot size)."""
    geo = _geography_of(parcels["neighbourhood"])
    nb = _codes(parcels["neighbourhood"], geo.ids, "neighbourhood")
    vacant = (parcels["property_class"] == PROPERTY_CLASSES[VACANT]).to_numpy() if "property_class" in parcels \
        else np.zeros(len(parcels), dtype=bool)
    built = parcels[~vacant]
    out = np.empty(len(parcels))
    out[~vacant] = _log_value(
        geo,
        nb[~vacant],
        built["living_area"].to_numpy(dtype=float),
        built["lot_size"].to_numpy(dtype=float),
        built["year_built"].to_numpy(dtype=float),
        _codes(built["quality"], QUALITY_LEVELS, "quality"),
        _codes(built["condition"], CONDITION_LEVELS, "condition"),
        built["bathrooms"].to_numpy(dtype=float),
        built["garage_spaces"].to_numpy(dtype=float),
        _codes(built["style"], STYLE_LEVELS, "style"),
        built["waterfront"].to_numpy(dtype=float),
    )
    out[vacant] = _vacant_log_value(geo, nb[vacant], parcels["lot_size"].to_numpy(dtype=float)[vacant])
    return out


@lru_cache(maxsize=1)
def _curve_offsets() -> dict[str, float]:
    """Mean of each raw main effect over the default demo's built parcels (generated once)."""
    parcels = generate().parcels
    parcels = parcels[parcels["property_class"] != PROPERTY_CLASSES[VACANT]]
    return {f: float(np.mean(curve(parcels[f]))) for f, curve in _MAIN_EFFECTS.items()}


def true_curve(feature: str, x: np.ndarray) -> np.ndarray:
    """Main-effect shape of a feature in log-value units, mean 0 over the default demo's built parcels.

    `x` holds feature values (labels for quality, condition and style; 0/1 for waterfront).
    """
    if feature not in _MAIN_EFFECTS:
        raise ValueError(f"unknown feature {feature!r}; expected one of {sorted(_MAIN_EFFECTS)}")
    return _MAIN_EFFECTS[feature](x) - _curve_offsets()[feature]


def _default_log_index(dates: object) -> np.ndarray:
    """Log market level at each date relative to the valuation date (0 on 2026-01-01), default town."""
    days = np.asarray(dates, dtype="datetime64[D]") - VALUATION_DATE
    t = days.astype(np.float64) / 365.25

    def dip(s: np.ndarray | float) -> np.ndarray:
        return np.exp(-(((np.asarray(s) - INDEX_DIP_CENTRE) / INDEX_DIP_WIDTH) ** 2))

    return INDEX_GROWTH * t - INDEX_DIP * (dip(t) - dip(0.0))


# ---- parcels -------------------------------------------------------------------------------


def _allocate(weights: np.ndarray, total: int) -> np.ndarray:
    """Split `total` into integers proportional to `weights` (largest remainder)."""
    exact = weights / weights.sum() * total
    counts = np.floor(exact).astype(np.int64)
    short = total - counts.sum()
    counts[np.argsort(counts - exact, kind="stable")[:short]] += 1
    return counts


def _parcel_ids(rng: np.random.Generator, n: int) -> np.ndarray:
    """Increasing numeric ids with random gaps, as text of at least 7 digits."""
    ids = np.cumsum(rng.integers(1, 9, n))
    width = max(7, len(str(ids[-1])))
    return np.char.zfill(ids.astype(f"U{width}"), width)


def _features(rng: np.random.Generator, nb: np.ndarray, geo: Geography) -> dict[str, np.ndarray]:
    """Draw property class and features; level features come back as integer codes."""
    n = nb.size
    mix = geo.rows("class_mix")[nb]
    u = rng.random(n)
    cls = (u >= mix[:, 0]).astype(np.intp) + (u >= mix[:, 0] + mix[:, 1])
    sf, th = cls == 0, cls == 1
    condo = ~(sf | th)

    built = geo.rows("built")[nb]
    year = np.clip(np.rint(rng.normal(built[:, 0], built[:, 1])), 1850, 2025)

    area_median = np.select([sf, th], [geo.column("area_median")[nb], 1450.0], 850.0)
    area_sd = np.select([sf, th], [0.28, 0.18], 0.30)
    area = np.clip(np.rint(area_median * np.exp(area_sd * rng.standard_normal(n))), 350, 9000)

    lot_z = rng.standard_normal(n)
    sf_lot = np.clip(geo.column("lot_median")[nb] * np.exp(0.35 * lot_z), 1500, 200_000)
    lot = np.select([sf, th], [sf_lot, 2200.0 * np.exp(0.25 * lot_z)], 0.0)
    lot = np.rint(lot / 10.0) * 10.0

    quality_latent = geo.column("quality")[nb] + np.log(area / area_median) + 0.75 * rng.standard_normal(n)
    quality = np.clip(np.rint(quality_latent), 0, 5).astype(np.intp)
    age = VALUATION_YEAR - year
    condition = np.clip(np.rint(3.2 - 0.012 * age + 0.7 * rng.standard_normal(n)), 0, 4).astype(np.intp)

    baths = np.rint(2.0 * (1.0 + (area - 700.0) / 850.0 + 0.35 * rng.standard_normal(n))) / 2.0
    baths = np.clip(baths, 1.0, np.where(condo, 3.0, 8.0))

    era = 1.8 / (1.0 + np.exp(-(year - 1955.0) / 12.0))
    garage_sf = 0.2 + era + (area > 4000) + 0.6 * rng.standard_normal(n)
    r = rng.random(n)
    garage = np.select([sf, th], [np.clip(np.rint(garage_sf), 0, 5), r < 0.5], r < 0.1).astype(np.int64)

    r = rng.random(n)
    split_share = np.where((year >= 1955) & (year <= 1990), 0.25, 0.03)
    style_sf = np.where(r < split_share, 2, np.where(r < split_share + (1.0 - split_share) / 2.0, 0, 1))
    style = np.select([sf, th], [style_sf, np.where(r < 0.2, 2, 1)], 3).astype(np.intp)

    waterfront_share = geo.column("waterfront")[nb] * np.where(th, 0.5, 1.0)
    waterfront = (rng.random(n) < waterfront_share).astype(np.int64)

    centre = geo.rows("centre")[nb]
    location = np.round(centre + 0.006 * rng.standard_normal((n, 2)), 6)
    return {
        "property_class": cls,
        "latitude": location[:, 0],
        "longitude": location[:, 1],
        "living_area": area,
        "lot_size": lot,
        "year_built": year,
        "quality": quality,
        "condition": condition,
        "bathrooms": baths,
        "garage_spaces": garage,
        "style": style,
        "waterfront": waterfront,
    }


PRIOR_LEVEL = 1  # the prior roll's assessment level (full value, no caps): prior assessed = prior market value


def _prior_values(rng: np.random.Generator, nb: np.ndarray, log_value: np.ndarray, geo: Geography) -> np.ndarray:
    """Older roll: a regressive, neighbourhood-drifted fraction of market value, to the 100."""
    level, slope, scatter = geo.rows("prior")[nb].T
    noise = scatter * rng.standard_normal(nb.size)
    log_prior = np.log(level) + PRIOR_PIVOT + slope * (log_value - PRIOR_PIVOT) + noise
    return (np.rint(np.exp(log_prior) / 100.0) * 100.0).astype(np.int64)


# ---- sales ---------------------------------------------------------------------------------

# Kinds of sold parcel, in the column order of the sale quota; 0 is a valid single-parcel sale.
_INVALID, _EARLY, _MULTI = 1, 2, 3


def _scaled(counts: np.ndarray, scale: float) -> np.ndarray:
    return np.rint(counts * scale).astype(np.int64)


def _sale_quota(
    rng: np.random.Generator, counts: np.ndarray, geo: Geography
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sales per neighbourhood and kind, plus each multi-parcel sale's neighbourhood and size.

    Each neighbourhood's quota scales with its recipe's share of parcels; the 2022 and multi-parcel
    sales scale with the town (both scales are n / 20,000 in a town of the 22 recipes).
    """
    k = len(geo.neighbourhoods)
    n = int(counts.sum())
    scale, per_recipe = n / DEFAULT_PARCELS, n / geo.column("parcels").sum()
    busy = np.flatnonzero(geo.busy)
    share = counts[busy] / counts[busy].sum()
    early_nb = rng.choice(busy, int(round(EARLY_SALES * scale)), p=share)
    group_nb = rng.choice(busy, max(1, int(round(MULTI_PARCEL_SALES * scale))), p=share)
    group_size = rng.integers(2, 4, group_nb.size)
    quota = np.stack(
        [
            _scaled(geo.column("valid_sales"), per_recipe),
            _scaled(geo.column("invalid_sales"), per_recipe),
            np.bincount(early_nb, minlength=k),
            np.bincount(group_nb, weights=group_size, minlength=k).astype(np.int64),
        ],
        axis=1,
    )
    if (quota.sum(axis=1) > counts).any():
        raise ValueError("more sales than parcels in a neighbourhood")
    order = np.argsort(group_nb, kind="stable")
    return quota, group_nb[order], group_size[order]


def _sales(
    rng: np.random.Generator,
    nb: np.ndarray,
    counts: np.ndarray,
    log_value: np.ndarray,
    geo: Geography,
    noise_sd: float,
) -> dict[str, np.ndarray]:
    """Choose sold parcels, dates and prices; one row per (sale, parcel), ordered by sale id."""
    quota, group_nb, group_size = _sale_quota(rng, counts, geo)
    n = nb.size
    # Rank parcels at random within their neighbourhood (parcels are grouped by neighbourhood).
    order = np.lexsort((rng.random(n), nb))
    rank = np.empty(n, dtype=np.int64)
    rank[order] = np.arange(n) - np.repeat(np.cumsum(counts) - counts, counts)
    kind = (rank[:, None] >= np.cumsum(quota, axis=1)[nb]).sum(axis=1)

    single = np.flatnonzero(kind < _MULTI)
    multi = np.flatnonzero(kind == _MULTI)
    multi = multi[np.lexsort((rank[multi], nb[multi]))]
    group_of = np.repeat(np.arange(group_nb.size), group_size)

    window_days = int((VALUATION_DATE - WINDOW_START).astype(np.int64))
    single_kind = kind[single]
    offset = np.where(
        single_kind == _EARLY,
        rng.integers(0, int((WINDOW_START - EARLY_START).astype(np.int64)), single.size),
        rng.integers(0, window_days, single.size),
    )
    single_date = np.where(single_kind == _EARLY, EARLY_START, WINDOW_START) + offset
    group_date = WINDOW_START + rng.integers(0, window_days, group_nb.size)

    noise = noise_sd * rng.standard_normal(single.size)
    discount = np.where(single_kind == _INVALID, rng.uniform(0.60, 0.85, single.size), 1.0)
    single_price = np.exp(log_value[single] + true_log_index(single_date) + noise) * discount
    member_value = np.exp(log_value[multi] + true_log_index(group_date[group_of]))
    group_noise = np.exp(noise_sd * rng.standard_normal(group_nb.size))
    group_price = np.bincount(group_of, weights=member_value) * group_noise

    invalid_code = 1 + rng.choice(len(INVALID_SHARES), single.size, p=INVALID_SHARES)
    validity = np.where(single_kind == _INVALID, invalid_code, 0)

    parcel = np.concatenate([single, multi])
    date = np.concatenate([single_date, group_date[group_of]])
    price = np.concatenate([single_price, group_price[group_of]])
    key = np.concatenate([np.arange(single.size), single.size + group_of])
    rows = np.lexsort((parcel, key, date))
    key = key[rows]
    sale_number = np.cumsum(np.r_[True, key[1:] != key[:-1]])
    return {
        "sale_number": sale_number,
        "parcel": parcel[rows],
        "date": date[rows],
        "price": (np.rint(price[rows] / 100.0) * 100.0).astype(np.int64),
        "validity": np.concatenate([validity, np.zeros(multi.size, dtype=np.intp)])[rows],
        "multi": np.concatenate([np.zeros(single.size, bool), np.ones(multi.size, bool)])[rows],
    }


# ---- planted data-entry errors -------------------------------------------------------------


def _swap_leading_digits(price: np.ndarray) -> np.ndarray:
    """Swap the first two digits of six-digit prices (416,500 -> 146,500)."""
    first, second = price // 100_000, (price // 10_000) % 10
    return price + (second - first) * 90_000


def _plant_errors(
    rng: np.random.Generator, nb: np.ndarray, f: dict[str, np.ndarray], s: dict[str, np.ndarray], geo: Geography
) -> list[tuple[str, int, str, int, int]]:
    """Apply eight plausible keying errors in place.

    Returns (kind, sale row, column, recorded value, correct value) for each.
    """
    p = s["parcel"]
    price = s["price"]
    first, second = price // 100_000, (price // 10_000) % 10
    sf, condo = f["property_class"][p] == 0, f["property_class"][p] == 2
    area, lot, year = f["living_area"][p], f["lot_size"][p], f["year_built"][p]
    plans = (
        ("living_area_tenth", "living_area", sf & (area >= 2500), lambda v: np.rint(v / 10.0)),
        ("living_area_extra_zero", "living_area", condo & (area <= 900), lambda v: v * 10.0),
        ("lot_size_extra_zero", "lot_size", sf & (lot >= 5000) & (lot <= 20_000), lambda v: v * 10.0),
        ("quality_swapped", "quality", f["quality"][p] <= 1, lambda v: 5 - v),
        ("year_built_transposed", "year_built", (year >= 1980) & (year <= 1989), lambda v: v - 90.0),
        ("price_missing_zero", "sale_price", price >= 250_000, lambda v: v // 10),
        ("price_extra_zero", "sale_price", price >= 150_000, lambda v: v * 10),
        (
            "price_transposed_digits",
            "sale_price",
            (price >= 100_000) & (price < 1_000_000) & (np.abs(first - second) >= 3) & (second > 0),
            _swap_leading_digits,
        ),
    )
    eligible = (s["validity"] == 0) & ~s["multi"] & (s["date"] >= WINDOW_START) & geo.busy[nb[p]]
    order = rng.permutation(p.size)
    used = np.zeros(p.size, dtype=bool)
    planted: list[tuple[str, int, str, int, int]] = []
    for kind, column, mask, keyed in plans:
        candidates = order[(eligible & mask & ~used)[order]]
        if candidates.size == 0:
            raise ValueError(f"no sale fits the planted error {kind}; generate more parcels")
        row = candidates[0]
        used[row] = True
        target, at = (s["price"], row) if column == "sale_price" else (f[column], p[row])
        correct = target[at]
        target[at] = keyed(correct)
        planted.append((kind, int(row), column, int(target[at]), int(correct)))
    return planted


# ---- land schedule -------------------------------------------------------------------------


def _land_schedule(
    nb: np.ndarray, f: dict[str, np.ndarray], log_value: np.ndarray, geo: Geography
) -> pd.DataFrame:
    """Per neighbourhood: a lot-size rule from typical lots and values, and a flat row for units."""
    frame = pd.DataFrame(
        {"nb": nb, "has_lot": f["lot_size"] > 0, "lot": f["lot_size"], "value": np.exp(log_value)}
    )
    typical = frame.groupby(["nb", "has_lot"]).median().reset_index()
    with_lot = typical["has_lot"].to_numpy()
    exponent = geo.column("land_exponent")[typical["nb"].to_numpy()]
    schedule = pd.DataFrame(
        {
            "neighbourhood": np.asarray(geo.ids)[typical["nb"].to_numpy()],
            "base_lot_size": np.where(with_lot, np.rint(typical["lot"] / 100.0) * 100.0, 0).astype(np.int64),
            "base_land_value": np.where(
                with_lot,
                np.rint(0.30 * typical["value"] / 1000.0) * 1000.0,
                np.rint(0.12 * typical["value"] / 500.0) * 500.0,
            ).astype(np.int64),
            "size_exponent": np.where(with_lot, exponent, 0.0),
        }
    )
    return schedule.sort_values(["neighbourhood", "base_lot_size"], ignore_index=True)


# ---- appended parcels: vacant lots and institutional parcels ------------------------------


def _appended(seed: int, scale: float, last_id: int, last_sale: int,
              geo: Geography) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Vacant lots (a few sold) and institutional parcels, drawn from their own stream so the built parcels stay
    as they are; ids continue after `last_id`, sale numbers after `last_sale`. Returns parcels and sales."""
    rng = np.random.default_rng([seed, APPENDED_STREAM])
    with_lots = np.array([n.class_mix[0] > 0 for n in geo.neighbourhoods])
    weights = np.where(with_lots, geo.column("parcels"), 0.0)
    n_vacant = max(1, int(round(VACANT_LOTS * scale)))
    vacant_nb = np.sort(rng.choice(len(geo.neighbourhoods), n_vacant, p=weights / weights.sum()))
    lot = np.rint(np.clip(geo.column("lot_median")[vacant_nb] * np.exp(0.45 * rng.standard_normal(n_vacant)),
                          1500, 200_000) / 10.0) * 10.0
    waterfront = (rng.random(n_vacant) < geo.column("waterfront")[vacant_nb]).astype(np.int64)
    n_inst = max(1, int(round(INSTITUTIONAL_PARCELS * scale)))
    inst_nb = np.full(n_inst, geo.ids.index(INSTITUTIONAL_NEIGHBOURHOOD))
    inst = _features(rng, inst_nb, geo)
    nb = np.concatenate([vacant_nb, inst_nb])
    n = nb.size
    ids = last_id + np.cumsum(rng.integers(1, 9, n))
    width = max(7, len(str(ids[-1])))
    vacant_value = _vacant_log_value(geo, vacant_nb, lot)
    inst_value = _log_value(geo, inst_nb, *(inst[c] for c in ("living_area", "lot_size", "year_built", "quality",
                                                              "condition", "bathrooms", "garage_spaces", "style",
                                                              "waterfront")))
    centre = geo.rows("centre")[vacant_nb]
    location = np.round(centre + 0.006 * rng.standard_normal((n_vacant, 2)), 6)
    log_prior = np.log(0.9) + np.concatenate([vacant_value, inst_value]) + 0.08 * rng.standard_normal(n)
    blank = np.full(n_vacant, np.nan)
    prior = (np.rint(np.exp(log_prior) / 100.0) * 100.0).astype(np.int64)

    def both(vacant: np.ndarray, built: np.ndarray) -> np.ndarray:
        return np.concatenate([vacant, built])

    parcels = pd.DataFrame({
        "parcel_id": np.char.zfill(ids.astype(f"U{width}"), width),
        "neighbourhood": pd.Categorical.from_codes(nb, geo.ids),
        "market_area": pd.Categorical.from_codes(geo.market_area_of[nb], geo.market_areas),
        "property_class": pd.Categorical.from_codes(np.r_[np.full(n_vacant, VACANT), np.full(n_inst, INSTITUTIONAL)],
                                                    PROPERTY_CLASSES),
        "prior_market_value": prior,
        "prior_assessed_value": prior * PRIOR_LEVEL,
        "new_construction": np.where(both(np.zeros(n_vacant), inst["year_built"]) >= VALUATION_YEAR - 1, "yes", "no"),
        "latitude": both(location[:, 0], inst["latitude"]),
        "longitude": both(location[:, 1], inst["longitude"]),
        "living_area": pd.array(both(blank, inst["living_area"]), dtype="Int64"),
        "lot_size": both(lot, inst["lot_size"]).astype(np.int64),
        "year_built": pd.array(both(blank, inst["year_built"]), dtype="Int64"),
        "quality": pd.Categorical.from_codes(both(np.full(n_vacant, -1), inst["quality"]), QUALITY_LEVELS,
                                             ordered=True),
        "condition": pd.Categorical.from_codes(both(np.full(n_vacant, -1), inst["condition"]), CONDITION_LEVELS,
                                               ordered=True),
        "bathrooms": both(np.zeros(n_vacant), inst["bathrooms"]),
        "garage_spaces": both(np.zeros(n_vacant, dtype=np.int64), inst["garage_spaces"]),
        "style": pd.Categorical.from_codes(both(np.full(n_vacant, -1), inst["style"]), STYLE_LEVELS),
        "waterfront": both(waterfront, inst["waterfront"]),
    })
    n_sold = min(n_vacant, max(1, int(round(VACANT_SALES * scale))))
    sold = np.sort(rng.choice(n_vacant, n_sold, replace=False))
    window_days = int((VALUATION_DATE - WINDOW_START).astype(np.int64))
    date = WINDOW_START + rng.integers(0, window_days, n_sold)
    price = np.exp(vacant_value[sold] + true_log_index(date) + NOISE_SD * rng.standard_normal(n_sold))
    order = np.argsort(date, kind="stable")
    sales = pd.DataFrame({
        "sale_id": np.char.add("S", np.char.zfill((last_sale + 1 + np.arange(n_sold)).astype("U7"), 7)),
        "parcel_id": parcels["parcel_id"].to_numpy()[sold[order]],
        "sale_date": date[order].astype("datetime64[s]"),
        "sale_price": (np.rint(price[order] / 100.0) * 100.0).astype(np.int64),
        "validity": pd.Categorical.from_codes(np.zeros(n_sold, dtype=np.intp), VALIDITY_CODES),
    })
    return parcels, sales


# ---- stress variants -----------------------------------------------------------------------
#
# Each variant is the built town (no vacant lots or institutional parcels, no land schedule) with one stress
# planted from a random stream of its own (default_rng([seed, VARIANT_STREAM + k])), so a seed fixes it and the
# default town is untouched. Sale prices keep their drawn noise: a variant moves each sale's price by the change
# in its true value and market level (`_repriced`). `DemoTown.truth` is then every parcel's true log value at the
# valuation date (from its correct features) and `true_log_index(dates, variant)` the market level.

VARIANTS = ("heavy_tails", "keying_errors", "thin", "one_date", "turning_market", "missing", "binary_interactions")
VARIANT_STREAM = 100
KEYED_SHARE = 0.02                         # keying_errors: share of valid in-window single-parcel sales
THIN_SEGMENTS, THIN_SALES, THIN_UNSOLD = 40, (1, 10), (15, 60)
THIN_SHIFT_SD = 0.10                       # thin: sd of each thin segment's own log-value shift
ONE_DATE = np.datetime64("2025-10-01", "D")
TURN_START = np.datetime64("2016-01-01", "D")   # turning_market: ten years of sales
TURN_PEAK, TURN_CURVATURE = -3.0, 0.01     # log index = -c (t - peak)^2 + c peak^2: +0.49 over 7 years, -0.09 after
MISSING_SHARE = 0.20
MISSING_FEATURES = ("year_built", "bathrooms")  # year_built left blank; bathrooms keyed 0 (declared missing = [0])
BINARY_FEATURES = ("basement", "pool", "fireplace", "corner_lot")
BINARY_SHARES = (0.45, 0.15, 0.35, 0.12)   # of houses; condominiums have no basement or pool
BINARY_EFFECTS = (0.06, 0.04, 0.03, -0.02)
# (feature, partner, coefficient): binary x binary is the product; with a continuous partner its transform below.
BINARY_INTERACTIONS: tuple[tuple[str, str, float], ...] = (
    ("basement", "fireplace", 0.05),
    ("pool", "waterfront", 0.06),
    ("basement", "living_area", 0.12),     # x ln(living_area / 1600)
    ("pool", "lot_size", 0.04),            # x ln(1 + lot_size / 3000)
)


def true_log_index(dates: object, variant: str | None = None) -> np.ndarray:
    """Log market level at each date relative to the valuation date (0 on 2026-01-01) for the default town or a
    variant (only turning_market has a market of its own)."""
    if variant != "turning_market":
        return _default_log_index(dates)
    t = (np.asarray(dates, dtype="datetime64[D]") - VALUATION_DATE).astype(np.float64) / 365.25
    return -TURN_CURVATURE * (t - TURN_PEAK) ** 2 + TURN_CURVATURE * TURN_PEAK ** 2


def _binary_terms(frame: pd.DataFrame) -> list[np.ndarray]:
    """The binary_interactions variant's terms: each yes/no feature, then each BINARY_INTERACTIONS product (their
    coefficients: BINARY_EFFECTS, then the products')."""
    def term(name: str) -> np.ndarray:
        if name == "living_area":
            return _log_area(frame[name].to_numpy(float))
        if name == "lot_size":
            return _log_lot(frame[name].to_numpy(float))
        return frame[name].to_numpy(float)

    return [*(term(name) for name in BINARY_FEATURES), *(term(a) * term(b) for a, b, _ in BINARY_INTERACTIONS)]


def binary_effects(frame: pd.DataFrame) -> np.ndarray:
    """The binary_interactions variant's addition to the true log value: main effects and interactions."""
    coefficients = (*BINARY_EFFECTS, *(c for _, _, c in BINARY_INTERACTIONS))
    return np.asarray(sum(c * t for c, t in zip(coefficients, _binary_terms(frame))), dtype=float)


def _correct_parcels(town: DemoTown) -> pd.DataFrame:
    """The parcels with each planted feature error put right (the truth is computed from these)."""
    parcels = town.parcels.copy()
    at = pd.Series(np.arange(len(parcels)), index=parcels["parcel_id"])
    for row in town.planted_errors.itertuples():
        if row.column != "sale_price":
            parcels.loc[at[row.parcel_id], row.column] = row.correct
    return parcels


def true_log_values(town: DemoTown) -> pd.Series:
    """Each parcel's true log value at the valuation date by parcel id (a variant's own truth, else computed from
    the correct features)."""
    if town.truth is not None:
        return town.truth
    return pd.Series(true_log_value(_correct_parcels(town)), index=town.parcels["parcel_id"].to_numpy())


def oracle_log_values(town: DemoTown, parcel_ids: object, recorded: bool = False) -> np.ndarray:
    """The oracle's log value for each listed parcel (e.g. the sold parcels of the sales the models are scored on,
    in their order): the generator's truth (`recorded`: at the features as recorded, `recorded_log_values`). A
    parcel the town does not have is an error, never a gap."""
    values = recorded_log_values(town) if recorded else true_log_values(town)
    truth = values.reindex(np.asarray(parcel_ids, dtype=object))
    if truth.isna().any():
        raise ValueError(f"no true value for parcel {truth.index[truth.isna()][0]!r}")
    return truth.to_numpy(float)


def _repriced(sales: pd.DataFrame, old_log: np.ndarray, new_log: np.ndarray) -> np.ndarray:
    """Each sale's price times the change in its parcels' summed value (per sale row: the parcel's log value at
    the sale date, old and new): the drawn noise, discounts and keyed errors stay as they were."""
    key = sales["sale_id"].to_numpy()
    ratio = (pd.Series(np.exp(new_log), index=key).groupby(level=0).transform("sum")
             / pd.Series(np.exp(old_log), index=key).groupby(level=0).transform("sum")).to_numpy()
    return (np.rint(sales["sale_price"].to_numpy(float) * ratio / 100.0) * 100.0).astype(np.int64)


def _variant(n_parcels: int, seed: int, variant: str) -> DemoTown:
    """The built town with one stress planted (see VARIANTS); prices follow the new truth."""
    if variant not in VARIANTS:
        raise ValueError(f"unknown variant {variant!r}; expected one of {', '.join(VARIANTS)}")
    base = _built(n_parcels, seed, NOISE_SD)
    rng = np.random.default_rng([seed, VARIANT_STREAM + VARIANTS.index(variant)])
    parcels, sales = base.parcels.copy(), base.sales.copy()
    planted = base.planted_errors
    correct = _correct_parcels(base)
    old_truth = true_log_value(correct)
    truth = old_truth.copy()
    at = pd.Series(np.arange(len(parcels)), index=parcels["parcel_id"]).loc[sales["parcel_id"]].to_numpy()
    dates = sales["sale_date"].to_numpy("datetime64[D]")
    new_dates = dates.copy()
    multi = sales["sale_id"].duplicated(keep=False).to_numpy()
    clean = ((sales["validity"] == "valid").to_numpy() & ~multi & ~sales["sale_id"].isin(planted["sale_id"]).to_numpy()
             & (dates >= WINDOW_START))

    if variant == "heavy_tails":
        t = rng.standard_t(3, clean.sum()) * NOISE_SD / np.sqrt(3.0)   # t(3) has variance 3
        price = np.exp(truth[at[clean]] + _default_log_index(dates[clean]) + t)
        sales.loc[clean, "sale_price"] = (np.rint(price / 100.0) * 100.0).astype(np.int64)
    elif variant == "keying_errors":
        rows = np.sort(rng.choice(np.flatnonzero(clean), int(round(KEYED_SHARE * clean.sum())), replace=False))
        price = sales["sale_price"].to_numpy().copy()
        first, second = price // 100_000, (price // 10_000) % 10
        swappable = (price >= 100_000) & (price < 1_000_000) & (np.abs(first - second) >= 2) & (second > 0)
        kind = rng.integers(0, 3, rows.size)            # 0 extra digit, 1 missing digit, 2 swapped leading digits
        kind = np.where((kind == 2) & ~swappable[rows], 0, kind)
        keyed = np.select([kind == 0, kind == 1], [price[rows] * 10, np.rint(price[rows] / 1000.0) * 100],
                          _swap_leading_digits(price[rows]))
        names = np.array(["price_keyed_extra_digit", "price_keyed_missing_digit", "price_keyed_swapped_digits"])
        planted = pd.concat([planted, pd.DataFrame({
            "kind": names[kind], "sale_id": sales["sale_id"].to_numpy()[rows],
            "parcel_id": sales["parcel_id"].to_numpy()[rows], "column": "sale_price",
            "recorded": keyed.astype(np.int64), "correct": price[rows]})], ignore_index=True)
        price[rows] = keyed
        sales["sale_price"] = price
    elif variant == "thin":
        nb = parcels["neighbourhood"].to_numpy(str)
        sold = np.zeros(len(parcels), dtype=bool)
        sold[at] = True
        sold_clean = np.zeros(len(parcels), dtype=bool)
        sold_clean[at[clean]] = True
        geo = geography(neighbourhood_count(n_parcels))
        taken = np.zeros(len(parcels), dtype=bool)
        new_nb = nb.astype(object)
        shift = np.zeros(len(parcels))
        for j in range(THIN_SEGMENTS):
            k = int(rng.integers(THIN_SALES[0], THIN_SALES[1] + 1))
            m = int(rng.integers(THIN_UNSOLD[0], THIN_UNSOLD[1] + 1))
            free = ~taken & geo.busy[_codes(nb, geo.ids, "neighbourhood")]
            able = [i for i in geo.ids if ((nb == i) & free & sold_clean).sum() >= k and ((nb == i) & free & ~sold).sum() >= m]
            if not able:
                raise ValueError("too few sales for 40 thin segments; generate more parcels")
            home = (nb == able[rng.integers(len(able))]) & free
            members = np.r_[rng.choice(np.flatnonzero(home & sold_clean), k, replace=False),
                            rng.choice(np.flatnonzero(home & ~sold), m, replace=False)]
            taken[members] = True
            new_nb[members] = f"THN{j + 1:02d}"
            shift[members] = THIN_SHIFT_SD * rng.standard_normal()
        parcels["neighbourhood"] = pd.Categorical(new_nb, categories=[*geo.ids, *(f"THN{j + 1:02d}" for j in
                                                                                   range(THIN_SEGMENTS))])
        truth = truth + shift
    elif variant == "one_date":
        new_dates = np.full(dates.size, ONE_DATE)
    elif variant == "turning_market":
        days = int((VALUATION_DATE - TURN_START).astype(np.int64))
        ids, first = np.unique(sales["sale_id"].to_numpy(), return_inverse=True)
        new_dates = (TURN_START + rng.integers(0, days, ids.size))[first]
    elif variant == "missing":
        for name in MISSING_FEATURES:          # each feature's own fifth of the parcels, drawn independently
            gone = rng.choice(len(parcels), int(round(MISSING_SHARE * len(parcels))), replace=False)
            if name == "year_built":
                column = pd.array(parcels[name].to_numpy(), dtype="Int64")
                column[gone] = pd.NA
                parcels[name] = column
            else:
                parcels.loc[gone, name] = 0.0
    elif variant == "binary_interactions":
        house = (parcels["property_class"] != "condominium").to_numpy()
        for name, share in zip(BINARY_FEATURES, BINARY_SHARES):
            has = rng.random(len(parcels)) < share
            if name in ("basement", "pool"):
                has &= house
            parcels[name] = has.astype(np.int64)
            correct[name] = parcels[name]
        truth = truth + binary_effects(correct)

    if variant in ("thin", "one_date", "turning_market", "binary_interactions"):
        sales["sale_price"] = _repriced(sales, old_truth[at] + _default_log_index(dates),
                                        truth[at] + true_log_index(new_dates, variant))
        sales["sale_date"] = new_dates.astype("datetime64[s]")
    return DemoTown(parcels=parcels, sales=sales, land_schedule=base.land_schedule.iloc[:0], planted_errors=planted,
                    variant=variant, truth=pd.Series(truth, index=parcels["parcel_id"].to_numpy()))


# ---- public API ----------------------------------------------------------------------------


def generate(n_parcels: int = DEFAULT_PARCELS, seed: int = DEFAULT_SEED, noise_sd: float = NOISE_SD,
             variant: str | None = None) -> DemoTown:
    """Generate Vellmarsh with `n_parcels` built parcels, then its vacant lots and institutional parcels; the same
    arguments give the same town. A `variant` (one of VARIANTS) is the built town with that stress planted."""
    if n_parcels < MIN_PARCELS:
        raise ValueError(f"n_parcels must be at least {MIN_PARCELS}")
    if variant is not None:
        if noise_sd != NOISE_SD:
            raise ValueError("a variant keeps the demo's noise sd")
        return _variant(n_parcels, seed, variant)
    town = _built(n_parcels, seed, noise_sd)
    last_sale = int(town.sales["sale_id"].str[1:].astype(int).max())
    extra_parcels, extra_sales = _appended(seed, n_parcels / DEFAULT_PARCELS, int(town.parcels["parcel_id"].iloc[-1]),
                                           last_sale, geography(neighbourhood_count(n_parcels)))
    return DemoTown(parcels=pd.concat([town.parcels, extra_parcels], ignore_index=True),
                    sales=pd.concat([town.sales, extra_sales], ignore_index=True),
                    land_schedule=town.land_schedule, planted_errors=town.planted_errors)


def _built(n_parcels: int, seed: int, noise_sd: float) -> DemoTown:
    """The built parcels (houses, townhouses, condominiums), their sales and land schedule."""
    rng = np.random.default_rng(seed)
    geo = geography(neighbourhood_count(n_parcels))
    counts = _allocate(geo.column("parcels"), n_parcels)
    nb = np.repeat(np.arange(len(geo.neighbourhoods)), counts)
    parcel_ids = _parcel_ids(rng, n_parcels)
    f = _features(rng, nb, geo)
    log_value = _log_value(
        geo, nb, *(f[c] for c in ("living_area", "lot_size", "year_built", "quality", "condition",
                             "bathrooms", "garage_spaces", "style", "waterfront"))
    )
    prior = _prior_values(rng, nb, log_value, geo)
    s = _sales(rng, nb, counts, log_value, geo, noise_sd)
    land = _land_schedule(nb, f, log_value, geo)
    sale_ids = np.char.add("S", np.char.zfill(s["sale_number"].astype("U7"), 7))
    planted = _plant_errors(rng, nb, f, s, geo)

    parcels = pd.DataFrame(
        {
            "parcel_id": parcel_ids,
            "neighbourhood": pd.Categorical.from_codes(nb, geo.ids),
            "market_area": pd.Categorical.from_codes(geo.market_area_of[nb], geo.market_areas),
            "property_class": pd.Categorical.from_codes(f["property_class"], PROPERTY_CLASSES),
            "prior_market_value": prior,
            "prior_assessed_value": prior * PRIOR_LEVEL,
            "new_construction": np.where(f["year_built"] >= VALUATION_YEAR - 1, "yes", "no"),
            "latitude": f["latitude"],
            "longitude": f["longitude"],
            "living_area": f["living_area"].astype(np.int64),
            "lot_size": f["lot_size"].astype(np.int64),
            "year_built": f["year_built"].astype(np.int64),
            "quality": pd.Categorical.from_codes(f["quality"], QUALITY_LEVELS, ordered=True),
            "condition": pd.Categorical.from_codes(f["condition"], CONDITION_LEVELS, ordered=True),
            "bathrooms": f["bathrooms"],
            "garage_spaces": f["garage_spaces"],
            "style": pd.Categorical.from_codes(f["style"], STYLE_LEVELS),
            "waterfront": f["waterfront"],
        }
    )
    sales = pd.DataFrame(
        {
            "sale_id": sale_ids,
            "parcel_id": parcel_ids[s["parcel"]],
            "sale_date": s["date"].astype("datetime64[s]"),
            "sale_price": s["price"],
            "validity": pd.Categorical.from_codes(s["validity"], VALIDITY_CODES),
        }
    )
    labels = {"quality": QUALITY_LEVELS}
    planted_errors = pd.DataFrame(
        [
            {
                "kind": kind,
                "sale_id": sale_ids[row],
                "parcel_id": parcel_ids[s["parcel"][row]],
                "column": column,
                "recorded": labels[column][recorded] if column in labels else int(recorded),
                "correct": labels[column][correct] if column in labels else int(correct),
            }
            for kind, row, column, recorded, correct in planted
        ]
    )
    return DemoTown(parcels=parcels, sales=sales, land_schedule=land, planted_errors=planted_errors)


def variant_config(variant: str) -> str:
    """reval.toml for a variant: the demo's, without the land schedule and the classes it values (a variant has
    built parcels only), plus what the variant's data needs."""
    text = CONFIG_PATH.read_text()
    head, classes = text.split("\n# How each property class is valued", 1)
    text = head.replace('land_schedule = "land_schedule.csv"\n', "").replace(
        "# land from the neighbourhood schedule (base_lot_size names the lot_size feature).", "# no land schedule.")
    text = text.replace("# reval project: the demo municipality of Vellmarsh (fictional; invented data).",
                        f"# reval project: the demo municipality of Vellmarsh, stress variant {variant} (fictional).")
    if variant == "turning_market":
        text = _replaced(text, "sale_window_months = 36 ", "sale_window_months = 120")
    elif variant == "missing":
        text = _replaced(text, 'name = "bathrooms"\ntype = "continuous"\n',
                         'name = "bathrooms"\ntype = "continuous"\nmissing = [0]                    # 0 = not known\n')
    elif variant == "binary_interactions":
        extra = "".join(f'\n[[features]]\nname = "{name}"\ntype = "binary"\nbaseline = "no"\n' for name in BINARY_FEATURES)
        text = _replaced(text, "\n[sales]", extra + "\n[sales]")
    return text


def _replaced(text: str, old: str, new: str) -> str:
    if old not in text:
        raise ValueError(f"the demo config has no {old!r}")
    return text.replace(old, new, 1)


def write_project(folder: Path, n_parcels: int = DEFAULT_PARCELS, seed: int = DEFAULT_SEED,
                  variant: str | None = None) -> DemoTown:
    """Write parcels.csv, sales.csv and (the default town) land_schedule.csv of a generated town, plus reval.toml;
    returns the town (its truth for a benchmark)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    town = generate(n_parcels=n_parcels, seed=seed, variant=variant)
    town.parcels.to_csv(folder / "parcels.csv", index=False)
    town.sales.to_csv(folder / "sales.csv", index=False, date_format="%Y-%m-%d")
    config = folder / CONFIG_PATH.name
    if variant is not None:
        config.write_text(variant_config(variant))
        return town
    town.land_schedule.to_csv(folder / "land_schedule.csv", index=False)
    if not (config.exists() and config.samefile(CONFIG_PATH)):
        shutil.copyfile(CONFIG_PATH, config)
    return town


def main(argv: list[str] | None = None) -> None:
    """Command line: write a Vellmarsh project folder of any size, or a stress variant of it."""
    parser = argparse.ArgumentParser(prog="python -m data_samples.demo_town", description=main.__doc__)
    parser.add_argument("--parcels", type=int, default=DEFAULT_PARCELS, help="number of parcels")
    parser.add_argument("--out", type=Path, required=True, help="project folder to write")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed")
    parser.add_argument("--variant", choices=VARIANTS, help="a stress variant (built parcels only)")
    args = parser.parse_args(argv)
    try:
        write_project(args.out, n_parcels=args.parcels, seed=args.seed, variant=args.variant)
    except ValueError as error:
        parser.error(str(error))


if __name__ == "__main__":
    main()


# ---- the truth's form with unknown coefficients ----------------------------------------------
#
# A benchmark floor (bench/accuracy.py): a fit TOLD the truth's functional form, estimating only its coefficients
# from the sales, shows how close any estimator could come to the oracle on the same sales.

# `missing` has no known form: a fifth of its parcels lack year_built or bathrooms, which the truth needs, so no
# regressors of the recorded features span it (a floor there would need each missing value's conditional mean).
KNOWN_FORM_VARIANTS = (None, "heavy_tails", "keying_errors", "thin", "one_date", "turning_market",
                       "binary_interactions")
# The variants whose truth is the default town's function of the features (thin adds a level per thin segment,
# binary_interactions terms of its own, missing's recorded features lack values the truth needs).
DEFAULT_TRUTH_VARIANTS = (None, "heavy_tails", "keying_errors", "one_date", "turning_market")
FREE, LEVEL, SLOPE = 0, 1, 2              # KnownForm.group: free, neighbourhood level, neighbourhood slope


@dataclass(frozen=True)
class KnownForm:
    """Regressors whose span holds the true log value of built parcels, and each column's group: FREE, a
    neighbourhood's level (LEVEL, beside its market area's) or its living-area slope (SLOPE, beside the common
    one); a fit may shrink the last two groups toward the market area and the common slope."""

    columns: np.ndarray
    group: np.ndarray


def _indicators(codes: np.ndarray, n_levels: int) -> np.ndarray:
    return (np.asarray(codes)[:, None] == np.arange(n_levels)[None, :]).astype(float)


def known_form(parcels: pd.DataFrame, variant: str | None = None) -> KnownForm:
    """The truth's functional form with its coefficients unknown, from the parcels' features as given: a level per
    market area and per neighbourhood, the living-area curve with a common slope and one per neighbourhood, the
    age, lot, bathroom and garage curves, a level per quality, condition and style (first level the baseline),
    waterfront, the TRUE_INTERACTIONS products and (binary_interactions) that variant's terms. Built by the same
    functions as `_log_value`, so the truth lies in the span (tests/test_demo_variants.py checks it)."""
    if variant not in KNOWN_FORM_VARIANTS:
        raise ValueError(f"no known form for variant {variant!r}; expected one of {KNOWN_FORM_VARIANTS}")
    if (parcels["property_class"] == PROPERTY_CLASSES[VACANT]).any():
        raise ValueError("the known form is of built parcels; vacant lots follow the land schedule")
    numeric = {c: parcels[c].to_numpy(dtype=float, na_value=np.nan) for c in
               ("living_area", "lot_size", "year_built", "bathrooms", "garage_spaces", "waterfront")}
    if any(np.isnan(v).any() for v in numeric.values()):
        raise ValueError("the known form needs every feature of every parcel")
    quality = _codes(parcels["quality"], QUALITY_LEVELS, "quality")
    condition = _codes(parcels["condition"], CONDITION_LEVELS, "condition")
    style = _codes(parcels["style"], STYLE_LEVELS, "style")
    area_ids, area = np.unique(parcels["market_area"].astype(str), return_inverse=True)
    nb_ids, nb = np.unique(parcels["neighbourhood"].astype(str), return_inverse=True)
    area_curve = _area_curve(numeric["living_area"])
    neighbourhood = _indicators(nb, nb_ids.size)
    free = [
        _indicators(area, area_ids.size),
        area_curve[:, None],
        *(f(numeric[c])[:, None] for f, c in ((_age_curve, "year_built"), (_lot_curve, "lot_size"),
                                              (_bathroom_curve, "bathrooms"), (_garage_curve, "garage_spaces"))),
        _indicators(quality, len(QUALITY_LEVELS))[:, 1:],
        _indicators(condition, len(CONDITION_LEVELS))[:, 1:],
        _indicators(style, len(STYLE_LEVELS))[:, 1:],
        numeric["waterfront"][:, None],
        *(t[:, None] for t in _interaction_terms(numeric["living_area"], numeric["lot_size"], numeric["year_built"],
                                                 quality, condition, numeric["waterfront"])),
        *((t[:, None] for t in _binary_terms(parcels)) if variant == "binary_interactions" else ()),
    ]
    free_columns = np.column_stack(free)
    columns = np.column_stack([free_columns, neighbourhood, neighbourhood * area_curve[:, None]])
    group = np.repeat([FREE, LEVEL, SLOPE], [free_columns.shape[1], nb_ids.size, nb_ids.size])
    return KnownForm(columns=columns, group=group)


def recorded_log_values(town: DemoTown) -> pd.Series:
    """The truth at each parcel's features as recorded, planted feature errors left in (the oracle sees the correct
    ones), by parcel id; for the default town and the variants whose truth is the default function."""
    if town.variant not in DEFAULT_TRUTH_VARIANTS:
        raise ValueError(f"variant {town.variant!r} has a truth of its own; expected one of {DEFAULT_TRUTH_VARIANTS}")
    return pd.Series(true_log_value(town.parcels), index=town.parcels["parcel_id"].to_numpy())
