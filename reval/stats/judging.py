"""What a verdict depends on besides the values, and what stands in the way of an approval.

The `[standards]` limits and the `[study]` settings that change a statistic or its interval (trimming,
confidence, bootstrap, seed) make one fingerprint, stored with every study and every approval, so a change
of standards afterwards shows on the batch. `failures` is the one rule of why a segment's statistics do not
let it be approved without a note; the gate and the app's "cannot be approved" filter both use it.
Light (no numpy or pandas): the app's overview uses it."""
from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import fields
from typing import Any

from reval.data.config import Config
from reval.stats.standards import Verdict, passes

NOT_JUDGED = ("cod_min",)   # standards that flag (the sales-chasing check) but never change a verdict
PER_CLASS = ("median_ratio", "cod")   # what each class of a mixed segment is judged on


def judging_basis(config: Config) -> dict[str, Any]:
    """The standards and study settings a verdict is judged under, as plain JSON values."""
    standards = {f.name: getattr(config.standards, f.name) for f in fields(config.standards)
                 if f.name not in NOT_JUDGED}
    standards = {k: dict(sorted(v.items())) if isinstance(v, Mapping) else v for k, v in standards.items()}
    study = config.study
    return {"standards": standards, "trim_iqr_k": study.trim_iqr_k, "confidence": study.confidence,
            "bootstrap": study.bootstrap, "seed": study.seed}


def judging_sha256(config: Config) -> str:
    """Fingerprint of `judging_basis`: equal exactly when the verdicts would be judged alike."""
    text = json.dumps(judging_basis(config), sort_keys=True, default=list)
    return hashlib.sha256(text.encode()).hexdigest()


def failures(statistics: dict[str, Any]) -> list[str]:
    """Why the statistics do not pass the standards (empty when they pass): the segment's own verdicts, and
    for a segment of mixed classes the level and COD of each class with enough sales, against that class's
    limits. Vertical equity (PRD, PRB) is judged on the whole segment: within one class of one segment the
    price range is narrow and the sample small, and both measures need a spread of prices (our choice)."""
    if not statistics["verdicts"] or statistics["n"] == 0:
        return ["no qualified sales in the segment"]
    out = _failed(statistics["verdicts"], "")
    for group in statistics.get("classes", []):
        judged = {k: v for k, v in group["verdicts"].items() if k in PER_CLASS}
        if not any(v["status"] in ("too_few_sales", "no_sales") for v in judged.values()):
            out += _failed(judged, f"{group['group']}: ")
    return out


def _failed(entries: dict[str, Any], prefix: str) -> list[str]:
    verdicts = {k: Verdict(v["status"], v["limit"], v["value"]) for k, v in entries.items()}
    if passes(verdicts):
        return []
    return [f"{prefix}{name} {'-' if v.value is None else f'{v.value:.3f}'} ({v.status.replace('_', ' ')}; "
            f"standard {v.limit})" for name, v in verdicts.items() if v.status != "pass"]
