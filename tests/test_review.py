"""The review report: value-change distribution, large changes, totals and the sales-chasing check."""
from __future__ import annotations

from math import comb
from pathlib import Path

import duckdb
import numpy as np
import pytest
from scipy.stats import norm

from reval.service.actions import review, stage_values
from reval.roll.review import sales_chasing
from helpers import roll_project

CHASED = "QUOR"


def test_fully_separated_samples_match_the_textbook_mann_whitney_p_values() -> None:
    # Mann & Whitney (1947): under H0 every ordering of the n1 + n2 values is equally likely, so when all sold
    # changes exceed all unsold ones U = n1 * n2 and the exact two-sided p = 2 / C(n1 + n2, n1). For larger
    # samples the normal approximation applies: mean n1 n2 / 2, variance n1 n2 (n1 + n2 + 1) / 12, with a
    # continuity correction of 1/2 (any nonparametrics text, e.g. Conover, Practical Nonparametric Statistics).
    small = sales_chasing(np.r_[1.20 + 0.01 * np.arange(7), 1.00 + 0.001 * np.arange(7)],
                          np.arange(14) < 7, min_sales=5)
    assert small["u_statistic"] == 49
    assert small["p_value"] == pytest.approx(2 / comb(14, 7), rel=1e-9)

    sold_changes = 1.20 + 0.01 * np.arange(10)
    unsold_changes = 1.00 + 0.001 * np.arange(10)
    ratios = np.concatenate([sold_changes, unsold_changes])
    sold = np.arange(20) < 10
    out = sales_chasing(ratios, sold, min_sales=10)
    z = (100 - 50 - 0.5) / np.sqrt(10 * 10 * 21 / 12)
    assert out["u_statistic"] == 100
    assert out["p_value"] == pytest.approx(2 * norm.sf(z), rel=1e-9)
    assert out["median_gap"] == pytest.approx(np.median(sold_changes) - np.median(unsold_changes), abs=1e-12)
    assert out["flagged"] and out["status"] == "flagged"
    assert sales_chasing(ratios[5:], sold[5:], min_sales=10)["status"] == "too_few_sales"
    same = sales_chasing(np.concatenate([unsold_changes, unsold_changes]), sold, min_sales=10)
    assert not same["flagged"] and same["median_gap"] == 0


@pytest.fixture
def reviewed(demo_project: Path, tmp_path: Path) -> Path:
    folder = roll_project(demo_project, tmp_path / "p", "review_change_threshold = 0.2\n", chase=(CHASED,))
    stage_values(folder)
    return folder


def test_sales_chasing_is_flagged_where_sold_parcels_took_their_prices(reviewed: Path) -> None:
    report = {s["segment"]: s for s in review(reviewed)["segments"]}
    chased = report[CHASED]["sales_chasing"]
    assert chased["flagged"] and chased["p_value"] < 1e-6
    assert chased["median_change_unsold"] == pytest.approx(0.0, abs=0.005)  # unsold kept (rounded) prior values
    honest = [s for name, s in report.items() if name != CHASED and s["sales_chasing"]["status"] != "too_few_sales"]
    assert len(honest) >= 15
    assert not any(s["sales_chasing"]["flagged"] for s in honest)


def test_review_numbers_match_an_independent_computation(reviewed: Path) -> None:
    segment = "CORV"
    report = review(reviewed, segment, limit=7)
    assert [s["segment"] for s in report["segments"]] == [segment]
    s = report["segments"][0]
    con = duckdb.connect(str(reviewed / "reval.duckdb"), read_only=True)
    f = con.execute("""SELECT v.* FROM roll_values v JOIN batches b USING (batch_id)
                       WHERE b.segment = ? AND b.state = 'staged'""", [segment]).df()
    con.close()
    ratio = (f["market_value"] / f["prior_value"]).to_numpy()
    # numpy's default quantile is linear interpolation (Hyndman & Fan type 7), as DuckDB's quantile_cont.
    expected = np.quantile(ratio, [0.05, 0.25, 0.5, 0.75, 0.95])
    np.testing.assert_allclose(list(s["change_ratio_quantiles"].values()), expected, rtol=1e-12)
    beyond = np.abs(ratio - 1) > 0.2
    assert s["n_beyond_threshold"] == beyond.sum() > 7
    listed = s["beyond_threshold"]
    assert len(listed) == 7
    largest = np.sort(np.abs(ratio[beyond] - 1))[::-1][:7]
    np.testing.assert_allclose([abs(p["change"]) for p in listed], largest, rtol=1e-12)
    assert s["totals"]["market"] == pytest.approx(f["market_value"].sum(), rel=1e-12)
    assert s["totals"]["prior"] == pytest.approx(f["prior_value"].sum(), rel=1e-12)
    assert s["total_change"] == pytest.approx(f["market_value"].sum() / f["prior_value"].sum() - 1, rel=1e-12)
