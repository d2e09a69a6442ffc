"""The report: the document writer (HTML and PDF with the same content) and the study report read from stored
studies."""
from __future__ import annotations

import re
from pathlib import Path

import matplotlib.pyplot as plt
import pytest

from helpers import pdf_image_count, pdf_text
from reval.report.document import Document, Num


def _small_document() -> Document:
    doc = Document("Ratio study", subtitle="Vellmarsh, valuation date 2026-01-01")
    part = doc.section("Summary (level, fit)")
    part.paragraph("Values are estimates for review by a qualified assessor.")
    part.table(["group", "n", "median"], [["all", 812, Num(0.98765, "0.988")], ["none", 0, None]], caption="All sales")
    for k in range(2):
        fig, ax = plt.subplots(figsize=(5, 3))
        ax.plot([1, 2, 3], [k, k + 1, k])
        part.figure(fig, caption=f"Figure {k}")
    doc.section("Sales used").table(["reason", "n"], [[f"reason {i}", i] for i in range(120)])  # over a page
    return doc


def test_html_is_self_contained_and_keeps_exact_numbers(tmp_path: Path) -> None:
    text = _small_document().write(tmp_path / "d.html").read_text()
    assert "<h2>Summary (level, fit)</h2>" in text and "<h2>Sales used</h2>" in text
    assert 'data-value="0.98765">0.988<' in text
    assert text.count("<img ") == 2 and text.count('src="data:image/png;base64,') == 2
    assert not re.search(r"(src|href)=\"https?:", text)   # nothing fetched


def test_pdf_text_reads_back_with_every_figure(tmp_path: Path) -> None:
    path = _small_document().write(tmp_path / "d.pdf")
    text = pdf_text(path)
    for title in ("Ratio study", "Summary (level, fit)", "Sales used", "0.988", "reason 119", "Figure 1"):
        assert title in text
    assert pdf_image_count(path) == 2
    assert text.count("page ") >= 2   # the long table ran on to a second page


def test_unknown_suffix_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="html or .pdf"):
        _small_document().write(tmp_path / "d.docx")


# ---- the study report -------------------------------------------------------------------------------------------

from html.parser import HTMLParser  # noqa: E402
import json  # noqa: E402
import shutil  # noqa: E402

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

from helpers import query_frame, run_reval  # noqa: E402
from reval.report.representativeness import mann_whitney_counts  # noqa: E402
from reval.service import actions  # noqa: E402

CAPTIONS = {"By market area": "market_area", "By segment": "segment", "By property class": "class",
            "By value range (quintiles of the value proxy)": "value_range", "By age (decades of year_built)": "age",
            "By size (quintile bands of living_area)": "size"}
STAT_KEYS = ["n", "n_trimmed", "median_ratio", "median_ratio_ci", "weighted_mean_ratio", "cod", "cod_ci", "prd", "prd_ci",
             "prb", "prb_ci"]


class _Tables(HTMLParser):
    """Every table of a page: its caption and rows of (text, exact value or None)."""

    def __init__(self) -> None:
        super().__init__()
        self.tables: list[dict] = []
        self._cell: list | None = None
        self._in_caption = False

    def handle_starttag(self, tag: str, attrs: list) -> None:
        a = dict(attrs)
        if tag == "table":
            self.tables.append({"caption": "", "rows": []})
        elif tag == "caption":
            self._in_caption = True
        elif tag == "tr":
            self.tables[-1]["rows"].append([])
        elif tag == "td":
            self._cell = ["", float(a["data-value"]) if "data-value" in a else None]

    def handle_endtag(self, tag: str) -> None:
        if tag == "caption":
            self._in_caption = False
        elif tag == "td" and self._cell is not None:
            self.tables[-1]["rows"][-1].append(tuple(self._cell))
            self._cell = None

    def handle_data(self, data: str) -> None:
        if self._in_caption:
            self.tables[-1]["caption"] += data
        elif self._cell is not None:
            self._cell[0] += data


def _tables(path: Path) -> dict[str, list[list[tuple[str, float | None]]]]:
    parser = _Tables()
    parser.feed(path.read_text())
    return {t["caption"]: [r for r in t["rows"] if r] for t in parser.tables}


@pytest.fixture(scope="module")
def reported(fitted_demo: Path, tmp_path_factory: pytest.TempPathFactory) -> dict:
    """The fitted demo with a segment whose every sale the analyst excluded, a failing segment approved with an
    override note, and its report written as HTML (prior values) and PDF (model values)."""
    folder = Path(shutil.copytree(fitted_demo, tmp_path_factory.mktemp("report") / "p"))
    counts = query_frame(folder, "SELECT p.segment, list(DISTINCT q.sale_id ORDER BY q.sale_id) AS sales "
                                 "FROM sale_qualification q JOIN parcels p USING (parcel_id) WHERE q.qualified "
                                 "GROUP BY p.segment ORDER BY len(sales), p.segment LIMIT 1")
    emptied, sales = counts["segment"][0], list(counts["sales"][0])
    for sale in sales:
        actions.decide_sale(folder, sale, "exclude", "not arm's length (test)")
    model = actions.study(folder, "model", "segment")
    failing = next(g["group"] for g in model["groups"] if g["group"] != emptied
                   and any(v["status"] == "fail" for v in g["verdicts"].values()))
    decision = actions.approve(folder, failing, note="override for the test: local market evidence")
    assert decision["override"]
    html_out = actions.report(folder, folder / "study.html", "prior")
    pdf_out = actions.report(folder, folder / "study.pdf", "model")
    return {"folder": folder, "emptied": emptied, "failing": failing, "html": html_out, "pdf": pdf_out}


def test_every_table_number_equals_the_study_json(reported: dict) -> None:
    tables = _tables(Path(reported["html"]["path"]))
    folder = reported["folder"]
    checked = 0
    for caption, grouping in CAPTIONS.items():
        done = run_reval("study", "--json", "--by", grouping, "--values", "prior", "--project", str(folder))
        assert done.returncode == 0, done.stderr
        groups = json.loads(done.stdout)["groups"]
        rows = tables[caption]
        assert [r[0][0] for r in rows] == [g["group"] for g in groups]
        for row, g in zip(rows, groups):
            expected: list[float | None] = []
            for key in STAT_KEYS:
                expected += g[key] if isinstance(g[key], list) else [g[key]]
            assert [value for _, value in row[1:-1]] == expected, (grouping, g["group"])
            checked += len(expected)
    everything = json.loads(run_reval("study", "--json", "--by", "all", "--project", str(folder)).stdout)["groups"][0]
    summary = {r[0][0]: r[1][1] for r in tables["Level, uniformity and vertical equity, all sales"]}
    assert summary == {"median ratio": everything["median_ratio"], "weighted mean ratio": everything["weighted_mean_ratio"],
                       "mean ratio": everything["mean_ratio"], "COD": everything["cod"], "PRD": everything["prd"],
                       "PRB": everything["prb"]}
    assert checked > 500


def test_pdf_text_reads_back_with_its_plots(reported: dict) -> None:
    path = Path(reported["pdf"]["path"])
    text = pdf_text(path)
    for title in ("Cover", "Summary", "Stratified results", "Plots", "Representativeness", "Sales used", "The model",
                  "Decisions", "Values are estimates for review by a qualified assessor"):
        assert title in text
    study = actions.study(reported["folder"], "model", "all")["groups"][0]
    assert f"median ratio {study['median_ratio']:.3f}" in " ".join(text.split())
    # ratio scatter, box plots, decile medians, COD by segment, market trend, value change, curves
    assert reported["pdf"]["figures"] == 7 == pdf_image_count(path)


def test_no_sales_failing_segment_and_override_are_shown(reported: dict) -> None:
    tables = _tables(Path(reported["html"]["path"]))
    by_segment = {r[0][0]: r[-1][0] for r in tables["By segment"]}
    assert by_segment[reported["emptied"]] == "no sales"
    assert "FAILS" in " ".join(by_segment.values())
    model_tables = {}
    actions.report(reported["folder"], reported["folder"] / "model.html", "model")
    model_tables = _tables(reported["folder"] / "model.html")
    assert "FAILS" in {r[0][0]: r[-1][0] for r in model_tables["By segment"]}[reported["failing"]]
    decisions = next(rows for caption, rows in model_tables.items() if caption.startswith("From the audit log"))
    approved = [r for r in decisions if r[2][0] == "batch approved" and r[3][0] == reported["failing"]]
    assert approved and approved[0][4][0] == "yes" and "local market evidence" in approved[0][5][0]
    excluded = next(rows for caption, rows in model_tables.items() if caption.startswith("The analyst's decisions"))
    assert {r[1][0] for r in excluded} == {"exclude"} and len(excluded) >= 1


def test_mann_whitney_from_counts_equals_scipy() -> None:
    rng = np.random.default_rng(5)
    sold, unsold = rng.integers(0, 12, 80).astype(float), rng.integers(2, 14, 300).astype(float)  # many ties
    values = np.unique(np.concatenate([sold, unsold]))
    u, p = mann_whitney_counts(values, (sold[:, None] == values).sum(0).astype(float),
                               (unsold[:, None] == values).sum(0).astype(float))
    reference = stats.mannwhitneyu(sold, unsold, method="asymptotic")   # SciPy: tie and continuity corrections
    assert u == pytest.approx(reference.statistic, rel=1e-12) and p == pytest.approx(reference.pvalue, rel=1e-9)


def test_the_app_writes_the_report_to_the_project_folder(reported: dict) -> None:
    import asyncio

    from helpers import settle
    from tui.app import RevalApp

    folder = reported["folder"]

    async def scenario() -> tuple[str, str]:
        app = RevalApp(folder)
        async with app.run_test(size=(100, 32)) as pilot:
            await settle(pilot)
            await pilot.press("w")
            await settle(pilot)
            return app.messages[-1]

    severity, text = asyncio.run(scenario())
    target = folder / "ratio_study_report.html"
    assert severity == "information" and str(target) in text and "out-of-fold model values" in text
    assert "<h2>Decisions</h2>" in target.read_text()


def test_a_report_named_without_html_or_pdf_is_refused_plainly(reported: dict) -> None:
    folder = reported["folder"]
    done = run_reval("report", str(folder / "study.docx"), "--project", str(folder))
    assert done.returncode == 1 and "written as .html or .pdf" in done.stderr and "Traceback" not in done.stderr
    assert not (folder / "study.docx").exists()


def test_age_and_size_groups_hold_the_sales_of_their_decade_and_band(reported: dict) -> None:
    folder = reported["folder"]
    age = actions.study(folder, "prior", "age")["groups"]
    expected = query_frame(folder, """
        SELECT CAST(floor(v.value / 10) * 10 AS INTEGER) || 's' AS decade, count(DISTINCT a.sale_id) AS n
        FROM adjusted_sales a JOIN parcels p USING (parcel_id)
        JOIN feature_values v ON v.parcel_id = a.parcel_id
         AND v.position = (SELECT position FROM features WHERE name = 'year_built')
        WHERE p.prior_value > 0 GROUP BY ALL""")
    counts = {g["group"]: g["n"] + g["n_trimmed"] for g in age}
    assert {k: v for k, v in counts.items() if v} == dict(zip(expected["decade"], expected["n"]))
    size = actions.study(folder, "prior", "size")["groups"]
    # quintile bands, in order (the demo's vacant lots, without a living area, form an "unknown" group without sales)
    assert [g["group"].split(":")[0] for g in size if g["n"] + g["n_trimmed"]] == ["1", "2", "3", "4", "5"]
    assert sum(g["n"] + g["n_trimmed"] for g in size) == sum(counts.values())
    value_range = actions.study(folder, "prior", "value_range")["groups"]
    shares = np.array([g["n"] + g["n_trimmed"] for g in value_range]) / sum(counts.values())
    assert len(value_range) == 5 and np.all(np.abs(shares - 0.2) < 0.05)   # quintiles (edges rounded to 2 digits)


def test_decile_intervals_centre_on_the_stored_decile_medians() -> None:
    from reval.stats.ratio_stats import decile_median_cis, decile_medians, median_ci

    rng = np.random.default_rng(3)
    ratios, key = rng.lognormal(0, 0.15, 937), rng.lognormal(12, 0.5, 937)
    cis = decile_median_cis(ratios, key, 0.9)
    assert np.array_equal(cis[:, 0], decile_medians(ratios, key))
    lowest = ratios[key < np.percentile(key, 10)]   # decile 0: below the 10th percentile
    assert tuple(cis[0, 1:]) == median_ci(lowest, 0.9)
