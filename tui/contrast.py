"""Legible colours on any theme: the theme's colours for text and plots, darkened or lightened where needed until
they reach the WCAG 2.1 contrast minimums against every background the app draws them on.

Source: W3C, Web Content Accessibility Guidelines (WCAG) 2.1, success criteria 1.4.3 Contrast (Minimum): 4.5:1
for text, and 1.4.11 Non-text Contrast: 3:1 for graphical objects; "relative luminance" and "contrast ratio" as
defined in its glossary.
"""
from __future__ import annotations

from textual.color import Color

TEXT = 4.5       # WCAG 2.1, 1.4.3
GRAPHICS = 3.0   # WCAG 2.1, 1.4.11

# the backgrounds the app draws on: screens, dialogs and tables, footer and header
BACKGROUNDS = ("background", "surface", "panel")
# theme colours the app uses for text (tcss `color:`, the overview's verdict cells) and for plots and marks
TEXT_COLOURS = ("text-muted", "text-warning", "text-error", "text-success", "text-accent", "text-primary")
GRAPHIC_COLOURS = ("primary", "secondary", "accent", "warning", "error", "success")
# a table's zebra stripe and cursor rows sit a little off the background: the margin covers them
MARGIN = 0.3


def luminance(colour: Color) -> float:
    """Relative luminance (WCAG 2.1 glossary, sRGB)."""
    def channel(value: int) -> float:
        c = value / 255
        return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = colour.rgb
    return 0.2126 * channel(r) + 0.7152 * channel(g) + 0.0722 * channel(b)


def ratio(a: Color, b: Color) -> float:
    """Contrast ratio (L1 + 0.05) / (L2 + 0.05), L1 the lighter (WCAG 2.1 glossary): 1 to 21."""
    high, low = sorted((luminance(a), luminance(b)), reverse=True)
    return (high + 0.05) / (low + 0.05)


def over(colour: Color, background: Color) -> Color:
    """A colour with transparency as it shows over an opaque background."""
    return background + colour if colour.a < 1 else colour


def shown_text(spec: str, background: Color) -> Color:
    """A text colour as drawn on `background`: "auto N%" is Textual's contrasting text at N % opacity."""
    if spec.startswith("auto"):
        alpha = float(spec.split()[1].rstrip("%")) / 100 if " " in spec else 1.0
        return over(background.get_contrast_text(alpha), background)
    return over(Color.parse(spec), background)


def worst(colour: Color, backgrounds: list[Color]) -> float:
    return min(ratio(over(colour, bg), bg) for bg in backgrounds)


def reaching(colour: Color, backgrounds: list[Color], minimum: float) -> Color:
    """The colour moved toward black on light backgrounds (white on dark) just far enough to reach `minimum`
    against each background."""
    towards = Color(0, 0, 0) if luminance(backgrounds[0]) > 0.18 else Color(255, 255, 255)
    step = 0.0
    moved = colour
    while worst(moved, backgrounds) < minimum and step < 1.0:
        step += 0.05
        moved = colour.blend(towards, step, alpha=colour.a)
    return moved


def legible(variables: dict[str, str]) -> dict[str, str]:
    """The theme's CSS variables with its text and graphic colours made legible on its backgrounds."""
    backgrounds = [Color.parse(variables[name]) for name in BACKGROUNDS]
    out = dict(variables)
    muted = 0.6
    while muted < 0.95 and worst(backgrounds[0].get_contrast_text(muted), backgrounds) < TEXT + MARGIN:
        muted += 0.05
    out["text-muted"] = f"auto {round(muted * 100)}%"
    for name in TEXT_COLOURS[1:]:
        out[name] = reaching(Color.parse(variables[name]), backgrounds, TEXT + MARGIN).hex
    for name in GRAPHIC_COLOURS:
        out[name] = reaching(Color.parse(variables[name]), backgrounds, GRAPHICS + MARGIN).hex
    # Textual's own: the footer's key letters (text on the footer) and a table's cursor row (text on the cursor)
    out["footer-key-foreground"] = reaching(Color.parse(variables["footer-key-foreground"]), backgrounds,
                                            TEXT + MARGIN).hex
    cursor = Color.parse(variables["block-cursor-background"])
    if variables["block-cursor-foreground"].startswith("auto"):
        out["block-cursor-foreground"] = "auto 100%"
    while ratio(shown_text(out["block-cursor-foreground"], cursor), cursor) < TEXT:
        cursor = cursor.blend(Color(0, 0, 0), 0.1)
    out["block-cursor-background"] = cursor.hex
    return out
