"""A run knows its data (issue 10, item 5): `reval value` and the app refuse to stage a run fitted on data
that differ from the current import, naming what changed; a parcel revalued with the run's models can have
its fingerprint recorded again (reval.data.fingerprint.record_fingerprints)."""
from __future__ import annotations

import asyncio
from pathlib import Path

import duckdb
import pandas as pd
import pytest

from reval.data.fingerprint import data_changes, record_fingerprints
from reval.data.store import Store
from reval.errors import UserError
from reval.service import actions
from helpers import SMALL_PARCELS, SMALL_SALES, database_content, insert_prior_run, run_reval, settle, write_project
from tui.app import RevalApp


def _small(tmp_path: Path) -> Path:
    folder = write_project(tmp_path / "p")
    actions.import_data(folder)
    actions.prepare_sales(folder)
    insert_prior_run(folder, "run-a", 1.1)
    return folder


def _reimport(folder: Path, parcels: str, sales: str | None = None) -> None:
    (folder / "parcels.csv").write_text(parcels, encoding="utf-8")
    if sales is not None:
        (folder / "sales.csv").write_text(sales, encoding="utf-8")
    actions.import_data(folder)
    actions.prepare_sales(folder)


def test_the_vacant_lot_finding_is_refused_by_the_command_and_the_app(demo_copy: Path) -> None:
    # The finding: a parcel re-imported as vacant land with blank building features was staged from the previous
    # run's estimate (a house's value). Here the demo's real run (`reval fit`) meets such a re-import.
    parcels = pd.read_csv(demo_copy / "parcels.csv", dtype=str, keep_default_na=False)
    target = parcels.index[parcels["property_class"] == "single_family"][0]
    parcel = parcels.loc[target, "parcel_id"]
    parcels.loc[target, ["living_area", "quality", "condition", "bathrooms", "garage_spaces", "style"]] = ""
    parcels.to_csv(demo_copy / "parcels.csv", index=False)
    assert actions.import_data(demo_copy)["changed"]
    before = database_content(demo_copy / "reval.duckdb")
    done = run_reval("value", "--replace", "--project", str(demo_copy))
    assert done.returncode == 1 and "Traceback" not in done.stderr
    message = " ".join((done.stdout + done.stderr).split())
    assert f"1 parcel(s) changed ({parcel})" in message and "reval fit" in message
    with pytest.raises(UserError, match=rf"1 parcel\(s\) changed \({parcel}\)"):
        actions.staging_plan(demo_copy)    # what the app reads before its confirmation
    asyncio.run(_the_app_says_the_same(demo_copy, parcel))
    assert database_content(demo_copy / "reval.duckdb") == before   # nothing staged


async def _the_app_says_the_same(folder: Path, parcel: str) -> None:
    app = RevalApp(folder)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        await pilot.press("v")                      # stage values: the plan is refused before any question
        await settle(pilot)
        severity, text = app.messages[-1]
        assert severity == "error" and f"1 parcel(s) changed ({parcel})" in " ".join(text.split())


def test_a_real_run_records_the_data_it_was_fitted_on(demo_copy: Path) -> None:
    with Store(demo_copy / "reval.duckdb", read_only=True) as store:
        (run,), = store.rows("roll_latest_run")
        assert data_changes(store, run) == {"run_id": run, "parcels": {}, "sales": []}
        (unset,), = store.con.execute("SELECT count(*) FROM parcel_estimates WHERE data_md5 IS NULL").fetchall()
        (segments,), = store.con.execute("SELECT count(*) FROM run_sales_fingerprints WHERE run_id = ?",
                                          [run]).fetchall()
    assert unset == 0 and segments > 0


def test_parcels_added_removed_and_changed_are_counted_and_named(tmp_path: Path) -> None:
    folder = _small(tmp_path)
    assert actions.stage_values(folder)["run_id"] == "run-a"   # unchanged data: staged
    lines = SMALL_PARCELS.splitlines()
    changed = [line.replace("1800,good", "1900,good") if line.startswith("00102") else line
               for line in lines if not line.startswith("00105")]
    sales = "".join(line + "\n" for line in SMALL_SALES.splitlines() if "00105" not in line)
    _reimport(folder, "\n".join(changed + ["00106,east,B,condominium,90000,700,low,no"]) + "\n", sales)
    with pytest.raises(UserError) as caught:
        actions.stage_values(folder, replace=True)
    text = str(caught.value)
    assert "1 parcel(s) added (00106)" in text and "1 parcel(s) removed (00105)" in text
    assert "1 parcel(s) changed (00102)" in text
    # A prior value is not data the model reads: changing it alone does not invalidate the run.
    _reimport(folder, SMALL_PARCELS.replace("00101,north,A,single_family,150000", "00101,north,A,single_family,1"),
              SMALL_SALES)
    assert actions.stage_values(folder, replace=True)["run_id"] == "run-a"


def test_changed_sales_and_sale_decisions_are_named_per_segment(tmp_path: Path) -> None:
    folder = _small(tmp_path)
    actions.decide_sale(folder, "S1", "exclude", "a transfer between relatives")
    actions.prepare_sales(folder)
    with pytest.raises(UserError) as caught:
        actions.stage_values(folder)
    # north lost the sale; east's one sale is time-adjusted by a trend re-estimated without S1, so it changed too.
    assert "sales changed in 2 segment(s) (east: 1 qualified sales then, 1 now; north: 2 qualified sales then, " \
           "1 now)" in str(caught.value)


def test_a_parcel_revalued_with_the_runs_models_can_be_fingerprinted_again(tmp_path: Path) -> None:
    folder = _small(tmp_path)
    _reimport(folder, SMALL_PARCELS.replace("00103,south,A,single_family,99000,900", "00103,south,A,single_family,99000,950"))
    with Store(folder / "reval.duckdb") as store:
        assert data_changes(store, "run-a")["parcels"] == {"changed": {"n": 1, "examples": ["00103"]}}
        with store.transaction():
            record_fingerprints(store, "run-a", ["00103"])   # as a correction of one parcel would
        assert data_changes(store, "run-a") == {"run_id": "run-a", "parcels": {}, "sales": []}


def test_a_run_from_before_fingerprints_is_refused_plainly(tmp_path: Path) -> None:
    folder = _small(tmp_path)
    con = duckdb.connect(str(folder / "reval.duckdb"))
    con.execute("UPDATE parcel_estimates SET data_md5 = NULL")
    con.close()
    with pytest.raises(UserError, match="made before reval recorded the data"):
        actions.stage_values(folder)
