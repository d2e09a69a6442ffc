"""The [model] section of reval.toml: the modelling choices, each key declared once with its bounds."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from reval.config_keys import Declared, Invalid, setting, toml_value
from reval.states import InteractionRule, Loss

Pairs = tuple[tuple[str, str], ...]


def _candidates(value: Any, key: str) -> str | Pairs:
    """"all", or explicit [a, b] pairs of two different feature names."""
    if value == "all":
        return "all"
    ok = isinstance(value, (list, tuple)) and all(
        isinstance(p, (list, tuple)) and len(p) == 2 and all(isinstance(n, str) for n in p) and p[0] != p[1]
        for p in value
    )
    if not ok:
        raise Invalid(key, f'expected "all" or a list of [a, b] pairs of feature names, got {toml_value(value)}')
    return tuple((a, b) for a, b in value)


def _surface(value: Any, key: str) -> tuple[str, ...]:
    """No features, or two different feature names."""
    ok = isinstance(value, (list, tuple)) and len(value) in (0, 2) and all(isinstance(n, str) for n in value)
    if not ok or (len(value) == 2 and value[0] == value[1]):
        raise Invalid(key, f"expected two different feature names (or none), got {toml_value(value)}")
    return tuple(value)


@dataclass(frozen=True)
class ModelSettings(Declared):
    """Modelling choices shared by every segment of a run."""

    folds: int = setting(10, "cross-validation folds for out-of-fold ratio studies", lo=2, hi=100)
    seed: int = setting(2026, "seed for fold assignment, so runs are reproducible", lo=0)
    n_basis_parent: int = setting(12, "spline basis functions per continuous feature, jurisdiction model",
                                  lo=5, hi=100)
    n_basis_segment: int = setting(8, "spline basis functions per continuous feature, segment deviations",
                                   lo=5, hi=100)
    interaction_rule: InteractionRule = setting(
        "lasso", 'how interactions are chosen: "lasso" (Lasso screening, then a Bonferroni-corrected t-test), '
        '"significance" (backward elimination) or "none"')
    interaction_candidates: str | Pairs = setting(
        "all", '"all" pairs of non-categorical features, or a list of pairs, e.g. [["living_area", "quality"]]',
        check=_candidates, type_text='"all" or a list of [a, b] pairs')
    max_interactions: int = setting(4, "at most this many interactions per model", lo=0)
    max_smooths: int = setting(4, "at most this many smooth interactions (a curve per level of a yes/no or "
                               "categorical feature, or a surface of two continuous features) enter the jurisdiction "
                               "model, each only when it lowers GCV (0 = none)", lo=0, hi=20)
    location_surface: tuple[str, ...] = setting(
        (), "two continuous features that place a parcel (e.g. latitude and longitude): a smooth surface of them is a "
        "candidate term of the jurisdiction model, entering only when it pays", check=_surface,
        type_text="[] or two feature names")
    alpha: float = setting(0.05, "significance level of the interaction selection (familywise under lasso, "
                           "per test under significance)", lo=0, hi=1, lo_open=True, hi_open=True)
    min_sales_own_selection: int = setting(60, "fewer sales: the segment inherits its parent's interactions", lo=1)
    min_sales_own_deviation: int = setting(1, "fewer sales: the segment takes its market area's model unchanged",
                                           lo=1)
    jobs: int = setting(1, "worker processes for fitting segments in parallel (1 = in this process)", lo=1, hi=256)
    scheduler: str | None = setting(None, "address of a Dask distributed scheduler: segment and fold fits run on its "
                                    "workers, only this machine writes the project (pip install 'reval[cluster]')",
                                    pattern=(r"^(tcp|tls)://\S+:\d+$", "an address like tcp://HOST:PORT"),
                                    example="tcp://10.0.0.5:8786")
    loss: Loss = setting("auto", '"huber": sales far from what the other sales say they are worth weigh less '
                         '(reval/model/robust.py); "squared": every sale counts fully; "auto": whichever predicts '
                         'the training sales left out one at a time better (reval/model/structure.py)')
    huber_k: float = setting(1.345, "Huber's constant: residuals beyond this many robust standard deviations are "
                             "down-weighted", lo=0, lo_open=True)
