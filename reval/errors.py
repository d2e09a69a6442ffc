"""User-facing errors: each carries a plain message the CLI prints without a traceback (exit code 1)."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path


class UserError(Exception):
    """An error in the user's data, config or request; the message says what to fix."""


class ConfigError(UserError):
    """A problem in reval.toml, naming the file and the dotted key ("model.alpha": section and key);
    key "" for a problem with the whole file (not found, not TOML)."""

    def __init__(self, file: Path | str, key: str, problem: str) -> None:
        self.file, self.key, self.problem = str(file), key, problem
        super().__init__(f"{file}: key '{key}': {problem}" if key else f"{file}: {problem}")

    @property
    def section(self) -> str:
        """The section of reval.toml the key is in ("model" for "model.alpha", "features" for "features[1].type")."""
        return self.key.split(".")[0].split("[")[0]


@dataclass(frozen=True)
class DataProblem:
    """One bad cell or row of an input file."""

    file: str
    line: int
    column: str
    value: str | None
    reason: str

    def __str__(self) -> str:
        shown = "" if self.value is None else f" (value {self.value!r})"
        return f"{self.file}, line {self.line}, column '{self.column}': {self.reason}{shown}"


class DataErrors(UserError):
    """Every problem found in the input files at once; `report` is the CSV written beside the database."""

    SHOWN = 20

    def __init__(self, problems: list[DataProblem], report: Path | None) -> None:
        self.problems, self.report = problems, report
        lines = [str(p) for p in problems[: self.SHOWN]]
        more = len(problems) - len(lines)
        if more > 0:
            lines.append(f"... and {more} more")
        where = f" Full list: {report}." if report else ""
        super().__init__(
            f"Import refused: {len(problems)} problem(s) in the input files; the database is unchanged.{where}\n"
            + "\n".join(lines)
        )
