"""The reval terminal app: screens over reval's service API, every read and write in a thread worker."""
from __future__ import annotations

import logging
from collections.abc import Callable
from functools import partial
from pathlib import Path
from typing import Any

from textual import work
from textual.app import App
from textual.content import Content
from textual.reactive import reactive
from textual.screen import Screen
from textual.worker import Worker, WorkerState, get_current_worker

from reval.service import UserError, actions, views
from reval.service.types import Overview, StagePlan
from reval.service.wording import shown

from . import keys
from .contrast import legible
from .jobs import (CoreNotice, JobCancelled, JobEnded, JobFinished, JobProgressed, JobStopped, Loaded, LoadFailed, NoticeRelay,
                   Status)
from .screens.base import DataScreen
from .screens.help import HelpScreen
from .screens.overview import OverviewScreen
from .screens.prompt import ConfirmScreen, ExportScreen, PromptScreen
from .outcomes import (DECISIONS, FIT_LINES, REPORT_NAME, Describe, app_wording, describe_decision, describe_export,
                       describe_fit, describe_import, describe_override, describe_report, describe_sales,
                       describe_study, describe_values, job_fraction, job_line, parse_override, staging_lines)

BUSY = "Another job is running: wait for it to finish or cancel it (Ctrl+K)."


def error_text(error: BaseException) -> str:
    """A person-readable line for a failure: the core's own message in the app's words (keys, not commands),
    else the exception's type and text."""
    if isinstance(error, UserError):
        return app_wording(str(error))
    return f"{type(error).__name__}: {error}"


class RevalApp(App[None]):
    """Review one project folder: segments, their models and equity, parcels, decisions and the export."""

    TITLE = "reval"
    CSS_PATH = "app.tcss"
    BINDINGS = keys.bindings("app")

    status: reactive[Status] = reactive(Status())
    poll_seconds = 5.0   # how often the newest event id is read, to show other processes' decisions

    def __init__(self, folder: Path) -> None:
        super().__init__()
        self.folder = Path(folder).resolve()
        self.job_label = ""
        self.job_running = False   # from a job's start until its thread is done (a cancelled one runs on briefly)
        self.seen_event: int | None = None   # the newest event id this app has shown
        self.messages: list[tuple[str, str]] = []  # (severity, text), oldest first
        self._reads: dict[Worker[Any], tuple[Screen[Any], str]] = {}

    def get_css_variables(self) -> dict[str, str]:
        """The theme's variables, its text and plot colours made legible on its backgrounds (tui/contrast.py)."""
        self.theme_variables = legible(super().get_css_variables())
        return self.theme_variables

    def format_title(self, title: str, sub_title: str) -> Content:
        """Title — sub-title in full text colour (Textual dims the sub-title below the 4.5:1 text contrast)."""
        return Content.assemble(title, " — ", sub_title) if sub_title else Content(title)

    def on_mount(self) -> None:
        self._notices = NoticeRelay(self)
        logging.getLogger("reval").addHandler(self._notices)
        self.push_screen(OverviewScreen())
        self.set_interval(self.poll_seconds, self._poll_events)
        self._first_look()

    @work(thread=True, group="plan", exit_on_error=False, name="first look")
    def _first_look(self) -> None:
        """A project without data opens on the steps screen, which says what to do next."""
        if not views.job_steps(self.folder)[0]["done"]:
            self.call_from_thread(self.action_steps)

    # ---- other processes' changes ----------------------------------------------------------------------

    def _poll_events(self) -> None:
        if not self.job_running and not any(w.group == "poll" and w.is_running for w in self.workers):
            self._read_latest_event()

    @work(thread=True, group="poll", exit_on_error=False, name="latest event")
    def _read_latest_event(self) -> None:
        try:
            latest = views.latest_event(self.folder)
        except UserError:
            return   # no database yet, or held by a writer for now: the next poll tries again
        self.call_from_thread(self._compare_event, latest)

    def _compare_event(self, latest: int) -> None:
        """Reload the screens when the log has grown since the app last looked (another app or the CLI)."""
        if self.seen_event is not None and latest > self.seen_event and not self.job_running:
            self.reload_screens()
        self.seen_event = latest

    def reload_screens(self) -> None:
        for screen in self.screen_stack:
            if isinstance(screen, DataScreen):
                screen.reload()

    def on_unmount(self) -> None:
        logging.getLogger("reval").removeHandler(self._notices)

    def on_core_notice(self, message: CoreNotice) -> None:
        self.report(message.text, "warning")

    # ---- reading ---------------------------------------------------------------------------------------

    def fetch(self, screen: Screen[Any], tag: str, fn: Callable[..., Any], *args: Any) -> None:
        """Run a read-only service call in a thread; post Loaded (or LoadFailed) to the screen."""
        worker = self.run_worker(partial(self._read, screen, tag, fn, args), thread=True, exclusive=True,
                                 group=f"read-{id(screen)}-{tag}", exit_on_error=False, name=f"read {tag}")
        self._reads[worker] = (screen, tag)

    def _read(self, screen: Screen[Any], tag: str, fn: Callable[..., Any], args: tuple[Any, ...]) -> None:
        data = fn(*args)   # reads run beside a job: the store joins this process's writing connection
        if not get_current_worker().is_cancelled:
            screen.post_message(Loaded(tag, data))

    def overview_data(self) -> Overview:
        return views.overview(self.folder)

    # ---- long jobs and quick actions -------------------------------------------------------------------

    def start_job(self, kind: str, label: str, fn: Callable[..., Any], *args: Any, describe: Describe,
                  progress: bool = False, **kwargs: Any) -> None:
        """Run a step that writes (fit, value, approve, ...) in the one job thread, with progress if asked."""
        if self.job_running:
            self.report(BUSY, "warning")
            return
        self.job_label, self.job_running = label, True
        self.status = Status(job_line(label, kind, None), running=True)
        self._job(kind, fn, args, kwargs, describe, progress)
        self.refresh_bindings()   # Ctrl+K shows in the footer only while a job runs

    @work(thread=True, exclusive=True, group="job", exit_on_error=False, name="job")
    def _job(self, kind: str, fn: Callable[..., Any], args: tuple[Any, ...], kwargs: dict[str, Any],
             describe: Describe, with_progress: bool) -> None:
        worker = get_current_worker()

        def progress(step: str, done: int, total: int) -> None:
            if worker.is_cancelled:
                raise JobCancelled(f"{kind} cancelled; the step was rolled back and nothing changed")
            self.post_message(JobProgressed(kind, step, done, total))

        try:
            result = fn(*args, progress=progress, **kwargs) if with_progress else fn(*args, **kwargs)
        except JobCancelled as stop:
            self.post_message(JobStopped(kind, str(stop)))
            return
        finally:
            self.post_message(JobEnded())
        self.post_message(JobFinished(kind, describe(result), result))

    def on_job_ended(self, message: JobEnded) -> None:
        self.job_running = False
        if self.status.running:
            self.status = Status()
        self.refresh_bindings()

    def on_job_progressed(self, message: JobProgressed) -> None:
        """One progress line for the whole job: its phase, and a bar over all its phases."""
        fraction = job_fraction(message.kind, message.step, message.done, message.total)
        self.status = Status(job_line(self.job_label, message.kind, message), running=True,
                             done=round(1000 * fraction), total=1000)

    def on_job_finished(self, message: JobFinished) -> None:
        self.report(message.summary)
        self.reload_screens()

    def on_job_stopped(self, message: JobStopped) -> None:
        self.report(message.summary, "warning")

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        """The one place a worker's failure becomes a message in the app (never a traceback)."""
        if event.state not in (WorkerState.SUCCESS, WorkerState.CANCELLED, WorkerState.ERROR):
            return
        read = self._reads.pop(event.worker, None)
        if event.state != WorkerState.ERROR or event.worker.error is None:
            return
        text = error_text(event.worker.error)
        if read is not None:
            read[0].post_message(LoadFailed(read[1], text))
        else:
            self.report(text, "error")

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "cancel_job":
            return self.job_running
        return True

    async def action_quit(self) -> None:
        """Leave the app; while a job runs, ask first (quitting cancels it and keeps nothing it did)."""
        if not self.job_running:
            self.exit()
            return

        def answered(answer: str | None) -> None:
            if answer == "yes":
                self.action_cancel_job()
                self.exit()

        self.push_screen(ConfirmScreen("Quit while a job runs?", [
            f"{self.job_label} is still running.",
            "Quitting cancels it: the step is rolled back and nothing it did is kept."]), answered)

    def action_cancel_job(self) -> None:
        jobs = [w for w in self.workers if w.group == "job" and w.is_running]
        for worker in jobs:
            worker.cancel()
        self.report("Cancelling: the job stops at its next step." if jobs else "No job is running.", "warning")
        if jobs:
            self.status = Status(f"{self.job_label}: cancelling at its next step…", running=True)

    def report(self, text: str, severity: str = "information") -> None:
        """Show an outcome in the status bar (and as a notification), and keep it in the message log."""
        text = shown(text, lines=True)
        self.messages.append((severity, text))
        self.status = Status(text, severity)
        if severity != "information":
            self.notify(text, severity=severity, markup=False)  # type: ignore[arg-type]

    # ---- navigation ------------------------------------------------------------------------------------

    # the drill-in screens (and their plots) load when first opened: the overview starts faster without them
    def open_segment(self, segment: str) -> None:
        from .screens.segment import SegmentScreen

        self.push_screen(SegmentScreen(segment))

    def open_parcel(self, parcel_id: str) -> None:
        from .screens.parcel import ParcelScreen

        self.push_screen(ParcelScreen(parcel_id))

    def action_open_list(self, name: str) -> None:
        """A work list: of the segment on screen in a drill-in, else of every segment."""
        from .screens.listing import ListScreen
        from .screens.segment import SegmentScreen

        segment = self.screen.segment if isinstance(self.screen, SegmentScreen) else None
        self.push_screen(ListScreen(name, segment))

    def action_steps(self) -> None:
        from .screens.steps import StepsScreen

        if not isinstance(self.screen, StepsScreen):
            self.push_screen(StepsScreen())

    def action_import_data(self) -> None:
        self.start_job("import", "Importing the input files", actions.import_data, self.folder, progress=True,
                       describe=describe_import)

    def action_prepare_sales(self) -> None:
        self.start_job("sales", "Preparing the sales", actions.prepare_sales, self.folder, progress=True,
                       describe=describe_sales)

    def action_study(self) -> None:
        """The ratio study the overview shows: of the latest run's out-of-fold values, else of prior values."""
        from .screens.steps import StepsScreen

        fitted = isinstance(self.screen, StepsScreen) and any(s["key"] == "f" and s["done"] for s in self.screen.steps)
        values = "model" if fitted else "prior"
        self.start_job("study", f"Ratio study of the {'model' if values == 'model' else 'prior'} values",
                       actions.study, self.folder, values, "segment", describe=describe_study)

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def action_find_parcel(self) -> None:
        self.ask_parcel("Open a parcel")

    def ask_parcel(self, title: str, value: str = "", detail: str = "") -> None:
        """Ask for a parcel id (offered `value`: Enter takes it) and open that parcel."""
        def chosen(parcel_id: str | None) -> None:
            if parcel_id:
                self.open_parcel(parcel_id)

        self.push_screen(PromptScreen(title, "parcel id", required=True, value=value, detail=detail), chosen)

    # ---- decisions and steps that write ------------------------------------------------------------------

    def decide(self, kind: str, segment: str, detail: str = "") -> None:
        """Approve, hold or revoke the segment's batch: refused at once while a job runs, else ask for the note or
        reason while a thread checks whether the batch's state allows it (already approved: revoke first); a
        refusal shows in the dialog before a note is typed. The UI never waits on the database (another process
        may hold it for REVAL_WAIT seconds). The core enforces the approval gate and says why it refuses."""
        if self.job_running:
            self.report(f"{kind.capitalize()} of {segment} not started: {BUSY}", "warning")
            return
        title, asked, required = DECISIONS[kind]
        fn = getattr(actions, kind)
        prompt = PromptScreen(title.format(segment=segment), asked, required=required, detail=detail)

        def answered(text: str | None) -> None:
            if prompt.refused is not None:
                return   # the refusal has been reported
            if text is None:
                self.report(f"{kind.capitalize()} of {segment} cancelled.", "warning")
                return
            self.start_job(kind, f"{kind.capitalize()} {segment}", fn, self.folder, segment, text or None,
                           describe=describe_decision)

        self.push_screen(prompt, answered)
        self._check_decision(kind, segment, prompt)

    @work(thread=True, group="decision check", exit_on_error=False, name="decision check")
    def _check_decision(self, kind: str, segment: str, prompt: PromptScreen) -> None:
        try:
            refused = actions.decision_refusal(self.folder, segment, kind)
        except UserError as error:
            refused = str(error)
        if refused is not None:
            self.call_from_thread(self._refuse_decision, prompt, app_wording(refused))

    def _refuse_decision(self, prompt: PromptScreen, why: str) -> None:
        if prompt.is_attached and prompt in self.screen_stack:
            prompt.refuse(why)
        self.report(why, "error")

    def override(self, parcel_id: str, reasons: list[str], model_value: float | None) -> None:
        """Ask for the value, reason code and note in one line, then set the parcel's override (the core checks
        the reason and the amount and says why it refuses)."""
        def answered(text: str | None) -> None:
            if text is None:
                self.report(f"Override of parcel {parcel_id} cancelled.", "warning")
                return
            try:
                value, reason, note = parse_override(text)
            except ValueError as exc:
                self.report(str(exc), "error")
                return
            self.start_job("override", f"Override {parcel_id}", actions.set_override, self.folder, parcel_id, value,
                           reason, note, describe=describe_override)

        model = f"The model's value: {model_value:,.0f}. " if model_value is not None else ""
        detail = (f"{model}Write: value reason-code note, e.g. 245000 {reasons[0]} board decision 14. "
                  f"Reason codes: {', '.join(reasons)}.")
        self.push_screen(PromptScreen(f"Override the value of parcel {parcel_id}", "value reason note",
                                      required=True, detail=detail), answered)

    def remove_override(self, parcel_id: str) -> None:
        """Ask for a note, then remove the parcel's override."""
        def answered(text: str | None) -> None:
            if text is None:
                self.report(f"Removal of the override of parcel {parcel_id} cancelled.", "warning")
                return
            self.start_job("override", f"Remove the override of {parcel_id}", actions.remove_override, self.folder,
                           parcel_id, text, describe=describe_override)

        self.push_screen(PromptScreen(f"Remove the override of parcel {parcel_id}", "note saying why",
                                      required=True), answered)

    def action_fit(self) -> None:
        """Fit a new run of every segment, after a confirmation saying what it does and does not touch."""
        if self.job_running:
            self.report(BUSY, "warning")
            return

        def answered(answer: str | None) -> None:
            if answer == "yes":
                self.start_job("fit", "Fitting every segment", actions.fit, self.folder, jobs=1, progress=True,
                               describe=describe_fit)
            else:
                self.report("Fit cancelled; nothing changed.", "warning")

        self.push_screen(ConfirmScreen("Fit a new run of every segment", FIT_LINES), answered)

    def action_value(self) -> None:
        """Stage the segments without a standing decision, after a confirmation that lists the decisions kept
        (and, if asked, those a re-stage of every segment would set aside)."""
        self.restage(None, replace=False)

    def restage(self, segments: list[str] | None, replace: bool) -> None:
        """Read what staging would do, then ask before doing it (nothing is written until confirmed)."""
        if self.job_running:
            self.report(BUSY, "warning")
            return
        self._plan_staging(segments, replace)

    @work(thread=True, exclusive=True, group="plan", exit_on_error=False, name="staging plan")
    def _plan_staging(self, segments: list[str] | None, replace: bool) -> None:
        plan = actions.staging_plan(self.folder, None, segments, replace)
        self.call_from_thread(self._confirm_staging, plan, segments, replace)

    def _confirm_staging(self, plan: StagePlan, segments: list[str] | None, replace: bool) -> None:
        extra = ("r", "replace", "re-stage these too") if plan["kept"] and not replace else None

        def answered(answer: str | None) -> None:
            if answer == "replace":
                self.restage(segments, replace=True)
            elif answer == "yes":
                self.start_job("value", f"Staging values from run {plan['run_id']}", actions.stage_values,
                               self.folder, None, segments, replace, describe=describe_values)
            else:
                self.report("Staging cancelled; nothing changed.", "warning")

        title = "Re-stage, setting decisions aside" if plan["set_aside"] else "Stage values for review"
        self.push_screen(ConfirmScreen(title, staging_lines(plan), extra=extra), answered)

    def action_write_report(self) -> None:
        target = self.folder / REPORT_NAME
        self.start_job("report", f"Writing the ratio-study report to {target}", actions.report, self.folder, target,
                       None, describe=describe_report)

    def action_export(self) -> None:
        """Ask where to write the roll (and whether partly); ask again before replacing an existing file."""
        if self.job_running:
            self.report(BUSY, "warning")
            return

        def export(target: Path, partial: bool, overwrite: bool) -> None:
            self.start_job("export", f"Exporting the value roll to {target}", actions.export_roll,
                           self.folder, target, partial=partial, overwrite=overwrite, describe=describe_export)

        def chosen(answer: tuple[Path, bool] | None) -> None:
            if answer is None:
                return
            path, partial = answer
            target = path if path.is_absolute() else self.folder / path
            existing = actions.existing_export_files(target)
            if not existing:
                export(target, partial, False)
                return

            def replace(answer: str | None) -> None:
                if answer == "yes":
                    export(target, partial, True)
                else:
                    self.report("Export cancelled; nothing was written.", "warning")

            self.push_screen(ConfirmScreen("Replace an existing roll?", [
                *(f"{p} already exists." for p in existing),
                "Enter replaces it with this export (its manifest too); Esc keeps it."]), replace)

        self.push_screen(ExportScreen(self.folder / "value_roll.csv"), chosen)


def run_app(folder: Path) -> None:
    """Open the app on a project folder."""
    RevalApp(folder).run()
