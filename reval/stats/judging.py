"""What a verdict depends on besides the values: the `[standards]` limits and the `[study]` settings that
change a statistic or its interval (trimming, confidence, bootstrap, seed). One fingerprint of them is
stored with every study and every approval, so a change of standards afterwards shows on the batch.
Light (no numpy or pandas): the app's overview uses it."""
from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import fields
from typing import Any

from reval.data.config import Config

NOT_JUDGED = ("cod_min",)   # standards that flag (the sales-chasing check) but never change a verdict


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
