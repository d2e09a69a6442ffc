"""Flags on roll values: why a reviewer should look at a value, as a code (for machines) and in words (for people).

Each staged row carries a list of codes `kind:detail` (the kinds are `reval.states.FlagKind`) and their text:

* `filled:<feature>`: the parcel lacked the feature; the model took the run's typical value (the text says which);
* `beyond:<feature>`: a continuous feature lies outside the range of the sales the run's fit rested on in the
  parcel's segment (its market area's when the segment has none): the segment's own curve is held flat there and
  the wider market's curve applies; beyond every sale, the whole curve is flat and the value is that at the edge
  (the text says which, with the range);
* `few_sales`: the parcel's segment has fewer qualified sales than `[standards] min_sales`;
* `far_from_prior`: the market value differs from the prior value by more than
  `[assessment] review_change_threshold` (the same rule `reval review` lists);
* `class:land_schedule`, `class:not_valued`: a `[classes]` rule, not the model, set the value (or left none);
* `cap:max_increase_<p>%`, `cap:max_decrease_<p>%`, `cap:lifted_<why>`, `land:<why>`: set while staging
  (reval/roll/valuation.py);
* `override:<reason>`: the analyst's override set the value (reval/roll/overrides.py); the words give the
  model's value beside it.

A new kind: add it to `FlagKind`, its code and words to sql/queries/roll_flags.sql (or where it is set), and a row
here. `approval_blockers` is the one rule of which rows stop a segment's approval: a row without a market value
(a class left for a manual value, or a land-valued lot the schedule cannot value) until it is valued.
Light (no numpy or pandas at import): the app's overview uses `approval_blockers`.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from reval.data.config import Config
from reval.data.store import Store
from reval.model import RANGE_WEIGHT

if TYPE_CHECKING:
    import pandas as pd


def class_rules(config: Config, classes: list[str]) -> pd.DataFrame:
    """The `[classes]` rule of each property class that the model does not value (frame `roll_classes`)."""
    import pandas as pd

    rules = {c: config.classes.rule(c) for c in classes}
    rules = {c: r for c, r in rules.items() if r != "model"}
    return pd.DataFrame({"property_class": pd.Series(list(rules), dtype=str),
                         "rule": pd.Series(list(rules.values()), dtype=str)})


def flag_values(store: Store, config: Config, run_id: str, batch_ids: list[int]) -> None:
    """Add the review flags to the new batches' rows and write each row's flags in words (needs `roll_classes`
    registered; the caller holds the staging transaction)."""
    store.run("roll_flags", {"run": run_id, "batch_ids": batch_ids, "range_weight": RANGE_WEIGHT,
                             "min_sales": config.standards.min_sales,
                             "threshold": config.assessment.review_change_threshold})


def approval_blockers(store: Store, batch_ids: list[int]) -> dict[int, list[str]]:
    """Why each batch cannot be approved whatever its statistics (batches nothing blocks are left out): rows
    without a value. An override (a value set by the analyst) satisfies it by giving the row a value."""
    out = {}
    for r in store.records("roll_unvalued", {"batch_ids": batch_ids}):
        more = f" and {r['n'] - len(r['examples']):,} more" if r["n"] > len(r["examples"]) else ""
        out[int(r["batch_id"])] = [f"{r['n']:,} parcel(s) have no value (a class reval does not value, or land the "
                                   f"schedule cannot value): {', '.join(r['examples'])}{more}; value them or "
                                   "remove them from the data"]
    return out
