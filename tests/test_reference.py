"""Contributions a board can read (issue 10, item 7): measured from a stated reference parcel of the segment, so a
feature at its reference value (a house not on the water, with "no" as waterfront's baseline) contributes exactly
0 — to its own term and to every interaction it is in — and the parts still add up to the value exactly."""
from __future__ import annotations

from pathlib import Path

import duckdb
import numpy as np
import pytest

from reval.data.config import load_config
from reval.errors import ConfigError
from reval.model.hierarchy import fit_hierarchy
from reval.model.reference import baselines, reference_parcels
from reval.service import views
from test_hierarchy import FAST, FEATURES, simulate


def _fitted() -> tuple:
    X, y, seg, ma = simulate({"s1a": 400, "s2a": 300, "s3b": 300}, seed=31, interaction=0.08)
    model = fit_hierarchy(X, y, seg, ma, FEATURES, FAST)
    assert any(model.interactions(s).shape[0] for s in ("s1a", "s2a", "s3b")), "the planted interaction is selected"
    return model, X, seg, ma


def test_a_feature_at_its_reference_value_contributes_nothing_and_the_parts_add_up() -> None:
    model, X, seg, ma = _fitted()
    # pool's baseline is "no" (0); the other features take the segment's median / lower median.
    refs = reference_parcels(X, seg, FEATURES, {"pool": 0.0})  # type: ignore[arg-type]
    base, terms = model.contributions(X, seg, ma, refs.rows)
    np.testing.assert_allclose(base + np.sum(list(terms.values()), axis=0), model.predict(X, seg, ma), atol=1e-10)
    no_pool = X[:, 3] == 0
    assert no_pool.sum() > 100 and np.abs(terms["pool"][no_pool]).max() < 1e-12
    assert np.abs(terms["pool"][~no_pool]).min() > 1e-3      # a pool does count
    grade_at_reference = X[:, 2] == refs.rows[:, 2]
    for term, part in terms.items():
        if ":" in term:      # an interaction vanishes when either of its features is at the reference
            a, b = term.split(":")
            at_ref = np.isclose(X[:, [f.name for f in FEATURES].index(a)], refs.rows[:, [f.name for f in FEATURES].index(a)]) | \
                np.isclose(X[:, [f.name for f in FEATURES].index(b)], refs.rows[:, [f.name for f in FEATURES].index(b)])
            assert at_ref.any() and np.abs(part[at_ref]).max() < 1e-12, term
    assert np.abs(terms["grade"][grade_at_reference]).max() < 1e-12
    # The reference parcel itself: every part 0 and the base its value.
    base_ref, terms_ref = model.contributions(refs.rows, seg, ma, refs.rows)
    assert max(np.abs(t).max() for t in terms_ref.values()) < 1e-12
    np.testing.assert_allclose(base_ref, model.predict(refs.rows, seg, ma), atol=1e-12)


def test_the_reference_parcel_is_the_segments_typical_one_unless_the_config_names_a_baseline() -> None:
    X = np.array([[1000, 10, 0, 1], [2000, 30, 1, 1], [3000, 50, 3, 0], [500, 5, 2, 0]], dtype=float)
    seg = np.array(["a", "a", "a", "b"])
    refs = reference_parcels(X, seg, FEATURES, {})  # type: ignore[arg-type]
    table = refs.table.set_index(["segment", "feature"])
    assert table.loc[("a", "area"), "value"] == 2000 and table.loc[("a", "area"), "how"] == "median"
    assert table.loc[("a", "grade"), "shown"] == "mid" and table.loc[("a", "grade"), "how"] == "lower median"
    assert table.loc[("a", "pool"), "shown"] == "yes" and table.loc[("a", "pool"), "how"] == "most common"
    chosen = reference_parcels(X, seg, FEATURES, {"pool": 0.0})  # type: ignore[arg-type]
    row = chosen.table.set_index(["segment", "feature"]).loc[("a", "pool")]
    assert (row["value"], row["shown"], row["how"]) == (0.0, "no", "baseline (config)")
    np.testing.assert_array_equal(refs.rows[3], [500, 5, 2, 0])   # a one-parcel segment is its own reference


def test_the_config_baseline_is_checked(tmp_path: Path) -> None:
    from helpers import write_project
    folder = write_project(tmp_path / "p")
    text = (folder / "reval.toml").read_text()
    (folder / "reval.toml").write_text(text.replace('name = "garage"\ntype = "binary"',
                                                    'name = "garage"\ntype = "binary"\nbaseline = "no"'))
    assert baselines(load_config(folder).features) == {"garage": 0.0}
    (folder / "reval.toml").write_text(text.replace('name = "garage"\ntype = "binary"',
                                                    'name = "garage"\ntype = "binary"\nbaseline = "maybe"'))
    with pytest.raises(ConfigError, match="features.*baseline.*not a yes/no value"):
        load_config(folder)
    (folder / "reval.toml").write_text(text.replace('levels = ["low", "average", "good"]',
                                                    'levels = ["low", "average", "good"]\nbaseline = "low"'))
    with pytest.raises(ConfigError, match="only categorical and binary features take a baseline"):
        load_config(folder)


def test_on_the_demo_a_house_off_the_water_shows_waterfront_zero(fitted_demo: Path) -> None:
    # The finding: measured from the segment's average sale, a house not on the water showed "waterfront -1,707"
    # and "lot_size:waterfront -3.9 %". The demo config names "no" as waterfront's baseline.
    con = duckdb.connect(str(fitted_demo / "reval.duckdb"), read_only=True)
    try:
        rows = con.execute("""
            SELECT c.term, max(abs(c.contribution)) AS largest, count(*) AS n
            FROM parcel_contributions c
            JOIN feature_values v ON v.parcel_id = c.parcel_id
            JOIN features f ON f.position = v.position AND f.name = 'waterfront'
            WHERE v.value = 0 AND (c.term = 'waterfront' OR c.term LIKE '%waterfront%')
            GROUP BY c.term""").fetchall()
        (how,), = con.execute("SELECT DISTINCT how FROM segment_references WHERE feature = 'waterfront'").fetchall()
        parcel, = con.execute("""SELECT v.parcel_id FROM feature_values v JOIN features f ON f.position = v.position
                                 WHERE f.name = 'waterfront' AND v.value = 0 ORDER BY v.parcel_id LIMIT 1""").fetchone()
    finally:
        con.close()
    assert how == "baseline (config)"
    assert rows and all(largest < 1e-12 for _, largest, _ in rows)
    detail = views.parcel_detail(fitted_demo, parcel)
    assert detail["split"] is not None
    parts = {p["term"]: p["currency"] for p in detail["split"]["parts"]}
    assert parts["waterfront"] == 0
    assert detail["split"]["base"] + sum(parts.values()) == detail["split"]["value"]   # exact, in currency
    reference = {r["feature"]: r["shown"] for r in detail["reference"]}
    assert reference["waterfront"] == "no" and set(reference) >= {"living_area", "lot_size", "quality"}
