"""The models a run scores, declared once: the id stored in `reference_accuracy.model` and
`feature_importance.model`, and the name `reval compare`, its JSON and the app show. Light to import
(the app's start-up loads it), so it holds names only."""
from __future__ import annotations

from typing import Any, Iterable, Mapping

OURS, OURS_NO_INTERACTIONS = "additive_with_interactions", "additive_no_interactions"
MODEL_NAMES = {  # stored id -> display name, in display order
    OURS: "reval: additive + interactions, pooled",
    OURS_NO_INTERACTIONS: "reval without interactions",
    "hedonic_ols": "OLS per neighbourhood",
    "hedonic_ols_quadratic": "OLS with squares and products",
    "plain_gam": "plain additive model (pygam)",
    "gradient_boosting": "gradient boosting",
    "random_forest": "random forest",
}
IMPORTANCE_MODELS = ("gradient_boosting", "random_forest")  # the references whose permutation importance is stored


def model_name(model: str) -> str:
    """The display name of a model id (the id itself for a model not declared here)."""
    return MODEL_NAMES.get(model, model)


def named(rows: Iterable[Mapping[str, Any]], group: str | None = None) -> list[dict[str, Any]]:
    """Rows with a `model` id, each given its `model_name` right after the id, models in display order;
    with `group` (a column such as "segment"), the groups first, in the order they first appear."""
    out = []
    for row in rows:
        with_name: dict[str, Any] = {}
        for key, value in row.items():
            with_name[key] = value
            if key == "model":
                with_name["model_name"] = model_name(value)
        out.append(with_name)
    groups = {g: i for i, g in enumerate(dict.fromkeys(r[group] for r in out))} if group else {}
    rank = {model: i for i, model in enumerate(MODEL_NAMES)}
    return sorted(out, key=lambda r: (groups.get(r[group], 0) if group else 0, rank.get(r["model"], len(rank))))
