"""The land schedule: each segment's land value by lot size, read and checked the way import checks data.

The file named by `assessment.land_schedule` (relative to the project folder) is a CSV with:

* first column: the segment, headed `segment` or with the project's own segment column name
  (`[columns] segment`, e.g. `neighbourhood`);
* `base_<feature>`: the base lot size, in the units of the continuous feature `<feature>` that holds
  each parcel's lot size; the header names that feature, so `base_lot_size` reads feature `lot_size`
  and `base_frontage` would read `frontage` (no config key needed);
* `base_land_value` and `size_exponent`.

A segment has at most one row with base lot size > 0 and at most one with base lot size 0. A parcel
with a lot (size > 0) takes land value = base_land_value x (lot size / base lot size) ^ size_exponent
from the first kind; a parcel without one (size 0, e.g. a condominium unit) takes the flat
base_land_value of the second kind.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable

import numpy as np
import pandas as pd

from reval.data.config import Config
from reval.errors import ConfigError, DataErrors, DataProblem

SCHEDULE_KEY = "assessment.land_schedule"
BASE_PREFIX = "base_"
VALUE_COLUMNS = ("base_land_value", "size_exponent")


@dataclass(frozen=True)
class LandSchedule:
    """A checked land schedule: rows (segment, base_lot_size, base_land_value, size_exponent)."""

    rows: pd.DataFrame
    lot_feature: str
    sha256: str


def schedule_path(config: Config) -> Path | None:
    """The configured schedule file, resolved against the project folder; None when none is set."""
    name = config.assessment.land_schedule
    return None if name is None else (config.folder / name).resolve()


def load_land_schedule(config: Config, segments: Iterable[str]) -> LandSchedule | None:
    """Read and check the configured schedule; None without one. Raises DataErrors listing every bad cell."""
    path = schedule_path(config)
    if path is None:
        return None
    if not path.is_file():
        raise ConfigError(config.path, SCHEDULE_KEY, f"file not found: {path}")
    raw = path.read_bytes()
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, encoding="utf-8")
    except (UnicodeDecodeError, pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise DataErrors([DataProblem(str(path), 1, "-", None, f"not a readable UTF-8 CSV file: {exc}")], None) \
            from None
    header_problems, lot_feature = _check_header(config, path, list(frame.columns))
    if header_problems:
        raise DataErrors(header_problems, None)
    frame.columns = ["segment", "base_lot_size", *VALUE_COLUMNS]
    rows, problems = _check_cells(str(path), frame, set(segments))
    if problems:
        raise DataErrors(problems, None)
    return LandSchedule(rows, lot_feature, hashlib.sha256(raw).hexdigest())


def _check_header(config: Config, path: Path, columns: list[str]) -> tuple[list[DataProblem], str]:
    """Problems with the header line, and the lot-size feature its `base_<feature>` column names."""
    file = str(path)
    segment_names = ("segment", config.columns["segment"])
    continuous = {f.name for f in config.features if f.kind == "continuous"}
    problems: list[DataProblem] = []
    if not columns or columns[0] not in segment_names:
        shown = columns[0] if columns else "-"
        problems.append(DataProblem(file, 1, shown, None,
                                    f"the first column must be the segment, headed '{segment_names[0]}' "
                                    f"or '{segment_names[1]}'"))
    bases = [c for c in columns[1:] if c.startswith(BASE_PREFIX) and c not in VALUE_COLUMNS]
    if len(bases) != 1:
        problems.append(DataProblem(file, 1, ", ".join(bases) or "-", None,
                                    "needs exactly one base_<feature> column naming the lot-size feature, "
                                    "e.g. base_lot_size"))
    lot_feature = bases[0][len(BASE_PREFIX):] if len(bases) == 1 else ""
    if lot_feature and lot_feature not in continuous:
        problems.append(DataProblem(file, 1, bases[0], None, f"'{lot_feature}' is not a continuous feature of "
                                    f"reval.toml (continuous: {', '.join(sorted(continuous)) or 'none'})"))
    for name in VALUE_COLUMNS:
        if name not in columns:
            problems.append(DataProblem(file, 1, name, None, "required column is missing"))
    expected = {*(columns[:1]), *bases, *VALUE_COLUMNS}
    problems += [DataProblem(file, 1, c, None, "unknown column") for c in columns if c not in expected]
    if not problems and columns[1:] != [bases[0], *VALUE_COLUMNS]:
        problems.append(DataProblem(file, 1, "-", None, "columns must be in the order segment, "
                                    f"{bases[0]}, {', '.join(VALUE_COLUMNS)}"))
    return problems, lot_feature


def _check_cells(file: str, frame: pd.DataFrame, segments: set[str]) -> tuple[pd.DataFrame, list[DataProblem]]:
    """Typed rows and every bad cell (line numbers count the header as line 1)."""
    lines = np.arange(2, len(frame) + 2)
    problems: list[DataProblem] = []

    def report(mask: np.ndarray, column: str, reason: str) -> None:
        problems.extend(DataProblem(file, int(line), column, str(value), reason)
                        for line, value in zip(lines[mask], frame[column].to_numpy()[mask]))

    segment = frame["segment"].str.strip()
    report((segment == "").to_numpy(), "segment", "segment is empty")
    report((segment != "").to_numpy() & ~segment.isin(segments).to_numpy(), "segment",
           "no imported parcel has this segment")
    numbers = {}
    for column, minimum in (("base_lot_size", 0.0), ("base_land_value", 0.0), ("size_exponent", None)):
        values = pd.to_numeric(frame[column].str.strip(), errors="coerce").to_numpy(float)
        finite = np.isfinite(values)
        report(~finite, column, "not a number")
        if minimum is not None:
            report(finite & (values < minimum), column, "cannot be negative")
        numbers[column] = values
    rows = pd.DataFrame({"segment": segment, **numbers})
    kind = np.where(rows["base_lot_size"] > 0, "base lot size > 0", "base lot size 0")
    repeated = pd.Series(list(zip(segment, kind))).duplicated().to_numpy()
    report(repeated, "segment", "a second row of the same kind for this segment (one row with base lot size > 0 "
                                "and one with base lot size 0 at most)")
    problems.sort(key=lambda p: (p.line, p.column))
    return rows, problems
