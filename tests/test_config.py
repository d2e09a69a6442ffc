"""reval.toml validation: every error names the file and the key."""
from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from helpers import SMALL_CONFIG, write_project
from reval.service.actions import init_project
from reval.data.config import load_config
from reval.errors import ConfigError, UserError


def test_small_config_loads(small_project: Path) -> None:
    config = load_config(small_project)
    assert config.jurisdiction == "Test township"
    assert [f.name for f in config.features] == ["living_area", "quality", "garage"]
    assert config.features[1].levels == ("low", "average", "good")
    assert config.columns["segment"] == "nbhd"
    assert str(config.sale_window_start) == "2023-01-01"


@pytest.mark.parametrize("old,new,key,fragment", [
    ('name = "Test township"', 'name = "T"\ncolour = "blue"', "jurisdiction.colour", "unknown key"),
    ('segment = "nbhd"\n', "", "columns.segment", "missing"),
    ('sale_price = "price"\n', "", "columns.sale_price", "missing"),
    ('type = "ordinal"', 'type = "ranked"', "features[1].type", "not one of"),
    ('levels = ["low", "average", "good"]', "", "features[1].levels", "needs its levels"),
    ("valuation_date = 2025-01-01", 'valuation_date = "soon"', "jurisdiction.valuation_date", "expected a date"),
    ("sale_window_months = 24", "sale_window_months = -3", "jurisdiction.sale_window_months", "positive"),
    ('parcels = "parcels.csv"', 'parcels = "nowhere.csv"', "files.parcels", "file not found"),
    ('parcels = "parcels.csv"', 'parcels = "parcels.xlsx"', "files.parcels", ".csv or .parquet"),
    ("[columns]", "[colums]", "(top level).colums", "unknown key"),
    ("range = [200, 8000]", "range = [8000, 200]", "features[0].range", "low <= high"),
])
def test_config_errors_name_file_and_key(tmp_path: Path, old: str, new: str, key: str, fragment: str) -> None:
    assert old in SMALL_CONFIG
    folder = write_project(tmp_path / "p", config=SMALL_CONFIG.replace(old, new, 1))
    with pytest.raises(ConfigError) as caught:
        load_config(folder)
    assert caught.value.key == key
    assert fragment in str(caught.value)
    assert str(folder / "reval.toml") in str(caught.value)


def test_sections_owned_by_other_modules_reject_unknown_keys(tmp_path: Path) -> None:
    folder = write_project(tmp_path / "p", config=SMALL_CONFIG + "\n[standards]\ncod_limit = 3\n")
    with pytest.raises(ConfigError) as caught:
        load_config(folder)
    assert caught.value.key == "standards" and "cod_limit" in str(caught.value)


def test_init_writes_a_commented_starter_that_parses(tmp_path: Path) -> None:
    path = init_project(tmp_path / "new", 'Borough of "Quoted"')
    data = tomllib.loads(path.read_text())
    assert data["jurisdiction"]["name"] == 'Borough of "Quoted"'
    assert "qualified assessor" in path.read_text() and "local law" in path.read_text()
    with pytest.raises(UserError):
        init_project(tmp_path / "new", "again")
    # The starter names files that do not exist yet: loading says which key points where.
    with pytest.raises(ConfigError) as caught:
        load_config(path)
    assert caught.value.key == "files.parcels"
