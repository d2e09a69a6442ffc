"""How each command's result reads on a terminal (rich), and the JSON form of `--json`.

Data is never markup: the console interprets no markup at all (styled words are rich Text objects), and
every name, id, note or path printed goes through `shown` (control characters removed, long names cut in
tables)."""
from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table
from rich.text import Text

from reval.service.wording import (CAUTION, FLAG_WORDS, NAME_WIDTH, grid_table, indicated_range, money, percent, shown,
                                 signed_money)

Render = Callable[[Any, Console], None]
MARKS = {"pass": "ok", "fail": "FAIL", "inconclusive": "?", "too_few_sales": "few", "no_sales": "no sales"}
LISTED = 10  # down-weighted sales listed under a study or a review
LISTED_REPEATS = 40  # repeat sales listed under `reval sales`


def console(stderr: bool = False) -> Console:
    """A console that never reads markup in what it prints."""
    return Console(stderr=stderr, markup=False)


def name(value: Any) -> str:
    """A user-provided name as printed in a sentence or a table cell (reval.service.wording.shown)."""
    return shown(value, NAME_WIDTH)


def emit(args: argparse.Namespace, result: Any, render: Render) -> None:
    """Print a command's result: JSON with --json (control characters escaped by JSON), else the human
    rendering."""
    if getattr(args, "json", False):
        print(json.dumps(result, indent=2, default=str))
    else:
        render(result, console())


@contextmanager
def progress_bar(args: argparse.Namespace) -> Iterator[Callable[[str, int, int], None] | None]:
    """A rich progress bar on a terminal; nothing with --json or without a terminal."""
    if getattr(args, "json", False) or not sys.stderr.isatty():
        yield None
        return
    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                  TimeElapsedColumn(), console=console(stderr=True), transient=True) as bar:
        tasks: dict[str, Any] = {}

        def update(step: str, done: int, total: int) -> None:
            if step not in tasks:
                tasks[step] = bar.add_task(step, total=total)
            bar.update(tasks[step], completed=done, total=total)

        yield update


def table(title: str, columns: list[str], rows: list[list[str]], console: Console) -> None:
    """A titled table, the first column left-aligned and the rest right-aligned; cells as `name` shows them."""
    out = Table(title=title)
    for i, column in enumerate(columns):
        out.add_column(column, justify="left" if i == 0 else "right")
    for row in rows:
        out.add_row(*(name(cell) for cell in row))
    console.print(out)


def records_table(title: str, rows: list[dict[str, Any]], console: Console) -> None:
    """A table of records, one column per key; numbers right-aligned to four significant digits."""
    if not rows:
        console.print(f"{title}: nothing to show")
        return
    out = Table(title=title)
    for key in rows[0]:
        out.add_column(name(key), justify="right" if isinstance(rows[0][key], (int, float)) else "left")
    for row in rows:
        out.add_row(*("" if v is None else f"{v:,.4g}" if isinstance(v, float) else name(v) for v in row.values()))
    console.print(out)


# ---- the project and its data -------------------------------------------------------------------------------

def imported(r: dict[str, Any], console: Console) -> None:
    console.print(("Imported" if r["changed"] else "Already imported (files unchanged)")
                  + f": {r['parcels']:,} parcels, {r['sales']:,} sales, {r['segments']} segments in "
                  f"{r['market_areas']} market areas.")
    _filled_in({k: f"{n:,} parcels" for k, n in r["filled_in"].items() if n}, console,
               "Missing values the model will fill in with the typical value (each is flagged on the roll)")


def _filled_in(counts: dict[str, str], console: Console, title: str) -> None:
    if counts:
        console.print(f"{title}:")
        for feature, what in counts.items():
            console.print(f"  {name(feature)}: {what}")


def demo_summary(summary: dict[str, Any], console: Console) -> None:
    console.print(Text.assemble((name(summary["jurisdiction"]), "bold"), f" — project folder {shown(summary['folder'])}"))
    console.print(f"{summary['parcels']:,} parcels, {summary['sales']:,} sales, {summary['segments']} neighbourhoods "
                  f"in {summary['market_areas']} market areas")
    for step in summary.get("steps", []):
        console.print(f"  done: {step}")
    console.print(CAUTION)


def sales(result: dict[str, Any], console: Console) -> None:
    console.print(f"{result['qualified']:,} qualified sales; {result['excluded']:,} excluded:")
    for reason, n in sorted(result["excluded_by_reason"].items(), key=lambda kv: -kv[1]):
        console.print(f"  {n:>6,}  {shown(reason)}")
    records_table("Sales per segment", [{"segment": s["segment"], "qualified": s["qualified"],
                                         "excluded": s["excluded"]} for s in result["segments"]], console)
    for note in result["trend_notes"]:
        console.print(f"Market trend: {shown(note)}.", highlight=False)
    repeats = result["repeat_sales"]
    if repeats:
        parcels = len({r["parcel_id"] for r in repeats})
        records_table(f"Repeat sales: {parcels:,} parcels sold more than once in the sale window"
                      + (f" (the first {LISTED_REPEATS} of {len(repeats):,} sales; all with `reval check --csv FILE`)"
                         if len(repeats) > LISTED_REPEATS else ""),
                      [{"parcel": r["parcel_id"], "segment": r["segment"], "sale": r["sale_id"], "date": r["sale_date"],
                        "price": money(r["sale_price"]), "latest": "yes" if r["latest"] else "",
                        "sales step": "qualified" if r["qualified"] else r["reason"] or ""}
                       for r in repeats[:LISTED_REPEATS]], console)


def check(r: dict[str, Any], console: Console) -> None:
    total = sum(r["totals"].values())
    console.print(f"Data check: {total:,} problems in {sum(1 for s in r['segments'] if s['problems'])} of "
                  f"{len(r['segments'])} segments (sold ranges from the {r['basis']}, {r['sale_window'][0]} to "
                  f"{r['sale_window'][1]}).")
    segments: dict[str, int] = {}
    for s in r["segments"]:
        for code in s["counts"]:
            segments[code] = segments.get(code, 0) + 1
    records_table("Problems per check", [{"check": code, "rows": n, "segments": segments[code]}
                                         for code, n in r["totals"].items()], console)
    for code in r["totals"]:
        console.print(f"  {code}: {r['checks'][code]}", highlight=False)
    records_table("Problems per segment", [
        {"segment": s["segment"], "parcels": s["parcels"], "sold": s["sold_parcels"], "problems": s["problems"],
         "by check": ", ".join(f"{code} {n:,}" for code, n in sorted(s["counts"].items(), key=lambda kv: -kv[1]))}
        for s in r["segments"]], console)
    for n in r["not_run"]:
        console.print(f"Not run: {n['check']}: {shown(n['reason'])}.", highlight=False)
    if r["csv"]:
        console.print(f"Wrote {r['csv']['rows']:,} rows to {shown(r['csv']['path'])}.")
    elif total:
        console.print("Every row (parcel, sale, segment, check, feature, value, problem): reval check --csv FILE")


def sale_decision(r: dict[str, Any], console: Console) -> None:
    what = "excluded from models and ratio studies" if r["decision"] == "exclude" else "included at full weight"
    console.print(f"Sale {r['sale_id']} ({', '.join(r['parcels'])}, segment {r['segment']}) {what}: {r['reason']}")
    if r["qualified"] is None:
        console.print("It takes effect at `reval sales`; then `reval fit`.")
    else:
        state = "qualified" if r["qualified"] else f"not qualified ({r['qualification']})"
        console.print(f"Sales re-qualified: this sale is now {state}. Run `reval fit` for a run that honours it.")


def _outdated(r: dict[str, Any], console: Console) -> None:
    if r["outdated"]:
        batches = ", ".join(f"{b['batch_id']} ({b['state']})" for b in r["outdated"])
        console.print(f"Batch(es) {batches} of segment {shown(r['segment'])} are outdated: run `reval value "
                      f"{shown(r['segment'])}` (with --replace over a held or approved batch), then decide it again.")


def override(r: dict[str, Any], console: Console) -> None:
    model = f"; model value {money(r['model_value'])}" if r["model_value"] is not None else ""
    if r["override"] is None:
        console.print(f"Override of parcel {shown(r['parcel_id'])} ({money(r['previous']['value'])}, "
                      f"{shown(r['previous']['reason'])}) removed{model}.")
    else:
        o = r["override"]
        console.print(f"Parcel {shown(r['parcel_id'])} (segment {shown(r['segment'])}): override {money(o['value'])}, "
                      f"reason {shown(o['reason'])}{model}.")
    _outdated(r, console)
    console.print(CAUTION)


def correction(r: dict[str, Any], console: Console) -> None:
    changed = "; ".join(f"{shown(c['feature'])} {shown(str(c['old']))} -> {shown(str(c['new']))}" for c in r["changes"])
    console.print(f"Parcel {shown(r['parcel_id'])} corrected: {changed}.")
    console.print(f"Revalued with run {shown(r['run_id'])} (no refit): {money(r['old_value'])} -> "
                  f"{money(r['new_value'])}.")
    if r["sales_in_fit"]:
        console.print(f"The run was fitted on {r['sales_in_fit']} sale(s) of this parcel with its old data; its ratio "
                      "studies keep them until the next `reval fit`.")
    _outdated(r, console)


# ---- studies and models ----------------------------------------------------------------------------------------

def study(result: dict[str, Any], console: Console) -> None:
    console.print(f"Ratio study of {result['values']}, by {result['by']}")
    if "warning" in result:
        console.print(Text.assemble(("Warning:", "bold"), " ", shown(result["warning"])))

    def cell(g: dict[str, Any], stat: str, fmt: str) -> str:
        value, verdict = g[stat], g["verdicts"][stat]
        shown = "-" if value is None else format(value, fmt)
        return f"{shown} {MARKS[verdict['status']]}"

    model = result["values_source"] != "prior"
    rows = [{"group": g["group"], "n": g["n"], "trimmed": g["n_trimmed"],
             **({"down-weighted": len(g.get("downweighted", []))} if model else {}),
             "median": cell(g, "median_ratio", ".3f"), "COD": cell(g, "cod", ".1f"),
             "PRD": cell(g, "prd", ".3f"), "PRB": cell(g, "prb", "+.3f")} for g in result["groups"]]
    records_table("Ratio statistics (ok = meets the standard, FAIL = does not, ? = inconclusive: the confidence "
                  "interval straddles a limit, few = too few sales)", rows, console)
    if model:
        light = sorted((s for g in result["groups"] for s in g.get("downweighted", [])), key=lambda s: s["weight"])
        if light:
            console.print("Down-weighted = sales the run's fit gave less than full weight (they still count in these "
                          f"statistics); the {min(len(light), LISTED)} lowest:")
            for s in light[:LISTED]:
                console.print(f"  {name(s['sale_id'])} (parcel {name(s['parcel_id'])}): {s['reason']}")
    console.print(CAUTION)


def report(result: dict[str, Any], console: Console) -> None:
    studied = f"; studied first and stored: {', '.join(result['studied'])}" if result["studied"] else ""
    console.print(f"Report of {result['values']} written to {shown(result['path'])} ({result['figures']} plots, "
                  f"{result['seconds']:.1f} s{studied}).")
    console.print(CAUTION)


def _by_name(rows: list[dict[str, Any]], *drop: str) -> list[dict[str, Any]]:
    """Rows for a human reader: the model's display name stands for its id (the JSON keeps both)."""
    return [{k: v for k, v in r.items() if k not in ("model", *drop)} for r in rows]


def fit(result: dict[str, Any], console: Console) -> None:
    console.print(f"Run {name(result['run_id'])}: {result['sales']:,} sales, {result['segments']} segments, "
                  f"{result['parcels']:,} parcels valued; {result['downweighted_sales']:,} sales down-weighted as far "
                  "from what the other sales say they are worth")
    console.print("  " + ", ".join(f"{k} {v:.1f} s" for k, v in result["timings"].items()))
    _filled_in({k: f"{f['parcels']:,} parcels filled in with {f['value']}" for k, f in result["filled_in"].items()
                if f["parcels"]}, console, "Missing values filled in (each is flagged on the roll)")
    records_table("Out-of-fold accuracy, whole jurisdiction (every model on the same sales and folds, none trimmed)",
                  _by_name(result["accuracy"]), console)
    console.print("Next: `reval study --values model` for the out-of-fold ratio study per segment. " + CAUTION)


def compare(result: dict[str, Any], console: Console) -> None:
    rows = result["rows"]
    for segment in dict.fromkeys(r["segment"] for r in rows):
        records_table(f"{name(segment)}: out-of-fold accuracy by model, same sales and folds, none trimmed "
                      f"(run {name(result['run_id'])})", _by_name([r for r in rows if r["segment"] == segment], "segment"),
                      console)
    for model, model_name in result["model_names"].items():
        importance = _by_name([r for r in result["importance"] if r["model"] == model], "model_name")
        if importance:
            records_table(f"What the {model_name} reference relies on (permutation importance: rise in RMSE of "
                          "log price when the feature is shuffled)", importance, console)
    structure = [{**r, "chosen": "chosen" if r["chosen"] else ""} for r in result["structure"]]
    records_table("Structure our model chose on the training sales (smooth interactions: lowest GCV, confirmed by "
                  "inner cross-validation; loss, thin segments' curves and pooling: lowest mean absolute leave-one-out "
                  "residual; lower is better)",
                  structure, console)


# ---- the value roll --------------------------------------------------------------------------------------------

def staged(r: dict[str, Any], console: Console) -> None:
    console.print(f"Run {name(r['run_id'])}: staged {len(r['staged'])} batch(es); "
                  f"{len(r['unchanged'])} segment(s) already hold a batch of this run.")
    for d in r["kept"]:
        console.print(f"  kept: {d['segment']} is {d['state']} (batch {d['batch_id']}, run {d['run_id']}); "
                      f"`reval value {d['segment']} --replace` stages it ({d['on_restage']}).")
    if r["land_schedule"] is None:
        console.print("No land schedule configured: land and improvement are not allocated.")
    table("Staged batches", ["segment", "batch", "parcels", "replaced"],
          [[s["segment"], str(s["batch_id"]), f"{s['n_parcels']:,}",
            "-" if s["replaced_batch_id"] is None else f"{s['replaced_batch_id']} ({s['replaced_state']})"]
           for s in r["staged"]], console)
    for flag, n in r["flags"].items():
        console.print(f"  {n:>8,}  parcels flagged {shown(flag)}")


def review(r: dict[str, Any], console: Console) -> None:
    rows = []
    for s in r["segments"]:
        q = s["change_ratio_quantiles"] or {}
        rows.append([s["segment"], f"{s['batch_id']} {s['state']}", f"{s['n_parcels']:,}", percent(s["total_change"]),
                     " / ".join("-" if q.get(k) is None else f"{q[k]:.2f}" for k in ("p25", "median", "p75")),
                     f"{s['n_beyond_threshold']:,}", f"{s['n_downweighted']:,}", _cods(s["sales_chasing"]),
                     s["sales_chasing"]["status"].replace("_", " ")])
    table(f"Value review: change = new market value / prior market value; beyond = more than +/-{100 * r['threshold']:.0f}%; "
          "down-weighted = sales the fit gave less than full weight",
          ["segment", "batch", "parcels", "total", "p25 / median / p75", "beyond", "down-weighted",
           "COD roll / out of fold", "sales chasing"], rows, console)
    kinds = list(dict.fromkeys(k for s in r["segments"] for k in FLAG_WORDS if s["flags"].get(k)))
    if kinds:
        table("Flagged parcels per segment, by kind of flag (the roll and the export list each parcel's flags)",
              ["segment", *(FLAG_WORDS[k] for k in kinds)],
              [[s["segment"], *(f"{s['flags'].get(k, 0):,}" for k in kinds)] for s in r["segments"]], console)
    for s in r["segments"]:
        for blocker in s["blockers"]:
            console.print(Text(f"{name(s['segment'])} cannot be approved: {blocker}", style="bold"))
        if len(r["segments"]) == 1 and s["flag_codes"]:
            console.print("Flags: " + ", ".join(f"{name(code)} {n:,}" for code, n in s["flag_codes"].items()))
        chase = s["sales_chasing"]
        if chase["flagged"]:
            console.print(Text(f"{name(s['segment'])}: possible sales chasing:", style="bold"))
            for reason in chase["reasons"]:
                console.print(f"  - {reason}")
        if s["downweighted"] and len(r["segments"]) == 1:
            table(f"{name(s['segment'])}: sales the fit down-weighted, lowest weight first "
                  f"({s['n_downweighted']:,} in all)", ["sale", "parcel", "weight", "why"],
                  [[d["sale_id"], d["parcel_id"], f"{d['weight']:.2f}", d["reason"] or ""]
                   for d in s["downweighted"]], console)
        if s["beyond_threshold"] and len(r["segments"]) == 1:
            table(f"{name(s['segment'])}: largest changes beyond the threshold ({s['n_beyond_threshold']:,} in all)",
                  ["parcel", "class", "prior market", "new market", "change"],
                  [[p["parcel_id"], p["property_class"], money(p["prior_value"]), money(p["market_value"]),
                    percent(p["change"])] for p in s["beyond_threshold"]], console)


def _cods(chase: dict[str, Any]) -> str:
    roll, oof = chase["roll_cod"], chase["oof_cod"]
    return "-" if roll is None else f"{roll:.1f}" + ("" if oof is None else f" / {oof:.1f}")


def decision(r: dict[str, Any], console: Console) -> None:
    console.print(f"{name(r['segment'])}: batch {r['batch_id']} (run {name(r['run_id'])}) is now {r['state']}.")
    if r.get("override"):
        console.print(f"Approved over failing statistics ({'; '.join(r['failed'])}); note stored: {shown(r['note'])}")
    elif r.get("note"):
        console.print(f"Note stored: {shown(r['note'])}")


def all_passing(r: dict[str, Any], console: Console) -> None:
    approved = r["approved"]
    console.print(f"Approved {len(approved)} segment{'s' if len(approved) != 1 else ''}: "
                  f"{', '.join(name(d['segment']) for d in approved) or 'none'}.")
    if r["left"]:
        table("Left as they were", ["segment", "why"], [[x["segment"], x["reason"]] for x in r["left"]], console)


def exported(r: dict[str, Any], console: Console) -> None:
    console.print(f"Wrote {r['rows']:,} parcels to {shown(r['path'])} (sha256 {r['sha256'][:16]}...); "
                  f"manifest {shown(r['manifest'])}.")
    if r["not_approved"]:
        console.print(f"Partial roll: not approved and left out: {', '.join(map(name, r['not_approved']))}.")
    table("Where each segment's values come from", ["segment", "run", "batch", "parcels"],
          [[t["segment"], t["run_id"], f"{t['batch_id']} ({t['state']})", f"{t['rows']:,}"] for t in r["segments"]],
          console)
    for p in r["pending_batches"]:
        console.print(f"{name(p['segment'])}: a newer batch {p['batch_id']} of run {name(p['run_id'])} is "
                      f"{p['state']} and was not exported (the certified values were).")


def log(r: dict[str, Any], console: Console) -> None:
    table("Events", ["id", "when", "who", "kind", "segment", "run", "note"],
          [[str(e["event_id"]), str(e["event_time"])[:19], e["who"], e["kind"], e["segment"] or "",
            e["run_id"] or "", str(e["detail"].get("note") or "")] for e in r["events"]], console)


def batch_states(r: dict[str, Any], console: Console) -> None:
    def show(b: dict[str, Any] | None) -> str:
        return "-" if b is None else f"{b['batch_id']} {b['state']} (run {b['run_id']})"

    table("Batches: the certified values (those an export writes) beside the pending ones",
          ["segment", "state", "certified batch", "open batch"],
          [[s["segment"], s["summary"], show(s["certified"]), show(s["open"])] for s in r["segments"]], console)


# ---- one parcel -----------------------------------------------------------------------------------------------

def parcel(r: dict[str, Any], console: Console) -> None:
    """Why a parcel has its value: value, prior values, flags, segment statistics, explanation, comparables."""
    console.print(Text.assemble((f"Parcel {shown(r['parcel_id'])}", "bold"),
                                f" · segment {name(r['segment'])} · market area {name(r['market_area'])} · "
                                f"{name(r['property_class'])} · {name(r['jurisdiction'])}, valuation date "
                                f"{r['valuation_date']}"))
    v = r["value"]
    console.print(f"Value {money(v['value'])} ({shown(v['source'])}); model value {money(v['model_value'])}"
                  + (f", run {r['run_id']}" if r["run_id"] else ""))
    for key, prior in r["prior_values"].items():
        console.print(f"{key.replace('_', ' ').capitalize()}: {money(prior)}")
    if r["value_change"] is not None:
        console.print(f"Change of the model value from the prior value: {percent(r['value_change'])}")
    table("Characteristics", ["feature", "value"],
          [[f["name"], "missing" if f["value"] is None else f["label"] or f"{f['value']:.10g}"] for f in r["features"]],
          console)
    stats = r["segment_statistics"]
    if stats:
        console.print(f"Segment {name(stats['segment'])}, {shown(stats['values'])}: {stats['n']} sales, median ratio "
                      f"{_num(stats['median_ratio'], '.3f')}, COD {_num(stats['cod'], '.1f')}, PRD "
                      f"{_num(stats['prd'], '.3f')}, PRB {_num(stats['prb'], '+.3f')}; verdicts "
                      + ", ".join(f"{k} {MARKS.get(s, s)}" for k, s in stats["verdicts"].items()), highlight=False)
    x = r["explanation"]
    if x:
        table(f"Explanation: the model value from {x['measured_from']}", ["part", "value", "% of value"],
              [["base", money(x["base"]), ""]]
              + [[p["term"], signed_money(p["currency"]), percent(p["percent"])] for p in x["parts"]]
              + [["= model value", money(x["value"]), ""]], console)
    grid = r["comparables"]
    if grid:
        header, rows = grid_table(grid)
        table(f"Comparable sales adjusted by the model (run {grid['run_id']})", header, rows, console)
        console.print(indicated_range(grid), highlight=False)
    console.print("Flags: " + ("none" if not r["flags"] else ""))
    for flag in r["flags"]:
        console.print(f"  ! {shown(flag)}", highlight=False)
    if r.get("report"):
        console.print(f"Report written to {shown(r['report'])}")
    console.print(CAUTION)


def _num(x: float | None, fmt: str) -> str:
    return "–" if x is None else format(x, fmt)
