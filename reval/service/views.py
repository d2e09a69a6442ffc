"""Read-only data for the terminal app's screens, as plain dicts, lists and numbers.

The app holds no SQL, pandas or statistics: every number it shows is computed here (or stored by the
core) and every query is a named file in sql/queries/app_*.sql. Lists of parcels and sales are paged or
limited in SQL; the overview is one row per segment. Rows are read as plain DuckDB tuples (no pandas), and
modules the overview does not need (numpy, scipy, the review) load in the calls that use them, so a fresh
app opens fast.
"""
from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any, TypedDict

from reval.data.config import Config
from reval.data.store import Store
from reval.errors import UserError
from reval.model import BASE_TERM, POOLING_SEGMENTS, THIN_CURVES
from reval.model.names import named
from reval.roll import batch_states
from reval.roll.batch_states import SegmentBatches, state_of
from reval.roll.split import value_split
from reval.service.project import open_project
from reval.service.types import (CheckPage, ComparableGrid, Curve, Equity, JobStep, ListColumn, ListPage, Overview,
                                 OverviewRow, ParcelDetail, Record, SalesPage, SegmentDetail, SegmentReview,
                                 SegmentStatistics, StatCell, ValueChange)
from reval.states import BatchState
from reval.roll.flags import approval_blockers
from reval.stats.judging import failures, judging_sha256
from reval.stats.sources import SOURCE_LABELS
from reval.states import ValuesSource
from reval.stats.stored import STATS, StudyGroup, stored_groups, study_id

SORT_KEYS = ("segment", "market_area", "parcels", "sales", "model", "median_ratio", "cod", "prd", "prb",
             "value_change", "state")


class ShownStudy(TypedDict):
    """The stored segment study the app shows (and its segment x class study, when stored)."""

    study_id: str
    values_source: ValuesSource
    run_id: str | None
    confidence: float
    groups: list[StudyGroup]
    class_groups: list[StudyGroup]


def latest_run(store: Store) -> str | None:
    rows = store.rows("app_latest_run")
    return str(rows[0][0]) if rows else None


def job_steps(folder: Path) -> list[JobStep]:
    """Each step of the job from data to roll, with where the project stands (a project without a database
    yet: nothing done; the first step not done is what to do next)."""
    from reval.data.config import load_config

    config = load_config(folder)
    n: dict[str, Any] = {}
    if config.database.exists():
        with open_project(folder) as (_, store):
            n = store.records("app_job_steps")[0]

    def count(key: str) -> int:
        return int(n.get(key) or 0)

    files = ", ".join(p.name for p in (config.parcels_file, config.sales_file) if p is not None)
    return [
        {"key": "i", "step": "Import", "does": f"check and load the input files ({files})", "done": count("parcels") > 0,
         "status": f"{count('parcels'):,} parcels, {count('sales'):,} sales" if count("parcels") else "not yet"},
        {"key": "u", "step": "Sales", "does": "qualify sales and time-adjust them to the valuation date",
         "done": count("qualified") > 0,
         "status": f"{count('qualified'):,} qualified, {count('excluded'):,} excluded" if count("qualified") or
         count("excluded") else "not yet"},
        {"key": "t", "step": "Ratio study", "does": "study the prior values (after a fit: the out-of-fold model values)",
         "done": count("prior_studies") > 0,
         "status": ("prior values" + (", out-of-fold values of the latest run" if count("model_studies") else ""))
         if count("prior_studies") else "not yet"},
        {"key": "f", "step": "Fit", "does": "fit every segment's model (a new run)", "done": count("runs") > 0,
         "status": f"{count('runs')} run(s), latest {n.get('run_id')}" if count("runs") else "not yet"},
        {"key": "v", "step": "Values", "does": "stage values for review (decisions kept)",
         "done": count("staged") + count("held") + count("approved") + count("exported") > 0,
         "status": f"{count('staged')} staged, {count('held')} held, {count('approved')} approved batch(es)"},
        {"key": "x", "step": "Export", "does": "write the value roll of the approved segments",
         "done": count("exported") > 0, "status": f"{count('exported')} batch(es) exported"},
    ]


def latest_event(folder: Path) -> int:
    """The newest event's id: the app reads it every few seconds and reloads when another process (a second
    app, the command line) decided or changed something."""
    with open_project(folder) as (_, store):
        return int(store.rows("app_latest_event")[0][0])


def _study(store: Store, config: Config, run_id: str | None) -> tuple[ShownStudy | None, str]:
    """The segment study the app shows, read from its stored rows (never recomputed): out-of-fold for the
    latest run when stored, else prior values; with a note saying what is missing or judged under other
    standards than the config's now."""
    header = store.records("app_segment_study", [run_id])
    notes = []
    if run_id is not None and (not header or header[0]["values_source"] != "model_out_of_fold"):
        notes.append(f"run {run_id} has no stored out-of-fold study")
    if not header:
        notes.append("no ratio study stored yet (run `reval sales` and `reval study`)")
        return None, "; ".join(notes)
    h = header[0]
    if h["judged_sha256"] != judging_sha256(config):
        notes.append("judged under other standards than the config's now: `reval study` judges again, "
                     "approval always does")
    groups = stored_groups(store, h["study_id"], h["values_source"])
    classes = stored_groups(store, study_id(h["values_source"], h["run_id"], "segment_class"), h["values_source"])
    return {"study_id": h["study_id"], "values_source": h["values_source"], "run_id": h["run_id"],
            "confidence": float(h["confidence"]), "groups": groups, "class_groups": classes}, "; ".join(notes)


def _approvable(group: StudyGroup | None, study: ShownStudy | None) -> bool:
    """Whether the stored verdicts let the segment be approved without a note (reval.stats.judging.failures,
    the gate's rule); a segment with no, too few or no sales, or an inconclusive verdict, cannot."""
    if group is None or study is None:
        return False
    prefix = group["group"] + " / "
    classes = [g for g in study["class_groups"] if g["group"].startswith(prefix)]
    return not failures({**group, "classes": classes if len(classes) > 1 else []})


def _stats_header(study: ShownStudy | None, run_id: str | None, note: str) -> str:
    if study is None:
        return "Ratio statistics: none yet" + (f" ({note})" if note else "")
    source = study["values_source"]
    head = f"Ratio statistics of {SOURCE_LABELS[source]}"
    if source == "model_out_of_fold":
        head += f", run {run_id}"
    return head + (f" ({note})" if note else "")


def _stats_short(study: ShownStudy | None, run_id: str | None) -> str:
    if study is None:
        return "no ratio study yet"
    if study["values_source"] == "model_out_of_fold":
        return f"out-of-fold model values of run {run_id}"
    return "prior roll values" + ("" if run_id is None else f" (run {run_id} has no out-of-fold study)")


def _stat_cells(group: StudyGroup | None) -> dict[str, StatCell]:
    cells: dict[str, StatCell] = {}
    for stat in STATS:
        if group is None:
            cells[stat] = {"value": None, "status": None, "limit": None, "ci": None}
            continue
        plain: dict[str, Any] = dict(group)
        verdict = group["verdicts"].get(stat)
        cells[stat] = {"value": plain[stat], "status": verdict["status"] if verdict else None,
                       "limit": verdict["limit"] if verdict else None, "ci": plain[f"{stat}_ci"]}
    return cells


def segment_states(store: Store, config: Config) -> dict[str, SegmentBatches]:
    """Each segment's open and certified batch (reval.roll.batch_states, the one rule)."""
    return {entry["segment"]: entry for entry in batch_states.segment_states(store, judging_sha256(config))}


def _state(entry: SegmentBatches | None) -> BatchState | None:
    return None if entry is None else state_of(entry)


def overview(folder: Path) -> Overview:
    """One row per segment with counts, model kind, ratio statistics and verdicts, value change and state."""
    with open_project(folder) as (config, store):
        states = segment_states(store, config)
        run_id = latest_run(store)
        study, note = _study(store, config, run_id)
        by_group = {g["group"]: g for g in (study["groups"] if study else [])}
        open_ids = {e["segment"]: int(e["open"]["batch_id"]) for e in states.values() if e["open"] is not None}
        blocked = approval_blockers(store, list(open_ids.values()))
        rows: list[OverviewRow] = []
        for r in store.records("app_segments", [run_id]):
            group = by_group.get(r["segment"])
            stats = _stat_cells(group)
            rows.append({"segment": r["segment"], "market_area": r["market_area"], "parcels": r["parcels"],
                         "sales": r["sales"], "kind": r["kind"], "borrowed_share": r["borrowed_share"],
                         "reason": r["reason"], "value_change": r["value_change"], "stats": stats,
                         "n": group["n"] if group else 0,
                         "failing": not _approvable(group, study) or open_ids.get(r["segment"]) in blocked,
                         "state": _state(states.get(r["segment"])),
                         "batches": states[r["segment"]]["summary"] if r["segment"] in states else "no batch"})
        return {"jurisdiction": config.jurisdiction, "valuation_date": config.valuation_date.isoformat(),
                "folder": str(config.folder), "run_id": run_id,
                "stats_source": study["values_source"] if study else None,
                "stats_header": _stats_header(study, run_id, note), "segments": rows,
                "market_areas": sorted({r["market_area"] for r in rows}),
                "states": sorted({r["state"] for r in rows if r["state"]})}


def filter_segments(rows: list[OverviewRow], *, failing_only: bool = False, market_area: str | None = None,
                    state: str | None = None, text: str = "") -> list[OverviewRow]:
    """The overview rows that pass every filter; `text` matches anywhere in the segment name, any case."""
    needle = text.strip().casefold()
    return [r for r in rows
            if (not failing_only or r["failing"])
            and (market_area is None or r["market_area"] == market_area)
            and (state is None or (r["state"] or "none") == state)
            and needle in r["segment"].casefold()]


def _sort_value(row: OverviewRow, key: str) -> Any:
    if key in STATS:
        return row["stats"][key]["value"]
    if key == "model":
        return None if row["kind"] is None else (row["kind"], row["borrowed_share"] or 0.0)
    return dict(row)[key]


def sort_segments(rows: list[OverviewRow], key: str, descending: bool = False) -> list[OverviewRow]:
    """Rows ordered by one column; missing values always last, ties by segment name."""
    if key not in SORT_KEYS:
        raise ValueError(f"cannot sort by {key!r}")
    present = [r for r in rows if _sort_value(r, key) is not None]
    missing = [r for r in rows if _sort_value(r, key) is None]
    present.sort(key=lambda r: r["segment"])
    present.sort(key=lambda r: _sort_value(r, key), reverse=descending)
    return present + sorted(missing, key=lambda r: r["segment"])


# ---- one segment ---------------------------------------------------------------------------------------

def _histogram(rows: list[Record], feature: str, n_bins: int) -> list[int]:
    counts = [0] * n_bins
    for r in rows:
        if r["feature"] == feature and 0 <= r["bin"] < n_bins:
            counts[r["bin"]] = r["n"]
    return counts


def _curves(store: Store, config: Config, run_id: str, segment: str, n_bins: int) -> list[Curve]:
    units = {f.name: f.unit for f in config.features}
    rows = store.records("app_curves", [run_id, segment])
    bins = store.records("app_feature_bins", [run_id, segment, n_bins])
    curves: dict[str, Curve] = {}
    for r in rows:
        c = curves.setdefault(r["feature"], {"feature": r["feature"], "kind": r["kind"],
                                             "unit": units.get(r["feature"], ""),
                                             "levels": list(r["levels"] or []), "x": [], "effect": [],
                                             "lo": [], "hi": [], "parent_effect": [], "data_bins": []})
        c["x"].append(r["x"])
        c["effect"].append(r["effect"])
        c["lo"].append(r["lo"])
        c["hi"].append(r["hi"])
        c["parent_effect"].append(r["parent_effect"])
    for c in curves.values():
        if c["kind"] == "binary":
            c["levels"] = ["no", "yes"]
        continuous = c["kind"] == "continuous"
        c["data_bins"] = _histogram(bins, c["feature"], n_bins if continuous else len(c["levels"]))
    return list(curves.values())


def _interactions(store: Store, run_id: str, segment: str) -> list[Record]:
    """Each interaction with a plain reading of its coefficient (products of standardised features)."""
    out = []
    for r in store.records("app_interactions", [run_id, segment]):
        a, _, b = r["term"].partition(":")
        pct = 100.0 * math.expm1(r["coef"])
        out.append({**r, "reading": f"{a} and {b} both one standard deviation above their means: {pct:+.1f}% "
                                    "in value beyond their separate effects"})
    return out


def _equity(store: Store, run_id: str | None, study: ShownStudy | None, segment: str,
            max_points: int) -> Equity:
    group = next((g for g in (study["groups"] if study else []) if g["group"] == segment), None)
    model = study is not None and study["values_source"] == "model_out_of_fold"
    points = store.records("app_ratio_points", [run_id if model else None, segment, max_points])
    return {"stats": _stat_cells(group), "n": group["n"] if group else 0, "model_values": model,
            "n_trimmed": group["n_trimmed"] if group else 0,
            "confidence": study["confidence"] if study else None,
            "mean_ratio": group["mean_ratio"] if group else None,
            "weighted_mean_ratio": group["weighted_mean_ratio"] if group else None,
            "decile_median_ratios": group["decile_median_ratios"] if group else [],
            "proxy_decile_median_ratios": group["proxy_decile_median_ratios"] if group else [],
            "price": [p["price"] for p in points], "ratio": [p["ratio"] for p in points]}


def _marginal_effects(store: Store, config: Config, run_id: str, segment: str) -> list[Record]:
    """Value per unit of each feature (with the config's unit), and its elasticity only where the feature is
    modelled in logs: an elasticity needs a true zero (a ratio scale), which a year (built) does not have."""
    logged = {f.name for f in config.features if f.log}
    spec = {f.name: f for f in config.features}
    return [{**r, "unit": spec[r["feature"]].unit if r["feature"] in spec else "",
             "kind": spec[r["feature"]].kind if r["feature"] in spec else "",
             "elasticity": r["elasticity"] if r["feature"] in logged else None}
            for r in store.records("app_marginal_effects", [run_id, segment])]


def _value_change(store: Store, run_id: str, segment: str, n_bins: int, max_points: int) -> ValueChange:
    rows = store.records("value_change_bins", [run_id, segment, n_bins, 0.02])
    pairs = store.rows("app_prior_new", [run_id, segment, max_points])
    medians = {bool(r["sold"]): r for r in store.records("app_value_change_medians", [run_id, segment])}
    sold, unsold = [0] * n_bins, [0] * n_bins
    for r in rows:
        (sold if r["sold"] else unsold)[r["bin"]] += r["n"]
    lo = rows[0]["lo"] if rows else None
    hi = rows[0]["hi"] if rows else None
    return {"sold": sold, "unsold": unsold, "lo": lo, "hi": hi,
            "median_sold": medians.get(True, {}).get("median_change"),
            "median_unsold": medians.get(False, {}).get("median_change"),
            "n_sold": medians.get(True, {}).get("n", 0), "n_unsold": medians.get(False, {}).get("n", 0),
            "prior": [float(a) for a, _ in pairs], "new": [float(b) for _, b in pairs]}


def segment_detail(folder: Path, segment: str, n_bins: int = 48, max_points: int = 2000) -> SegmentDetail:
    """Everything the drill-in shows for one segment; model parts are empty lists when there is no run."""
    with open_project(folder) as (config, store):
        info = [r for r in store.records("app_segments", [None]) if r["segment"] == segment]
        if not info:
            raise UserError(f"No segment named {segment!r}.")
        run_id = latest_run(store)
        study, note = _study(store, config, run_id)
        model = store.records("app_segment_model", [run_id, segment]) if run_id else []
        entry = segment_states(store, config).get(segment)
        state = _state(entry)
        return {
            "segment": segment, "market_area": info[0]["market_area"], "parcels": info[0]["parcels"],
            "sales": info[0]["sales"], "run_id": run_id,
            "stats_header": _stats_header(study, run_id, note), "stats_short": _stats_short(study, run_id),
            "model": model[0] if model else None,
            "curves": _curves(store, config, run_id, segment, n_bins) if run_id else [],
            "interactions": _interactions(store, run_id, segment) if run_id else [],
            "marginal_effects": _marginal_effects(store, config, run_id, segment) if run_id else [],
            "equity": _equity(store, run_id, study, segment, max_points),
            "value_change": _value_change(store, run_id, segment, 24, max_points) if run_id else None,
            "reference_accuracy": named(store.records("app_reference_accuracy", [run_id, segment]), group="segment") if run_id else [],
            "structure": structure_words(store.records("run_structure_rows", [run_id])) if run_id else "",
            "state": state, "batches": entry["summary"] if entry else "no batch",
            "review": _review(store, config, segment) if state else None,
        }


def structure_words(rows: list[Record]) -> str:
    """The structure a run's model chose by evidence (rows of run_structure_rows), in one sentence."""
    terms = [r["candidate"] for r in rows if r["chosen"] and r["choice"] == "smooth interactions"
             and r["criterion"] == "GCV" and r["candidate"] != "(none further)"]
    if not rows:
        return ""
    said = [f"smooth interactions {', '.join(terms)}" if terms else "no smooth interaction"]
    for choice, words in (("loss", "loss {}"), (POOLING_SEGMENTS, "segments {}"), (THIN_CURVES, "thin segments' curves of {}")):
        said += [words.format(r["candidate"]) for r in rows if r["chosen"] and r["choice"] == choice]
    return f"Chosen on the training sales by evidence: {'; '.join(said)} (`reval compare` lists every candidate's figures)."


def _review(store: Store, config: Config, segment: str) -> SegmentReview | None:
    """The core's review of the segment's open (else certified) batch: the sales-chasing check."""
    from reval.roll.review import review  # loads pandas and scipy: only the drill-in needs them, the overview starts faster

    report = review(store, config, segment, limit=10)["segments"]
    return report[0] if report else None


def segment_sales(folder: Path, segment: str, page: int = 0, page_size: int = 50) -> SalesPage:
    """One page of a segment's sales: those the analyst excluded first (so they can be reinstated), then the
    qualified ones, largest ratio deviations first, with the values under study and each sale's weight in the
    latest run's fit with why it is below 1."""
    with open_project(folder) as (config, store):
        run_id = latest_run(store)
        study, _ = _study(store, config, run_id)
        model = study is not None and study["values_source"] == "model_out_of_fold"
        sid = study["study_id"] if study else ""
        total = int(store.rows("app_segment_sales_count", [segment])[0][0])
        pages = max(1, math.ceil(total / page_size))
        page = min(max(page, 0), pages - 1)
        rows = store.records("app_segment_sales",
                             [run_id if model else None, segment, sid, page_size, page * page_size, run_id])
        for r in rows:
            r["sale_date"] = r["sale_date"].isoformat()
        light = int(store.rows("app_segment_downweighted", [run_id, segment])[0][0]) if run_id else 0
        return {"segment": segment, "page": page, "pages": pages, "total": total, "rows": rows,
                "values": "out-of-fold model values" if model else "prior roll values", "downweighted": light}


# ---- work lists ----------------------------------------------------------------------------------------

def _column(key: str, label: str, format: str = "text", sortable: bool = True) -> ListColumn:
    return {"key": key, "label": label, "format": format, "sortable": sortable}


class ListSpec(TypedDict):
    """A work list: its query (sql/queries/app_list_NAME.sql), title, columns, default order and what a row opens."""

    title: str
    columns: list[ListColumn]
    sort: str
    descending: bool
    opens: str


LISTS: dict[str, ListSpec] = {
    "changes": {"title": "Value changes beyond the review threshold", "sort": "change", "descending": True,
                "opens": "parcel",
                "columns": [_column("parcel_id", "Parcel"), _column("segment", "Segment"),
                            _column("prior_value", "Prior", "money"), _column("market_value", "Value", "money"),
                            _column("change", "Change", "change"), _column("state", "Batch", sortable=False)]},
    "sales": {"title": "Excluded and down-weighted sales, with why", "sort": "sale_id", "descending": False,
              "opens": "parcel",
              "columns": [_column("sale_id", "Sale"), _column("parcel_id", "Parcel"),
                          _column("status", "Status", sortable=False), _column("weight", "Weight", "weight"),
                          _column("reason", "Why"), _column("segment", "Segment"),
                          _column("sale_date", "Date", "date"), _column("sale_price", "Price", "money")]},
    "parcels": {"title": "Parcels, with the value of their segment's current batch", "sort": "parcel_id",
                "descending": False, "opens": "parcel",
                "columns": [_column("parcel_id", "Parcel"), _column("segment", "Segment"),
                            _column("property_class", "Class"), _column("prior_value", "Prior", "money"),
                            _column("market_value", "Value", "money"), _column("change", "Change", "change"),
                            _column("state", "Batch", sortable=False)]},
    "all_sales": {"title": "Every sale, qualified or not", "sort": "sale_id", "descending": False, "opens": "parcel",
                  "columns": [_column("sale_id", "Sale"), _column("parcel_id", "Parcel"), _column("segment", "Segment"),
                              _column("sale_date", "Date", "date"), _column("sale_price", "Price", "money"),
                              _column("adjusted_price", "Adjusted", "money"), _column("status", "Status"),
                              _column("reason", "Why", sortable=False)]},
    "log": {"title": "Audit log", "sort": "event_id", "descending": True, "opens": "parcel, else the segment",
            "columns": [_column("event_id", "Event"), _column("event_time", "Time", "time", sortable=False),
                        _column("who", "Who"), _column("kind", "Kind"), _column("segment", "Segment"),
                        _column("parcel_id", "Parcel", sortable=False), _column("detail", "Detail", sortable=False)]},
}
# the SQL's names for the sort keys of columns whose row key differs
_SORT_NAMES = {"parcel_id": "parcel", "prior_value": "prior", "market_value": "value", "sale_id": "sale",
               "sale_date": "date", "sale_price": "price", "event_id": "event", "property_class": "class",
               "adjusted_price": "adjusted"}


def _event_detail(text: str | None) -> str:
    """An event's detail in one line: its plain fields (notes, reasons, batch, states), not the stored snapshots."""
    detail = json.loads(text or "{}")
    first = [k for k in ("note", "reason") if k in detail]   # what a person wrote reads first
    keep = [f"{k}: {detail[k]}" for k in [*first, *(k for k in detail if k not in first)]
            if isinstance(detail[k], (str, int, float, bool)) and not k.endswith("sha256")]
    return "; ".join(keep)


def list_page(folder: Path, name: str, *, segment: str | None = None, text: str = "", sort: str | None = None,
              descending: bool | None = None, page: int = 0, page_size: int = 50) -> ListPage:
    """One page of a work list, filtered (segment, text) and sorted in SQL; a page past the end gives the last."""
    if name not in LISTS:
        raise UserError(f"No list named {name!r}: {', '.join(LISTS)}.")
    spec = LISTS[name]
    sort = sort or spec["sort"]
    if sort not in {c["key"] for c in spec["columns"] if c["sortable"]}:
        raise UserError(f"The {name} list cannot be sorted by {sort!r}.")
    descending = spec["descending"] if descending is None else descending
    with open_project(folder) as (config, store):
        params: dict[str, Any] = {"segment": segment, "text": text.strip(), "sort": _SORT_NAMES.get(sort, sort),
                                  "descending": descending, "limit": page_size}
        if name == "changes":
            params["threshold"] = config.assessment.review_change_threshold
        if name == "sales":
            params["run_id"] = latest_run(store)

        def read(at: int) -> list[Record]:
            return store.records(f"app_list_{name}", {**params, "offset": at * page_size})

        rows = read(max(page, 0))
        total = int(rows[0]["total_rows"]) if rows else 0
        pages = max(1, math.ceil(total / page_size))
        if not rows and page > 0:   # past the end: the last page (the count comes with any row)
            total = int(next(iter(read(0)), {"total_rows": 0})["total_rows"])
            pages = max(1, math.ceil(total / page_size))
            page = pages - 1
            rows = read(page)
        page = min(max(page, 0), pages - 1)
    for r in rows:
        r.pop("total_rows", None)
        for key in ("sale_date", "event_time"):
            if r.get(key) is not None:
                r[key] = r[key].isoformat(sep=" ", timespec="seconds") if key == "event_time" else r[key].isoformat()
        if "detail" in r:
            r["detail"] = _event_detail(r["detail"])
    title = spec["title"]
    if name == "changes":
        limit = params["threshold"]
        title += f" (±{limit:.0%}, the segment's open batch, else its certified one)"
    return {"name": name, "title": title, "columns": spec["columns"], "rows": rows, "total": total, "page": page,
            "pages": pages, "page_size": page_size, "sort": sort, "descending": descending, "segment": segment,
            "text": text, "opens": spec["opens"]}
# ---- the data-quality check -----------------------------------------------------------------------------

def check_rows(folder: Path, page: int = 0, page_size: int = 50, segment: str | None = None,
               code: str | None = None, sort: str = "segment") -> CheckPage:
    """One page of the data-quality check's rows, filtered by segment and check and sorted in SQL. The check is
    built afresh on a read-only connection (it always shows the data as they are), for the one segment asked for
    when there is one: a page of a segment's rows costs that segment's work."""
    from reval.data import check  # loads numpy: only the check screen needs it

    with open_project(folder) as (config, store):
        check.build_check(store, config, segment)
        return check.rows_page(store, page, page_size, segment, code, sort)


# ---- one parcel ----------------------------------------------------------------------------------------

def _parcel_flags(config: Config, parcel: Record, features: list[Record], estimate: Record | None,
                  sales: list[Record], trimmed: list[str], roll: list[Record], override: Record | None) -> list[str]:
    flags = []
    if override is not None:
        flags.append(f"overridden: {override['value']:,.0f} ({override['reason']}) over the model's value"
                     + ("" if any(r["override_reason"] for r in roll[:1]) else "; not on the roll until valued again"))
    missing = [f["name"] for f in features if f["value"] is None]
    if missing:
        flags.append("missing feature values (the model used typical values): " + ", ".join(missing))
    if not parcel["prior_value"]:
        flags.append("no prior value on the roll")
    if estimate and parcel["prior_value"]:
        change = estimate["market_value"] / parcel["prior_value"] - 1
        limit = config.assessment.review_change_threshold
        if abs(change) > limit:
            flags.append(f"value change {change:+.1%} is beyond the review threshold of ±{limit:.0%}")
    if estimate and estimate["kind"] == "parent_only":
        flags.append(f"valued with its parent's model: {estimate['reason'] or 'too few sales'}")
    flags += [f"sale {s['sale_id']} excluded: {s['reason']}" for s in sales if s["qualified"] is False]
    flags += [f"sale {t} trimmed as a ratio outlier" for t in trimmed]
    flags += [f"roll (batch {r['batch_id']}, {r['state']}): {text}" for r in roll
              for text in (r["flag_text"].split("; ") if r["flag_text"] else r["flags"])]
    return flags


def _suggestions(store: Store, text: str) -> list[str]:
    return [r[0] for r in store.rows("app_parcel_suggest", [text, 5])] if text else []


def parcel_suggestions(folder: Path, text: str) -> list[str]:
    """Parcel ids close to what was typed (starting with it first), for "did you mean"."""
    with open_project(folder) as (_, store):
        return _suggestions(store, text.strip())


def parcel_detail(folder: Path, parcel_id: str) -> ParcelDetail:
    """One parcel: its features, value and contributions (currency parts summing to the value), prior
    value and change, its sales and flags. Raises UserError naming close ids when it is not found."""
    with open_project(folder) as (config, store):
        return read_parcel(store, config, parcel_id)


def read_parcel(store: Store, config: Config, parcel_id: str) -> ParcelDetail:
    """`parcel_detail` on an open project (the parcel report builds on it)."""
    parcel_id = parcel_id.strip()
    found = store.records("app_parcel", [parcel_id])
    if not found:
        near = _suggestions(store, parcel_id)
        hint = f"; did you mean {', '.join(near)}?" if near else ""
        raise UserError(f"No parcel with id {parcel_id!r}{hint}")
    parcel = found[0]
    run_id = latest_run(store)
    features = store.records("app_parcel_features", [parcel_id])
    estimate = next(iter(store.records("app_parcel_estimate", [run_id, parcel_id])), None) if run_id else None
    parts = store.records("app_parcel_contributions", [run_id, parcel_id]) if estimate else []
    reference = store.records("app_segment_reference", [run_id, parcel["segment"]]) if estimate else []
    sales = store.records("app_parcel_sales", [run_id, parcel_id])
    for s in sales:
        s["sale_date"] = s["sale_date"].isoformat()
    trimmed = sorted({r["sale_id"] for r in store.records("app_parcel_trimmed", [parcel_id])})
    roll = store.records("app_parcel_roll", [parcel_id])
    override = next(iter(store.records("override_get", [parcel_id])), None)
    for r in roll:
        r["flags"] = list(r["flags"] or [])
    split = None
    if parts:
        logs = {p["term"]: p["contribution"] for p in parts if p["term"] != BASE_TERM}
        base = sum(p["contribution"] for p in parts if p["term"] == BASE_TERM)
        split = value_split(base, logs)
    prior = parcel["prior_value"]
    value = estimate["market_value"] if estimate else None
    return {"parcel_id": parcel["parcel_id"], "segment": parcel["segment"], "market_area": parcel["market_area"],
            "property_class": parcel["property_class"], "prior_value": parcel["prior_value"],
            "prior_values": {k: v for k, v in parcel.items() if k.startswith("prior_")},
            "prior_assessed_value": parcel["prior_assessed_value"], "reference": reference,
            "latitude": parcel["latitude"], "longitude": parcel["longitude"], "run_id": run_id,
            "features": features, "estimate": estimate, "split": split, "roll": roll,
            "value_change": (value / prior - 1) if value and prior else None, "sales": sales,
            "flags": _parcel_flags(config, parcel, features, estimate, sales, trimmed, roll, override),
            "override": override, "override_reasons": list(config.overrides.reasons)}


def segment_statistics(store: Store, config: Config, run_id: str | None, segment: str) -> SegmentStatistics | None:
    """The segment's group in the study the app shows (out-of-fold for the run when stored, else prior values)."""
    study, _ = _study(store, config, run_id)
    group = next((g for g in (study["groups"] if study else []) if g["group"] == segment), None)
    if study is None or group is None:
        return None
    return {"segment": segment, "study_id": study["study_id"],
            "values": SOURCE_LABELS.get(study["values_source"], study["values_source"]), "n": group["n"],
            "median_ratio": group["median_ratio"], "cod": group["cod"], "prd": group["prd"], "prb": group["prb"],
            "verdicts": {stat: v["status"] for stat, v in group["verdicts"].items()}}


def parcel_comparables(folder: Path, parcel_id: str) -> ComparableGrid | None:
    """The parcel's comparable sales adjusted by the latest run's model (None before the first run or when the
    run did not value it)."""
    from reval.roll.comparables import comparable_grid  # numpy: only the parcel view needs it

    parcel_id = parcel_id.strip()
    with open_project(folder) as (config, store):
        run_id = latest_run(store)
        if run_id is None or not store.rows("app_parcel_estimate", [run_id, parcel_id]):
            return None
        return comparable_grid(store, config, run_id, parcel_id)
