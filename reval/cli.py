"""The `reval` command line: one entry point with sub_commands().

Exit codes: 0 ok; 1 data or user error (one-paragraph message, no traceback); 2 usage error.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Callable, Iterator

from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from .cli_roll import add_roll_commands
from .errors import UserError

def _commands() -> Any:
    """The step functions, imported when a command runs: they pull in pandas, SciPy and scikit-learn,
    which `--help` and the terminal app's start-up should not wait for."""
    from . import commands

    return commands


CAUTION = ("Values are estimates for review by a qualified assessor. Assessment level, caps, exemptions, "
           "notices and appeals follow local law.")


def _show_progress(args: argparse.Namespace) -> bool:
    return not getattr(args, "json", False) and sys.stderr.isatty()


@contextmanager
def progress_bar(args: argparse.Namespace) -> Iterator[Callable[[str, int, int], None] | None]:
    """A rich progress bar on a terminal; nothing with --json or without a terminal."""
    if not _show_progress(args):
        yield None
        return
    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                  TimeElapsedColumn(), console=Console(stderr=True), transient=True) as bar:
        tasks: dict[str, Any] = {}

        def update(step: str, done: int, total: int) -> None:
            if step not in tasks:
                tasks[step] = bar.add_task(step, total=total)
            bar.update(tasks[step], completed=done, total=total)

        yield update


def _print_table(title: str, rows: list[dict[str, Any]], console: Console) -> None:
    if not rows:
        console.print(f"{title}: nothing to show")
        return
    table = Table(title=title)
    for key in rows[0]:
        table.add_column(str(key), justify="right" if isinstance(rows[0][key], (int, float)) else "left")
    for row in rows:
        table.add_row(*("" if v is None else f"{v:,.4g}" if isinstance(v, float) else str(v) for v in row.values()))
    console.print(table)


def emit(args: argparse.Namespace, result: dict[str, Any], render: Callable[[dict[str, Any], Console], None]) -> None:
    """Print a command's result: JSON with --json, else a human rendering."""
    if getattr(args, "json", False):
        print(json.dumps(result, indent=2, default=str))
    else:
        render(result, Console())


# ---- subcommands -------------------------------------------------------------------------------------------

def cmd_init(args: argparse.Namespace) -> None:
    path = _commands().init_project(Path(args.folder), args.name)
    print(f"Wrote {path}. Edit it to name your files and columns, then run `reval import` in {path.parent}.")


def cmd_import(args: argparse.Namespace) -> None:
    with progress_bar(args) as progress:
        result = _commands().import_project(Path(args.project), progress)
    emit(args, result.as_dict(), lambda r, c: c.print(
        ("Imported" if r["changed"] else "Already imported (files unchanged)")
        + f": {r['parcels']:,} parcels, {r['sales']:,} sales, {r['segments']} segments in "
        f"{r['market_areas']} market areas."))


def cmd_demo(args: argparse.Namespace) -> None:
    folder = Path(args.folder)
    with progress_bar(args) as progress:
        summary = _commands().build_demo(folder, args.parcels, progress)
    headless = args.headless or os.environ.get("HEADLESS", "") not in ("", "0") or not sys.stdout.isatty()
    if headless or args.json:
        emit(args, summary, _render_summary)
        return
    _launch_app(folder)


def _render_summary(summary: dict[str, Any], console: Console) -> None:
    console.print(f"[bold]{summary['jurisdiction']}[/bold] — project folder {summary['folder']}")
    console.print(f"{summary['parcels']:,} parcels, {summary['sales']:,} sales, {summary['segments']} neighbourhoods "
                  f"in {summary['market_areas']} market areas")
    for step in summary.get("steps", []):
        console.print(f"  done: {step}")
    console.print(CAUTION)


def cmd_sales(args: argparse.Namespace) -> None:
    if args.report:
        result = _commands().sales_report(Path(args.project))
    else:
        with progress_bar(args) as progress:
            result = _commands().prepare_sales_step(Path(args.project), progress)
    emit(args, result, _render_sales)


def _render_sales(result: dict[str, Any], console: Console) -> None:
    console.print(f"{result['qualified']:,} qualified sales; {result['excluded']:,} excluded:")
    for reason, n in sorted(result["excluded_by_reason"].items(), key=lambda kv: -kv[1]):
        console.print(f"  {n:>6,}  {reason}")
    _print_table("Sales per segment", [{"segment": s["segment"], "qualified": s["qualified"],
                                        "excluded": s["excluded"]} for s in result["segments"]], console)


def cmd_study(args: argparse.Namespace) -> None:
    result = _commands().study_step(Path(args.project), args.values, args.by, args.run, args.in_sample)
    if args.segment:
        result["groups"] = [g for g in result["groups"] if g["group"] == args.segment]
        if not result["groups"]:
            raise UserError(f"No group named '{args.segment}' in the study by {args.by}.")
    emit(args, result, _render_study)


MARKS = {"pass": "ok", "fail": "FAIL", "too_few_sales": "few"}


def _render_study(result: dict[str, Any], console: Console) -> None:
    console.print(f"Ratio study of {result['values']}, by {result['by']}")
    if "warning" in result:
        console.print(f"[bold]Warning:[/bold] {result['warning']}")

    def cell(g: dict[str, Any], stat: str, fmt: str) -> str:
        value, verdict = g[stat], g["verdicts"][stat]
        shown = "-" if value is None else format(value, fmt)
        return f"{shown} {MARKS[verdict['status']]}"

    rows = [{"group": g["group"], "n": g["n"], "trimmed": g["n_trimmed"],
             "median": cell(g, "median_ratio", ".3f"), "COD": cell(g, "cod", ".1f"),
             "PRD": cell(g, "prd", ".3f"), "PRB": cell(g, "prb", "+.3f")} for g in result["groups"]]
    _print_table("Ratio statistics (ok = meets the standard, FAIL = does not, few = too few sales)", rows, console)
    console.print(CAUTION)


def cmd_fit(args: argparse.Namespace) -> None:
    with progress_bar(args) as progress:
        result = _commands().fit_step(Path(args.project), progress, args.jobs)
    emit(args, result, _render_fit)


def _render_fit(result: dict[str, Any], console: Console) -> None:
    console.print(f"Run {result['run_id']}: {result['sales']:,} sales, {result['segments']} segments, "
                  f"{result['parcels']:,} parcels valued")
    console.print("  " + ", ".join(f"{k} {v:.1f} s" for k, v in result["timings"].items()))
    _print_table("Out-of-fold accuracy, whole jurisdiction (same folds for every model)", result["accuracy"], console)
    console.print("Next: `reval study --values model` for the out-of-fold ratio study per segment. " + CAUTION)


def cmd_compare(args: argparse.Namespace) -> None:
    result = _commands().compare_report(Path(args.project), args.run)
    emit(args, result, _render_compare)


def _render_compare(result: dict[str, Any], console: Console) -> None:
    rows = result["rows"]
    for segment in dict.fromkeys(r["segment"] for r in rows):
        _print_table(f"{segment}: out-of-fold accuracy by model (run {result['run_id']})",
                     [{k: v for k, v in r.items() if k != "segment"} for r in rows if r["segment"] == segment],
                     console)
    _print_table("What the gradient-boosting reference relies on (permutation importance)",
                 result["gradient_boosting_importance"], console)


def cmd_tui(args: argparse.Namespace) -> None:
    _launch_app(Path(args.project))


def _launch_app(folder: Path) -> None:
    from tui.app import run_app  # the UI is loaded only when asked for; the core never imports it

    run_app(folder)


# ---- parser ------------------------------------------------------------------------------------------------

def build_parser() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--project", default=".", metavar="DIR", help="project folder (default: current folder)")
    common.add_argument("--json", action="store_true", help="print machine-readable JSON")

    parser = argparse.ArgumentParser(prog="reval", description="Assessment revaluation over an embedded DuckDB database. "
                                     + CAUTION)
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("init", help="write a commented starter reval.toml into a new project folder")
    p.add_argument("folder", help="project folder to create")
    p.add_argument("--name", default="My municipality", help="jurisdiction name")
    p.set_defaults(func=cmd_init)

    p = sub.add_parser("import", parents=[common], help="check and load the files named in reval.toml")
    p.set_defaults(func=cmd_import)

    p = sub.add_parser("demo", parents=[common], help="build the demo municipality's project and run every step")
    p.add_argument("folder", nargs="?", default="demo_project", help="where to build it (default: demo_project)")
    p.add_argument("--parcels", type=int, default=None, help="generate this many parcels instead of the shipped sample")
    p.add_argument("--headless", action="store_true", help="print a summary instead of opening the app")
    p.set_defaults(func=cmd_demo)

    p = sub.add_parser("sales", parents=[common], help="qualify sales and time-adjust them to the valuation date")
    p.add_argument("--report", action="store_true", help="show the stored counts without recomputing")
    p.set_defaults(func=cmd_sales)

    p = sub.add_parser("study", parents=[common], help="ratio study (median ratio, COD, PRD, PRB) against the standards")
    p.add_argument("--segment", help="show only this group")
    p.add_argument("--by", choices=["segment", "market_area", "class", "all"], default="segment")
    p.add_argument("--values", choices=["prior", "model"], default="prior",
                   help="prior roll values, or the latest run's model values (out-of-fold unless --in-sample)")
    p.add_argument("--in-sample", action="store_true", help="with --values model: in-sample values (flattering)")
    p.add_argument("--run", default=None, help="with --values model: run id (default: the latest)")
    p.set_defaults(func=cmd_study)

    p = sub.add_parser("fit", parents=[common], help="fit every segment's model and store a run")
    p.add_argument("--jobs", type=int, default=None, help="worker processes for segment fits (default: config)")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("compare", parents=[common], help="reference models' accuracy beside ours, on the same folds")
    p.add_argument("--run", default=None, help="run id (default: the latest)")
    p.set_defaults(func=cmd_compare)

    add_roll_commands(sub, common)

    p = sub.add_parser("tui", parents=[common], help="open the terminal app on a project")
    p.set_defaults(func=cmd_tui)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    try:
        args.func(args)
    except UserError as exc:
        print(f"reval: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("reval: interrupted; nothing was changed by the unfinished step", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
