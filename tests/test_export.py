"""Export of the value roll: reconciliation, atomic writes under SIGKILL, safe cells, refits leave it alone."""
from __future__ import annotations

import csv
import hashlib
import json
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

from helpers import (SMALL_PARCELS, SMALL_SALES, copy_project, export_state, insert_prior_run, insert_run, query_frame,
                     roll_agrees, roll_project, write_project)
from reval.service.actions import approve, event_log, export_roll, revoke, stage_values
from reval.service.actions import import_data, prepare_sales
from reval.service.project import open_project
from reval.data.config import load_config
from reval.errors import UserError
from reval.data.store import open_store

ROOT = Path(__file__).resolve().parent.parent
VALUE_COLUMNS = ["prior_market_value", "prior_assessed_value", "market_value", "land_value", "improvement_value",
                 "assessed_value", "assessed_land_value", "assessed_improvement_value"]
PLAIN_DECIMAL = re.compile(r"^-?\d+\.\d{2}$")


def _approve_all(folder: Path) -> None:
    """Approve every segment, with an override note where the statistics do not pass."""
    config = load_config(folder)
    with open_store(config.database) as store:
        segments = [r[0] for r in store.rows("roll_segments")]
    for segment in segments:
        try:
            approve(folder, segment)
        except UserError:
            approve(folder, segment, "override: too few sales, values follow the market area")


@pytest.fixture(scope="module")
def approved(demo_project: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo with run-a valued and every segment approved (copy it before changing it)."""
    folder = roll_project(demo_project, tmp_path_factory.mktemp("approved") / "p")
    stage_values(folder)
    _approve_all(folder)
    return folder


def _read_roll(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, dtype=str, keep_default_na=False)


def test_the_roll_reconciles_with_the_approved_batches(approved: Path, tmp_path: Path) -> None:
    folder = copy_project(approved, tmp_path / "p")
    out = tmp_path / "roll.csv"
    manifest = export_roll(folder, out)
    roll = _read_roll(out)
    parcels = query_frame(folder, "SELECT parcel_id, segment FROM parcels")
    assert len(roll) == len(parcels) == manifest["rows"]
    assert set(roll["parcel_id"]) == set(parcels["parcel_id"])
    assert "0000007" in set(roll["parcel_id"])                       # leading zeros kept
    keys = list(zip(roll["segment"], roll["parcel_id"]))
    assert keys == sorted(keys)                                      # deterministic order
    for column in VALUE_COLUMNS + ["change_pct"]:
        assert roll[column].map(lambda x: x == "" or bool(PLAIN_DECIMAL.match(x))).all(), column
    db = query_frame(folder, """SELECT b.segment, sum(v.prior_value) AS prior_market_value,
                                  sum(v.prior_assessed_value) AS prior_assessed_value, sum(v.market_value) AS market_value,
                                  sum(v.land_value) AS land_value, sum(v.improvement_value) AS improvement_value,
                                  sum(v.assessed_value) AS assessed_value, sum(v.assessed_land_value) AS assessed_land_value,
                                  sum(v.assessed_improvement_value) AS assessed_improvement_value, count(*) AS rows
                           FROM roll_values v JOIN batches b USING (batch_id) WHERE b.state = 'exported'
                           GROUP BY 1 ORDER BY 1""").set_index("segment")
    sums = roll.assign(**{c: pd.to_numeric(roll[c]) for c in VALUE_COLUMNS}).groupby("segment")[VALUE_COLUMNS].sum()
    for column in VALUE_COLUMNS:
        np.testing.assert_allclose(sums[column].reindex(db.index), db[column], rtol=1e-12, err_msg=column)
        np.testing.assert_allclose([s[column] for s in manifest["segments"]], db[column], rtol=1e-12)
    assert [s["rows"] for s in manifest["segments"]] == db["rows"].tolist()
    assert hashlib.sha256(out.read_bytes()).hexdigest() == manifest["sha256"]
    written = json.loads((tmp_path / "roll.manifest.json").read_text())
    assert written["sha256"] == manifest["sha256"] and written["rows"] == len(roll)
    assert written["config_sha256"] == load_config(folder).sha256 and written["run_ids"] == ["run-a"]
    assert query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'approved'")["n"][0] == 0
    kinds = [e["kind"] for e in event_log(folder)["events"]]
    assert kinds.count("batch_exported") == 22 and kinds[-1] == "roll_exported"


def test_export_names_unapproved_segments_unless_partial(approved: Path, tmp_path: Path) -> None:
    folder = copy_project(approved, tmp_path / "p")
    for segment in ("WHIN", "BRIN"):
        revoke(folder, segment, "second look")
    out = tmp_path / "roll.csv"
    with pytest.raises(UserError, match=r"2 segment\(s\) not approved: BRIN, WHIN\."):
        export_roll(folder, out)
    assert not out.exists()
    manifest = export_roll(folder, out, partial=True)
    expected = query_frame(folder, "SELECT count(*) AS n FROM parcels WHERE segment NOT IN ('BRIN', 'WHIN')")["n"][0]
    roll = _read_roll(out)
    assert len(roll) == expected and not set(roll["segment"]) & {"BRIN", "WHIN"}
    assert manifest["partial"] and manifest["not_approved"] == ["BRIN", "WHIN"]


def test_a_killed_export_leaves_no_roll_and_no_exported_state(approved: Path, tmp_path: Path) -> None:
    """The export runs in a child process that is SIGKILLed as soon as its temporary file appears, i.e. while
    DuckDB writes it. To make that window wide (about a second here) without any hook in the product code,
    the approved batches are padded to 200,000 rows; the kill lands long before the rename."""
    folder = copy_project(approved, tmp_path / "p")
    con = duckdb.connect(str(folder / "reval.duckdb"))
    con.execute("""INSERT INTO roll_values BY NAME SELECT * EXCLUDE (parcel_id, k), parcel_id || '-' || k AS parcel_id
                   FROM roll_values, range(1, 10) AS t(k)""")
    con.close()
    out = tmp_path / "roll.csv"
    code = "import sys; from pathlib import Path; from reval.service.actions import export_roll; " \
           "export_roll(Path(sys.argv[1]), Path(sys.argv[2]))"
    child = subprocess.Popen([sys.executable, "-c", code, str(folder), str(out)], cwd=ROOT)
    deadline = time.monotonic() + 60
    caught = []
    while child.poll() is None and time.monotonic() < deadline and not caught:
        caught = list(tmp_path.glob(".roll.csv.*.partial"))
        time.sleep(0.001)
    os.kill(child.pid, signal.SIGKILL)
    assert child.wait() == -signal.SIGKILL and caught, "the export was not caught mid-write"
    assert not out.exists() and not (tmp_path / "roll.manifest.json").exists()
    assert query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0] == 0
    assert query_frame(folder, "SELECT count(*) AS n FROM events WHERE kind LIKE '%exported'")["n"][0] == 0

    manifest = export_roll(folder, out)                              # a rerun succeeds
    assert manifest["rows"] == 10 * query_frame(folder, "SELECT count(*) AS n FROM parcels")["n"][0]
    assert hashlib.sha256(out.read_bytes()).hexdigest() == manifest["sha256"]
    assert not list(tmp_path.glob(".roll*.partial"))                 # and clears what the killed one left
    assert query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0] == 22


def test_formula_like_cells_are_neutralised_reversibly_and_leading_zeros_kept(tmp_path: Path) -> None:
    # OWASP "CSV Injection" (from memory): prefix cells starting with = + - @ tab or carriage return with a
    # single quote so a spreadsheet treats them as text. Issue finding: ids =1+1 and '=1+1 both exported as
    # '=1+1; a cell already starting with a quote now gets one too, so removing one leading quote is exact.
    parcels = (SMALL_PARCELS.replace("00101,north", "=1+2,north").replace("00102,north", "'=1+2,north")
               .replace("00103,south,A,single_family", "00103,@south,A,-cls").replace("00104,east", '"\t00104",east'))
    sales = SMALL_SALES.replace("S1,00101", "S1,=1+2").replace("S2,00102", "S2,'=1+2")
    folder = write_project(tmp_path / "p", parcels=parcels, sales=sales)
    import_data(folder)
    prepare_sales(folder)
    insert_prior_run(folder, "run-a", 0.9)
    stage_values(folder)
    _approve_all(folder)
    out = tmp_path / "roll.csv"
    export_roll(folder, out)
    with out.open(newline="", encoding="utf-8") as handle:
        rows = {r["parcel_id"]: r for r in csv.DictReader(handle)}
    assert set(rows) == {"'=1+2", "''=1+2", "00103", "00104", "00105"}   # the tab before 00104 is trimmed
    stored = set(query_frame(folder, "SELECT parcel_id FROM parcels")["parcel_id"])
    assert {i[1:] if i.startswith("'") else i for i in rows} == stored == {"=1+2", "'=1+2", "00103", "00104", "00105"}
    assert rows["00103"]["segment"] == "'@south" and rows["00103"]["property_class"] == "'-cls"
    assert rows["00104"]["change_pct"] == "-10.00"                   # numbers stay numbers
    assert rows["00105"]["prior_market_value"] == "" and rows["00105"]["market_value"] == "90000.00"
    risky = tuple("=+-@\t\r")
    for row in rows.values():
        for column in ("parcel_id", "segment", "property_class", "run_id", "flags", "flag_text"):
            assert not row[column].startswith(risky), (column, row[column])


def test_a_refit_after_export_leaves_the_roll_unchanged(approved: Path, tmp_path: Path) -> None:
    folder = copy_project(approved, tmp_path / "p")
    first = export_roll(folder, tmp_path / "first.csv")
    before = query_frame(folder, "SELECT * FROM roll_values ORDER BY batch_id, parcel_id")
    insert_run(folder, "run-b", 2, order=1)
    assert len(stage_values(folder)["staged"]) == 22
    after = query_frame(folder, "SELECT v.* FROM roll_values v JOIN batches b USING (batch_id) "
                           "WHERE b.run_id = 'run-a' ORDER BY batch_id, parcel_id")
    pd.testing.assert_frame_equal(before, after)
    again = export_roll(folder, tmp_path / "again.csv")
    assert (tmp_path / "again.csv").read_bytes() == (tmp_path / "first.csv").read_bytes()
    assert again["sha256"] == first["sha256"] and again["run_ids"] == ["run-a"]
    assert len(again["pending_newer_batches"]) == 22


@pytest.mark.parametrize("target", ["reval.duckdb", "reval.toml", "parcels.csv", "sales.csv", "land_schedule.csv"])
def test_export_never_writes_over_a_file_of_the_project(approved: Path, tmp_path: Path, target: str) -> None:
    """Issue finding: `reval export reval.duckdb --partial` destroyed the project (exit 0)."""
    folder = copy_project(approved, tmp_path / "p")
    before = {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}
    for overwrite in (False, True):
        with pytest.raises(UserError, match="project's own"):
            export_roll(folder, folder / target, partial=True, overwrite=overwrite)
    assert {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()} == before
    assert query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0] == 0


def test_export_refuses_an_existing_file_unless_told_to_overwrite(approved: Path, tmp_path: Path) -> None:
    folder = copy_project(approved, tmp_path / "p")
    out = tmp_path / "roll.csv"
    out.write_text("someone else's file\n")
    with pytest.raises(UserError, match="already exists.*--overwrite"):
        export_roll(folder, out)
    assert out.read_text() == "someone else's file\n"
    (tmp_path / "other.manifest.json").write_text("{}")
    with pytest.raises(UserError, match="other.manifest.json already exists"):
        export_roll(folder, tmp_path / "other.csv")
    assert not (tmp_path / "other.csv").exists()
    manifest = export_roll(folder, out, overwrite=True)
    assert hashlib.sha256(out.read_bytes()).hexdigest() == manifest["sha256"]


def test_cli_export_onto_the_database_exits_1_and_keeps_the_project(approved: Path, tmp_path: Path) -> None:
    folder = copy_project(approved, tmp_path / "p")
    before = (folder / "reval.duckdb").read_bytes()
    done = subprocess.run([sys.executable, "-m", "reval.cli", "export", "reval.duckdb", "--partial"],
                          capture_output=True, text=True, cwd=folder, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert done.returncode == 1 and "Traceback" not in done.stderr, done.stderr
    assert "project's own" in done.stderr
    assert (folder / "reval.duckdb").read_bytes() == before


# ---- kills at each step of the export protocol ---------------------------------------------------------------

KILLING_EXPORT = """\
import os, signal, sys
from pathlib import Path
import reval.data.publish as publish
import reval.roll.export as export
from reval.service.actions import export_roll

folder, out, when, name, count, overwrite = sys.argv[1:7]
owners = {"begin": publish, "commit": publish, "finish": publish, "_fsync": export, "replace": os}
owner, seen = owners[name], [0]
real = getattr(owner, name)

def killing(*args, **kwargs):
    seen[0] += 1
    if when == "before" and seen[0] == int(count):
        os.kill(os.getpid(), signal.SIGKILL)
    result = real(*args, **kwargs)
    if when == "after" and seen[0] == int(count):
        os.kill(os.getpid(), signal.SIGKILL)
    return result

setattr(owner, name, killing)
export_roll(Path(folder), Path(out), overwrite=overwrite == "1")
"""


@pytest.fixture(scope="module")
def small_approved(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The small test township with a run valued at 0.9 x prior and its three segments approved."""
    folder = write_project(tmp_path_factory.mktemp("small-approved") / "p")
    import_data(folder)
    prepare_sales(folder)
    insert_prior_run(folder, "run-a", 0.9)
    stage_values(folder)
    _approve_all(folder)
    return folder


@pytest.mark.parametrize("when,name,count,expected", [
    ("after", "begin", 1, "before"),      # the publication is recorded, no file written yet
    ("after", "_fsync", 1, "before"),     # the roll's temporary file is written
    ("after", "_fsync", 2, "before"),     # both temporary files are written
    ("after", "commit", 1, "before"),     # inside the transaction, before it commits
    ("before", "finish", 1, "after"),     # committed, nothing renamed yet
    ("after", "replace", 1, "after"),     # between the two renames (issue finding: roll beside an older manifest)
    ("after", "replace", 2, "after"),     # renamed, the publication not yet forgotten
])
def test_a_kill_at_each_step_of_the_export_leaves_before_or_after(
        small_approved: Path, tmp_path: Path, caplog: pytest.LogCaptureFixture,
        when: str, name: str, count: int, expected: str) -> None:
    """Issue finding: killed exports left roll.csv and its manifest with the batches still approved and no
    event, a roll beside an older manifest, and a stale .partial file. Each step of the protocol is killed
    (SIGKILL, in a child process); a reader never sees a roll without its own manifest, and the next command
    that opens the project for writing finishes or cleans the export and says so."""
    folder = copy_project(small_approved, tmp_path / "p")
    out = tmp_path / "roll.csv"
    child = subprocess.run([sys.executable, "-c", KILLING_EXPORT, str(folder), str(out), when, name, str(count), "0"],
                           cwd=ROOT, capture_output=True, text=True)
    assert child.returncode == -signal.SIGKILL, child.stderr
    assert roll_agrees(out)
    with caplog.at_level("WARNING", logger="reval"), open_project(folder, write=True):
        pass
    assert export_state(folder, out) == expected
    exported = query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0]
    assert exported == (3 if expected == "after" else 0)
    said = "finished an interrupted export" if expected == "after" else "nothing was exported"
    assert said in caplog.text


def test_an_overwriting_export_killed_between_renames_never_pairs_a_roll_with_another_manifest(
        small_approved: Path, tmp_path: Path) -> None:
    folder = copy_project(small_approved, tmp_path / "p")
    out = tmp_path / "roll.csv"
    first = export_roll(folder, out)
    again = subprocess.run(
        [sys.executable, "-c", KILLING_EXPORT, str(folder), str(out), "after", "replace", "1", "1"],
        cwd=ROOT, capture_output=True, text=True)
    assert again.returncode == -signal.SIGKILL
    assert not out.exists() and roll_agrees(out)          # the old roll went first, the new manifest is in place
    with open_project(folder, write=True):
        pass
    assert roll_agrees(out) and json.loads((tmp_path / "roll.manifest.json").read_text())["sha256"] == first["sha256"]
    events = query_frame(folder, "SELECT detail->>'$.sha256' AS sha FROM events WHERE kind = 'roll_exported'")
    assert events["sha"].tolist() == [first["sha256"], first["sha256"]]   # same batches, same roll, two exports


def test_values_that_cannot_go_on_a_roll_are_refused_naming_the_parcels(small_approved: Path, tmp_path: Path) -> None:
    """Issue finding: a prior value nan/inf was exported as nan/inf (and Infinity in the manifest). The
    import now refuses them; a database holding one from before is refused at export, naming the parcel."""
    folder = copy_project(small_approved, tmp_path / "p")
    con = duckdb.connect(str(folder / "reval.duckdb"))
    con.execute("UPDATE roll_values SET prior_value = 'inf'::DOUBLE WHERE parcel_id = '00102'")
    con.execute("UPDATE roll_values SET prior_value = 'nan'::DOUBLE WHERE parcel_id = '00104'")
    con.close()
    out = tmp_path / "roll.csv"
    with pytest.raises(UserError, match=r"Export refused: 2 parcel\(s\).*00104 \(east\): prior value nan.*"
                                        r"00102 \(north\): prior value inf"):
        export_roll(folder, out)
    assert not out.exists() and not list(tmp_path.glob(".*partial"))
    assert query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0] == 0


def test_the_manifest_is_strict_json(small_approved: Path, tmp_path: Path) -> None:
    folder = copy_project(small_approved, tmp_path / "p")
    export_roll(folder, tmp_path / "roll.csv")
    text = (tmp_path / "roll.manifest.json").read_text()

    def refuse(constant: str) -> None:
        raise ValueError(constant)

    manifest = json.loads(text, parse_constant=refuse)      # NaN, Infinity, -Infinity would raise here
    assert manifest["rows"] == 5 and "remove one leading '" in manifest["text_cells"]
