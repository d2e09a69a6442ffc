"""A line (or lines) of text built from data: never read as markup, control characters removed."""
from __future__ import annotations

from typing import Any

from textual.widgets import Static

from reval.service.wording import shown


class Plain(Static):
    """A Static for text that holds names, ids, notes or messages: shown as written (no markup), without
    control characters (reval.service.wording.shown, line breaks kept)."""

    def __init__(self, content: str = "", **kwargs: Any) -> None:
        super().__init__(shown(content, lines=True), markup=False, **kwargs)

    def update(self, content: Any = "", *, layout: bool = True) -> None:
        super().update(shown(content, lines=True), layout=layout)
