"""Every colour the app draws reaches the WCAG 2.1 contrast minimums on both themes (issue 15: "orange on light
grey is faint in the light theme").

Source: W3C, Web Content Accessibility Guidelines (WCAG) 2.1: 1.4.3 Contrast (Minimum), 4.5:1 for text; 1.4.11
Non-text Contrast, 3:1 for graphical objects; relative luminance and contrast ratio as its glossary defines them.
The ratios are computed here, independently of tui/contrast.py, from the colours the screens actually render
(the compositor's output at 80x24), each against the background it is drawn on.
"""
from __future__ import annotations

import asyncio
from pathlib import Path

from helpers import settle
from textual.scrollbar import ScrollBar, ScrollBarCorner
from textual.widgets import Tabs

from tui import contrast
from tui.app import RevalApp

THEMES = ("textual-dark", "textual-light")
SCREENS = ((), ("enter",), ("2",), ("3",), ("4",), ("5",), ("6",), ("escape", "C"), ("escape", "question_mark"),
           ("escape", "W"))


def wcag_ratio(a: tuple[int, int, int], b: tuple[int, int, int]) -> float:
    def lum(rgb: tuple[int, int, int]) -> float:
        c = [v / 255 for v in rgb]
        r, g, b_ = (v / 12.92 if v <= 0.03928 else ((v + 0.055) / 1.055) ** 2.4 for v in c)
        return 0.2126 * r + 0.7152 * g + 0.0722 * b_

    hi, lo = sorted((lum(a), lum(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def graphic(text: str) -> bool:
    """Braille dots, block elements, box drawing and geometric shapes are plot marks and lines (1.4.11)."""
    return all(0x2500 <= ord(ch) <= 0x25FF or 0x2800 <= ord(ch) <= 0x28FF for ch in text)


def test_the_wcag_formula() -> None:
    # WCAG 2.1 glossary: the ratio runs from 1 (same colour) to 21 (black on white)
    assert wcag_ratio((0, 0, 0), (255, 255, 255)) == 21.0 and wcag_ratio((90, 90, 90), (90, 90, 90)) == 1.0
    from textual.color import Color
    for a, b in (((254, 166, 43), (224, 224, 224)), ((1, 120, 212), (18, 18, 18))):
        assert abs(contrast.ratio(Color(*a), Color(*b)) - wcag_ratio(a, b)) < 1e-12


def test_every_colour_on_screen_reaches_the_wcag_minimum(fitted_demo: Path) -> None:
    low: list[str] = []
    for theme in THEMES:
        asyncio.run(_scan(fitted_demo, theme, low))
    assert not low, "\n".join(low[:40])


async def _scan(folder: Path, theme: str, low: list[str]) -> None:
    app = RevalApp(folder)
    app.theme = theme
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        for keys in SCREENS:
            if keys:
                await pilot.press(*keys)
                await settle(pilot)
            screen = app.screen
            for y, strip in enumerate(screen._compositor.render_strips()):
                x = 0
                for seg in strip:
                    start, x = x, x + seg.cell_length
                    text = seg.text.strip()
                    if not text or seg.style is None or seg.style.color is None or seg.style.bgcolor is None:
                        continue
                    widget, _ = screen.get_widget_at(start, y)
                    # Textual's own scrollbars and the tab row's underline are outside the app's styles
                    if isinstance(widget, (ScrollBar, ScrollBarCorner)) or any(
                            isinstance(a, Tabs) for a in widget.ancestors_with_self):
                        continue
                    fg, bg = seg.style.color.get_truecolor(), seg.style.bgcolor.get_truecolor()
                    r = wcag_ratio(tuple(fg), tuple(bg))
                    need = contrast.GRAPHICS if graphic(text) else contrast.TEXT
                    if r < need:
                        low.append(f"{theme} {type(screen).__name__} {keys}: {text[:24]!r} "
                                   f"{fg.hex} on {bg.hex} = {r:.2f} < {need}")
