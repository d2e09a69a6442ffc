"""Comparable sales adjusted by the model (reval.roll.comparables): the arithmetic on a hand-worked example, and
on the fitted demo every comparable's adjusted price against the stored model values, the grid's rows against
its net adjustment, and the [comparables] settings."""
from __future__ import annotations

import json
import re
import math
from pathlib import Path

import numpy as np
import pytest

from helpers import PINNED_RUN, pdf_image_count, pdf_text, query_frame
from helpers import run_reval as reval
from reval.roll.comparables import adjusted_prices, choose, gross_shares, log_mean, weighted_median
from reval.service.actions import parcel_report


# ---- the arithmetic, by hand ---------------------------------------------------------------------------------

def test_adjustment_of_one_comparable_worked_by_hand() -> None:
    # A comparable sold for a time-adjusted 200,000. The model says the subject's living area is worth 0.10
    # more on the log scale, its condition 0.05 less, and the location the same:
    #   adjusted  = 200,000 x exp(0.10 - 0.05) = 200,000 x 1.0512711 = 210,254.22
    #   log mean  = (210,254.22 - 200,000) / (ln 210,254.22 - ln 200,000) = 10,254.22 / 0.05 = 205,084.4
    #   rows      = +0.10 x 205,084.4 = +20,508.44 ; -0.05 x 205,084.4 = -10,254.22 ; 0
    #   net       = +20,508.44 - 10,254.22 = +10,254.22 = adjusted - price
    #   gross     = (20,508.44 + 10,254.22) / 200,000 = 15.381 %
    logs = np.array([[0.10, -0.05, 0.0]])
    price = np.array([200_000.0])
    assert adjusted_prices(price, logs)[0] == pytest.approx(210_254.22, abs=0.01)
    lm = log_mean(adjusted_prices(price, logs), price)[0]
    assert lm == pytest.approx(205_084.4, abs=0.1)
    rows = logs[0] * lm
    assert rows == pytest.approx([20_508.44, -10_254.22, 0.0], abs=0.01)
    assert rows.sum() == pytest.approx(210_254.22 - 200_000, abs=0.01)
    assert gross_shares(price, logs)[0] == pytest.approx(0.15381, abs=1e-5)


def test_log_mean_of_equal_numbers_is_the_number() -> None:
    assert log_mean(np.array([5.0, 2.0]), np.array([5.0, 1.0])) == pytest.approx([5.0, 1 / math.log(2)])


def test_weighted_median_and_the_order_of_choice() -> None:
    # values 10, 20, 30 with weights 1, 1, 3: cumulative 1, 2, 5 reaches half of 5 at 30; equal weights: 20.
    assert weighted_median(np.array([30.0, 10.0, 20.0]), np.array([3.0, 1.0, 1.0])) == 30.0
    assert weighted_median(np.array([30.0, 10.0, 20.0]), np.ones(3)) == 20.0
    # sales within the maximum gross adjustment come first, each group nearest first
    assert choose(np.array([0.1, 0.2, 0.3, 0.05]), np.array([True, False, False, True]), 3).tolist() == [1, 2, 3]


# ---- on the fitted demo -------------------------------------------------------------------------------------------

def _parcels(folder: Path) -> list[str]:
    """A sold and an unsold parcel of the largest segment, and one of the smallest segment."""
    frame = query_frame(folder, """
        WITH sizes AS (SELECT segment, count(*) n FROM parcels GROUP BY segment)
        SELECT p.parcel_id, p.segment, s.n, p.parcel_id IN (SELECT parcel_id FROM adjusted_sales) AS sold
        FROM parcels p JOIN sizes s USING (segment) ORDER BY s.n DESC, p.parcel_id""")
    big = frame[frame["n"] == frame["n"].max()]
    return [big[big["sold"]]["parcel_id"].iloc[0], big[~big["sold"]]["parcel_id"].iloc[0],
            frame["parcel_id"].iloc[-1]]


def test_adjusted_price_is_time_adjusted_price_times_exp_of_model_difference(fitted_demo: Path) -> None:
    # The test: each comparable's adjusted price equals its time-adjusted price x exp(model value of the
    # subject - model value of the comparable), to rounding; the grid's rows sum to the net adjustment.
    for parcel_id in _parcels(fitted_demo):
        report = parcel_report(fitted_demo, parcel_id)
        grid = report["comparables"]
        assert grid is not None and grid["run_id"] == PINNED_RUN
        assert len(grid["comparables"]) == 5
        stored = query_frame(fitted_demo, "SELECT parcel_id, log_value FROM parcel_estimates WHERE run_id = ?",
                             [PINNED_RUN]).set_index("parcel_id")["log_value"]
        prices = query_frame(fitted_demo, "SELECT sale_id, adjusted_price FROM adjusted_sales").set_index(
            "sale_id")["adjusted_price"]
        subject = stored[parcel_id]
        assert grid["model_value"] == round(math.exp(subject))
        for i, c in enumerate(grid["comparables"]):
            assert c["parcel_id"] != parcel_id
            expected = prices[c["sale_id"]] * math.exp(subject - stored[c["parcel_id"]])
            assert abs(c["adjusted_price"] - expected) <= 1.0, (parcel_id, c["sale_id"])
            assert abs(c["time_adjusted_price"] - prices[c["sale_id"]]) <= 1.0
            column = [row["adjustments"][i] for row in grid["rows"]]
            assert sum(column) == c["net_adjustment"] == c["adjusted_price"] - c["time_adjusted_price"]
            assert c["gross_percent"] == pytest.approx(sum(map(abs, column)) / c["time_adjusted_price"])
        adjusted = [c["adjusted_price"] for c in grid["comparables"]]
        assert grid["low"] == min(adjusted) and grid["high"] == max(adjusted)
        assert grid["low"] <= grid["indicated_value"] <= grid["high"]
        assert grid["brackets"] == (grid["low"] <= grid["model_value"] <= grid["high"])


def test_a_thin_segment_widens_to_its_market_area(fitted_demo: Path) -> None:
    thin = query_frame(fitted_demo, """
        SELECT p.segment, p.market_area, count(a.sale_id) n FROM parcels p
        LEFT JOIN adjusted_sales a USING (parcel_id) GROUP BY ALL ORDER BY n, p.segment LIMIT 1""")
    assert int(thin["n"].iloc[0]) < 20     # fewer than widen_below's default: the search must widen
    parcel_id = str(query_frame(fitted_demo, "SELECT min(parcel_id) p FROM parcels WHERE segment = ?",
                                [thin["segment"].iloc[0]])["p"].iloc[0])
    grid = parcel_report(fitted_demo, parcel_id)["comparables"]
    assert grid is not None and grid["searched"] == "market_area"
    assert {c["market_area"] for c in grid["comparables"]} == {thin["market_area"].iloc[0]}
    # a sale outside the parcel's segment carries at least the segment weight (default 0.10) in its distance
    assert all(c["distance"] >= 0.10 for c in grid["comparables"] if c["segment"] != thin["segment"].iloc[0])


def test_comparables_prefer_the_segment_and_respect_the_settings(demo_copy: Path) -> None:
    parcel_id = _parcels(demo_copy)[0]
    first = parcel_report(demo_copy, parcel_id)
    assert first["comparables"] is not None
    assert first["comparables"]["searched"] == "segment"
    assert {c["segment"] for c in first["comparables"]["comparables"]} == {first["segment"]}
    config = demo_copy / "reval.toml"
    config.write_text(config.read_text() + "\n[comparables]\nk = 3\nmax_age_months = 12\nwiden_below = 100000\n"
                      'widest = "jurisdiction"\n')
    second = parcel_report(demo_copy, parcel_id)["comparables"]
    assert second is not None
    assert len(second["comparables"]) == 3 and second["searched"] == "jurisdiction"
    assert all(c["age_months"] <= 12 for c in second["comparables"])
    within = query_frame(demo_copy, """SELECT count(*) n FROM adjusted_sales WHERE -month_offset <= 12
                                      AND sale_id IN (SELECT sale_id FROM adjusted_sales GROUP BY 1 HAVING count(*) = 1)""")
    assert second["candidates"] <= int(within["n"].iloc[0])


def test_parcel_command_json_and_unknown_id(fitted_demo: Path) -> None:
    parcel_id = _parcels(fitted_demo)[1]
    done = reval("parcel", parcel_id, "--project", str(fitted_demo), "--json")
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    split = report["explanation"]
    assert split["base"] + sum(p["currency"] for p in split["parts"]) == split["value"] == report["value"]["model_value"]
    amounts = [abs(p["currency"]) for p in split["parts"]]
    assert amounts == sorted(amounts, reverse=True)
    assert report["segment_statistics"]["segment"] == report["segment"]
    assert "qualified assessor" in report["caution"]
    shown = reval("parcel", parcel_id, "--project", str(fitted_demo), columns=200)
    assert shown.returncode == 0 and "Indicated value" in shown.stdout and "qualified assessor" in shown.stdout
    missing = reval("parcel", parcel_id[:-1], "--project", str(fitted_demo))
    assert missing.returncode == 1 and "did you mean" in missing.stderr and "Traceback" not in missing.stderr
    typo = reval("parcel", parcel_id + "x", "--project", str(fitted_demo))    # one character too many
    assert typo.returncode == 1 and f"did you mean {parcel_id}" in typo.stderr


# ---- the one-page parcel report ------------------------------------------------------------------------------------

def test_parcel_report_pdf_has_real_text_and_html_has_the_grid_of_the_json(fitted_demo: Path, tmp_path: Path) -> None:
    parcel_id = _parcels(fitted_demo)[0]
    pdf = tmp_path / "parcel.pdf"
    done = reval("parcel", parcel_id, "--project", str(fitted_demo), "--report", str(pdf), "--json")
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    assert report["report"] == str(pdf)
    value = f"{report['value']['value']:,}"
    text = " ".join(pdf_text(pdf).split())   # wrapped lines read as one text
    assert f"Parcel {parcel_id}: value {value}" in text            # the title, as machine-readable text
    assert "qualified assessor" in text and f"{report['comparables']['indicated_value']:,}" in text
    assert pdf.read_bytes().count(b"/Type /Page\n") + pdf.read_bytes().count(b"/Type /Page ") == 1   # one page
    assert pdf_image_count(pdf) == 1                                 # the explanation chart

    page = parcel_report(fitted_demo, parcel_id, tmp_path / "parcel.html")
    html = (tmp_path / "parcel.html").read_text(encoding="utf-8")
    assert f"Parcel {parcel_id}: value {value}" in html and "qualified assessor" in html
    numbers = [float(v) for v in re.findall(r'data-value="([^"]+)"', html)]
    grid = page["comparables"]
    assert grid is not None
    expected = [c["time_adjusted_price"] for c in grid["comparables"]]
    expected += [a for row in grid["rows"] for a in row["adjustments"]]
    expected += [c["net_adjustment"] for c in grid["comparables"]] + [c["adjusted_price"] for c in grid["comparables"]]
    assert numbers == expected
    assert grid == report["comparables"]


def test_parcel_report_refuses_another_format_before_any_work(fitted_demo: Path, tmp_path: Path) -> None:
    done = reval("parcel", _parcels(fitted_demo)[0], "--project", str(fitted_demo), "--report", str(tmp_path / "p.docx"))
    assert done.returncode == 1 and ".html or .pdf" in done.stderr and not (tmp_path / "p.docx").exists()
