"""The structure chosen by evidence (reval/model/structure.py): smooth interactions that pay enter, others do not;
the criterion's arithmetic; the loss; and what a run stores and `reval compare` shows."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path
from types import SimpleNamespace

import numpy as np

from reval.data.store import open_store
from reval.model.design import DesignSpec
from reval.model import POOLING_AREAS, POOLING_SEGMENTS, THIN_CURVES
from reval.model.hierarchy import THIN_BASIS, _choose_pooling, fit_hierarchy
from reval.model.penalised import PenalisedLS
from reval.model.settings import ModelSettings
from reval.model.structure import GCV, INNER_CV, LOO, Deleted, Smooth, candidate_smooths, choose_smooths
from helpers import run_reval as reval

FEATURES = [
    SimpleNamespace(name="area", kind="continuous", log=False, levels=()),
    SimpleNamespace(name="east", kind="continuous", log=False, levels=()),
    SimpleNamespace(name="north", kind="continuous", log=False, levels=()),
    SimpleNamespace(name="corner", kind="binary", log=False, levels=()),
]
SETTINGS = ModelSettings(folds=5, location_surface=("east", "north"))
SEGMENTS = ("Aa", "Ab", "Ba", "Bb")


def town(n: int, seed: int, *, by: float = 0.0, surface: float = 0.0,
         gross: float = 0.0) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Sales with a known truth: log value = segment level + curve of area + east + north + corner, plus `by` x a
    bend of the area curve for corner lots only (zero on average over them) and `surface` x a bump that is not a
    sum of an east and a north curve; noise sd 0.08, and a share `gross` of prices keyed wrong by a factor 10.
    Returns X, y (noisy), truth (noise-free), segment, market area."""
    rng = np.random.default_rng(seed)
    segment = rng.choice(SEGMENTS, n)
    market_area = np.char.add("M", np.char.ljust(segment.astype(str), 1)).astype(str)
    area = rng.uniform(0.0, 1.0, n)
    east, north = rng.uniform(0.0, 1.0, n), rng.uniform(0.0, 1.0, n)
    corner = (rng.random(n) < 0.3).astype(float)
    level = np.select([segment == s for s in SEGMENTS], [0.0, 0.1, -0.1, 0.05])
    truth = (12.0 + level + 0.8 * area + 0.2 * np.sin(2 * np.pi * area) + 0.1 * east - 0.1 * north + 0.1 * corner
             + by * corner * np.sin(2 * np.pi * area)
             + surface * np.exp(-((east - 0.5) ** 2 + (north - 0.5) ** 2) / 0.04))
    y = truth + rng.normal(0.0, 0.08, n)
    keyed = rng.random(n) < gross
    y[keyed] += np.log(10.0) * np.where(rng.random(int(keyed.sum())) < 0.5, 1.0, -1.0)
    return np.column_stack([area, east, north, corner]), y, truth, segment, market_area


def smooths(model: object) -> list[str]:
    return [s.term for s in model.jurisdiction.smooths]  # type: ignore[attr-defined]


def test_a_planted_curve_per_level_is_chosen_and_lowers_held_out_error() -> None:
    X, y, _, seg, ma = town(1200, 1, by=0.15)
    model = fit_hierarchy(X, y, seg, ma, FEATURES, SETTINGS)
    assert smooths(model) == ["area by corner"]
    plain = fit_hierarchy(X, y, seg, ma, FEATURES, dataclasses.replace(SETTINGS, max_smooths=0))
    Xt, _, truth, st, mt = town(3000, 2, by=0.15)  # new sales from the same town: error against the truth
    with_term = np.sqrt(np.mean((model.predict(Xt, st, mt) - truth) ** 2))
    without = np.sqrt(np.mean((plain.predict(Xt, st, mt) - truth) ** 2))
    assert with_term < 0.8 * without


def test_without_an_interaction_no_smooth_enters() -> None:
    for seed in (3, 4):
        X, y, _, seg, ma = town(1200, seed)
        model = fit_hierarchy(X, y, seg, ma, FEATURES, SETTINGS)
        assert smooths(model) == []
        assert any(c.choice == "smooth interactions" and c.candidate == "(none further)" and c.chosen
                   for c in model.choices)


def test_a_planted_location_surface_is_found() -> None:
    X, y, _, seg, ma = town(1200, 5, surface=0.3)
    assert smooths(fit_hierarchy(X, y, seg, ma, FEATURES, SETTINGS)) == ["east x north"]


def test_contributions_of_a_smooth_term_add_up_and_vanish_at_the_reference() -> None:
    X, y, _, seg, ma = town(1200, 1, by=0.15, surface=0.3)
    model = fit_hierarchy(X, y, seg, ma, FEATURES, SETTINGS)
    assert set(smooths(model)) == {"area by corner", "east x north"}
    reference = np.tile(np.median(X, axis=0), (len(X), 1))
    reference[:, 3] = 0.0
    base, parts = model.contributions(X, seg, ma, reference)
    assert np.allclose(base + np.sum(list(parts.values()), axis=0), model.predict(X, seg, ma), atol=1e-10)
    at_reference_area = X.copy()
    at_reference_area[:, 0] = reference[:, 0]
    _, parts_there = model.contributions(at_reference_area, seg, ma, reference)
    assert np.allclose(parts_there["area by corner"], 0.0, atol=1e-12)
    assert np.allclose(parts_there["area"], 0.0, atol=1e-12)
    assert np.abs(parts["area by corner"][X[:, 3] == 1]).max() > 0.05


def test_gcv_and_edf_of_a_candidate_match_an_explicit_hat_matrix() -> None:
    """GCV = n RSS / (n - gamma tr H)^2 with H = X (X'X + S)^-1 X' (Craven & Wahba 1979; Wood 2017, Generalized
    Additive Models, 2nd ed., section 4.2.3, from memory), computed here from the n x n hat matrix of the
    augmented design, against the figure the forward selection stored from its block elimination."""
    X, y, _, _, _ = town(300, 6, by=0.3)
    spec = DesignSpec.learn(X, FEATURES, 8)
    base = PenalisedLS(gamma=1.4).fit(spec.blocks(X), y)
    candidate = Smooth.learn("by", "area", "corner", spec, X, 8)
    assert candidate is not None
    chosen, log = choose_smooths(base, spec, X, [candidate], 1, 1.4, np.arange(len(y)) % 5)
    assert [s.term for s, _ in chosen] == ["area by corner"]
    stored = next(c.value for c in log if c.criterion == GCV and c.candidate == "area by corner")
    blocks = spec.blocks(X) + [candidate.block(spec, X)]
    design = np.hstack([b.columns for b in blocks])
    penalty = np.zeros((design.shape[1],) * 2)
    start, lambdas = 0, list(base.lambdas_) + list(chosen[0][1])
    k = 0
    for b in blocks:
        width = b.columns.shape[1]
        for matrix in b.penalties:
            penalty[start:start + width, start:start + width] += lambdas[k] * matrix
            k += 1
        start += width
    hat = design @ np.linalg.solve(design.T @ design + penalty, design.T)
    edf = np.trace(hat)
    rss = float(np.sum((y - hat @ y) ** 2))
    n = len(y)
    assert abs(stored - n * rss / (n - 1.4 * edf) ** 2) < 1e-6 * stored
    # and the inner cross-validation figure is the mean absolute residual of refits without each fold
    held = np.empty(n)
    folds = np.arange(n) % 5
    for f in range(5):
        train = folds != f
        coef = np.linalg.solve(design[train].T @ design[train] + penalty, design[train].T @ y[train])
        held[~train] = y[~train] - design[~train] @ coef
    inner = next(c.value for c in log if c.criterion == INNER_CV and c.candidate == "area by corner")
    assert abs(inner - np.mean(np.abs(held))) < 1e-6 * inner


def test_candidates_are_curves_per_level_product_upgrades_and_the_surface() -> None:
    X, _, _, _, _ = town(600, 7)
    spec = DesignSpec.learn(X, FEATURES, 12)
    found = [s.term for s in candidate_smooths(spec, X, 8, [("area", "east")], ("east", "north"))]
    assert found == ["area by corner", "east by corner", "north by corner", "east x north", "area x east"]
    thin = X.copy()
    thin[:, 3] = (np.arange(len(X)) < 69).astype(float)  # 69 corner lots: fewer than ten per column of a curve
    assert [s.term for s in candidate_smooths(DesignSpec.learn(thin, FEATURES, 12), thin, 8)] == []


def test_loss_auto_picks_huber_where_prices_hold_gross_errors_and_records_both_figures() -> None:
    X, y, _, seg, ma = town(1200, 8, gross=0.03)
    model = fit_hierarchy(X, y, seg, ma, FEATURES, dataclasses.replace(SETTINGS, loss="auto"))
    loss = {c.candidate: c for c in model.choices if c.choice == "loss"}
    assert loss["huber"].chosen and not loss["squared"].chosen and loss["huber"].criterion == LOO
    assert loss["huber"].value < loss["squared"].value
    assert model.sale_weights is not None and model.sale_weights.weight.min() < 0.5


def test_same_data_same_structure_and_values() -> None:
    X, y, _, seg, ma = town(800, 9, by=0.15)
    one, two = (fit_hierarchy(X, y, seg, ma, FEATURES, SETTINGS) for _ in range(2))
    assert one.choices == two.choices
    assert np.array_equal(one.predict(X, seg, ma), two.predict(X, seg, ma))


def test_the_run_stores_its_structure_and_compare_shows_it(demo_project: Path) -> None:
    data = json.loads(reval("compare", "--project", str(demo_project), "--json").stdout)
    rows = data["structure"]
    with open_store(demo_project / "reval.duckdb", read_only=True) as store:
        stored = store.records("run_structure_rows", [data["run_id"]])
    assert len(rows) == len(stored) > 0
    assert {r["choice"] for r in rows} == {"smooth interactions", "loss", POOLING_AREAS, THIN_CURVES, POOLING_SEGMENTS}
    for key in {(r["step"], r["choice"], r["criterion"]) for r in rows}:  # exactly one candidate chosen per step
        assert sum(r["chosen"] for r in rows if (r["step"], r["choice"], r["criterion"]) == key) == 1
    shown = reval("compare", "--project", str(demo_project), columns=200).stdout
    assert "Structure our model chose" in shown and "leave-one-out" in shown


def test_the_deleted_residuals_are_those_of_refits_without_each_sale() -> None:
    """The leave-one-out identity of a linear smoother at fixed penalties and weights (Wood 2017, Generalized
    Additive Models, section 6.2.2, from memory), checked against one refit per sale, for the full deviation and for
    a share of it."""
    X, y, _, seg, _ = town(60, 11)
    spec = DesignSpec.learn(X, FEATURES, 8, deviation=True)
    offset = 12.0 + 0.5 * X[:, 0]
    weights = np.random.default_rng(3).uniform(0.3, 1.0, len(y))
    first = PenalisedLS().fit(spec.blocks(X), y, offset, weights)
    deleted = Deleted.of(first)
    without = np.empty(len(y))
    for i in range(len(y)):
        rest = np.arange(len(y)) != i
        refit = PenalisedLS(lambdas=first.lambdas_).fit(spec.blocks(X[rest]), y[rest], offset[rest], weights[rest])
        without[i] = refit.predict(spec.blocks(X[i:i + 1]))[0]
    target = y - offset
    for keep in (1.0, 0.6):
        assert np.isclose(deleted.criterion(keep), np.mean(np.abs(target - keep * without)), rtol=1e-8)


def test_pooling_keeps_the_share_of_the_deviations_that_predicts_left_out_sales_best() -> None:
    rng = np.random.default_rng(12)
    true = rng.normal(0.0, 0.1, 500)
    target = true + rng.normal(0.0, 0.01, 500)
    keep, choices = _choose_pooling(Deleted(target, 1.6 * true, np.zeros(500)), POOLING_SEGMENTS, 1)
    assert 0.6 <= keep <= 0.7   # the deviations overshoot 1.6 times: about 1 / 1.6 of them is right
    assert [c.candidate for c in choices if c.chosen] == [f"keep {keep:.0%} of each deviation"]
    assert _choose_pooling(Deleted(target, target, np.zeros(500)), POOLING_SEGMENTS, 1)[0] == 1.0
    assert _choose_pooling(Deleted(target, np.zeros(500), np.zeros(500)), POOLING_SEGMENTS, 1)[0] == 1.0  # a tie


def thin_town(wiggle: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Eight segments of 50 sales (under min_sales_own_selection), each bending the area curve its own way by
    `wiggle` x sin(4 pi area), which no single cubic can follow."""
    rng = np.random.default_rng(21)
    segment = np.repeat([f"S{i}" for i in range(8)], 50)
    market_area = np.where(np.isin(segment, ["S0", "S1", "S2", "S3"]), "MA", "MB")  # both bends in each area
    area, east, north = rng.uniform(0.0, 1.0, (3, len(segment)))
    corner = (rng.random(len(segment)) < 0.3).astype(float)
    sign = np.where(np.isin(segment, ["S0", "S2", "S4", "S6"]), 1.0, -1.0)
    y = 12.0 + 0.8 * area + wiggle * sign * np.sin(4 * np.pi * area) + 0.1 * east + rng.normal(0.0, 0.05, len(segment))
    return np.column_stack([area, east, north, corner]), y, segment, market_area


def test_thin_segments_keep_their_finer_curves_where_their_sales_bend_and_the_choice_is_applied() -> None:
    X, y, seg, ma = thin_town(0.2)
    model = fit_hierarchy(X, y, seg, ma, FEATURES, dataclasses.replace(SETTINGS, location_surface=()))
    thin = {c.candidate: c for c in model.choices if c.choice == THIN_CURVES}
    assert set(thin) == {"8 basis functions", f"{THIN_BASIS} basis functions"}
    assert thin["8 basis functions"].chosen and thin["8 basis functions"].value < thin["4 basis functions"].value
    assert {f.level.spec.n_basis for f in model.segments.values() if f.level is not None} == {8}
    flat = fit_hierarchy(*thin_town(0.0)[:2], seg, ma, FEATURES, dataclasses.replace(SETTINGS, location_surface=()))
    chosen = next(c.candidate for c in flat.choices if c.choice == THIN_CURVES and c.chosen)
    assert {f.level.spec.n_basis for f in flat.segments.values() if f.level is not None} == {int(chosen.split()[0])}
    for choice in (POOLING_AREAS, POOLING_SEGMENTS):
        assert sum(c.chosen for c in model.choices if c.choice == choice) == 1
