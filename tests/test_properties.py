"""Property-based tests (hypothesis): the ratio statistics' invariances, and ids and values that come out of
an export exactly as they went into the import.

Ratio statistics (IAAO Standard on Ratio Studies definitions, from memory): multiplying every value by c
multiplies the median ratio by c and leaves COD and PRD unchanged (both are ratios of level measures);
multiplying values and prices alike changes no ratio; the order of the sales changes nothing; COD >= 0;
equal ratios give COD 0 and PRD 1.
"""
from __future__ import annotations

import csv
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from helpers import SMALL_CONFIG, insert_prior_run, set_assessment, write_project
from reval.service.actions import approve, export_roll, import_data, prepare_sales, stage_values
from reval.stats.ratio_stats import cod, prb, prd, ratio_study

REL = 1e-9
prices = st.floats(1e3, 1e7, allow_nan=False, allow_infinity=False)
ratio_values = st.floats(0.2, 5.0, allow_nan=False, allow_infinity=False)
sales = st.integers(1, 120).flatmap(lambda n: st.tuples(st.lists(prices, min_size=n, max_size=n),
                                                         st.lists(ratio_values, min_size=n, max_size=n)))
factors = st.floats(1e-3, 1e3, allow_nan=False, allow_infinity=False)


def _arrays(sale_list: tuple[list[float], list[float]]) -> tuple[np.ndarray, np.ndarray]:
    p = np.array(sale_list[0])
    return p * np.array(sale_list[1]), p


@given(sales, factors)
def test_scaling_the_values_scales_the_median_and_keeps_cod_and_prd(sale_list, c: float) -> None:
    v, p = _arrays(sale_list)
    assert np.median(c * v / p) == pytest.approx(c * np.median(v / p), rel=REL)
    assert cod(c * v / p) == pytest.approx(cod(v / p), rel=REL, abs=1e-9)
    assert prd(c * v, p) == pytest.approx(prd(v, p), rel=REL)


@given(sales, factors)
def test_scaling_values_and_prices_alike_changes_nothing(sale_list, c: float) -> None:
    v, p = _arrays(sale_list)
    assert cod(c * v / (c * p)) == pytest.approx(cod(v / p), rel=REL, abs=1e-9)
    assert prd(c * v, c * p) == pytest.approx(prd(v, p), rel=REL)


@settings(max_examples=40)
@given(sales, st.randoms(use_true_random=False))
def test_the_order_of_the_sales_changes_nothing(sale_list, rnd) -> None:
    v, p = _arrays(sale_list)
    order = list(range(len(v)))
    rnd.shuffle(order)
    a, b = ratio_study(v, p, n_boot=20), ratio_study(v[order], p[order], n_boot=20)
    assert (a.median_ratio, a.cod, a.prd, *a.cod_ci, *a.prd_ci) == pytest.approx(
        (b.median_ratio, b.cod, b.prd, *b.cod_ci, *b.prd_ci), rel=REL, nan_ok=True)
    if len(v) >= 3:
        assert prb(v, p)[0] == pytest.approx(prb(v[order], p[order])[0], rel=1e-7, abs=1e-12, nan_ok=True)


@given(sales)
def test_cod_is_never_negative(sale_list) -> None:
    v, p = _arrays(sale_list)
    assert cod(v / p) >= 0


@given(st.lists(prices, min_size=1, max_size=120), ratio_values)
def test_equal_ratios_give_cod_0_and_prd_1(price_list, r: float) -> None:
    p = np.array(price_list)
    assert prd(r * p, p) == pytest.approx(1.0, rel=1e-12)
    assert cod(np.full(len(p), r)) == 0.0


# ---- import -> export round trips --------------------------------------------------------------------------

# ids as an office might have them: leading zeros, letters of any script, spaces and punctuation inside,
# even a leading = or ' (written to the roll with one more leading quote); no control characters, and no
# white space at either end (the import trims it: documented in reval/data/importer.py)
ID_TEXT = st.text(st.characters(blacklist_categories=("Cc", "Cs", "Zl", "Zp")), min_size=1, max_size=12)
TRIMMED = " \t\n\v\f\r\xa0\ufeff"                     # what the import trims besides Python's white space
ids = ID_TEXT.filter(lambda s: s == s.strip() == s.strip(TRIMMED) != "")
cents = st.integers(1, 10**12)                           # prior values up to 1e10 with two decimals
PARCEL_HEADER = ["pid", "nbhd", "area", "class", "prior", "sqft", "quality", "garage"]


def _write_csv(path: Path, header: list[str], rows: list[list[str]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@example([("=1+1", 100), ("'=1+1", 250), ("007", 99_999_999_999), ("0007", 123_456_789_012), ("Åsgård 12 b", 1)])
@given(st.lists(st.tuples(ids, cents), min_size=2, max_size=40, unique_by=lambda t: t[0]))
def test_ids_and_prior_values_come_out_of_the_export_as_they_went_in(parcels: list[tuple[str, int]]) -> None:
    """Issue finding: ids =1+1 and '=1+1 both exported as '=1+1."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = write_project(Path(tmp) / "p", config=SMALL_CONFIG)
        set_assessment(folder, "rounding = 0\n")       # values = prior values to the cent
        prior = {pid: f"{c // 100}.{c % 100:02d}" for pid, c in parcels}
        _write_csv(folder / "parcels.csv", PARCEL_HEADER,
                   [[pid, "north", "A", "single_family", prior[pid], "1000", "average", "1"] for pid, _ in parcels])
        _write_csv(folder / "sales.csv", ["sale_id", "pid", "date", "price", "code"],
                   [["S1", parcels[0][0], "2024-06-01", "100000", "valid"]])
        import_data(folder)
        prepare_sales(folder)
        insert_prior_run(folder, "run-a", 1.0)
        stage_values(folder)
        approve(folder, "north", "round-trip test")
        out = Path(tmp) / "roll.csv"
        export_roll(folder, out)
        with out.open(newline="", encoding="utf-8") as handle:
            rows = list(csv.DictReader(handle))
    read = {r["parcel_id"][1:] if r["parcel_id"].startswith("'") else r["parcel_id"]: r["prior_market_value"] for r in rows}
    assert read == prior
