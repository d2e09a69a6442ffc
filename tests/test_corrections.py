"""Data corrections without a refit (issue 12, item 5) on the fitted demo: `reval correct` changes one parcel's
characteristics, revalues that parcel alone with the run's stored model and outdates its segment's batches.

The stored model is checked against the run itself: putting the corrected feature back gives the parcel its
original estimate again (to 1e-9, the run having valued all parcels at once), so the stored model is the run's
model and not a refit.
"""
from __future__ import annotations

from pathlib import Path

import duckdb
import pytest

from reval.errors import UserError
from reval.service.actions import batch_states, correct_parcel, event_log, stage_values
from helpers import database_content, insert_prior_run, query_frame, run_reval

PER_PARCEL = ("feature_values", "parcel_estimates", "parcel_contributions")


def _parcel(folder: Path) -> tuple[str, str, float]:
    """An unsold parcel with a living area well inside the declared range: (parcel, segment, living area)."""
    row = query_frame(folder, """SELECT p.parcel_id, p.segment, v.value FROM parcels p
                                 JOIN feature_values v ON v.parcel_id = p.parcel_id
                                 JOIN features f ON f.position = v.position AND f.name = 'living_area'
                                 WHERE v.value BETWEEN 1200 AND 2500
                                   AND p.parcel_id NOT IN (SELECT parcel_id FROM sales)
                                 ORDER BY p.parcel_id LIMIT 1""").iloc[0]
    return str(row["parcel_id"]), str(row["segment"]), float(row["value"])


def _rows(folder: Path, table: str) -> list[tuple]:
    return database_content(folder / "reval.duckdb")[table]


def _estimate(folder: Path, parcel: str) -> float:
    return float(query_frame(folder, "SELECT market_value FROM parcel_estimates WHERE parcel_id = ?",
                             [parcel])["market_value"][0])


def test_a_correction_revalues_exactly_one_parcel(demo_copy: Path) -> None:
    parcel, segment, area = _parcel(demo_copy)
    before = {t: _rows(demo_copy, t) for t in PER_PARCEL}
    curves = _rows(demo_copy, "model_curves")
    value = _estimate(demo_copy, parcel)

    result = correct_parcel(demo_copy, parcel, [f"living_area={area + 600:g}", "quality=good"], "field visit 12 May")
    assert result["old_value"] == pytest.approx(value) and result["new_value"] > value
    assert {c["feature"] for c in result["changes"]} == {"living_area", "quality"}
    after = {t: _rows(demo_copy, t) for t in PER_PARCEL}
    for table in PER_PARCEL:   # every other parcel's rows unchanged, byte for byte
        kept_before = [r for r in before[table] if parcel not in r]
        kept_after = [r for r in after[table] if parcel not in r]
        assert kept_after == kept_before and len(kept_before) > 0
        assert [r for r in after[table] if parcel in r] != [r for r in before[table] if parcel in r]
    assert _rows(demo_copy, "model_curves") == curves   # no refit
    parts = query_frame(demo_copy, """SELECT sum(c.contribution) AS s, any_value(e.log_value) AS v
                                      FROM parcel_contributions c JOIN parcel_estimates e USING (run_id, parcel_id)
                                      WHERE parcel_id = ?""", [parcel]).iloc[0]
    assert parts["s"] == pytest.approx(parts["v"], abs=1e-9)   # contributions still add up to the value

    assert [b["state"] for b in result["outdated"]] == ["staged"]
    assert "outdated" in {s["segment"]: s["summary"] for s in batch_states(demo_copy)["segments"]}[segment]
    staged = stage_values(demo_copy)
    assert [s["segment"] for s in staged["staged"]] == [segment]   # only the corrected parcel's segment
    roll = query_frame(demo_copy, """SELECT v.model_value FROM roll_values v JOIN batches b USING (batch_id)
                                     WHERE b.state = 'staged' AND v.parcel_id = ?""", [parcel])
    assert roll["model_value"][0] == pytest.approx(round(result["new_value"] / 100) * 100)

    event = [e for e in event_log(demo_copy, segment)["events"] if e["kind"] == "parcel_corrected"]
    assert len(event) == 1 and event[0]["detail"]["note"] == "field visit 12 May"
    change = {c["feature"]: c for c in event[0]["detail"]["changes"]}
    assert change["living_area"]["old"] == area and change["living_area"]["new"] == area + 600
    assert change["quality"]["new"] == "good"
    assert event[0]["detail"]["old_value"] == pytest.approx(value)

    back = correct_parcel(demo_copy, parcel, [f"living_area={area:g}", f"quality={change['quality']['old']}"],
                          "undo for the test")
    assert back["new_value"] == pytest.approx(value, rel=1e-9)     # the stored model is the run's own


def test_bad_values_are_refused_by_name_and_change_nothing(demo_copy: Path) -> None:
    parcel, _, _ = _parcel(demo_copy)
    snapshot = database_content(demo_copy / "reval.duckdb")
    cases = {("living_area=abc",): r"living_area = 'abc': not a number",
             ("living_area=10",): r"living_area = '10': outside the declared range",
             ("quality=superb",): r"quality = 'superb': unknown level \(expected one of: low, fair",
             ("waterfront=maybe",): r"waterfront = 'maybe': not a yes/no value",
             ("pool=1",): r"Unknown feature 'pool'",
             ("living_area=1500", "living_area=1600"): "corrected twice",
             ("living_area",): "FEATURE=VALUE"}
    for changes, message in cases.items():
        with pytest.raises(UserError, match=message):
            correct_parcel(demo_copy, parcel, list(changes), "note")
    with pytest.raises(UserError, match="No parcel with id 'X-404'"):
        correct_parcel(demo_copy, "X-404", ["living_area=1500"], "note")
    with pytest.raises(UserError, match="--note"):
        correct_parcel(demo_copy, parcel, ["living_area=1500"], "")
    assert database_content(demo_copy / "reval.duckdb") == snapshot
    done = run_reval("correct", parcel, "quality=superb", "--note", "x", "--project", str(demo_copy))
    assert done.returncode == 1 and "Traceback" not in done.stderr and "unknown level" in done.stderr
    assert database_content(demo_copy / "reval.duckdb") == snapshot


def test_a_run_without_a_stored_model_is_refused_plainly(demo_copy: Path) -> None:
    parcel, _, _ = _parcel(demo_copy)
    insert_prior_run(demo_copy, "run-fixture", 1.0)    # a run made without keeping its model
    snapshot = database_content(demo_copy / "reval.duckdb")
    with pytest.raises(UserError, match="run-fixture keeps no model"):
        correct_parcel(demo_copy, parcel, ["living_area=1500"], "note")
    assert database_content(demo_copy / "reval.duckdb") == snapshot


def test_a_stored_model_that_would_build_anything_else_is_refused(demo_copy: Path) -> None:
    """The stored model is read by an unpickler that builds only model classes (Python docs, "Restricting
    Globals"): a blob naming os.system is refused, not run."""
    import pickle

    class Evil:
        def __reduce__(self) -> tuple:
            return (__import__("os").system, ("touch pwned",))

    parcel, _, _ = _parcel(demo_copy)
    con = duckdb.connect(str(demo_copy / "reval.duckdb"))
    con.execute("UPDATE run_models SET model = ?", [pickle.dumps(Evil())])
    con.close()
    with pytest.raises(UserError, match="cannot be read back"):
        correct_parcel(demo_copy, parcel, ["living_area=1500"], "note")
    assert not (demo_copy / "pwned").exists() and not Path("pwned").exists()
