"""Helpers shared by the tests: small projects on disk, database snapshots, fixture runs and the app's pilot.

Everything here works on real files and real DuckDB databases (no mocks). Fixtures live in conftest.py.

Fixture runs: A plausible model run written straight into a demo project's database, for tests of what follows a fit.

Each parcel's estimate is its TRUE market value from the demo generator (data_samples.demo_town,
true_log_value of its recorded features) times lognormal noise; a qualified sale's in-sample log value is
its parcel's log estimate and its out-of-fold log value adds more noise, as a held-out model's would.
Options bend the run for tests: `scale` multiplies a segment's estimates (a level failure), `chase` values
a segment the sales-chasing way: a share `chase_share` of its sold parcels (drawn at random) is valued at
its time-adjusted price, every other parcel keeps its honest estimate.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
import subprocess
import sys
import textwrap
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import duckdb
import numpy as np
import pandas as pd
import pytest
from textual.pilot import Pilot
from textual.widgets import DataTable
from textual.worker import WorkerCancelled, WorkerFailed

from data_samples.demo_town import true_log_value
from reval.data.fingerprint import record_fingerprints
from reval.data.store import Store
from reval.service import actions

ROOT = Path(__file__).resolve().parent.parent


# ---- small projects ---------------------------------------------------------------------------------------------

SMALL_CONFIG = """\
[jurisdiction]
name = "Test township"
valuation_date = 2025-01-01
sale_window_months = 24

[files]
parcels = "parcels.csv"
sales = "sales.csv"

[columns]
parcel_id = "pid"
segment = "nbhd"
market_area = "area"
property_class = "class"
prior_market_value = "prior"
sale_id = "sale_id"
sale_date = "date"
sale_price = "price"
sale_validity = "code"

[[features]]
name = "living_area"
column = "sqft"
type = "continuous"
log = true
range = [200, 8000]

[[features]]
name = "quality"
type = "ordinal"
levels = ["low", "average", "good"]

[[features]]
name = "garage"
type = "binary"
"""

SMALL_PARCELS = """\
pid,nbhd,area,class,prior,sqft,quality,garage
00101,north,A,single_family,150000,1200,average,1
00102,north,A,single_family,210000,1800,good,0
00103,south,A,single_family,99000,900,low,yes
00104,east,B,condominium,120000,750,average,no
00105,east,B,condominium,,800,good,1
"""

SMALL_SALES = """\
sale_id,pid,date,price,code
S1,00101,2024-03-01,180000,valid
S2,00102,2024-06-15,260000,valid
S3,00104,2023-11-30,140000,family
S4,00105,2024-09-01,155000,valid
S4,00103,2024-09-01,155000,valid
"""


def write_project(folder: Path, config: str = SMALL_CONFIG, parcels: str = SMALL_PARCELS,
                  sales: str = SMALL_SALES) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "reval.toml").write_text(textwrap.dedent(config), encoding="utf-8")
    (folder / "parcels.csv").write_text(parcels, encoding="utf-8")
    (folder / "sales.csv").write_text(sales, encoding="utf-8")
    return folder


def copy_project(source: Path, target: Path) -> Path:
    shutil.copytree(source, target)
    return target


# ---- other processes ---------------------------------------------------------------------------------------------

CHILD_ENV = {"PATH": "/usr/bin:/bin", "HOME": str(Path.home()), "PYTHONPATH": str(ROOT)}


def run_reval(*args: str | bytes, cwd: Path | None = None, columns: int | None = None,
              env: dict[str, str] | None = None) -> subprocess.CompletedProcess[str]:
    """The `reval` command as a user runs it: a real subprocess with a bare environment plus `env`
    (`columns`: the terminal width rich lays its tables out for, so long names are not wrapped)."""
    width = {"COLUMNS": str(columns)} if columns else {}
    return subprocess.run([sys.executable, "-m", "reval.cli", *args], capture_output=True, text=True, cwd=cwd,
                          env={**CHILD_ENV, **width, **(env or {})})


@contextmanager
def held_by_child(folder: Path, write: bool = True, seconds: float = 120.0) -> Iterator[subprocess.Popen[str]]:
    """A child process that opens the project (for writing, or read-only as the app does), pretending to be
    `reval fit` / `reval tui`, and holds it for `seconds` or until the block ends."""
    code = ("import sys, time; from pathlib import Path; from reval.service.project import open_project\n"
            "folder, write, seconds = Path(sys.argv[1]), sys.argv[2] == 'w', float(sys.argv[3])\n"
            "sys.argv = ['reval', 'fit' if write else 'tui']\n"
            "with open_project(folder, write=write):\n"
            "    print('held', flush=True); time.sleep(seconds)\n")
    child = subprocess.Popen([sys.executable, "-c", code, str(folder), "w" if write else "r", str(seconds)],
                             stdout=subprocess.PIPE, text=True, env=CHILD_ENV)
    try:
        assert child.stdout is not None and child.stdout.readline().strip() == "held"
        yield child
    finally:
        if child.poll() is None:
            child.kill()
        child.wait()


def sigkill(child: subprocess.Popen[Any]) -> None:
    """Kill a child at once (SIGKILL: no clean-up runs) and reap it."""
    if child.poll() is None:
        os.kill(child.pid, 9)
    child.wait()


# ---- reading a database ------------------------------------------------------------------------------------------

def database_content(path: Path) -> dict[str, list[tuple]]:
    """All rows of all tables, sorted, so two snapshots compare equal iff the content is equal."""
    if not path.exists():
        return {}
    con = duckdb.connect(str(path), read_only=True)
    try:
        tables = [t for (t,) in con.execute("SELECT table_name FROM information_schema.tables "
                                              "WHERE table_schema = 'main' ORDER BY table_name").fetchall()]
        return {t: sorted(con.execute(f'SELECT * FROM "{t}"').fetchall(), key=repr) for t in tables}
    finally:
        con.close()


def query_frame(folder: Path, sql: str, params: list | None = None):
    """One read-only query against a project's database, as a pandas DataFrame."""
    con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
    try:
        return con.execute(sql, params or []).df()
    finally:
        con.close()


# ---- an exported roll ------------------------------------------------------------------------------------------------

def roll_agrees(out: Path) -> bool:
    """A reader's check: a roll is there only with its own manifest beside it (its sha256 named there)."""
    manifest = out.with_name(out.stem + ".manifest.json")
    if not out.exists():
        return True
    return manifest.exists() and json.loads(manifest.read_text())["sha256"] == hashlib.sha256(out.read_bytes()).hexdigest()


def export_state(folder: Path, out: Path) -> str:
    """'before' (nothing exported, nothing on disk) or 'after' (roll, manifest, event and batch states agree);
    anything else fails the test. No publication is left pending and no temporary file is left over."""
    manifest = out.with_name(out.stem + ".manifest.json")
    exported = query_frame(folder, "SELECT count(*) AS n FROM batches WHERE state = 'exported'")["n"][0]
    marked = query_frame(folder, "SELECT count(*) AS n FROM events WHERE kind = 'batch_exported'")["n"][0]
    events = query_frame(folder, "SELECT detail->>'$.sha256' AS sha FROM events WHERE kind = 'roll_exported'")
    assert query_frame(folder, "SELECT count(*) AS n FROM publications")["n"][0] == 0
    assert not list(out.parent.glob(".*.partial"))
    if not out.exists() and not manifest.exists() and exported == 0 and events.empty:
        return "before"
    sha = hashlib.sha256(out.read_bytes()).hexdigest()
    assert json.loads(manifest.read_text())["sha256"] == sha
    assert events["sha"].tolist() == [sha] and exported == marked > 0
    return "after"


# ---- fixture runs ---------------------------------------------------------------------------------------------------

def _created(order: int) -> dt.datetime:
    """A creation time after any run already in the project (e.g. one the demo build fitted), `order` minutes on,
    so the fixture run is the newest and `reval value` picks it by default."""
    return dt.datetime.now() + dt.timedelta(minutes=1 + order)


def insert_run(folder: Path, run_id: str, seed: int, *, noise_sd: float = 0.05, oof_sd: float = 0.04,
               scale: dict[str, float] | None = None, chase: tuple[str, ...] = (), chase_share: float = 1.0,
               order: int = 0) -> str:
    """Insert runs, parcel_estimates and sale_predictions rows for `run_id`; `order` spaces creation times."""
    rng = np.random.default_rng(seed)
    parcels = pd.read_csv(folder / "parcels.csv", dtype={"parcel_id": str})
    con = duckdb.connect(str(folder / "reval.duckdb"))
    try:
        stored = con.execute("SELECT parcel_id, segment, prior_value FROM parcels").df()
        sales = con.execute("SELECT sale_id, parcel_id, adjusted_price FROM adjusted_sales").df()
        own = parcels.drop(columns=["prior_market_value", "prior_assessed_value", "new_construction"])
        frame = stored.merge(own, on="parcel_id", validate="one_to_one")
        log_value = true_log_value(frame) + rng.normal(0.0, noise_sd, len(frame))
        for segment, factor in (scale or {}).items():
            log_value[(frame["segment"] == segment).to_numpy()] += np.log(factor)
        honest = log_value.copy()   # what the model says: out-of-fold values are drawn around it
        price = sales.groupby("parcel_id")["adjusted_price"].mean()
        sold_price = frame["parcel_id"].map(price).to_numpy(float)
        drawn = rng.random(len(frame)) < chase_share if chase else np.zeros(len(frame), dtype=bool)
        chased = frame["segment"].isin(chase).to_numpy() & ~np.isnan(sold_price) & drawn
        log_value[chased] = np.log(sold_price[chased])
        estimates = pd.DataFrame({"run_id": run_id, "parcel_id": frame["parcel_id"], "segment": frame["segment"],
                                  "log_value": log_value, "market_value": np.exp(log_value)})
        insample = sales["parcel_id"].map(dict(zip(frame["parcel_id"], log_value))).to_numpy(float)
        model = sales["parcel_id"].map(dict(zip(frame["parcel_id"], honest))).to_numpy(float)
        predictions = pd.DataFrame({"run_id": run_id, "sale_id": sales["sale_id"], "parcel_id": sales["parcel_id"],
                                    "fold": rng.integers(0, 5, len(sales)).astype(np.int16),
                                    "insample_log": insample,
                                    "oof_log": model + rng.normal(0.0, oof_sd, len(sales))})
        con.begin()
        con.execute("INSERT INTO runs VALUES (?, ?, 'fixture', 'fixture', ?, 5, '{}', ?, '{}')",
                    [run_id, _created(order), seed,
                     json.dumps({"numpy": np.__version__, "source": "tests/run_fixture.py"})])
        con.register("estimates_frame", estimates)
        con.register("predictions_frame", predictions)
        con.execute("INSERT INTO parcel_estimates BY NAME SELECT * FROM estimates_frame")
        con.execute("INSERT INTO sale_predictions SELECT * FROM predictions_frame")
        con.commit()
    finally:
        con.close()
    _fingerprint(folder, run_id)
    return run_id


def insert_estimates(folder: Path, run_id: str, values: dict[str, float]) -> str:
    """A fixture run valuing each listed parcel at the given market value (hand-worked examples)."""
    con = duckdb.connect(str(folder / "reval.duckdb"))
    try:
        frame = pd.DataFrame({"parcel_id": list(values), "value": list(values.values())})
        con.register("values_frame", frame)
        con.execute("INSERT INTO runs VALUES (?, ?, 'fixture', 'fixture', 0, 5, '{}', '{}', '{}')",
                    [run_id, _created(0)])
        con.execute("""INSERT INTO parcel_estimates (run_id, parcel_id, segment, log_value, market_value)
                       SELECT ?, p.parcel_id, p.segment, ln(v.value), v.value
                       FROM parcels p JOIN values_frame v USING (parcel_id)""", [run_id])
    finally:
        con.close()
    _fingerprint(folder, run_id)
    return run_id


def _fingerprint(folder: Path, run_id: str) -> None:
    """Record the data a fixture run stands for, as a real run does (reval.data.fingerprint)."""
    with Store(folder / "reval.duckdb") as store, store.transaction():
        record_fingerprints(store, run_id)


def set_section(folder: Path, section: str, lines: str) -> None:
    """Replace the config's [section] (and its sub-tables) with `lines`, so a test states every rule of that
    section it relies on, whatever the shipped demo config holds."""
    path = folder / "reval.toml"
    kept, inside = [], False
    for line in path.read_text(encoding="utf-8").splitlines():
        header = line.strip().startswith("[")
        if header:
            name = line.strip().strip("[]")
            inside = name == section or name.startswith(section + ".")
        if not inside:
            kept.append(line)
    path.write_text("\n".join(kept) + f"\n\n[{section}]\n{lines}", encoding="utf-8")


def set_assessment(folder: Path, lines: str) -> None:
    """Replace the config's [assessment] section (and its [[assessment.caps]]) with `lines`."""
    set_section(folder, "assessment", lines)


def insert_prior_run(folder: Path, run_id: str, factor: float, *, order: int = 0, missing_prior: float = 100_000.0) -> str:
    """A run for any project: every estimate is the prior value (or `missing_prior`) times `factor`."""
    con = duckdb.connect(str(folder / "reval.duckdb"))
    try:
        con.begin()
        con.execute("INSERT INTO runs VALUES (?, ?, 'fixture', 'fixture', 0, 5, '{}', '{}', '{}')",
                    [run_id, _created(order)])
        con.execute("""INSERT INTO parcel_estimates (run_id, parcel_id, segment, log_value, market_value)
                       SELECT ?, parcel_id, segment, ln(coalesce(prior_value, ?) * ?), coalesce(prior_value, ?) * ?
                       FROM parcels""", [run_id, missing_prior, factor, missing_prior, factor])
        con.execute("""INSERT INTO sale_predictions
                       SELECT ?, a.sale_id, a.parcel_id, 0, e.log_value, e.log_value FROM adjusted_sales a
                       JOIN parcel_estimates e ON e.parcel_id = a.parcel_id AND e.run_id = ?""", [run_id, run_id])
        con.commit()
    finally:
        con.close()
    _fingerprint(folder, run_id)
    return run_id


ALL_VALUED = 'land_schedule = ["vacant_land"]\n'   # [classes] that leave no parcel without a value


def roll_project(demo_project: Path, target: Path, assessment: str | None = "", classes: str = ALL_VALUED,
                 **run: object) -> Path:
    """A copy of the demo project with one fixture run 'run-a' (seed 1). The [assessment] section uses the
    demo's land schedule plus the `assessment` lines; with None it is empty (no schedule, defaults). [classes]
    values vacant lots by the schedule (when there is one) and the rest by the model, so every segment can be
    approved; give the demo's own lines to leave its institutional parcels without a value."""
    shutil.copytree(demo_project, target)
    set_assessment(target, "" if assessment is None else f'land_schedule = "land_schedule.csv"\n{assessment}')
    set_section(target, "classes", classes if assessment is not None else "")
    insert_run(target, "run-a", 1, **run)  # type: ignore[arg-type]
    return target


# ---- the app ----------------------------------------------------------------------------------------------------------

APP_DEMO_PARCELS = 2000   # the demo generator's smallest municipality: a full fit takes seconds, not minutes
PINNED_RUN = "run-demo"
_BUILT: dict[str, Path] = {}


def pin_run_id(database: Path, run_id: str) -> None:
    """Give the demo's one run a fixed id everywhere it is stored, so screens (and snapshots) do not
    show the fit's clock."""
    con = duckdb.connect(str(database))
    try:
        (old,), = con.execute("SELECT run_id FROM runs").fetchall()
        columns = con.execute("SELECT c.table_name, c.column_name FROM information_schema.columns c "
                              "JOIN information_schema.tables t USING (table_schema, table_name) "
                              "WHERE c.column_name IN ('run_id', 'study_id') AND c.table_schema = 'main' "
                              "AND t.table_type = 'BASE TABLE'").fetchall()
        con.begin()
        for table, column in columns:
            con.execute(f'UPDATE "{table}" SET "{column}" = replace("{column}", ?, ?)', [old, run_id])
        con.commit()
    finally:
        con.close()


def fitted_demo_folder(factory: pytest.TempPathFactory) -> Path:
    """The demo municipality built with every step (import, sales, fit, values staged), once per session."""
    if "demo" not in _BUILT:
        folder = factory.mktemp("tui-demo")
        actions.build_demo(folder, APP_DEMO_PARCELS)
        pin_run_id(folder / "reval.duckdb", PINNED_RUN)
        _BUILT["demo"] = folder
    return _BUILT["demo"]


async def settle(pilot: Pilot[Any]) -> None:
    """Wait until every worker has finished and the messages they posted are handled (a cancelled job's
    thread runs on to its next progress report: the app's job_running says when it is done)."""
    app = pilot.app
    for _ in range(1200):
        for worker in list(app.workers):
            try:
                await worker.wait()
            except (WorkerFailed, WorkerCancelled):
                pass  # a newer read replaced a cancelled one; a failure becomes a message the tests assert on
        await pilot.pause()
        if not any(w.is_running for w in app.workers):
            if not getattr(app, "job_running", False):
                return
            await pilot.pause(0.05)
    raise AssertionError("workers kept running")


async def type_text(pilot: Pilot[Any], text: str) -> None:
    await pilot.press(*("space" if ch == " " else ch for ch in text))


def table_rows(table: DataTable[Any]) -> list[list[str]]:
    return [[str(c) for c in table.get_row_at(i)] for i in range(table.row_count)]


def pdf_text(path: Path) -> str:
    """The text of a PDF written by matplotlib (Type 42 fonts: strings of UTF-16BE codes in TJ arrays), read with
    the standard library only, so a test proves the text is in the file and not only drawn."""
    import re
    import zlib

    data = path.read_bytes()
    out = []
    for match in re.finditer(rb"stream\r?\n(.*?)\r?\nendstream", data, re.S):
        try:
            content = zlib.decompress(match.group(1))
        except zlib.error:
            continue
        for array in re.finditer(rb"\[(.*?)\]\s*TJ", content, re.S):
            pieces = re.findall(rb"\(((?:\\.|[^\\)])*)\)", array.group(1), re.S)
            raw = b"".join(re.sub(rb"\\(.)", rb"\1", p, flags=re.S) for p in pieces)
            out.append(raw.decode("utf-16-be", errors="replace"))
    return "\n".join(out)


def pdf_image_count(path: Path) -> int:
    """How many raster images a PDF holds (each report figure is one)."""
    return path.read_bytes().count(b"/Subtype /Image")
# ---- a project with a planted case of every `reval check` code ---------------------------------------------------

# A small project with one planted case of every `reval check` code (and clean parcels that must raise none).
#
# Segment north holds ten ordinary sold houses (N01-N10: 1,200-2,100 sq ft, 1-3 bathrooms, built 1950-2004,
# about 150 per sq ft, prior values near 90 % of the price) and one planted parcel per check; segment south
# has two ordinary sold houses (S01, S02) and parcels without sales. Valuation date 2025-01-01, a 24-month sale
# window (2023-01-01 to 2025-01-01). The planted cases (parcel: what the check must say):
#
#     P11 living_area blank                         -> missing
#     P12 living_area 5,000 (north sold: <= 2,100)  -> beyond_sold
#     P13 300 sq ft with 4 bathrooms                -> area_per_bathroom (and beyond_sold: below the sold minimum)
#     P14 1,500 sq ft with 0 bathrooms              -> no_bathroom
#     P15 built 2026, after the valuation date      -> built_after_valuation
#     P16 sold 2023-05-01, built 2024               -> built_after_sale (sale T16)
#     P17 sold for 2,000,000 with 1,500 sq ft       -> price_per_area (sale T17; also price_vs_prior)
#     P18 sold for 300,000, prior value 50,000      -> price_vs_prior (sale T18)
#     P19 two sales on 2024-02-01 (T19a, T19b)      -> duplicate_sale (both listed)
#     P20 sold 2023-06-01 (T20a) and 2024-06-01 (T20b) -> repeat_sale (both listed)
#     P21 quality "good" (north sold: low, average) -> beyond_sold (quality)
#     P22 waterfront yes (no north sale is)         -> beyond_sold (waterfront)
#     P23 living_area 210: inside the imported range [200, 8000], outside a range tightened to [250, 8000]
#                                                   -> beyond_range once the config says so (and beyond_sold)

CHECK_CONFIG = """\
[jurisdiction]
name = "Check township"
valuation_date = 2025-01-01
sale_window_months = 24

[files]
parcels = "parcels.csv"
sales = "sales.csv"

[columns]
parcel_id = "pid"
segment = "nbhd"
market_area = "area"
property_class = "class"
prior_market_value = "prior"
sale_id = "sale_id"
sale_date = "date"
sale_price = "price"
sale_validity = "code"

[[features]]
name = "living_area"
column = "sqft"
type = "continuous"
log = true
range = [200, 8000]

[[features]]
name = "bathrooms"
type = "continuous"
range = [0, 10]

[[features]]
name = "year_built"
type = "continuous"
range = [1800, 2030]

[[features]]
name = "quality"
type = "ordinal"
levels = ["low", "average", "good"]

[[features]]
name = "waterfront"
type = "binary"

[sales]
validity_codes_kept = ["valid"]
"""

# pid, nbhd, sqft, bathrooms, year_built, quality, waterfront, prior
_PARCELS = [
    ("N01", "north", 1200, 1, 1950, "low", "no", 170000),
    ("N02", "north", 1300, 1, 1955, "average", "no", 175000),
    ("N03", "north", 1400, 2, 1960, "low", "no", 190000),
    ("N04", "north", 1500, 2, 1965, "average", "no", 205000),
    ("N05", "north", 1600, 2, 1970, "average", "no", 215000),
    ("N06", "north", 1700, 2, 1980, "low", "no", 230000),
    ("N07", "north", 1800, 2, 1990, "average", "no", 240000),
    ("N08", "north", 1900, 3, 1995, "average", "no", 255000),
    ("N09", "north", 2000, 3, 2000, "low", "no", 270000),
    ("N10", "north", 2100, 3, 2004, "average", "no", 285000),
    ("P11", "north", None, 2, 1975, "average", "no", 200000),
    ("P12", "north", 5000, 3, 1985, "average", "no", 600000),
    ("P13", "north", 300, 4, 1985, "average", "no", 90000),
    ("P14", "north", 1500, 0, 1985, "average", "no", 200000),
    ("P15", "north", 1500, 2, 2026, "average", "no", 200000),
    ("P16", "north", 1500, 2, 2024, "average", "no", 200000),
    ("P17", "north", 1500, 2, 1985, "average", "no", 200000),
    ("P18", "north", 2000, 2, 1985, "average", "no", 50000),
    ("P19", "north", 1500, 2, 1985, "average", "no", 200000),
    ("P20", "north", 1500, 2, 1985, "average", "no", 200000),
    ("P21", "north", 1500, 2, 1985, "good", "no", 200000),
    ("P22", "north", 1500, 2, 1985, "average", "yes", 200000),
    ("P23", "north", 210, 1, 1985, "average", "no", 60000),
    ("S01", "south", 1400, 2, 1970, "average", "no", 190000),
    ("S02", "south", 1600, 2, 1975, "average", "no", 215000),
    ("S03", "south", 1500, 2, 1972, "average", "no", 200000),
]

# sale_id, pid, date, price
_SALES = [
    ("T01", "N01", "2023-02-01", 180000), ("T02", "N02", "2023-04-01", 195000),
    ("T03", "N03", "2023-06-01", 210000), ("T04", "N04", "2023-08-01", 225000),
    ("T05", "N05", "2023-10-01", 240000), ("T06", "N06", "2024-01-15", 255000),
    ("T07", "N07", "2024-03-01", 270000), ("T08", "N08", "2024-05-01", 285000),
    ("T09", "N09", "2024-07-01", 300000), ("T10", "N10", "2024-09-01", 315000),
    ("T16", "P16", "2023-05-01", 225000),
    ("T17", "P17", "2024-04-01", 2000000),
    ("T18", "P18", "2024-02-01", 300000),
    ("T19a", "P19", "2024-02-01", 225000), ("T19b", "P19", "2024-02-01", 225000),
    ("T20a", "P20", "2023-06-01", 215000), ("T20b", "P20", "2024-06-01", 230000),
    ("U01", "S01", "2023-09-01", 210000), ("U02", "S02", "2024-08-01", 240000),
]

PLANTED = {("P11", "missing", "living_area"), ("P12", "beyond_sold", "living_area"),
           ("P13", "area_per_bathroom", "bathrooms"), ("P13", "beyond_sold", "living_area"),
           ("P14", "no_bathroom", "bathrooms"), ("P15", "built_after_valuation", "year_built"),
           ("P16", "built_after_sale", "year_built"), ("P17", "price_per_area", "living_area"),
           ("P17", "price_vs_prior", None), ("P18", "price_vs_prior", None),
           ("P19", "duplicate_sale", None), ("P20", "repeat_sale", None),
           ("P21", "beyond_sold", "quality"), ("P22", "beyond_sold", "waterfront"),
           ("P23", "beyond_sold", "living_area")}
CLEAN = {p[0] for p in _PARCELS if p[0][0] in "NS"}


def _cell(v: object) -> str:
    return "" if v is None else str(v)


def write_check_project(folder: Path) -> Path:
    parcels = "pid,nbhd,area,class,prior,sqft,bathrooms,year_built,quality,waterfront\n" + "".join(
        f"{pid},{nbhd},A,single_family,{prior},{_cell(sqft)},{baths},{year},{quality},{water}\n"
        for pid, nbhd, sqft, baths, year, quality, water, prior in _PARCELS)
    sales = "sale_id,pid,date,price,code\n" + "".join(f"{s},{p},{d},{price},valid\n" for s, p, d, price in _SALES)
    return write_project(folder, CHECK_CONFIG, parcels, sales)
