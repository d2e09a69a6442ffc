"""The README's text screenshots of the app are the app's current screens (issue 15: "the README's screenshots
match"). Each is the fitted demo at 80x24 (run id pinned), as a terminal shows it; a block follows its marker
`<!-- screen: NAME -->` in README.md. After an intended change of a screen: `README_SCREENS=update pytest
tests/test_readme_screens.py` rewrites the blocks; then read them."""
from __future__ import annotations

import asyncio
import os
import re
from pathlib import Path

import pytest
from helpers import ROOT, settle
from test_tui_layout import screen_text

from tui.app import RevalApp

README = ROOT / "README.md"
SCREENS = {"overview": (), "curves": ("enter",)}   # the keys that lead from the opened app to each screen


def block(name: str) -> re.Pattern[str]:
    return re.compile(rf"(<!-- screen: {name} -->\n```text\n)(.*?)(\n```)", re.S)


async def _shown(folder: Path, keys: tuple[str, ...]) -> str:
    app = RevalApp(folder)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        for key in keys:
            await pilot.press(key)
            await settle(pilot)
        # A table's scroll bars come and go while its columns are measured: wait until two captures agree.
        shown, previous = "", None
        for _ in range(50):
            await pilot.pause(0.1)
            shown = "\n".join(line.rstrip() for line in screen_text(app))
            if shown == previous:
                break
            previous = shown
        return shown


@pytest.mark.parametrize("name", SCREENS)
def test_readme_screenshot_is_the_current_screen(fitted_demo: Path, name: str) -> None:
    text = README.read_text(encoding="utf-8")
    found = block(name).search(text)
    assert found, f"README.md has no block after <!-- screen: {name} -->"
    shown = asyncio.run(_shown(fitted_demo, SCREENS[name]))
    if os.environ.get("README_SCREENS") == "update":
        README.write_text(block(name).sub(lambda m: m.group(1) + shown + m.group(3), text, count=1), encoding="utf-8")
        return
    assert found.group(2) == shown
