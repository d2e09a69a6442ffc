"""The `reval` command as a user runs it: real subprocesses, exit codes, messages, JSON."""
from __future__ import annotations

import argparse
import json
from pathlib import Path

from helpers import SMALL_PARCELS
from helpers import run_reval as reval
from reval.cli.main import build_parser


def test_import_json_and_exit_code(small_project: Path) -> None:
    done = reval("import", "--project", str(small_project), "--json")
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["parcels"] == 5


def test_bad_data_exits_1_with_line_and_column_and_no_traceback(small_project: Path) -> None:
    (small_project / "parcels.csv").write_text(SMALL_PARCELS.replace("1800,good", "1800,superb"))
    done = reval("import", "--project", str(small_project))
    assert done.returncode == 1
    assert "line 3, column 'quality'" in done.stderr and "unknown level" in done.stderr
    assert "Traceback" not in done.stderr
    assert (small_project / "import_errors.csv").exists()


def test_config_error_exits_1_naming_key(small_project: Path) -> None:
    config = small_project / "reval.toml"
    config.write_text(config.read_text().replace("[columns]", "[columns]\nowner = \"x\""))
    done = reval("import", "--project", str(small_project))
    assert done.returncode == 1 and "columns.owner" in done.stderr and "Traceback" not in done.stderr


def test_usage_error_exits_2() -> None:
    assert reval("import", "--no-such-flag").returncode == 2
    assert reval("frobnicate").returncode == 2


def test_every_subcommand_of_the_real_parser_has_help() -> None:
    parser = build_parser()
    commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices
    assert {"import", "sales", "study", "fit", "value", "approve", "export"} <= set(commands)
    for command in commands:
        done = reval(command, "--help")
        assert done.returncode == 0 and f"usage: reval {command}" in done.stdout, (command, done.stderr)


def test_init_then_missing_files_is_a_user_error(tmp_path: Path) -> None:
    assert reval("init", str(tmp_path / "p")).returncode == 0
    done = reval("import", "--project", str(tmp_path / "p"))
    assert done.returncode == 1 and "files.parcels" in done.stderr


def test_compare_lists_every_model_by_its_display_name(demo_project: Path) -> None:
    shown = reval("compare", "--project", str(demo_project), columns=200)
    assert shown.returncode == 0, shown.stderr
    for name in ("reval: additive + interactions, pooled", "OLS per neighbourhood", "OLS with squares and products",
                 "plain additive model (pygam)", "gradient boosting", "random forest"):
        assert name in shown.stdout
    assert "hedonic_ols" not in shown.stdout                         # ids are for the JSON
    assert "What the random forest reference relies on" in shown.stdout
    data = json.loads(reval("compare", "--project", str(demo_project), "--json").stdout)
    assert {(r["model"], r["model_name"]) for r in data["rows"]} >= {("plain_gam", "plain additive model (pygam)"),
                                                                     ("random_forest", "random forest")}
