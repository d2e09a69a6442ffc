"""The steps of the job from data to roll, where the project stands in each, and the key that runs it. A
project without data opens here, on what to do next."""
from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.widgets import DataTable, Header

from reval.service import views
from reval.service.types import JobStep

from .. import keys
from ..format import SHORT_CAUTION, cells
from ..jobs import Loaded, StatusBar
from ..plain import Plain
from .base import DataScreen, footer


def next_step(steps: list[JobStep]) -> str:
    """What to do next, in one line: the first step not done yet."""
    todo = next((s for s in steps if not s["done"]), None)
    if todo is None:
        return "Every step has been done at least once; approve or hold segments on the overview (Esc)."
    return f"Next: press {todo['key']} to {todo['does']}."


class StepsScreen(DataScreen):
    """Import, sales, ratio study, fit, values and export, each with its key and its state in this project."""

    CSS_PATH = "steps.tcss"
    BINDINGS = keys.bindings("steps")

    def __init__(self) -> None:
        super().__init__()
        self.steps: list[JobStep] = []

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain("The job, step by step: reading the project…", id="steps-title")
        yield DataTable(id="steps-table", cursor_type="row")
        yield Plain("", id="steps-does")
        yield Plain("", id="steps-next")
        yield Plain(SHORT_CAUTION, id="caution")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        self.query_one(DataTable).focus()
        self.reload()

    def reload(self) -> None:
        self.fetch("steps", views.job_steps, self.reval.folder)

    @on(Loaded)
    def show_steps(self, message: Loaded) -> None:
        self.steps = message.data
        self.query_one("#steps-title", Plain).update("The job, step by step (each key runs its step, as the "
                                                      "command line does)")
        table = self.query_one(DataTable)
        table.clear(columns=True)
        table.add_columns("Key", "Step", "Where the project is")
        for s in self.steps:
            table.add_row(*cells(s["key"], ("✓ " if s["done"] else "· ") + s["step"], s["status"]))
        self.query_one("#steps-next", Plain).update(next_step(self.steps))

    @on(DataTable.RowHighlighted)
    def step_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.cursor_row < len(self.steps):
            s = self.steps[event.cursor_row]
            self.query_one("#steps-does", Plain).update(f"{s['key']}: {s['does']}")

    def action_back(self) -> None:
        self.dismiss()
