"""What every data screen shares: reading through the app's workers and reloading after a change."""
from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any, cast

from textual.screen import Screen
from textual.widgets import Footer

from ..jobs import LoadFailed

if TYPE_CHECKING:
    from ..app import RevalApp


def footer() -> Footer:
    """The footer every screen shows: the registry's visible keys, compact to fit 80 columns."""
    return Footer(compact=True, show_command_palette=False)


class DataScreen(Screen[None]):
    """A screen whose data comes from reval.service.views through the app's thread workers."""

    @property
    def reval(self) -> RevalApp:
        return cast("RevalApp", self.app)

    def fetch(self, tag: str, fn: Callable[..., Any], *args: Any) -> None:
        """Read `fn(*args)` off the UI thread; the result arrives as a Loaded message to this screen."""
        self.reval.fetch(self, tag, fn, *args)

    def reload(self) -> None:
        """Read this screen's data again (after a job or an action changed the database)."""

    def on_load_failed(self, message: LoadFailed) -> None:
        self.reval.report(message.error, "error")
