"""The commented starter reval.toml written by `reval init`."""
from __future__ import annotations

from reval.model.settings import MODEL_TOML_COMMENTED
from reval.stats.standards import STANDARDS_TOML_COMMENTED

_HEAD = """\
# reval project configuration. One folder = one revaluation: this file, the database
# (reval.duckdb) and the exports. Paths are relative to this folder.
#
# Values that reval produces are estimates for review by a qualified assessor.
# Assessment level, caps, exemptions, notices and appeals follow local law: the office
# must set the [assessment] rules to match it.

[jurisdiction]
name = {name}
valuation_date = 2026-01-01        # the date all values and time-adjusted prices refer to
sale_window_months = 36            # sales from this many months before the valuation date

[files]
parcels = "parcels.csv"            # CSV or Parquet, one row per parcel
sales = "sales.csv"                # one row per sale and parcel; leave out if the parcels file
                                   # holds the sales too (one row per sold parcel, as in research data)
# date_format = "%d/%m/%Y"         # sale date format if not YYYY-MM-DD

# Your column names (right) for each role (left). Required: parcel_id, segment, and for
# sales sale_date and sale_price. The others are optional.
[columns]
parcel_id = "parcel_id"
segment = "neighbourhood"          # the unit a model is fitted for
market_area = "market_area"        # the parent a thin segment borrows from
property_class = "property_class"
prior_value = "prior_value"        # value on the current roll
sale_id = "sale_id"                # the same sale id on several parcels = a multi-parcel sale
sale_date = "sale_date"
sale_price = "sale_price"
sale_validity = "validity"         # code telling arm's-length sales from others
# latitude = "latitude"
# longitude = "longitude"

# Model features: type is continuous, ordinal (with its levels, lowest first), categorical
# (with its levels) or binary (0/1, yes/no, true/false). Optional: column (if it differs
# from name), log = true (model the logarithm), range = [low, high] (values outside are errors).
[[features]]
name = "living_area"
type = "continuous"
log = true
range = [100, 20000]

[[features]]
name = "quality"
type = "ordinal"
levels = ["low", "average", "good", "excellent"]

# Which sales qualify for models and ratio studies.
[sales]
validity_codes_kept = ["valid"]    # leave out to keep every code
# price_min = 10000
# price_max = 5000000
# property_classes = ["single_family", "condominium"]
exclude_multi_parcel = true

# Market-trend estimation for time adjustment to the valuation date.
[time_adjustment]
# by_market_area = false           # a trend per market area where it has enough sales
# min_sales_market_area = 400
# n_basis = 10

# Ratio studies.
[study]
# trim_iqr_k = 3.0                 # trim ratios outside Q1 - k*IQR .. Q3 + k*IQR (listed, never silent)
# confidence = 0.95
# bootstrap = 1000                 # resamples for the COD and PRD confidence intervals
# seed = 2026

"""

_TAIL = """
# Rules from local law: the office sets these.
[assessment]
# level = 1.0                      # assessment level: assessed value = market value x level
# rounding = 100                   # round assessed values to this unit
# land_schedule = "land_schedule.csv"   # CSV: segment, base_<lot feature>, base_land_value, size_exponent;
#                                  # land = base_land_value x (lot / base lot) ^ size_exponent
# review_change_threshold = 0.25   # list parcels whose value changes by more than 25 %
# A cap on the yearly increase for some property classes (repeat the table for more rules):
# [[assessment.caps]]
# property_classes = ["single_family"]
# max_increase = 0.10              # assessed value at most prior value x 1.10
#
# reval review flags possible sales chasing where sold and unsold parcels' value changes differ:
# Mann-Whitney U p < 0.01 and medians more than 0.05 apart (common practice; see the IAAO
# Standard on Ratio Studies on sales chasing).
"""


def starter_config(name: str) -> str:
    """The starter config text for a jurisdiction called `name`."""
    quoted = '"' + name.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return _HEAD.format(name=quoted) + STANDARDS_TOML_COMMENTED + "\n" + MODEL_TOML_COMMENTED + _TAIL
