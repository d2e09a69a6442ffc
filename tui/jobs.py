"""Work off the UI thread: the messages workers post, the app-wide status they update, and its bar.

Workers never touch widgets: they post these past-tense messages and the handlers change state.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any

from textual.app import App, ComposeResult
from textual.containers import Horizontal
from textual.message import Message
from textual.widget import Widget
from textual.widgets import ProgressBar, Static


class JobCancelled(Exception):
    """Raised inside a worker's progress callback when the person cancelled the job."""


@dataclass
class Loaded(Message):
    """A screen's data arrived from a worker; `tag` says which part."""

    tag: str
    data: Any


@dataclass
class LoadFailed(Message):
    """Reading a screen's data failed; `error` is the message to show in its place."""

    tag: str
    error: str


@dataclass
class JobProgressed(Message):
    """A long job reported progress through the core's progress callback."""

    kind: str
    step: str
    done: int
    total: int


@dataclass
class JobFinished(Message):
    """A job or quick action ended well; `summary` is a line for the status bar."""

    kind: str
    summary: str
    result: Any


@dataclass
class JobStopped(Message):
    """A job stopped at a progress report because it was cancelled; its step was rolled back."""

    kind: str
    summary: str


@dataclass
class JobEnded(Message):
    """The job's thread is done, whatever the outcome (a cancelled worker's thread runs to its next step)."""


@dataclass
class CoreNotice(Message):
    """Something the core logged while working (a stale lock removed, an interrupted export finished)."""

    text: str


class NoticeRelay(logging.Handler):
    """Posts the core's log notices ("reval" logger) to the app as CoreNotice messages, from any thread."""

    def __init__(self, app: App[Any]) -> None:
        super().__init__(logging.WARNING)
        self.app = app

    def emit(self, record: logging.LogRecord) -> None:
        self.app.post_message(CoreNotice(record.getMessage()))


@dataclass(frozen=True)
class Status:
    """What the status bar shows: the running job with its progress, or the last outcome."""

    text: str = ""
    severity: str = "information"   # information | warning | error
    running: bool = False
    done: int = 0
    total: int = 0


SYMBOLS = {"information": "✓", "warning": "!", "error": "✗"}


class StatusBar(Widget):
    """One line above the footer: a progress bar while a job runs, else the last message with a symbol."""

    DEFAULT_CSS = """
    StatusBar { height: 1; background: $panel; }
    StatusBar #status-text { width: 1fr; height: 1; padding: 0 1; color: $text; }
    StatusBar.-error #status-text { color: $text-error; text-style: bold; }
    StatusBar.-warning #status-text { color: $text-warning; }
    StatusBar ProgressBar { width: auto; height: 1; display: none; }
    StatusBar.-running ProgressBar { display: block; }
    """

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield ProgressBar(show_eta=False, id="status-progress")
            yield Static("", id="status-text", markup=False)

    def on_mount(self) -> None:
        self.watch(self.app, "status", self.show_status)

    def show_status(self, status: Status) -> None:
        self.set_class(status.running, "-running")
        self.set_class(status.severity == "error", "-error")
        self.set_class(status.severity == "warning", "-warning")
        text = self.query_one("#status-text", Static)
        if status.running:
            self.query_one(ProgressBar).update(total=max(status.total, 1), progress=status.done)
            text.update(status.text)
        else:
            text.update(f"{SYMBOLS[status.severity]} {status.text}" if status.text else "")
