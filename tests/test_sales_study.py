"""Sales qualification, time adjustment wiring and stored ratio studies, on real databases."""
from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pytest

from helpers import copy_project
from reval.service.actions import prepare_sales, study
from reval.data.config import load_config
from reval.stats.ratio_stats import ratio_study
from reval.data.store import open_store
from reval.stats.stored import load_study

REQUIRED_KEYS = {"group", "n", "median_ratio", "median_ratio_ci", "mean_ratio", "weighted_mean_ratio", "cod",
                 "cod_ci", "prd", "prd_ci", "prb", "prb_ci", "verdicts", "values_source"}


def _con(folder: Path) -> duckdb.DuckDBPyConnection:
    return duckdb.connect(str(folder / "reval.duckdb"), read_only=True)


def test_every_excluded_sale_keeps_its_reason(demo_project: Path) -> None:
    con = _con(demo_project)
    total = con.execute("SELECT count(*) FROM sales").fetchone()[0]
    rows = con.execute("SELECT qualified, reason FROM sale_qualification").fetchall()
    assert len(rows) == total
    assert all((q and r is None) or (not q and r) for q, r in rows)
    # Rules from data_samples/demo/reval.toml: only code 'valid' kept, multi-parcel sales excluded.
    bad = con.execute("""SELECT count(*) FROM sale_qualification q JOIN sales s USING (sale_id, parcel_id)
                         WHERE q.qualified AND (s.validity <> 'valid'
                            OR s.sale_id IN (SELECT sale_id FROM sales GROUP BY 1 HAVING count(*) > 1)
                            OR s.sale_date < DATE '2023-01-01')""").fetchone()[0]
    assert bad == 0
    reasons = dict(con.execute("SELECT reason, count(*) FROM sale_qualification WHERE NOT qualified GROUP BY 1").fetchall())
    assert reasons["multi-parcel sale"] > 0 and reasons["before the sale window"] > 0
    con.close()


def test_adjusted_prices_use_the_stored_index(demo_project: Path) -> None:
    # A sale placed by day between two stored months takes the index interpolated linearly between them.
    con = _con(demo_project)
    sales = con.execute("""SELECT a.factor, a.adjusted_price, s.sale_price, a.month_offset, a.trend_area
                           FROM adjusted_sales a JOIN sales s USING (sale_id, parcel_id)""").df()
    trend = con.execute("SELECT area, month_offset, log_index FROM market_trend ORDER BY area, month_offset").df()
    con.close()
    assert (sales["month_offset"] != np.round(sales["month_offset"])).mean() > 0.9   # by day, not by month
    for area, rows in sales.groupby("trend_area"):
        index = trend[trend["area"] == area]
        expected = np.exp(-np.interp(rows["month_offset"], index["month_offset"], index["log_index"]))
        np.testing.assert_allclose(rows["factor"], expected, rtol=1e-12)
    np.testing.assert_allclose(sales["adjusted_price"], sales["sale_price"] * sales["factor"], rtol=1e-12)


def test_study_json_has_the_promised_shape_and_matches_ratio_stats(demo_writable: Path) -> None:
    result = study(demo_writable, "prior", "segment")
    assert result["values_source"] == "prior" and result["by"] == "segment"
    assert len(result["groups"]) >= 20
    for group in result["groups"]:
        assert REQUIRED_KEYS <= set(group)
        assert set(group["verdicts"]) == {"median_ratio", "cod", "prd", "prb"}
    json.dumps(result, allow_nan=False)  # strict JSON: missing values are null, never NaN
    # The stored numbers are ratio_stats' numbers on the same sales (one implementation, no drift).
    con = _con(demo_writable)
    name = result["groups"][0]["group"]
    value, price = map(np.array, zip(*con.execute(
        """SELECT p.prior_value, a.adjusted_price FROM adjusted_sales a JOIN parcels p USING (parcel_id)
           WHERE p.segment = ? AND p.prior_value > 0""", [name]).fetchall()))
    con.close()
    config = load_config(demo_writable)
    direct = ratio_study(value, price, confidence=config.study.confidence, n_boot=config.study.bootstrap,
                         seed=config.study.seed, trim_iqr_k=config.study.trim_iqr_k)
    g = result["groups"][0]
    assert g["n"] == direct.n and g["cod"] == pytest.approx(direct.cod, abs=1e-12)
    assert g["prb_ci"] == pytest.approx(list(direct.prb_ci), abs=1e-12)
    assert g["cod_ci"] == pytest.approx(list(direct.cod_ci), abs=1e-12)


def test_stored_study_reads_back_without_recomputing(demo_writable: Path) -> None:
    computed = study(demo_writable, "prior", "market_area")
    config = load_config(demo_writable)
    with open_store(config.database, read_only=True) as store:
        assert load_study(store, "prior", "market_area") == computed


def test_trimmed_sales_are_listed_not_dropped(demo_writable: Path) -> None:
    result = study(demo_writable, "prior", "all")
    group = result["groups"][0]
    assert group["n_trimmed"] == len(group["trimmed"])
    con = _con(demo_writable)
    n_all = con.execute("SELECT count(*) FROM adjusted_sales a JOIN parcels p USING (parcel_id) "
                        "WHERE p.prior_value > 0").fetchone()[0]
    con.close()
    assert group["n"] + group["n_trimmed"] == n_all


def test_failed_sales_step_changes_nothing(demo_project: Path, tmp_path: Path) -> None:
    folder = copy_project(demo_project, tmp_path / "copy")
    from helpers import database_content

    before = database_content(folder / "reval.duckdb")
    config = folder / "reval.toml"
    config.write_text(config.read_text().replace('validity_codes_kept = ["valid"]',
                                                 'validity_codes_kept = ["no_such_code"]'))
    from reval.errors import UserError

    with pytest.raises(UserError, match="No sale qualifies"):
        prepare_sales(folder)
    assert database_content(folder / "reval.duckdb") == before


def test_a_handful_of_sales_still_gets_an_index_with_an_honest_band(small_project: Path) -> None:
    """With fewer sales than the trend has parameters the noise cannot be estimated: the index is stored,
    its band is NULL (unknown) or finite, never a made-up number."""
    from reval.data.importer import run_import

    run_import(load_config(small_project))
    result = prepare_sales(small_project)
    assert result["qualified"] == 3  # S4 covers two parcels (multi-parcel, excluded by default)
    con = _con(small_project)
    rows = con.execute("SELECT log_index, lo, hi FROM market_trend").fetchall()
    adjusted = con.execute("SELECT count(*) FROM adjusted_sales").fetchone()[0]
    con.close()
    assert adjusted == 3 and rows
    assert all(np.isfinite(i) for i, _, _ in rows)
    assert all((lo is None and hi is None) or (lo <= i <= hi) for i, lo, hi in rows)


def test_every_segment_is_a_group_and_those_without_sales_say_so(demo_writable: Path) -> None:
    # Finding: segments with no qualified sale were missing from the study. TORV (Torvel Hollow) has none by
    # construction (data_samples/demo_town.py).
    con = _con(demo_writable)
    segments = [r[0] for r in con.execute("SELECT segment FROM segments ORDER BY 1").fetchall()]
    pairs = con.execute("SELECT DISTINCT segment, property_class FROM parcels ORDER BY ALL").fetchall()
    con.close()
    by_segment = study(demo_writable, "prior", "segment")
    assert [g["group"] for g in by_segment["groups"]] == segments
    torv = next(g for g in by_segment["groups"] if g["group"] == "TORV")
    assert torv["n"] == 0 and {v["status"] for v in torv["verdicts"].values()} == {"no_sales"}
    by_class = study(demo_writable, "prior", "segment_class")
    assert [g["group"] for g in by_class["groups"]] == [f"{s} / {c}" for s, c in pairs]
    assert all(g["property_class"] == g["group"].split(" / ")[1] for g in by_class["groups"])  # each class's own limit
    assert {v["status"] for v in next(g for g in by_class["groups"] if g["group"].startswith("TORV"))["verdicts"].values()} \
        == {"no_sales"}


def test_value_proxy_deciles_are_stored_beside_price_deciles(demo_project: Path) -> None:
    # Finding: out-of-fold medians ran 1.033 -> 0.963 by price decile but 1.013 -> 0.984 by the value proxy:
    # sorting by price alone exaggerates regressivity (prices high by chance sort to the top).
    config = load_config(demo_project)
    with open_store(config.database, read_only=True) as store:
        run = store.rows("roll_latest_run")[0][0]
        whole = load_study(store, "model_out_of_fold", "all", run)["groups"][0]
    by_price, by_proxy = whole["decile_median_ratios"], whole["proxy_decile_median_ratios"]
    assert len(by_proxy) == 10 and None not in by_proxy
    assert by_price[0] - by_price[9] > 1.5 * abs(by_proxy[0] - by_proxy[9])


def test_the_sales_step_says_when_no_trend_is_estimated(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Every sale within one month: no trend, every factor 1, the band unknown; `reval sales` says so, the
    # event keeps it and `reval sales --report` repeats it.
    from helpers import SMALL_CONFIG, SMALL_PARCELS, write_project
    from reval.cli.main import main
    from reval.data.importer import run_import

    sales = ("sale_id,pid,date,price,code\nS1,00101,2024-09-01,180000,valid\nS2,00102,2024-09-15,260000,valid\n"
             "S3,00104,2024-09-30,140000,valid\n")
    folder = write_project(tmp_path / "p", SMALL_CONFIG, SMALL_PARCELS, sales)
    run_import(load_config(folder))
    assert main(["sales", "--project", str(folder)]) == 0
    out = " ".join(capsys.readouterr().out.split())   # rich wraps lines at the terminal's width
    assert "Market trend: jurisdiction: the sales span 1.0 months (under 2): no market trend is estimated" in out
    con = _con(folder)
    assert con.execute("SELECT DISTINCT factor FROM adjusted_sales").fetchall() == [(1.0,)]
    assert con.execute("SELECT count(*) FROM market_trend WHERE lo IS NOT NULL OR hi IS NOT NULL").fetchone()[0] == 0
    con.close()
    assert main(["sales", "--report", "--json", "--project", str(folder)]) == 0
    report = json.loads(capsys.readouterr().out)
    assert len(report["trend_notes"]) == 1 and "factor 1" in report["trend_notes"][0]
