"""The [model] section of reval.toml: a typed, validated set of modelling choices with documented defaults."""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any, Mapping

INTERACTION_RULES: tuple[str, ...] = ("lasso", "significance", "none")


@dataclass(frozen=True)
class ModelSettings:
    """Modelling choices shared by every segment of a run."""

    folds: int = 10
    """Number of cross-validation folds for out-of-fold ratio studies."""
    seed: int = 2026
    """Seed for every random choice (fold assignment), so runs are reproducible."""
    n_basis_parent: int = 12
    """B-spline basis functions per continuous feature in the jurisdiction model."""
    n_basis_segment: int = 8
    """B-spline basis functions per continuous feature in a market-area or segment deviation."""
    interaction_rule: str = "lasso"
    """How pairwise interactions are selected: "lasso" (Lasso screening, then a Bonferroni-corrected t-test),
    "significance" (backward elimination) or "none"."""
    interaction_candidates: str | tuple[tuple[str, str], ...] = "all"
    """"all" pairs of non-categorical features, or an explicit list of [a, b] pairs."""
    max_interactions: int = 4
    """At most this many interactions per model."""
    alpha: float = 0.05
    """Significance level of the selection: familywise for the jurisdiction and for all segments together under
    "lasso", per test in backward elimination under "significance"."""
    min_sales_own_selection: int = 60
    """Segments with at least this many sales select their own interactions; thinner ones inherit."""
    min_sales_own_deviation: int = 1
    """Segments with fewer sales than this take the market-area model unchanged."""
    jobs: int = 1
    """Worker processes used to fit segments in parallel (1 = in this process)."""

    def __post_init__(self) -> None:
        checks = {
            "folds": self.folds >= 2,
            "n_basis_parent": self.n_basis_parent >= 5,
            "n_basis_segment": self.n_basis_segment >= 5,
            "interaction_rule": self.interaction_rule in INTERACTION_RULES,
            "max_interactions": self.max_interactions >= 0,
            "alpha": 0.0 < self.alpha < 1.0,
            "min_sales_own_selection": self.min_sales_own_selection >= 1,
            "min_sales_own_deviation": self.min_sales_own_deviation >= 1,
            "jobs": self.jobs >= 1,
        }
        hints = {
            "folds": "at least 2", "n_basis_parent": "at least 5", "n_basis_segment": "at least 5",
            "interaction_rule": "one of " + ", ".join(f'"{r}"' for r in INTERACTION_RULES),
            "max_interactions": "0 or more", "alpha": "between 0 and 1",
            "min_sales_own_selection": "at least 1", "min_sales_own_deviation": "at least 1",
            "jobs": "at least 1",
        }
        for key, ok in checks.items():
            if not ok:
                raise ValueError(f"key '{key}': must be {hints[key]}, got {getattr(self, key)!r}")

    @classmethod
    def from_mapping(cls, data: Mapping[str, Any]) -> ModelSettings:
        """Build from a parsed [model] table; unknown keys and wrong types raise ValueError naming the key."""
        known = {f.name for f in fields(cls)}
        for key in data:
            if key not in known:
                raise ValueError(f"unknown key '{key}' (known: {', '.join(sorted(known))})")
        values: dict[str, Any] = {}
        for key, value in data.items():
            if key == "interaction_candidates":
                values[key] = _candidates(value)
            elif key == "alpha":
                if isinstance(value, bool) or not isinstance(value, (int, float)):
                    raise ValueError(f"key 'alpha': expected a number, got {value!r}")
                values[key] = float(value)
            elif key == "interaction_rule":
                if not isinstance(value, str):
                    raise ValueError(f"key 'interaction_rule': expected a string, got {value!r}")
                values[key] = value
            else:
                if isinstance(value, bool) or not isinstance(value, int):
                    raise ValueError(f"key '{key}': expected a whole number, got {value!r}")
                values[key] = value
        return cls(**values)


def _candidates(value: Any) -> str | tuple[tuple[str, str], ...]:
    if value == "all":
        return "all"
    ok = isinstance(value, list) and all(
        isinstance(p, list) and len(p) == 2 and all(isinstance(n, str) for n in p) and p[0] != p[1] for p in value
    )
    if not ok:
        raise ValueError(
            f"key 'interaction_candidates': expected \"all\" or a list of [a, b] pairs of feature names, got {value!r}"
        )
    return tuple((a, b) for a, b in value)


MODEL_TOML_COMMENTED = """\
[model]
# folds = 10                      # cross-validation folds for out-of-fold ratio studies
# seed = 2026                     # seed for fold assignment, so runs are reproducible
# n_basis_parent = 12             # spline basis functions per continuous feature, jurisdiction model
# n_basis_segment = 8             # spline basis functions per continuous feature, segment deviations
# interaction_rule = "lasso"      # "lasso", "significance" or "none"
# interaction_candidates = "all"  # or a list of pairs, e.g. [["living_area", "quality"]]
# max_interactions = 4            # at most this many interactions per model
# alpha = 0.05                    # significance level of the interaction selection
# min_sales_own_selection = 60    # fewer sales: the segment inherits its parent's interactions
# min_sales_own_deviation = 1     # fewer sales: the segment takes its market area's model unchanged
# jobs = 1                        # worker processes for fitting segments in parallel
"""
