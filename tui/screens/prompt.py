"""Modal prompts: one line of text (a note, a reason, a parcel id), a confirmation and the export form."""
from __future__ import annotations

from pathlib import Path

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Checkbox, Input, Label, Static

from reval.service.wording import shown


class PromptScreen(ModalScreen[str | None]):
    """Ask for one line; Enter returns it (refused when empty and required), Esc returns None."""

    CSS_PATH = "prompt.tcss"
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="prompt.cancel"),
                Binding("enter", "close_refused", "Close", show=False, id="prompt.close")]

    def __init__(self, title: str, placeholder: str, *, required: bool = False, detail: str = "",
                 value: str = "") -> None:
        super().__init__()
        self.title_text, self.placeholder, self.required = title, placeholder, required
        self.detail, self.value = detail, value
        self.refused: str | None = None   # set when a check run beside the dialog refuses what it asks for

    def refuse(self, why: str) -> None:
        """Say in the dialog why its action is refused: the input closes, Enter or Esc closes the dialog (keys
        typed ahead stay in the dialog instead of reaching the screen below)."""
        self.refused = why
        self.query_one("#prompt-input", Input).disabled = True
        self.query_one("#prompt-hint", Static).update(f"✗ {why} (Enter or Esc closes)")
        self.focus()

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label(shown(self.title_text), id="prompt-title", markup=False)
            if self.detail:
                yield Static(self.detail, id="prompt-detail", markup=False)
            yield Input(self.value, placeholder=self.placeholder, id="prompt-input")
            yield Static("Enter to confirm · Esc to cancel" + (" · required" if self.required else ""),
                         id="prompt-hint")

    @on(Input.Submitted, "#prompt-input")
    def submitted(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        if self.required and not text:
            self.query_one("#prompt-hint", Static).update(f"✗ A {self.placeholder} is required (Esc to cancel).")
            return
        self.dismiss(text)

    def action_close_refused(self) -> None:
        if self.refused is not None:
            self.dismiss(None)

    def action_cancel(self) -> None:
        self.dismiss(None)


class ExportScreen(ModalScreen[tuple[Path, bool] | None]):
    """Ask where to write the value roll and whether a partial roll (approved segments only) is meant."""

    CSS_PATH = "prompt.tcss"
    # Enter exports from the path and from the checkbox alike (a checkbox would otherwise toggle on Enter)
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="export.cancel"),
                Binding("enter", "export", "Export", priority=True, id="export.confirm")]

    def __init__(self, default_path: Path) -> None:
        super().__init__()
        self.default_path = default_path

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label("Export the value roll", id="prompt-title")
            yield Static("Only approved segments are written. A full export needs every segment approved; "
                         "a partial one says so in its manifest.", id="prompt-detail")
            yield Input(str(self.default_path), placeholder="file path (.csv)", id="prompt-input")
            yield Checkbox("Partial export (only the approved segments)", id="partial")
            yield Static("Enter exports · Tab to the checkbox, Space ticks it · Esc cancels",
                         id="prompt-hint")

    def action_export(self) -> None:
        text = self.query_one("#prompt-input", Input).value.strip()
        if not text:
            self.query_one("#prompt-hint", Static).update("✗ A file path is required (Esc to cancel).")
            return
        self.dismiss((Path(text).expanduser(), self.query_one(Checkbox).value))

    def action_cancel(self) -> None:
        self.dismiss(None)


class ConfirmScreen(ModalScreen[str | None]):
    """Say what a step will do and ask before doing it: Enter returns "yes", the optional extra key returns its
    answer (e.g. "replace"), Esc returns None."""

    CSS_PATH = "prompt.tcss"
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="confirm.cancel"),
                Binding("enter", "answer('yes')", "Confirm", id="confirm.yes"),
                Binding("r", "extra", "The other answer", show=False, id="confirm.extra")]

    def __init__(self, title: str, lines: list[str], *, extra: tuple[str, str, str] | None = None) -> None:
        """`extra` = ("r", answer, what r does): a second answer besides Enter's "yes"."""
        super().__init__()
        self.title_text, self.lines, self.extra = title, lines, extra

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label(self.title_text, id="prompt-title")
            yield Static("\n".join(self.lines), id="prompt-detail", markup=False)
            extra = f" · {self.extra[0]} {self.extra[2]}" if self.extra else ""
            yield Static(f"Enter to confirm{extra} · Esc to cancel", id="prompt-hint", markup=False)

    def action_answer(self, answer: str) -> None:
        self.dismiss(answer)

    def action_extra(self) -> None:
        if self.extra is not None:
            self.dismiss(self.extra[1])

    def action_cancel(self) -> None:
        self.dismiss(None)
