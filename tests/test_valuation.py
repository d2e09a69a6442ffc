"""Values for every parcel: rounding, assessment level, caps, land and improvement, on the real demo project.

Expected values are computed here independently with numpy/pandas from the demo's own files: the land
formula is the one documented in data_samples/demo_town.py (its module docstring), not reval's SQL.
"""
from __future__ import annotations

from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

from reval.service.actions import stage_values
from reval.errors import DataErrors, UserError
from helpers import roll_project

CAPPED = '[[assessment.caps]]\nproperty_classes = ["condominium"]\nmax_increase = 0.05\n'


def _values(folder: Path) -> pd.DataFrame:
    con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
    try:
        return con.execute("""SELECT v.*, b.segment, e.market_value AS estimate
                              FROM roll_values v JOIN batches b USING (batch_id)
                              JOIN parcel_estimates e ON e.parcel_id = v.parcel_id AND e.run_id = b.run_id
                              WHERE b.state = 'staged' ORDER BY v.parcel_id""").df()
    finally:
        con.close()


def _round_half_up(x: np.ndarray, unit: float) -> np.ndarray:
    return np.floor(x / unit + 0.5) * unit  # nearest multiple, halves up (values here are positive)


def test_every_parcel_is_valued_by_the_documented_rules(demo_project: Path, tmp_path: Path) -> None:
    folder = roll_project(demo_project, tmp_path / "p", "level = 0.95\nrounding = 100.0\n" + CAPPED)
    result = stage_values(folder)
    assert result["run_id"] == "run-a" and len(result["staged"]) == 22
    v = _values(folder)
    parcels = pd.read_csv(folder / "parcels.csv", dtype={"parcel_id": str}).set_index("parcel_id")
    assert len(v) == len(parcels) and set(v["parcel_id"]) == set(parcels.index)  # every parcel, once
    p = parcels.loc[v["parcel_id"]]

    # Land: demo_town docstring — lot > 0: base_land_value * (lot / base_lot_size) ** exponent from the row with
    # base_lot_size > 0; lot 0: the flat base_land_value of the row with base_lot_size 0.
    schedule = pd.read_csv(folder / "land_schedule.csv")
    sized = schedule[schedule["base_lot_size"] > 0].set_index("neighbourhood")
    flat = schedule[schedule["base_lot_size"] == 0].set_index("neighbourhood")
    lot = p["lot_size"].to_numpy(float)
    nb = p["neighbourhood"].to_numpy()
    with np.errstate(invalid="ignore"):
        sized_land = sized["base_land_value"].reindex(nb).to_numpy() * (
            lot / sized["base_lot_size"].reindex(nb).to_numpy()) ** sized["size_exponent"].reindex(nb).to_numpy()
    raw_land = _round_half_up(np.where(lot > 0, sized_land, flat["base_land_value"].reindex(nb).to_numpy()), 100)
    has_row = np.isfinite(raw_land)

    # Market value: the run's estimate rounded; a vacant lot ([classes] land_schedule) takes its land value alone.
    vacant = (v["property_class"] == "vacant_land").to_numpy()
    market = np.where(vacant, raw_land, _round_half_up(v["estimate"].to_numpy(), 100))
    assert vacant.sum() == 120 and has_row[vacant].all()
    np.testing.assert_allclose(v["market_value"], market, rtol=0, atol=1e-6)
    land = np.minimum(raw_land, market)
    np.testing.assert_allclose(v["land_value"].to_numpy(float)[has_row], land[has_row], rtol=0, atol=1e-6)
    assert v["land_value"][~has_row].isna().all()
    improvement = v["improvement_value"].to_numpy(float)[has_row]
    assert (improvement >= 0).all()
    np.testing.assert_allclose(land[has_row] + improvement, market[has_row], rtol=0, atol=1e-6)

    # Assessed = market x level, rounded; condominiums capped at prior x 1.05 rounded down.
    prior = v["prior_value"].to_numpy(float)
    uncapped = _round_half_up(market * 0.95, 100)
    capped = (v["property_class"].to_numpy() == "condominium") & (uncapped > prior * 1.05)
    expected = np.where(capped, np.floor(prior * 1.05 / 100 + 1e-9) * 100, uncapped)
    np.testing.assert_allclose(v["assessed_value"], expected, rtol=0, atol=1e-6)
    assert capped.sum() > 10 and (v["assessed_value"][capped] <= prior[capped] * 1.10).all()

    flags = v["flags"].map(set)
    assert (flags.map(lambda f: "cap:max_increase_5%" in f).to_numpy() == capped).all()
    exceeds = has_row & (raw_land > market)
    assert (flags.map(lambda f: "land:exceeds_total" in f).to_numpy() == exceeds).all()
    assert (flags.map(lambda f: "land:no_schedule_row" in f).to_numpy() == ~has_row).all()
    assert result["flags"]["cap:max_increase_5%"] == capped.sum()


def test_without_a_schedule_the_split_is_not_allocated(demo_project: Path, tmp_path: Path) -> None:
    folder = roll_project(demo_project, tmp_path / "p", None)
    result = stage_values(folder)
    v = _values(folder)
    assert result["land_schedule"] is None
    assert v["land_value"].isna().all() and v["improvement_value"].isna().all()
    staged_here = v["flags"].map(lambda f: [c for c in f if c.startswith(("land:", "cap:"))])   # review flags aside
    assert staged_here.map(lambda f: f == ["land:not_allocated"]).all()
    # Defaults (config.py): level 1.0, rounding 100, no caps.
    np.testing.assert_allclose(v["assessed_value"], v["market_value"], rtol=0, atol=0)
    np.testing.assert_allclose(v["market_value"], _round_half_up(v["estimate"].to_numpy(), 100), atol=1e-6)


def test_schedule_problems_are_listed_with_file_line_and_column(demo_project: Path, tmp_path: Path) -> None:
    folder = roll_project(demo_project, tmp_path / "p")
    (folder / "land_schedule.csv").write_text(
        "neighbourhood,base_lot_size,base_land_value,size_exponent\n"
        "ASKR,6900,92000,0.45\n"
        "BRIN,7200,lots,0.45\n"
        "NOWHERE,100,100,0.5\n"
        "CORV,-5,104000,0.55\n"
        "ASKR,7000,90000,0.45\n", encoding="utf-8")
    with pytest.raises(DataErrors) as caught:
        stage_values(folder)
    text = str(caught.value)
    schedule = folder / "land_schedule.csv"
    assert f"{schedule}, line 3, column 'base_land_value': not a number (value 'lots')" in text
    assert f"{schedule}, line 4, column 'segment': no imported parcel has this segment" in text
    assert f"{schedule}, line 5, column 'base_lot_size': cannot be negative" in text
    assert f"{schedule}, line 6, column 'segment': a second row of the same kind" in text
    (folder / "land_schedule.csv").write_text("neighbourhood,base_frontage,base_land_value,size_exponent\n"
                                              "ASKR,6900,92000,0.45\n", encoding="utf-8")
    with pytest.raises(DataErrors, match=r"line 1, column 'base_frontage': 'frontage' is not a continuous feature"):
        stage_values(folder)
    con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
    assert con.execute("SELECT count(*) FROM batches WHERE run_id = 'run-a'").fetchone()[0] == 0  # nothing staged
    con.close()


def test_a_run_that_misses_a_parcel_is_refused(demo_project: Path, tmp_path: Path) -> None:
    folder = roll_project(demo_project, tmp_path / "p")
    con = duckdb.connect(str(folder / "reval.duckdb"))
    con.execute("DELETE FROM parcel_estimates WHERE parcel_id = '0000007'")
    con.close()
    with pytest.raises(UserError, match=r"1 parcel\(s\) added \(0000007\)"):
        stage_values(folder)
    with pytest.raises(UserError, match="No run 'nope'"):
        stage_values(folder, "nope")


def test_staging_refuses_values_that_are_not_finite_and_positive(tmp_path: Path) -> None:
    """Issue finding: 2,600 NaN rows (from `level = nan`) were staged, approved and exported. Whatever makes
    a value NaN, infinite, zero or negative, staging refuses it, names the parcels and changes nothing."""
    from helpers import database_content, insert_prior_run, write_project
    from reval.service.actions import import_data, prepare_sales

    folder = write_project(tmp_path / "p")
    import_data(folder)
    prepare_sales(folder)
    insert_prior_run(folder, "run-a", 1.0)
    con = duckdb.connect(str(folder / "reval.duckdb"))
    for parcel, value in (("00101", "nan"), ("00103", "inf"), ("00104", "-500")):
        con.execute("UPDATE parcel_estimates SET market_value = ?::DOUBLE WHERE parcel_id = ?", [value, parcel])
    con.close()
    def content() -> dict:  # the NaN estimate never equals itself: compare everything else
        return {k: v for k, v in database_content(folder / "reval.duckdb").items() if k != "parcel_estimates"}

    before = content()
    with pytest.raises(UserError, match=r"Staging refused: 3 parcel\(s\).*finite and positive.*"
                                        r"00104 \(east\): market value -500.0; assessed value -500.0.*"
                                        r"00101 \(north\): market value nan.*"
                                        r"00103 \(south\): market value inf"):
        stage_values(folder)
    assert content() == before
