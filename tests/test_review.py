"""The review report: value-change distribution, large changes, totals and the sales-chasing check."""
from __future__ import annotations

from math import comb
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
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


def test_kolmogorov_smirnov_on_fully_separated_samples_matches_the_exact_textbook_p_value() -> None:
    # Two-sample Kolmogorov-Smirnov, m = n: when every sold change exceeds every unsold one D = 1, and the exact
    # two-sided p is the share of the C(2n, n) equally likely orderings with D = 1, i.e. 2 / C(2n, n) (Conover,
    # Practical Nonparametric Statistics, the two-sample Smirnov test; from memory). scipy.stats.ks_2samp gives it.
    sold = np.arange(20) < 10
    out = sales_chasing(np.r_[1.20 + 0.01 * np.arange(10), 1.00 + 0.001 * np.arange(10)], sold, min_sales=10)
    assert out["ks_statistic"] == 1.0
    assert out["ks_p_value"] == pytest.approx(2 / comb(20, 10), rel=1e-9)
    # D counts the largest gap between the two empirical distribution functions: shifting 3 of 10 sold values
    # below every unsold value leaves 7/10 of the sold values above them all.
    shifted = np.r_[0.5 + 0.01 * np.arange(3), 1.20 + 0.01 * np.arange(7), 1.00 + 0.001 * np.arange(10)]
    assert sales_chasing(shifted, sold, min_sales=10)["ks_statistic"] == pytest.approx(0.7, abs=1e-12)


def _sales(roll: np.ndarray, oof: np.ndarray, price: np.ndarray) -> pd.DataFrame:
    return pd.DataFrame({"roll_value": roll, "oof_value": oof, "adjusted_price": price, "sale_price": price * 0.9})


def test_values_at_their_prices_and_a_low_cod_are_reasons_to_flag() -> None:
    rng = np.random.default_rng(4)
    n = 200
    price = np.exp(rng.normal(12.5, 0.3, n))
    oof = price * np.exp(rng.normal(0.0, 0.12, n))
    honest = price * np.exp(rng.normal(0.0, 0.10, n))
    changes, sold = rng.lognormal(0.05, 0.1, 2 * n), np.arange(2 * n) < n
    fine = sales_chasing(changes, sold, 10, _sales(honest, oof, price), cod_min=5.0, rounding=100)
    assert fine["status"] == "pass" and fine["reasons"] == []
    # the roll's COD and the out-of-fold COD of the same sales, by the IAAO definition
    r, o = honest / price, oof / price
    assert fine["roll_cod"] == pytest.approx(100 * np.mean(np.abs(r - np.median(r))) / np.median(r), rel=1e-12)
    assert fine["cod_share"] == pytest.approx(fine["roll_cod"] / (100 * np.mean(np.abs(o - np.median(o))) / np.median(o)))
    # 30 % of the sold parcels at their price, rounded to 100: far more values at the price than the model puts there
    chased = np.where(np.arange(n) < 60, np.round(price / 100) * 100, honest)
    out = sales_chasing(changes, sold, 10, _sales(chased, oof, price), cod_min=5.0, rounding=100)
    assert out["flagged"] and out["n_at_price"] >= 60
    assert out["n_at_price"] > 3 * out["expected_at_price"] and out["at_price_p_value"] < 1e-6
    assert any("within 0.5% of their sale price" in reason for reason in out["reasons"])
    # set to the price as sold (not time-adjusted): still at the price
    as_sold = np.where(np.arange(n) < 60, price * 0.9, honest)
    assert sales_chasing(changes, sold, 10, _sales(as_sold, oof, price), rounding=100)["flagged"]
    # every sold parcel at its price: the roll's COD on the sales falls under the low-COD limit and far under
    # the out-of-fold COD
    every = sales_chasing(changes, sold, 10, _sales(np.round(price / 100) * 100, oof, price), cod_min=5.0, rounding=100)
    assert every["roll_cod"] < 0.1
    assert any("below the low-COD limit 5" in reason for reason in every["reasons"])
    assert any("times the out-of-fold COD" in reason for reason in every["reasons"])


@pytest.fixture
def reviewed(demo_project: Path, tmp_path: Path) -> Path:
    folder = roll_project(demo_project, tmp_path / "p", "review_change_threshold = 0.2\n", chase=(CHASED,),
                          chase_share=0.3)
    stage_values(folder)
    return folder


def test_partial_chasing_is_flagged_at_the_demo_sample_sizes_and_honest_segments_pass(reviewed: Path) -> None:
    # 30 % of QUOR's sold parcels valued at their time-adjusted price, every other parcel honest.
    report = {s["segment"]: s for s in review(reviewed)["segments"]}
    chased = report[CHASED]["sales_chasing"]
    assert chased["flagged"] and chased["n_at_price"] > 0.25 * chased["n_sales"]
    honest = [s for name, s in report.items() if name != CHASED and s["sales_chasing"]["status"] != "too_few_sales"]
    assert len(honest) >= 15
    assert not any(s["sales_chasing"]["flagged"] for s in honest), [s["sales_chasing"]["reasons"] for s in honest]


def test_full_chasing_with_an_unbiased_model_is_flagged(demo_project: Path, tmp_path: Path) -> None:
    # Finding: with every sold parcel at its time-adjusted price CORV, QUOR and BRIN passed (Mann-Whitney p
    # 0.41 / 0.61 / 0.37): an unbiased model's chasing narrows the spread and leaves the median change alone.
    folder = roll_project(demo_project, tmp_path / "p", chase=("CORV", "QUOR", "BRIN"))
    stage_values(folder)
    report = {s["segment"]: s["sales_chasing"] for s in review(folder)["segments"]}
    for segment in ("CORV", "QUOR", "BRIN"):
        assert report[segment]["flagged"], segment
        assert abs(report[segment]["median_gap"]) < 0.05   # the level test alone would not see it
        assert report[segment]["roll_cod"] < 0.5 < 5.0 < report[segment]["oof_cod"]


def test_the_honest_demo_fit_is_not_flagged(demo_project: Path) -> None:
    # The shipped demo, fitted by reval and staged by `reval demo`: no segment's values chase its sales.
    report = review(demo_project)["segments"]
    judged = [s for s in report if s["sales_chasing"]["status"] != "too_few_sales"]
    assert len(judged) >= 19
    assert not any(s["sales_chasing"]["flagged"] for s in judged), [(s["segment"], s["sales_chasing"]["reasons"])
                                                                     for s in judged if s["sales_chasing"]["flagged"]]
    assert all(0.6 < s["sales_chasing"]["cod_share"] < 1.05 for s in judged)


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
