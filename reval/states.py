"""Every set of states and kinds reval stores or reports, declared once (no heavy imports: the app uses it)."""
from __future__ import annotations

from typing import Literal, get_args

BatchState = Literal["staged", "held", "approved", "exported", "replaced", "superseded"]
OPEN_STATES: tuple[BatchState, ...] = ("staged", "held")            # awaiting a decision
CERTIFIED_STATES: tuple[BatchState, ...] = ("approved", "exported")  # in force on the roll

ModelKind = Literal["own", "pooled", "parent_only"]                  # how a segment's model was made
ValuesSource = Literal["prior", "model_in_sample", "model_out_of_fold", "final"]  # final: the roll after overrides
VerdictStatus = Literal["pass", "fail", "inconclusive", "too_few_sales", "no_sales"]
VerdictRule = Literal["point", "interval"]                          # judge the point estimate, or its interval
Grouping = Literal["segment", "market_area", "class", "segment_class", "all", "value_range", "age", "size"]
FeatureKind = Literal["continuous", "ordinal", "categorical", "binary"]
InteractionRule = Literal["lasso", "significance", "none"]
Loss = Literal["auto", "huber", "squared"]                                   # the fit's loss on log price
FeatureShape = Literal["increasing", "decreasing", "free"]               # a feature's shape rule
SaleChoice = Literal["exclude", "include"]                               # the analyst's decision on a sale
RepeatSales = Literal["latest", "all"]                                   # which sales of a parcel sold repeatedly count
SearchArea = Literal["segment", "market_area", "jurisdiction"]           # how far comparable sales are sought
ClassRule = Literal["model", "land_schedule", "not_valued"]              # how a property class is valued ([classes])
# Why a reviewer should look at a roll value (reval/roll/flags.py): each kind is the prefix of a stored code,
# "filled:living_area", "beyond:lot_size", "class:land_schedule", "cap:max_increase_10%", "land:no_lot_size", ...
FlagKind = Literal["filled", "beyond", "few_sales", "far_from_prior", "class", "cap", "land", "override"]

GROUPINGS: tuple[Grouping, ...] = get_args(Grouping)
VERDICT_RULES: tuple[VerdictRule, ...] = get_args(VerdictRule)
FEATURE_KINDS: tuple[FeatureKind, ...] = get_args(FeatureKind)
INTERACTION_RULES: tuple[InteractionRule, ...] = get_args(InteractionRule)
FEATURE_SHAPES: tuple[FeatureShape, ...] = get_args(FeatureShape)
VALUES_SOURCES: tuple[ValuesSource, ...] = get_args(ValuesSource)
CLASS_RULES: tuple[ClassRule, ...] = get_args(ClassRule)
FLAG_KINDS: tuple[FlagKind, ...] = get_args(FlagKind)
