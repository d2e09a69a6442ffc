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
    part = doc.section("Summary (level)")
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
    assert "<h2>Summary (level)</h2>" in text and "<h2>Sales used</h2>" in text
    assert 'data-value="0.98765">0.988<' in text
    assert text.count("<img ") == 2 and text.count('src="data:image/png;base64,') == 2
    assert not re.search(r"(src|href)=\"https?:", text)   # nothing fetched


def test_pdf_text_reads_back_with_every_figure(tmp_path: Path) -> None:
    path = _small_document().write(tmp_path / "d.pdf")
    text = pdf_text(path)
    for title in ("Ratio study", "Summary (level)", "Sales used", "0.988", "reason 119", "Figure 1"):
        assert title in text
    assert pdf_image_count(path) == 2
    assert text.count("page ") >= 2   # the long table ran on to a second page


def test_unknown_suffix_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="html or .pdf"):
        _small_document().write(tmp_path / "d.docx")
