"""Overrides (issue 12, item 4) on the fitted demo: a value the analyst sets, with a reason, above the model's.

Checked on the real project: the override reaches the roll at the next value step and stays through a refit and a
re-stage; the export shows it flagged with the model's value and the reason beside it; ratio studies of model
values leave the overridden parcel's sale out and the study of final values takes it in at the override;
removing the override brings the model's value back; every change is an event; bad input changes nothing.
"""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from reval.data.store import open_store
from reval.errors import UserError
from reval.service.actions import (approve, approve_all_passing, batch_states, event_log, export_roll, fit,
                                   remove_override, set_override, stage_values, study)
from reval.stats.study import sales_for_study
from helpers import database_content, query_frame, run_reval

VALUE = 234_500.0


def _sold_parcel(folder: Path) -> tuple[str, str, str]:
    """A parcel with exactly one qualified single-parcel sale in the run's study: (parcel, sale, segment)."""
    row = query_frame(folder, """SELECT a.parcel_id, any_value(a.sale_id) AS sale_id, any_value(p.segment) AS segment
                                 FROM adjusted_sales a JOIN parcels p USING (parcel_id)
                                 WHERE a.sale_id IN (SELECT sale_id FROM adjusted_sales GROUP BY sale_id
                                                     HAVING count(*) = 1)
                                 GROUP BY a.parcel_id HAVING count(*) = 1 ORDER BY a.parcel_id LIMIT 1""").iloc[0]
    return str(row["parcel_id"]), str(row["sale_id"]), str(row["segment"])


def _roll_row(folder: Path, parcel: str) -> dict[str, object]:
    """The parcel's row in its segment's newest live batch."""
    rows = query_frame(folder, """SELECT v.market_value, v.model_value, v.override_reason, b.run_id
                                  FROM roll_values v JOIN batches b USING (batch_id)
                                  WHERE v.parcel_id = ? AND b.state IN ('staged', 'held', 'approved', 'exported')
                                  ORDER BY b.batch_id DESC LIMIT 1""", [parcel])
    return rows.iloc[0].to_dict()


def _study_sales(folder: Path, source: str) -> dict[str, float]:
    with open_store(folder / "reval.duckdb", read_only=True) as store:
        run = None if source == "final" else store.rows("roll_latest_run")[0][0]
        frame = sales_for_study(store, source, run)
    return dict(zip(frame["sale_id"], frame["value"]))


def test_an_override_survives_a_refit_and_a_restage_and_is_flagged_in_the_export(demo_copy: Path,
                                                                                  tmp_path: Path) -> None:
    parcel, sale, segment = _sold_parcel(demo_copy)
    assert sale in _study_sales(demo_copy, "model_out_of_fold")    # premise: the sale is in the model study
    result = set_override(demo_copy, parcel, VALUE, "appeal_decision", "board decision 2026-14")
    assert result["override"] is not None and result["override"]["value"] == VALUE
    assert [b["state"] for b in result["outdated"]] == ["staged"]   # the staged batch no longer holds the roll's value
    summary = {s["segment"]: s["summary"] for s in batch_states(demo_copy)["segments"]}
    assert "outdated" in summary[segment]
    with pytest.raises(UserError, match="outdated"):
        approve(demo_copy, segment, "try")

    staged = stage_values(demo_copy)                                # only the outdated segment is staged again
    assert [s["segment"] for s in staged["staged"]] == [segment] and staged["flags"]["overridden"] == 1
    row = _roll_row(demo_copy, parcel)
    assert row["market_value"] == VALUE and row["override_reason"] == "appeal_decision"
    model_value = row["model_value"]
    assert model_value != VALUE

    assert sale not in _study_sales(demo_copy, "model_out_of_fold")   # left out of studies of model values
    assert sale not in _study_sales(demo_copy, "model_in_sample")
    final = _study_sales(demo_copy, "final")
    assert final[sale] == VALUE                                      # in the study of final values, at the override
    stored = study(demo_copy, "final", "all")
    model = study(demo_copy, "model", "all")
    assert stored["values_source"] == "final" and "warning" in stored
    counted = [g["n"] + g["n_trimmed"] for g in (stored["groups"][0], model["groups"][0])]
    assert counted[0] == counted[1] + 1

    first_run = row["run_id"]
    fit(demo_copy)                                                  # a refit ...
    stage_values(demo_copy, replace=True)                           # ... and a re-stage keep the override
    row = _roll_row(demo_copy, parcel)
    assert row["run_id"] != first_run and row["market_value"] == VALUE and row["override_reason"] == "appeal_decision"

    # The demo's institutional parcels are a class reval does not value ([classes] not_valued): their segment
    # can be approved only once each has a manual value, which is an override (issue 10 item 4).
    manual = query_frame(demo_copy, "SELECT parcel_id FROM parcels WHERE property_class = 'institutional'")
    for pid in manual["parcel_id"]:
        set_override(demo_copy, pid, 400_000, "manual_value", "valued by hand")
    stage_values(demo_copy, replace=True)
    for s in batch_states(demo_copy)["segments"]:
        approve(demo_copy, s["segment"], "test: approved to export")
    out = tmp_path / "roll.csv"
    export_roll(demo_copy, out)
    with out.open(newline="") as handle:
        rows = {r["parcel_id"]: r for r in csv.DictReader(handle)}
    assert rows[parcel]["market_value"] == f"{VALUE:.2f}" and rows[parcel]["overridden"] == "yes"
    assert rows[parcel]["override_reason"] == "appeal_decision"
    assert float(rows[parcel]["model_value"]) == row["model_value"]
    assert all(rows[p]["overridden"] == "yes" and rows[p]["override_reason"] == "manual_value"
               and "override:manual_value" in rows[p]["flags"] for p in manual["parcel_id"])
    others = [r for p, r in rows.items()
              if p != parcel and p not in set(manual["parcel_id"]) and r["property_class"] != "vacant_land"]
    assert all(r["overridden"] == "no" and r["market_value"] == r["model_value"] and not r["override_reason"]
               for r in others)


def test_removing_an_override_restores_the_model_value_and_both_are_events(demo_copy: Path) -> None:
    parcel, _, segment = _sold_parcel(demo_copy)
    before = _roll_row(demo_copy, parcel)
    set_override(demo_copy, parcel, VALUE, "informal_review", "owner showed a survey")
    stage_values(demo_copy)
    assert _roll_row(demo_copy, parcel)["market_value"] == VALUE
    removed = remove_override(demo_copy, parcel, "survey withdrawn")
    assert removed["override"] is None and removed["previous"]["value"] == VALUE
    stage_values(demo_copy)
    after = _roll_row(demo_copy, parcel)
    assert after["market_value"] == before["market_value"] == after["model_value"]
    assert after["override_reason"] is None
    events = [e for e in event_log(demo_copy, segment)["events"] if e["kind"].startswith("override_")]
    assert [e["kind"] for e in events] == ["override_set", "override_removed"]
    expected = {"parcel_id": parcel, "value": VALUE, "reason": "informal_review", "note": "owner showed a survey"}
    assert {k: events[0]["detail"][k] for k in expected} == expected
    assert events[1]["detail"]["note"] == "survey withdrawn" and events[1]["detail"]["removed"]["value"] == VALUE


def test_bad_reason_unknown_parcel_and_bad_value_change_nothing(demo_copy: Path) -> None:
    parcel, _, _ = _sold_parcel(demo_copy)
    snapshot = database_content(demo_copy / "reval.duckdb")
    with pytest.raises(UserError, match=r"Unknown override reason 'hunch'.*informal_review, appeal_decision"):
        set_override(demo_copy, parcel, VALUE, "hunch")
    with pytest.raises(UserError, match=r"No parcel with id 'X-404'"):
        set_override(demo_copy, "X-404", VALUE, "manual_value")
    with pytest.raises(UserError, match="positive amount"):
        set_override(demo_copy, parcel, -5.0, "manual_value")
    with pytest.raises(UserError, match="no override to remove"):
        remove_override(demo_copy, parcel, "nothing there")
    with pytest.raises(UserError, match="--note"):
        remove_override(demo_copy, parcel, " ")
    assert database_content(demo_copy / "reval.duckdb") == snapshot
    done = run_reval("override", parcel, "1000", "--reason", "hunch", "--project", str(demo_copy))
    assert done.returncode == 1 and "Traceback" not in done.stderr and "Unknown override reason" in done.stderr
    assert database_content(demo_copy / "reval.duckdb") == snapshot


def test_the_cli_sets_and_removes_an_override(demo_copy: Path) -> None:
    parcel, _, _ = _sold_parcel(demo_copy)
    done = run_reval("override", parcel, "150000", "--reason", "data_correction", "--note", "wrong storey count",
                     "--project", str(demo_copy), columns=200)
    assert done.returncode == 0, done.stderr
    assert "override 150,000" in done.stdout and "outdated" in done.stdout
    assert query_frame(demo_copy, "SELECT value, reason FROM overrides").values.tolist() == [[150000.0, "data_correction"]]
    done = run_reval("override", parcel, "--remove", "--note", "corrected at source", "--project", str(demo_copy))
    assert done.returncode == 0, done.stderr
    assert query_frame(demo_copy, "SELECT count(*) AS n FROM overrides")["n"][0] == 0


def test_approve_all_passing_leaves_a_batch_outdated_by_an_override(demo_copy: Path) -> None:
    # `reval approve --all-passing` refuses what a single approval refuses: a staged batch outdated by an
    # override made after it was staged is left (same words), not approved, until `reval value` stages it again.
    parcel, _, segment = _sold_parcel(demo_copy)
    set_override(demo_copy, parcel, VALUE, "appeal_decision", "board decision 2026-14")
    with pytest.raises(UserError) as refused:
        approve(demo_copy, segment, "try")
    result = approve_all_passing(demo_copy)
    left = {x["segment"]: x["reason"] for x in result["left"]}
    assert segment not in {d["segment"] for d in result["approved"]}
    assert "outdated" in left[segment] and left[segment] in str(refused.value)
    entry = next(s for s in batch_states(demo_copy)["segments"] if s["segment"] == segment)
    assert entry["certified"] is None and entry["open"]["state"] == "staged"


def test_an_override_in_an_approved_segment_waits_for_a_deliberate_restage(demo_copy: Path) -> None:
    """Approved values never change: the approval stays certified (marked outdated) until the segment is staged
    again on purpose (--replace, the rule of reval/roll/batch_states.py) and the new batch is approved."""
    parcel, _, segment = _sold_parcel(demo_copy)
    approved = approve(demo_copy, segment, "test: approved")
    certified = _roll_row(demo_copy, parcel)
    set_override(demo_copy, parcel, VALUE, "appeal_decision", "board decision")
    entry = next(s for s in batch_states(demo_copy)["segments"] if s["segment"] == segment)
    assert entry["certified"]["batch_id"] == approved["batch_id"] and "outdated" in entry["summary"]
    kept = stage_values(demo_copy)
    assert segment in [k["segment"] for k in kept["kept"]] and _roll_row(demo_copy, parcel) == certified
    with pytest.raises(UserError, match="--replace"):
        stage_values(demo_copy, segments=[segment])
    staged = stage_values(demo_copy, segments=[segment], replace=True)
    assert [s["segment"] for s in staged["staged"]] == [segment]
    assert _roll_row(demo_copy, parcel)["market_value"] == VALUE
    approve(demo_copy, segment, "test: approved with the override")
    entry = next(s for s in batch_states(demo_copy)["segments"] if s["segment"] == segment)
    assert entry["certified"]["state"] == "approved" and "outdated" not in entry["summary"]
