"""The value-roll steps: a service API (plain functions the command line and the terminal app share) and
the `reval value | review | approve | hold | revoke | export | log | batches` subcommands."""
from __future__ import annotations

import argparse
import json
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Callable, Iterator

from rich.console import Console
from rich.table import Table

from .config import Config, load_config
from .errors import UserError
from .store import Store, latest_version, open_store


@contextmanager
def _project(folder: Path, write: bool) -> Iterator[tuple[Config, Store]]:
    config = load_config(folder)
    with open_store(config.database, read_only=not write) as store:
        if not write and store.version() < latest_version():
            raise UserError("The database needs upgrading first: run `reval value`.")
        yield config, store


# ---- service API ---------------------------------------------------------------------------------------------

def value_step(folder: Path, run_id: str | None = None) -> dict[str, Any]:
    """Value every parcel from a run (default: the newest) and stage one batch per segment."""
    from . import valuation  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=True) as (config, store):
        return valuation.stage_values(store, config, run_id)


def review_report(folder: Path, segment: str | None = None, limit: int = 20) -> dict[str, Any]:
    """Value changes, parcels beyond the review threshold and the sales-chasing check, per segment."""
    from . import review  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=False) as (config, store):
        return review.review(store, config, segment, limit)


def approve(folder: Path, segment: str, note: str | None = None) -> dict[str, Any]:
    """Approve a segment's staged batch (its out-of-fold statistics must pass, or give an override note)."""
    from . import batches  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=True) as (config, store):
        return batches.approve(store, config, segment, note)


def hold(folder: Path, segment: str, reason: str) -> dict[str, Any]:
    """Hold a segment's staged batch, with a reason."""
    from . import batches  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=True) as (config, store):
        return batches.hold(store, config, segment, reason)


def revoke(folder: Path, segment: str, note: str) -> dict[str, Any]:
    """Withdraw a segment's approval before export, with a note."""
    from . import batches  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=True) as (config, store):
        return batches.revoke(store, config, segment, note)


def export_roll(folder: Path, path: Path, partial: bool = False, overwrite: bool = False) -> dict[str, Any]:
    """Write the certified roll (and its manifest) to `path`; refuses while a segment is unapproved unless partial,
    refuses the project's own files, and an existing file unless overwrite."""
    from . import export  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=True) as (config, store):
        return export.export_roll(store, config, path, partial, overwrite)


def event_log(folder: Path, segment: str | None = None) -> dict[str, Any]:
    """The audit log, oldest first, optionally for one segment."""
    from . import batches  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=False) as (_, store):
        rows = batches.json_records(store.frame("log_events", {"segment": segment}))
    return {"segment": segment, "events": [{**r, "detail": json.loads(r["detail"] or "{}")} for r in rows]}


def batch_states(folder: Path) -> dict[str, Any]:
    """Each segment's open batch (staged or held) and certified batch (approved or exported)."""
    from . import batches  # step modules load pandas and SciPy: only when the step runs

    with _project(folder, write=False) as (_, store):
        return {"segments": batches.segment_states(store)}


# ---- rendering -------------------------------------------------------------------------------------------------

def _emit(args: argparse.Namespace, result: dict[str, Any], render: Callable[[dict[str, Any], Console], None]) -> None:
    from .cli import emit  # imported here: reval.cli imports this module to register the commands

    emit(args, result, render)


def _money(x: float | None) -> str:
    return "-" if x is None else f"{x:,.0f}"


def _pct(x: float | None) -> str:
    return "-" if x is None else f"{100 * x:+.1f}%"


def _table(title: str, columns: list[str], rows: list[list[str]], console: Console) -> None:
    table = Table(title=title)
    for i, name in enumerate(columns):
        table.add_column(name, justify="left" if i == 0 else "right")
    for row in rows:
        table.add_row(*row)
    console.print(table)


def _render_value(r: dict[str, Any], console: Console) -> None:
    console.print(f"Run {r['run_id']}: staged {len(r['staged'])} batch(es); "
                  f"{len(r['unchanged'])} segment(s) already hold a batch of this run.")
    if r["land_schedule"] is None:
        console.print("No land schedule configured: land and improvement are not allocated.")
    _table("Staged batches", ["segment", "batch", "parcels", "replaced"],
           [[s["segment"], str(s["batch_id"]), f"{s['n_parcels']:,}",
             "-" if s["replaced_batch_id"] is None else f"{s['replaced_batch_id']} ({s['replaced_state']})"]
            for s in r["staged"]], console)
    for flag, n in r["flags"].items():
        console.print(f"  {n:>8,}  parcels flagged {flag}")


def _render_review(r: dict[str, Any], console: Console) -> None:
    rows = []
    for s in r["segments"]:
        q = s["change_ratio_quantiles"] or {}
        rows.append([s["segment"], f"{s['batch_id']} {s['state']}", f"{s['n_parcels']:,}", _pct(s["total_change"]),
                     " / ".join("-" if q.get(k) is None else f"{q[k]:.2f}" for k in ("p25", "median", "p75")),
                     f"{s['n_beyond_threshold']:,}", s["sales_chasing"]["status"].replace("_", " ")])
    _table(f"Value review: change = new market value / prior value; beyond = more than +/-{100 * r['threshold']:.0f}%",
           ["segment", "batch", "parcels", "total", "p25 / median / p75", "beyond", "sales chasing"], rows, console)
    for s in r["segments"]:
        chase = s["sales_chasing"]
        if chase["flagged"]:
            console.print(f"[bold]{s['segment']}: possible sales chasing[/bold] — median change sold "
                          f"{_pct(chase['median_change_sold'])} vs unsold {_pct(chase['median_change_unsold'])}, "
                          f"Mann-Whitney U p = {chase['p_value']:.2g} ({chase['rule']}).")
        if s["beyond_threshold"] and len(r["segments"]) == 1:
            _table(f"{s['segment']}: largest changes beyond the threshold ({s['n_beyond_threshold']:,} in all)",
                   ["parcel", "class", "prior", "new", "change"],
                   [[p["parcel_id"], p["property_class"], _money(p["prior_value"]), _money(p["market_value"]),
                     _pct(p["change"])] for p in s["beyond_threshold"]], console)


def _render_transition(r: dict[str, Any], console: Console) -> None:
    console.print(f"{r['segment']}: batch {r['batch_id']} (run {r['run_id']}) is now {r['state']}.")
    if r.get("override"):
        console.print(f"Approved over failing statistics ({'; '.join(r['failed'])}); note stored: {r['note']}")
    elif r.get("note"):
        console.print(f"Note stored: {r['note']}")


def _render_export(r: dict[str, Any], console: Console) -> None:
    console.print(f"Wrote {r['rows']:,} parcels to {r['path']} (sha256 {r['sha256'][:16]}...); "
                  f"manifest {r['manifest']}.")
    if r["not_approved"]:
        console.print(f"Partial roll: not approved and left out: {', '.join(r['not_approved'])}.")
    if r["pending_newer_batches"]:
        console.print(f"Newer batches await review in: {', '.join(r['pending_newer_batches'])}.")


def _render_log(r: dict[str, Any], console: Console) -> None:
    _table("Events", ["id", "when", "who", "kind", "segment", "run", "note"],
           [[str(e["event_id"]), str(e["event_time"])[:19], e["who"], e["kind"], e["segment"] or "",
             e["run_id"] or "", str(e["detail"].get("note") or "")] for e in r["events"]], console)


def _render_states(r: dict[str, Any], console: Console) -> None:
    def show(b: dict[str, Any] | None) -> str:
        return "-" if b is None else f"{b['batch_id']} {b['state']} (run {b['run_id']})"

    _table("Batches", ["segment", "open batch", "certified batch"],
           [[s["segment"], show(s["open"]), show(s["certified"])] for s in r["segments"]], console)


# ---- subcommands -------------------------------------------------------------------------------------------------

def add_roll_commands(sub: Any, common: argparse.ArgumentParser) -> None:
    """Register the value-roll subcommands on the `reval` parser's subparsers."""
    def folder(args: argparse.Namespace) -> Path:
        return Path(args.project)

    p = sub.add_parser("value", parents=[common], help="value every parcel from a run and stage a batch per segment")
    p.add_argument("--run", help="run id (default: the newest run)")
    p.set_defaults(func=lambda a: _emit(a, value_step(folder(a), a.run), _render_value))

    p = sub.add_parser("review", parents=[common], help="value changes, large changes and the sales-chasing check")
    p.add_argument("--segment", help="only this segment (also lists its largest changes)")
    p.add_argument("--limit", type=int, default=20, help="parcels beyond the threshold listed per segment")
    p.set_defaults(func=lambda a: _emit(a, review_report(folder(a), a.segment, a.limit), _render_review))

    p = sub.add_parser("approve", parents=[common], help="approve a segment's staged batch")
    p.add_argument("segment")
    p.add_argument("--note", help="why; required to approve over failing out-of-fold statistics")
    p.set_defaults(func=lambda a: _emit(a, approve(folder(a), a.segment, a.note), _render_transition))

    p = sub.add_parser("hold", parents=[common], help="hold a segment's staged batch")
    p.add_argument("segment")
    p.add_argument("--reason", required=True, help="why the batch is held")
    p.set_defaults(func=lambda a: _emit(a, hold(folder(a), a.segment, a.reason), _render_transition))

    p = sub.add_parser("revoke", parents=[common], help="withdraw a segment's approval (only before export)")
    p.add_argument("segment")
    p.add_argument("--note", required=True, help="why the approval is withdrawn")
    p.set_defaults(func=lambda a: _emit(a, revoke(folder(a), a.segment, a.note), _render_transition))

    p = sub.add_parser("export", parents=[common], help="write the approved value roll as CSV with a manifest")
    p.add_argument("path", help="the CSV file to write")
    p.add_argument("--partial", action="store_true", help="export the approved segments even if some are not")
    p.add_argument("--overwrite", action="store_true", help="replace an existing roll file and its manifest "
                   "(never the project's own files)")
    p.set_defaults(func=lambda a: _emit(a, export_roll(folder(a), Path(a.path), a.partial, a.overwrite),
                                        _render_export))

    p = sub.add_parser("log", parents=[common], help="the audit log of events")
    p.add_argument("--segment", help="only this segment's events")
    p.set_defaults(func=lambda a: _emit(a, event_log(folder(a), a.segment), _render_log))

    p = sub.add_parser("batches", parents=[common], help="each segment's open and certified batch")
    p.set_defaults(func=lambda a: _emit(a, batch_states(folder(a)), _render_states))
