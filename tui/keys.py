"""The one registry of key bindings: it builds every screen's BINDINGS, the footer and the help screen.

Each action has a stable id (usable in a keymap to remap it), the keys that trigger it, where it applies
and a description. Nothing else in the app declares a binding.
"""
from __future__ import annotations

from dataclasses import dataclass

from textual.binding import Binding, BindingType

SCOPES = {
    "app": "Everywhere",
    "overview": "Segments overview",
    "segment": "Segment drill-in",
    "parcel": "Parcel view",
    "list": "Work lists",
    "steps": "Steps of the job",
    "check": "Data check",
    "help": "Help",
}


@dataclass(frozen=True)
class KeyAction:
    """One bindable action: id, keys (comma-separated), Textual action, scope, footer label, description."""

    id: str
    keys: str
    action: str
    scope: str
    label: str
    description: str
    show: bool = True
    key_display: str | None = None
    priority: bool = False


REGISTRY: tuple[KeyAction, ...] = (
    # everywhere
    KeyAction("app.help", "question_mark,f1", "app.help", "app", "Help", "Show every key and what it does",
              key_display="?"),
    KeyAction("app.quit", "q", "app.quit", "app", "Quit", "Leave the app (asks first while a job runs)"),
    KeyAction("app.parcel", "o", "app.find_parcel", "app", "Parcel", "Open a parcel by its id", show=False),
    KeyAction("app.fit", "f", "app.fit", "app", "Fit", "Fit the models of every segment: a new run (asks first)"),
    KeyAction("app.value", "v", "app.value", "app", "Value",
              "Stage values from the latest run for every segment without a held or approved batch (asks first)",
              show=False),
    KeyAction("app.export", "x", "app.export", "app", "Export", "Export the value roll (approved segments)"),
    KeyAction("app.cancel_job", "ctrl+k", "app.cancel_job", "app", "Cancel job",
              "Cancel the job that is running (shown in the footer only then); it keeps nothing"),
    KeyAction("app.steps", "W", "app.steps", "app", "Steps",
              "Show the steps of the job (import, sales, study, fit, values, export) and where the project is",
              show=False),
    KeyAction("app.changes", "C", "app.open_list('changes')", "app", "Changes",
              "List the parcels whose value changes beyond the review threshold (this segment's, in a drill-in)",
              show=False),
    KeyAction("app.sales_list", "E", "app.open_list('sales')", "app", "Sales left out",
              "List the excluded and down-weighted sales with why (this segment's, in a drill-in)", show=False),
    KeyAction("app.parcels", "P", "app.open_list('parcels')", "app", "Parcels",
              "Browse the parcels with their values (this segment's, in a drill-in)", show=False),
    KeyAction("app.all_sales", "U", "app.open_list('all_sales')", "app", "Every sale",
              "List every sale, qualified or not, to sort and filter (this segment's, in a drill-in)", show=False),
    KeyAction("app.log", "L", "app.open_list('log')", "app", "Log",
              "Show the audit log (this segment's, in a drill-in)", show=False),
    KeyAction("app.theme", "ctrl+t", "app.toggle_dark", "app", "Light/dark", "Switch between light and dark theme",
              show=False),
    KeyAction("app.report", "w", "app.write_report", "app", "Report",
              "Write the ratio-study report (HTML) to the project folder: model values of the latest run, "
              "prior values before any", show=False),
    # overview
    KeyAction("overview.down", "j,down", "cursor_down", "overview", "Down", "Next segment", show=False),
    KeyAction("overview.up", "k,up", "cursor_up", "overview", "Up", "Previous segment", show=False),
    KeyAction("overview.top", "g,home", "cursor_top", "overview", "Top", "First segment", show=False),
    KeyAction("overview.bottom", "G,end", "cursor_bottom", "overview", "Bottom", "Last segment", show=False),
    KeyAction("overview.open", "enter,l", "open_segment", "overview", "Open", "Open the segment's drill-in",
              key_display="⏎"),
    KeyAction("overview.sort_next", "s", "sort_next", "overview", "Sort", "Sort by the next column"),
    KeyAction("overview.sort_prev", "S", "sort_previous", "overview", "Sort back", "Sort by the previous column",
              show=False),
    KeyAction("overview.sort_reverse", "r", "sort_reverse", "overview", "Reverse", "Reverse the sort order",
              show=False),
    KeyAction("overview.failing", "F", "toggle_failing", "overview", "Failing",
              "Show only segments that cannot be approved without a note: a standard failed or inconclusive, "
              "too few or no sales, or a parcel left without a value (again: all)"),
    KeyAction("overview.area", "m", "cycle_area", "overview", "Area", "Filter by market area (cycles)",
              show=False),
    KeyAction("overview.state", "t", "cycle_state", "overview", "State", "Filter by batch state (cycles)",
              show=False),
    KeyAction("overview.search", "slash", "search", "overview", "Search", "Search segments by name as you type",
              key_display="/"),
    KeyAction("overview.clear", "c", "clear_filters", "overview", "Clear", "Clear the search and every filter",
              show=False),
    KeyAction("overview.approve", "a", "approve", "overview", "Approve", "Approve the segment's batch (with a note)"),
    KeyAction("overview.hold", "h", "hold", "overview", "Hold", "Hold the segment's batch (with a reason)"),
    KeyAction("overview.revoke", "R", "revoke", "overview", "Revoke",
              "Revoke the segment's approval before export (with a note)", show=False),
    KeyAction("overview.restage", "V", "restage", "overview", "Re-stage",
              "Re-stage the segment from the latest run, setting its hold or approval aside (asks first)", show=False),
    KeyAction("overview.refresh", "ctrl+r", "refresh", "overview", "Refresh", "Read the database again",
              show=False),
    KeyAction("overview.check", "d", "open_check", "overview", "Check",
              "Open the data check: problems per segment to work through before fitting", show=False),
    # segment drill-in
    KeyAction("segment.back", "escape,backspace", "back", "segment", "Back", "Back to the overview"),
    KeyAction("segment.next", "right_square_bracket,n", "page(1)", "segment", "Next",
              "Next curve, or next page of sales", key_display="]"),
    KeyAction("segment.prev", "left_square_bracket,p", "page(-1)", "segment", "Prev",
              "Previous curve, or previous page of sales", key_display="["),
    *(KeyAction(f"segment.tab{i + 1}", str(i + 1), f"tab({i})", "segment", name, f"Show the {name.lower()} tab",
                show=False) for i, name in enumerate(("Curves", "Interactions and effects", "Equity",
                                                       "Value change", "Sales", "Reference models"))),
    KeyAction("segment.approve", "a", "approve", "segment", "Approve", "Approve this segment's batch"),
    KeyAction("segment.hold", "h", "hold", "segment", "Hold", "Hold this segment's batch"),
    KeyAction("segment.revoke", "R", "revoke", "segment", "Revoke", "Revoke this segment's approval",
              show=False),
    KeyAction("segment.parcel", "enter", "open_sale_parcel", "segment", "Parcel",
              "On the sales tab: open the parcel of the highlighted sale", show=False),
    KeyAction("segment.exclude", "e", "decide_sale('exclude')", "segment", "Exclude sale",
              "On the sales tab: exclude the highlighted sale from models and ratio studies (with a reason)",
              show=False),
    KeyAction("segment.include", "i", "decide_sale('include')", "segment", "Reinstate sale",
              "On the sales tab: reinstate the highlighted sale, excluded by you, at full weight (with a reason)",
              show=False),
    # parcel
    KeyAction("parcel.back", "escape,backspace", "back", "parcel", "Back", "Back"),
    KeyAction("parcel.segment", "s", "open_segment", "parcel", "Segment", "Open this parcel's segment"),
    # work lists
    KeyAction("list.back", "escape,backspace", "back", "list", "Back", "Back"),
    KeyAction("list.open", "enter", "open_row", "list", "Open", "Open the row's parcel (a log row without one: its segment)",
              key_display="⏎"),
    KeyAction("list.next", "right_square_bracket,n", "page(1)", "list", "Next", "Next page", key_display="]"),
    KeyAction("list.prev", "left_square_bracket,p", "page(-1)", "list", "Prev", "Previous page", key_display="["),
    KeyAction("list.sort_next", "s", "sort(1)", "list", "Sort", "Sort by the next column"),
    KeyAction("list.sort_prev", "S", "sort(-1)", "list", "Sort back", "Sort by the previous column", show=False),
    KeyAction("list.reverse", "r", "reverse", "list", "Reverse", "Reverse the order", show=False),
    KeyAction("list.search", "slash", "search", "list", "Filter", "Show only rows containing a text",
              key_display="/"),
    KeyAction("list.segment", "e", "segment_filter", "list", "Segment", "Show one segment's rows (empty: all)"),
    # steps of the job (fit, value and export are the app's own keys f, v, x)
    KeyAction("steps.back", "escape,backspace", "back", "steps", "Back", "Back"),
    KeyAction("steps.import", "i", "app.import_data", "steps", "Import",
              "Check and load the input files named in reval.toml (all or nothing)"),
    KeyAction("steps.sales", "u", "app.prepare_sales", "steps", "Sales",
              "Qualify the sales and time-adjust them to the valuation date"),
    KeyAction("steps.study", "t", "app.study", "steps", "Study",
              "Ratio study of the latest values: out-of-fold model values after a fit, else prior values"),
    # data check
    KeyAction("check.back", "escape,backspace", "back", "check", "Back", "Back to the overview"),
    KeyAction("check.next", "right_square_bracket,n", "page(1)", "check", "Next", "Next page of the segment's rows",
              key_display="]"),
    KeyAction("check.prev", "left_square_bracket,p", "page(-1)", "check", "Prev",
              "Previous page of the segment's rows", key_display="["),
    KeyAction("check.filter", "t", "cycle_check", "check", "One check",
              "Show the segment's rows of one check at a time (cycles; then all again)"),
    KeyAction("check.parcel", "enter", "open_parcel", "check", "Parcel",
              "On a segment: go to its rows; on a row: open its parcel", show=False),
    KeyAction("parcel.report", "r", "report", "parcel", "Parcel report",
              "Write this parcel's one-page report (HTML or PDF: value, explanation, comparable sales, flags)"),
    KeyAction("parcel.override", "e", "override", "parcel", "Override",
              "Set this parcel's value over the model's: value, reason code and note"),
    KeyAction("parcel.remove_override", "u", "remove_override", "parcel", "Remove override",
              "Remove this parcel's override (with a note); the model's value applies at the next value step",
              show=False),
    # help
    KeyAction("help.close", "escape,question_mark,q", "close", "help", "Close", "Close the help"),
)

BY_ID = {k.id: k for k in REGISTRY}


def bindings(scope: str) -> list[BindingType]:
    """The Textual bindings of one scope."""
    out: list[BindingType] = []
    for k in REGISTRY:
        if k.scope != scope:
            continue
        out.append(Binding(k.keys, k.action, k.label, show=k.show, key_display=k.key_display,
                           priority=k.priority, id=k.id, tooltip=k.description))
    return out


def display_keys(k: KeyAction) -> str:
    """The keys of an action as a person types them."""
    names = {"question_mark": "?", "slash": "/", "right_square_bracket": "]", "left_square_bracket": "[",
             "escape": "Esc", "enter": "Enter", "backspace": "Backspace", "down": "↓", "up": "↑",
             "home": "Home", "end": "End", "tab": "Tab", "f1": "F1"}
    return " ".join(names.get(key, key.replace("ctrl+", "Ctrl+")) for key in k.keys.split(","))


def help_rows() -> list[tuple[str, str, str, str]]:
    """(scope title, keys, description, id) for every action, in registry order."""
    return [(SCOPES[k.scope], display_keys(k), k.description, k.id) for k in REGISTRY]
