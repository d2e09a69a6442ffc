"""The `reval` command line: argparse over the service layer, one subcommand per action.

Exit codes: 0 ok; 1 data or user error (one-paragraph message, no traceback), a project in use by another
process, or output cut short (a closed pipe, e.g. `reval study --json | head`, ends quietly); 2 usage error.
Notices the core logs (a stale lock removed, an interrupted export finished) go to stderr as "reval: ...".
"""
from __future__ import annotations

import argparse
import logging
import os
import sys
from pathlib import Path

from reval.cli import render
from reval.errors import UserError
from reval.service import actions
from reval.service.wording import CAUTION, shown
from reval.states import GROUPINGS


def _folder(args: argparse.Namespace) -> Path:
    return Path(args.project)


def _approve(args: argparse.Namespace) -> None:
    if args.all_passing:
        if args.segment or args.note:
            raise UserError("`reval approve --all-passing` takes no segment and no note: it approves only what passes.")
        render.emit(args, actions.approve_all_passing(_folder(args)), render.all_passing)
    elif not args.segment:
        raise UserError("Name a segment to approve, or use --all-passing.")
    else:
        render.emit(args, actions.approve(_folder(args), args.segment, args.note), render.decision)


def cmd_init(args: argparse.Namespace) -> None:
    path = actions.init_project(Path(args.folder), args.name)
    print(f"Wrote {path}. Edit it to name your files and columns, then run `reval import` in {path.parent}.")


def cmd_import(args: argparse.Namespace) -> None:
    with render.progress_bar(args) as progress:
        result = actions.import_data(_folder(args), progress, allow_empty=args.allow_empty)
    render.emit(args, result, render.imported)


def cmd_demo(args: argparse.Namespace) -> None:
    folder = Path(args.folder)
    with render.progress_bar(args) as progress:
        summary = actions.build_demo(folder, args.parcels, progress)
    headless = args.headless or os.environ.get("HEADLESS", "") not in ("", "0") or not sys.stdout.isatty()
    if headless or args.json:
        render.emit(args, summary, render.demo_summary)
        return
    _launch_app(folder)


def cmd_sales(args: argparse.Namespace) -> None:
    if args.report:
        result = actions.sales_report(_folder(args))
    else:
        with render.progress_bar(args) as progress:
            result = actions.prepare_sales(_folder(args), progress)
    render.emit(args, result, render.sales)


def cmd_study(args: argparse.Namespace) -> None:
    if args.projects:
        if args.by != "segment" or args.run:
            raise UserError("`reval study --projects` studies each project whole and all together; "
                            "it takes no --by or --run (each project's latest run is used).")
        result = actions.combined_study([Path(p) for p in args.projects], args.values, args.in_sample)
    else:
        result = actions.study(_folder(args), args.values, args.by, args.run, args.in_sample)
    if args.segment:
        result["groups"] = [g for g in result["groups"] if g["group"] == args.segment]
        if not result["groups"]:
            raise UserError(f"No group named '{args.segment}' in the study by {args.by}.")
    render.emit(args, result, render.study)


def cmd_fit(args: argparse.Namespace) -> None:
    with render.progress_bar(args) as progress:
        result = actions.fit(_folder(args), progress, args.jobs, args.scheduler)
    render.emit(args, result, render.fit)


def cmd_parcel(args: argparse.Namespace) -> None:
    result = actions.parcel_report(_folder(args), args.parcel_id, Path(args.report) if args.report else None)
    render.emit(args, result, render.parcel)
def cmd_override(args: argparse.Namespace) -> None:
    if args.remove:
        if args.value is not None or args.reason:
            raise UserError("--remove takes no value and no --reason: `reval override PARCEL --remove --note TEXT`.")
        result = actions.remove_override(_folder(args), args.parcel_id, args.note or "")
    else:
        if args.value is None or not args.reason:
            raise UserError("Give the value and a reason code: `reval override PARCEL VALUE --reason CODE [--note "
                            "TEXT]` (or --remove --note TEXT).")
        result = actions.set_override(_folder(args), args.parcel_id, args.value, args.reason, args.note)
    render.emit(args, result, render.override)


def cmd_tui(args: argparse.Namespace) -> None:
    _launch_app(_folder(args))


def _launch_app(folder: Path) -> None:
    from tui.app import run_app  # the UI is loaded only when asked for; the core never imports it

    run_app(folder)


def build_parser() -> argparse.ArgumentParser:
    """The whole command line: every subcommand with its options."""
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--project", default=".", metavar="DIR", help="project folder (default: current folder)")
    common.add_argument("--json", action="store_true", help="print machine-readable JSON")

    parser = argparse.ArgumentParser(prog="reval", description="Assessment revaluation over an embedded DuckDB "
                                     "database. " + CAUTION)
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("init", help="write a commented starter reval.toml into a new project folder")
    p.add_argument("folder", help="project folder to create")
    p.add_argument("--name", default="My municipality", help="jurisdiction name")
    p.set_defaults(func=cmd_init)

    p = sub.add_parser("import", parents=[common], help="check and load the files named in reval.toml")
    p.add_argument("--allow-empty", action="store_true", help="accept an input file without data rows (it empties "
                   "the data set it holds)")
    p.set_defaults(func=cmd_import)

    p = sub.add_parser("check", parents=[common], help="data-quality check before fitting: problems per segment and "
                       "check (blanks, implausible values and combinations, duplicate and repeat sales)")
    p.add_argument("--csv", metavar="FILE", default=None, help="write every problem found to this CSV (parcel, sale, "
                   "segment, check, feature, value, problem)")
    p.set_defaults(func=lambda a: render.emit(a, actions.check_data(_folder(a), None if a.csv is None else Path(a.csv)),
                                              render.check))

    p = sub.add_parser("demo", parents=[common], help="build the demo municipality's project and run every step")
    p.add_argument("folder", nargs="?", default="demo_project", help="where to build it (default: demo_project)")
    p.add_argument("--parcels", type=int, default=None, help="generate this many parcels instead of the shipped sample")
    p.add_argument("--headless", action="store_true", help="print a summary instead of opening the app")
    p.set_defaults(func=cmd_demo)

    p = sub.add_parser("sales", parents=[common], help="qualify sales and time-adjust them to the valuation date")
    p.add_argument("--report", action="store_true", help="show the stored counts without recomputing")
    p.set_defaults(func=cmd_sales)

    p = sub.add_parser("sale", parents=[common], help="exclude one sale from models and studies, or include it at full "
                       "weight in the fit, with a reason (re-qualifies the sales; the next fit honours it)")
    p.add_argument("sale_id", help="the sale's id (all its parcels)")
    p.add_argument("decision", choices=["exclude", "include"])
    p.add_argument("--reason", required=True, help="why; kept in the audit log and shown with the sale")
    p.set_defaults(func=lambda a: render.emit(a, actions.decide_sale(_folder(a), a.sale_id, a.decision, a.reason),
                                              render.sale_decision))

    p = sub.add_parser("study", parents=[common], help="ratio study (median ratio, COD, PRD, PRB) against the standards")
    p.add_argument("--segment", help="show only this group")
    p.add_argument("--by", choices=list(GROUPINGS), default="segment",
                   help="groups: segment, market area, property class, segment x class, all sales, value range (quintiles of "
                        "the value proxy), age (decades of the age feature) or size (quintile bands of the size feature)")
    p.add_argument("--values", choices=["prior", "model", "final"], default="prior",
                   help="prior roll values, the latest run's model values (out-of-fold unless --in-sample; overridden "
                   "parcels left out), or the final roll values after overrides")
    p.add_argument("--in-sample", action="store_true", help="with --values model: in-sample values (flattering)")
    p.add_argument("--run", default=None, help="with --values model: run id (default: the latest)")
    p.add_argument("--projects", nargs="+", metavar="FOLDER", help="a combined study across these projects (each "
                   "read only; judged under the first one's standards)")
    p.set_defaults(func=cmd_study)

    p = sub.add_parser("report", parents=[common], help="write the ratio-study report (HTML or PDF) for a reviewer or "
                       "an oversight body: tables, plots, the sales used, the model and the decisions")
    p.add_argument("out", type=Path, help="the file to write: NAME.html (one self-contained file) or NAME.pdf")
    p.add_argument("--values", choices=["prior", "model"], default="prior",
                   help="prior roll values, or the latest run's out-of-fold model values")
    p.add_argument("--run", default=None, help="with --values model: run id (default: the latest)")
    p.set_defaults(func=lambda a: render.emit(a, actions.report(_folder(a), a.out, a.values, a.run), render.report))

    p = sub.add_parser("fit", parents=[common], help="fit every segment's model and store a run")
    p.add_argument("--jobs", type=int, default=None, help="worker processes for segment fits (default: config)")
    p.add_argument("--scheduler", metavar="tcp://HOST:PORT", default=None,
                   help="fit on this Dask cluster's workers (default: [model] scheduler; needs reval[cluster])")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("compare", parents=[common], help="reference models' accuracy beside ours, on the same folds")
    p.add_argument("--run", default=None, help="run id (default: the latest)")
    p.set_defaults(func=lambda a: render.emit(a, actions.compare(_folder(a), a.run), render.compare))

    p = sub.add_parser("value", parents=[common], help="value parcels from a run and stage a batch per segment")
    p.add_argument("segments", nargs="*", metavar="SEGMENT",
                   help="segments to stage (default: every segment without a held or approved batch)")
    p.add_argument("--run", help="run id (default: the newest run)")
    p.add_argument("--replace", action="store_true", help="also re-stage segments with a held batch (replaced) or "
                   "an approved one (it stays certified until the new batch is decided)")
    p.set_defaults(func=lambda a: render.emit(a, actions.stage_values(_folder(a), a.run, a.segments, a.replace),
                                              render.staged))

    p = sub.add_parser("override", parents=[common], help="set one parcel's market value over the model's, with a "
                       "reason code ([overrides] reasons), or remove its override")
    p.add_argument("parcel_id", help="the parcel's id")
    p.add_argument("value", nargs="?", type=float, help="the market value to put on the roll (not with --remove)")
    p.add_argument("--reason", help="a reason code from [overrides] reasons in reval.toml")
    p.add_argument("--note", help="free text kept in the audit log (required with --remove)")
    p.add_argument("--remove", action="store_true", help="remove the parcel's override: the model's value applies again")
    p.set_defaults(func=cmd_override)

    p = sub.add_parser("correct", parents=[common], help="correct one parcel's characteristics and revalue it with the "
                       "run's models, without a refit")
    p.add_argument("parcel_id", help="the parcel's id")
    p.add_argument("changes", nargs="+", metavar="FEATURE=VALUE", help="the corrected values, written as in the "
                   "parcels file (levels by name; empty = missing)")
    p.add_argument("--note", required=True, help="why; kept in the audit log with the old and new values")
    p.add_argument("--run", help="the run whose models revalue the parcel (default: the newest)")
    p.set_defaults(func=lambda a: render.emit(a, actions.correct_parcel(_folder(a), a.parcel_id, a.changes, a.note,
                                                                        a.run), render.correction))

    p = sub.add_parser("review", parents=[common], help="value changes, large changes and the sales-chasing check")
    p.add_argument("--segment", help="only this segment (also lists its largest changes)")
    p.add_argument("--limit", type=int, default=20, help="parcels beyond the threshold listed per segment")
    p.set_defaults(func=lambda a: render.emit(a, actions.review(_folder(a), a.segment, a.limit), render.review))

    p = sub.add_parser("parcel", parents=[common], help="why a parcel has its value: explanation, flags, segment "
                       "statistics and comparable sales adjusted by the model")
    p.add_argument("parcel_id", help="the parcel's id")
    p.add_argument("--report", metavar="FILE", help="also write a one-page report (FILE.html or FILE.pdf)")
    p.set_defaults(func=cmd_parcel)

    p = sub.add_parser("approve", parents=[common], help="approve a segment's staged batch (or every passing one)")
    p.add_argument("segment", nargs="?", help="the segment (omit with --all-passing)")
    p.add_argument("--note", help="why; required to approve over failing out-of-fold statistics")
    p.add_argument("--all-passing", action="store_true",
                   help="approve every staged batch whose out-of-fold statistics pass, in one transaction")
    p.set_defaults(func=_approve)

    p = sub.add_parser("hold", parents=[common], help="hold a segment's staged batch")
    p.add_argument("segment")
    p.add_argument("--reason", required=True, help="why the batch is held")
    p.set_defaults(func=lambda a: render.emit(a, actions.hold(_folder(a), a.segment, a.reason), render.decision))

    p = sub.add_parser("revoke", parents=[common], help="withdraw a segment's approval (only before export)")
    p.add_argument("segment")
    p.add_argument("--note", required=True, help="why the approval is withdrawn")
    p.set_defaults(func=lambda a: render.emit(a, actions.revoke(_folder(a), a.segment, a.note), render.decision))

    p = sub.add_parser("export", parents=[common], help="write the approved value roll as CSV with a manifest")
    p.add_argument("path", help="the CSV file to write")
    p.add_argument("--partial", action="store_true", help="export the approved segments even if some are not")
    p.add_argument("--overwrite", action="store_true", help="replace an existing roll file and its manifest "
                   "(never the project's own files)")
    p.set_defaults(func=lambda a: render.emit(a, actions.export_roll(_folder(a), Path(a.path), a.partial, a.overwrite),
                                              render.exported))

    p = sub.add_parser("log", parents=[common], help="the audit log of events")
    p.add_argument("--segment", help="only this segment's events")
    p.set_defaults(func=lambda a: render.emit(a, actions.event_log(_folder(a), a.segment), render.log))

    p = sub.add_parser("batches", parents=[common], help="each segment's open and certified batch")
    p.set_defaults(func=lambda a: render.emit(a, actions.batch_states(_folder(a)), render.batch_states))

    p = sub.add_parser("tui", parents=[common], help="open the terminal app on a project")
    p.set_defaults(func=cmd_tui)
    return parser


class _Notices(logging.Handler):
    """The core's notices on stderr, one "reval: ..." line each, control characters removed."""

    def emit(self, record: logging.LogRecord) -> None:
        print(f"reval: {shown(record.getMessage())}", file=sys.stderr)


def _show_notices() -> None:
    logger = logging.getLogger("reval")
    if not any(isinstance(h, _Notices) for h in logger.handlers):
        logger.addHandler(_Notices())


def _say(text: str) -> None:
    print("\n".join(f"reval: {shown(line)}" if i == 0 else shown(line)
                    for i, line in enumerate(text.splitlines() or [""])), file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    _show_notices()
    try:
        args.func(args)
        sys.stdout.flush()
    except UserError as exc:
        _say(str(exc))
        return 1
    except KeyboardInterrupt:
        _say("interrupted; nothing was changed by the unfinished step")
        return 1
    except BrokenPipeError:
        # the reader went away (e.g. `| head`): stop quietly; stdout to /dev/null so the exit flush is silent
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    return 0
