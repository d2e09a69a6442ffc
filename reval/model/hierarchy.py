"""The valuation model: a jurisdiction additive model, market-area deviations, and segment deviations.

log value = jurisdiction model (P-spline main effects + selected interactions, all sales)
          + market-area deviation (intercept + curves + interactions, penalised toward zero)
          + segment deviation (the same, on the segment's sales; own interactions when it has enough).
Each deviation's penalties are chosen by GCV, so a segment borrows from its parent exactly as
much as its own sales fail to support; the edf of its deviation says how much it used its own data.

Offsets: each child is fitted on its parent's in-sample predictions (the parent fitted on all training
rows); cross-fitted offsets (`offset_folds`) were measured and were equal or worse (docs/model.md, section
2). GCV's edf is inflated by gamma = 1.4 (Kim & Gu 2004, JRSS B 66(2)) so thin segments borrow more
(docs/model.md, section 3). Interactions: the jurisdiction tests its candidates at familywise level alpha
and the segments that select their own share one more alpha (reval/model/interactions.py). The model is
built on our own P-splines rather than pygam because the selection, the deviations and the contributions
need things pygam does not expose (docs/model.md, section 5).

Outliers (reval/model/robust.py): every sale's weight comes from Huber's loss on the jurisdiction's main effects
+ segment levels + selected pairs (`_screen`), and every layer is fitted at those weights; reweighting again in
each segment, on its own deviation's leave-one-out residuals, was measured slightly worse and slower
(docs/model.md, section 7). A sale of weight below RANGE_WEIGHT spans no layer's curves (`_counted`). Shape rules
(reval/model/shape.py) act on each layer with its parents' curves held fixed, so the total curve obeys them. All
of it is redone inside every fold.

Pooling and thin segments, chosen by evidence per fit (the leave-one-out residuals of each deviation layer, exact for
a linear smoother: structure.Deleted): each layer may keep only a share of its deviations (POOLING_GRID; a share below 1 pulls
every segment further toward its parent than its own GCV did), and the segments under `min_sales_own_selection`
sales get curves of THIN_BASIS basis functions instead of `n_basis_segment` when that predicts their sales left out
better. Both are stored with the run and shown by `reval compare`.

Structure (reval/model/structure.py): on top of the pairs, smooth interactions (curves per level of a factor, surfaces)
enter the jurisdiction layer when GCV and an inner cross-validation on the training sales say they pay, and
`loss = "auto"` picks Huber's loss or least squares by the leave-one-out error; the deviations keep product pairs only.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable, Iterable, Mapping, Sequence

import numpy as np
import pandas as pd
from joblib import Parallel, delayed
from scipy.stats import norm
from threadpoolctl import threadpool_limits

from reval.model import POOLING_AREAS, POOLING_SEGMENTS, RANGE_WEIGHT, THIN_CURVES
from reval.model.design import INTERCEPT, Block, DesignSpec, Feature, Pair, sum_to_zero_basis, typical_value
from reval.model.interactions import candidate_pairs, select_interactions
from reval.model.settings import ModelSettings
from reval.model.penalised import TIE, PenalisedLS, column_slices, stack
from reval.model.robust import Huber, Refined, refine
from reval.model.shape import Layer, shape_constraint
from reval.model.structure import LOO, Choice, Deleted, Smooth, candidate_smooths, choose_smooths, loo_criterion

NO_SALES = "no qualified sales"
GAMMA = 1.4  # GCV inflation of edf (Kim & Gu 2004), see the module docstring
INNER_FOLDS = 5  # inner cross-validation of the structure choice (common practice: 5 or 10 folds)
POOLING_GRID = np.linspace(1.0, 0.0, 11)  # shares of a layer's deviations compared by leave-one-out error (ties: 1)
THIN_BASIS = 4  # the fewest cubic B-splines: one cubic per curve, the thin segments' alternative curves
Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class LevelFit:
    """One fitted layer (the jurisdiction model or a deviation): design, coefficients and their covariance."""

    spec: DesignSpec
    pairs: tuple[Pair, ...]
    coef: np.ndarray
    cov: np.ndarray
    slices: dict[str, slice]
    lambdas: np.ndarray
    penalty_terms: tuple[str, ...]
    edf: float
    n: int
    smooths: tuple[Smooth, ...] = ()  # two-feature smooth terms (reval.model.structure), jurisdiction only

    @classmethod
    def fit(cls, spec: DesignSpec, pairs: Sequence[Pair], X: np.ndarray, y: np.ndarray, offset: np.ndarray | None,
            weights: np.ndarray, parents: Sequence[Layer] = (),
            smooths: Sequence[Smooth] = ()) -> tuple[LevelFit, PenalisedLS]:
        """Fit at the given row weights with GCV-chosen penalties, the total curve over `parents` + this layer held
        to the shape rules; also return the smoother (its factorisation serves selection)."""
        blocks = spec.blocks(X, pairs) + [s.block(spec, X) for s in smooths]
        constraint = shape_constraint(spec, *column_slices(blocks), parents)
        smoother = PenalisedLS(gamma=GAMMA).fit(blocks, y, offset, weights, constraint)
        level = cls(spec, tuple(pairs), smoother.coef_, smoother.cov_, smoother.slices_, smoother.lambdas_,
                    tuple(smoother.penalty_terms_), smoother.edf_, smoother.n_, tuple(smooths))
        return level, smoother

    def shrunk(self, keep: float) -> LevelFit:
        """The layer with its coefficients times `keep` (a deviation pulled further toward its parent; its edf and
        posterior scale alike). For keep in [0, 1] the total curve parent + keep x deviation lies between two curves
        that obey the shape rules, so it obeys them too."""
        return replace(self, coef=self.coef * keep, cov=self.cov * keep**2, edf=self.edf * keep)

    @property
    def n_columns(self) -> int:
        return int(self.coef.shape[0])

    def blocks(self, X: np.ndarray) -> list[Block]:
        return self.spec.blocks(X, self.pairs) + [s.block(self.spec, X) for s in self.smooths]

    def predict(self, X: np.ndarray) -> np.ndarray:
        design, _, _ = stack(self.blocks(X))
        return design @ self.coef

    def contributions(self, X: np.ndarray) -> dict[str, np.ndarray]:
        return {b.term: b.columns @ self.coef[self.slices[b.term]] for b in self.blocks(X)}

    def _smooth_values(self, smooth: Smooth, X: np.ndarray) -> np.ndarray:
        return smooth.columns(self.spec, X) @ self.coef[self.slices[smooth.term]]

    def contributions_from(self, X: np.ndarray, R: np.ndarray) -> dict[str, np.ndarray]:
        """Each term's part of rows X measured from reference rows R (imputed, same shape); they add up to
        predict(X) - predict(R). A main term: its part at X minus at R. A product c za zb of standardised
        features splits around the reference (za0, zb0): the pair keeps c (za - za0)(zb - zb0) and a and b
        get c zb0 (za - za0) and c za0 (zb - zb0), so a feature at its reference value contributes nothing,
        to its own term or to a pair (the functional ANOVA split at a point; docs/model.md). A smooth term h(a, b)
        splits the same way: the pair keeps h(a, b) - h(a0, b) - h(a, b0) + h(a0, b0), a gets h(a, b0) - h(a0, b0)
        and b gets h(a0, b) - h(a0, b0)."""
        at_x, at_r = self.contributions(X), self.contributions(R)
        pairs = {f"{a}:{b}" for a, b in self.pairs} | {s.term for s in self.smooths}
        out = {t: at_x[t] - at_r[t] for t in at_x if t != INTERCEPT and t not in pairs}
        for smooth in self.smooths:
            ia, ib = self.spec.index(smooth.a), self.spec.index(smooth.b)
            a_at_ref, b_at_ref = X.copy(), X.copy()
            a_at_ref[:, ia], b_at_ref[:, ib] = R[:, ia], R[:, ib]
            h_x, h_r = at_x[smooth.term], at_r[smooth.term]
            h_a0 = self._smooth_values(smooth, a_at_ref)
            h_b0 = self._smooth_values(smooth, b_at_ref)
            out[smooth.term] = h_x - h_a0 - h_b0 + h_r
            out[smooth.a] = out.get(smooth.a, 0.0) + h_b0 - h_r
            out[smooth.b] = out.get(smooth.b, 0.0) + h_a0 - h_r
        if self.pairs:
            zx, zr = self.spec.standardised(X), self.spec.standardised(R)
            for a, b in self.pairs:
                c = float(self.coef[self.slices[f"{a}:{b}"]][0])
                ia, ib = self.spec.index(a), self.spec.index(b)
                da, db = zx[:, ia] - zr[:, ia], zx[:, ib] - zr[:, ib]
                out[f"{a}:{b}"] = c * da * db
                out[a] = out.get(a, 0.0) + c * zr[:, ib] * da
                out[b] = out.get(b, 0.0) + c * zr[:, ia] * db
        return out

    def curves_at(self, X: np.ndarray, names: Sequence[str]) -> dict[str, np.ndarray]:
        """Effect of each named feature at raw rows X (features this layer holds constant are left out)."""
        held = [name for name in names if name in self.slices]
        return {name: cols @ self.coef[self.slices[name]] for name, cols in self.spec.feature_columns(X, held).items()}

    def curve(self, feature: str, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Effect of one feature at raw values x, and its posterior variance (zero if the layer lacks it)."""
        if feature not in self.slices:
            return np.zeros(len(x)), np.zeros(len(x))
        s = self.slices[feature]
        cols = self.spec.term_columns(feature, x)
        return cols @ self.coef[s], np.einsum("ij,jk,ik->i", cols, self.cov[s, s], cols)

    def term_coefficient(self, term: str) -> tuple[float, float]:
        """Coefficient and variance of a one-column term (an interaction); zeros if absent."""
        if term not in self.slices:
            return 0.0, 0.0
        i = self.slices[term].start
        return float(self.coef[i]), float(self.cov[i, i])

    def lambdas_by_term(self) -> dict[str, tuple[float, ...]]:
        out: dict[str, tuple[float, ...]] = {}
        for term, lam in zip(self.penalty_terms, self.lambdas):
            out[term] = out.get(term, ()) + (float(lam),)
        return out


@dataclass(frozen=True)
class SegmentFit:
    """A segment's deviation (None when it takes its market area's model) and how it was decided."""

    name: str
    market_area: str
    n_sales: int
    kind: str  # "own" (own interactions), "pooled" (inherited interactions) or "parent_only"
    reason: str
    level: LevelFit | None


@dataclass(frozen=True)
class SaleWeights:
    """Each training sale's weight in the fit, the screening model's leave-one-out residual (log) it was judged on,
    and the scale."""

    weight: np.ndarray
    residual: np.ndarray
    scale: float


def _choose_pooling(deleted: Deleted, choice: str, step: int) -> tuple[float, list[Choice]]:
    """The share of a layer's deviations kept (POOLING_GRID) with the least leave-one-out error, and every
    candidate's figure; 1 (each penalty as GCV chose it) when the layer fitted no sale."""
    if not len(deleted.target):
        return 1.0, []
    values = [deleted.criterion(keep) for keep in POOLING_GRID]
    best = next(i for i, v in enumerate(values) if v <= min(values) * (1 + TIE))  # ties: the most kept
    return float(POOLING_GRID[best]), [Choice(step, choice, f"keep {keep:.0%} of each deviation", LOO, value, i == best)
                                       for i, (keep, value) in enumerate(zip(POOLING_GRID, values))]


def fold_ids(n: int, segment: np.ndarray, seed: int, k: int) -> np.ndarray:
    """Fold id 0..k-1 per row: a seeded permutation dealt round-robin within each segment from a random start.

    Every segment is spread evenly over the folds, and segments with fewer sales than folds do not
    all land in fold 0. Public so reference models can use the very same folds.
    """
    segment = np.asarray(segment)
    if segment.shape != (n,):
        raise ValueError(f"segment must have {n} entries, got {segment.shape}")
    rng = np.random.default_rng(seed)
    _, codes = np.unique(segment, return_inverse=True)
    order = np.lexsort((rng.permutation(n), codes))
    sorted_codes = codes[order]
    first = np.searchsorted(sorted_codes, sorted_codes, side="left")
    start = rng.integers(0, k, size=int(codes.max()) + 1 if n else 0)
    folds = np.empty(n, dtype=np.intp)
    folds[order] = (np.arange(n) - first + start[sorted_codes]) % k
    return folds


def _crossfit(blocks: list[Block], y: np.ndarray, offset: np.ndarray | None, lambdas: np.ndarray,
              folds: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Out-of-fold fitted values (offset excluded) with the penalties held fixed, rescaled to each training size."""
    out = np.zeros(len(y))
    design, _, _ = stack(blocks)
    for k in np.unique(folds):
        test = folds == k
        train = ~test
        if not train.any():
            continue
        part = [Block(b.term, b.columns[train], b.penalties, b.roots) for b in blocks]
        sub_offset = None if offset is None else offset[train]
        fitted = PenalisedLS(lambdas=lambdas * train.mean()).fit(part, y[train], sub_offset, weights[train])
        out[test] = design[test] @ fitted.coef_
    return out


def _fit_segment(name: str, market_area: str, X: np.ndarray, y: np.ndarray, offset: np.ndarray,
                 parent: DesignSpec, features: Sequence[Feature], candidates: Sequence[Pair],
                 inherited: tuple[Pair, ...], settings: ModelSettings, segment_alpha: float,
                 weights: np.ndarray, parents: tuple[LevelFit, ...],
                 n_basis: int | None = None) -> tuple[SegmentFit, Deleted | None]:
    """One segment's deviation on top of its market-area offset, and its leave-one-out view; a pure function, so
    segments can be mapped.

    `segment_alpha` is the level of its own selection: settings.alpha shared (Bonferroni) among the segments
    that select their own, so all segments together add a false pair with probability at most alpha. The
    sales keep their weights from `_screen`; `parents` hold the curves its shape rules add to. `n_basis`: basis
    functions per curve (default settings.n_basis_segment)."""
    n = len(y)
    if n < settings.min_sales_own_deviation:
        reason = NO_SALES if n == 0 else f"only {n} qualified sale(s) (< {settings.min_sales_own_deviation})"
        return SegmentFit(name, market_area, n, "parent_only", reason, None), None
    spec = DesignSpec.learn(X[_counted(weights)], features, n_basis or settings.n_basis_segment, deviation=True,
                            scale_from=parent)
    own = n >= settings.min_sales_own_selection and settings.interaction_rule != "none"
    if own:
        level, smoother = LevelFit.fit(spec, (), X, y, offset, weights, parents)
        varying = [(a, b) for a, b in candidates  # a pair with a feature constant here is no interaction here
                   if not (spec.transforms[spec.index(a)].constant or spec.transforms[spec.index(b)].constant)]
        pairs = tuple(select_interactions(
            smoother, y - offset, spec.products(X, varying), varying, rule=settings.interaction_rule,
            max_interactions=settings.max_interactions, alpha=segment_alpha))
        reason = f"{n} sales >= {settings.min_sales_own_selection}: own interactions"
    else:
        pairs = inherited
        sales = f"{n} sale{'s' if n != 1 else ''}"
        reason = (f"{sales}: interaction rule 'none'" if settings.interaction_rule == "none"
                  else f"{sales} < {settings.min_sales_own_selection}: interactions inherited")
    if pairs or not own:  # an own selection of no pairs leaves the deviation already fitted
        level, smoother = LevelFit.fit(spec, pairs, X, y, offset, weights, parents)
    fit = SegmentFit(name, market_area, n, "own" if own else "pooled", reason, level)
    return fit, Deleted.of(smoother)


def _counted(weights: np.ndarray) -> np.ndarray:
    """The sales a layer learns its design from (ranges, centring): those of weight at least RANGE_WEIGHT (all,
    if none is).

    A sale the fit all but ignores must not stretch a curve's range: beyond the range of the sales it
    rests on, a curve is clamped flat, where it would otherwise continue the spline's trend over ground
    no weighted sale covers (a condominium keyed at 8,010 sq ft did that in the demo).
    """
    counted = weights >= RANGE_WEIGHT
    return counted if counted.any() else np.ones(len(weights), dtype=bool)


def _location_block(segment: np.ndarray) -> Block:
    """Ridge-penalised segment levels (sum to zero over the rows) for the jurisdiction's selection smoother.

    Without them, pairs of features that vary with location (large lots in cheap outer areas) stand in
    for the segment levels that the deviations supply later, and get selected as interactions.
    """
    _, codes = np.unique(segment, return_inverse=True)
    indicators = np.zeros((len(codes), int(codes.max()) + 1))
    indicators[np.arange(len(codes)), codes] = 1.0
    z = sum_to_zero_basis(indicators.mean(axis=0))
    return Block("(segment)", indicators @ z, (z.T @ z,), (z.T,))


def _segment_market_areas(segment: np.ndarray, market_area: np.ndarray) -> dict[str, str]:
    pairs = pd.DataFrame({"s": segment, "m": market_area}).drop_duplicates()
    doubled = pairs["s"][pairs["s"].duplicated()]
    if len(doubled):
        raise ValueError(f"segment {doubled.iloc[0]!r} lies in more than one market area")
    return dict(zip(pairs["s"], pairs["m"]))


def _check_inputs(X: np.ndarray, segment: np.ndarray, market_area: np.ndarray, k: int) -> tuple[np.ndarray, ...]:
    X = np.asarray(X, dtype=float)
    segment = np.asarray(segment).astype(str)
    market_area = np.asarray(market_area).astype(str)
    if X.ndim != 2 or X.shape[1] != k:
        raise ValueError(f"X must be (n, {k}), got {X.shape}")
    if segment.shape != (X.shape[0],) or market_area.shape != (X.shape[0],):
        raise ValueError("segment and market_area need one entry per row of X")
    return X, segment, market_area


def fit_hierarchy(X: np.ndarray, y: np.ndarray, segment: np.ndarray, market_area: np.ndarray,
                  features: Sequence[Feature], settings: ModelSettings, *,
                  segments: Mapping[str, str] | None = None, offset_folds: int = 0,
                  trusted: np.ndarray | None = None, progress: Progress | None = None) -> FittedHierarchy:
    """Fit jurisdiction, market-area and segment layers on sales (y = log time-adjusted price).

    `segments` maps every segment on the roll to its market area, so segments without sales are
    recorded as taking their parent's model. `offset_folds` = k > 1 fits children on k-fold
    cross-fitted parent predictions instead of in-sample ones (the measured alternative, see above).
    `trusted` marks sales an analyst has vouched for: they keep full weight under the robust loss.
    BLAS runs on one thread: the work is thousands of small (p ~ 100) factorisations, where
    threading costs more than it gains; parallelism is across segments (`settings.jobs`).
    """
    X, segment, market_area = _check_inputs(X, segment, market_area, len(features))
    y = np.asarray(y, dtype=float)
    if y.shape != (X.shape[0],) or not np.all(np.isfinite(y)):
        raise ValueError("y must be one finite log price per row of X")
    if offset_folds == 1 or offset_folds < 0:
        raise ValueError(f"offset_folds must be 0 (in-sample offsets) or at least 2, got {offset_folds}")
    fixed = np.zeros(len(y), dtype=bool) if trusted is None else np.asarray(trusted, dtype=bool)
    if fixed.shape != y.shape:
        raise ValueError("trusted needs one entry per row of X")
    with threadpool_limits(limits=1, user_api="blas"):
        return _fit(X, y, segment, market_area, features, settings, segments, offset_folds, fixed, progress)


def _rows_by(labels: np.ndarray) -> dict[str, np.ndarray]:
    """Row indices of each label, in sorted label order (one sort, not one scan per label)."""
    names, codes = np.unique(labels, return_inverse=True)
    order = np.argsort(codes, kind="stable")
    return dict(zip(names.tolist(), np.split(order, np.cumsum(np.bincount(codes, minlength=len(names)))[:-1])))


@dataclass(frozen=True)
class Screened:
    """What the screening model decided: the product pairs, the smooth terms (with the penalties they entered at),
    the sales' weights and the figures of every choice made by evidence (reval.model.structure)."""

    pairs: tuple[Pair, ...]
    smooths: tuple[tuple[Smooth, tuple[float, ...]], ...]
    screen: Refined
    choices: tuple[Choice, ...]


def _screen(spec: DesignSpec, Xi: np.ndarray, y: np.ndarray, segment: np.ndarray, candidates: Sequence[Pair],
            settings: ModelSettings, fixed: np.ndarray) -> Screened:
    """The jurisdiction's interactions, its loss and every sale's starting weight, from the main effects + segment
    levels.

    Weights judged on a model without a true interaction would down-weight exactly the sales that show it
    (on the demo, the large waterfront lots), so pairs and smooth terms are selected first (reval.model.structure,
    by GCV on top of the main effects + segment levels + pairs), the weights come from all of them (at the
    main effects' penalties), and the pair selection is repeated with the weights until the pairs settle (twice at
    most). Under loss "auto" the robust and the squared fit of that model are compared by their mean absolute
    leave-one-out residual.
    """
    products = spec.products(Xi, candidates)
    location = _location_block(segment)
    main = PenalisedLS(gamma=GAMMA).fit(spec.blocks(Xi) + [location], y)

    def select(smoother: PenalisedLS) -> tuple[Pair, ...]:
        return tuple(select_interactions(smoother, y, products, candidates, rule=settings.interaction_rule,
                                         max_interactions=settings.max_interactions, alpha=settings.alpha))

    pairs = select(main)
    smooths: list[tuple[Smooth, tuple[float, ...]]] = []
    choices: list[Choice] = []
    if settings.max_smooths > 0:
        base = PenalisedLS(lambdas=main.lambdas_).fit(spec.blocks(Xi, pairs) + [location], y)
        inner = fold_ids(len(y), segment, settings.seed + 1, INNER_FOLDS)
        found = candidate_smooths(spec, Xi, settings.n_basis_segment, pairs, settings.location_surface)
        smooths, choices = choose_smooths(base, spec, Xi, found, settings.max_smooths, GAMMA, inner,
                                          settings.alpha)
        # a smooth of a pair replaces its product (whose line it holds), and the reselection may not bring it back
        covered = {frozenset((s.a, s.b)) for s, _ in smooths}
        keep = [i for i, c in enumerate(candidates) if frozenset(c) not in covered]
        candidates, products = [candidates[i] for i in keep], products[:, keep]
        pairs = tuple(p for p in pairs if frozenset(p) not in covered)

    def full_fit(chosen: tuple[Pair, ...]) -> PenalisedLS:
        blocks = spec.blocks(Xi, chosen) + [location] + [s.block(spec, Xi) for s, _ in smooths]
        lambdas = np.concatenate([main.lambdas_, *[np.asarray(lam) for _, lam in smooths]])
        return PenalisedLS(lambdas=lambdas).fit(blocks, y, constraint=shape_constraint(spec, *column_slices(blocks)))

    unweighted = Refined(main, np.ones(len(y)), main.resid_, float("nan"), 0)
    if settings.loss == "squared":
        return Screened(pairs, tuple(smooths), unweighted, tuple(choices))
    huber = Huber(settings.huber_k)
    squared_pairs, squared = pairs, full_fit(pairs)
    for attempt in range(2):
        full = squared if attempt == 0 else full_fit(pairs)
        screen = refine(full, huber, fixed=fixed)
        again = select(main.refit(screen.weights)) if attempt == 0 else pairs
        if again == pairs:
            break
        pairs = again
    if settings.loss == "auto":
        robust_value, squared_value = loo_criterion(screen.smoother, screen.residual), loo_criterion(squared)
        robust_wins = robust_value <= squared_value
        step = 1 + max((c.step for c in choices), default=0)
        choices += [Choice(step, "loss", "huber", LOO, robust_value, robust_wins),
                    Choice(step, "loss", "squared", LOO, squared_value, not robust_wins)]
        if not robust_wins:
            return Screened(squared_pairs, tuple(smooths), unweighted, tuple(choices))
    return Screened(pairs, tuple(smooths), screen, tuple(choices))


def _fit(X: np.ndarray, y: np.ndarray, segment: np.ndarray, market_area: np.ndarray, features: Sequence[Feature],
         settings: ModelSettings, segments: Mapping[str, str] | None, offset_folds: int, fixed: np.ndarray,
         progress: Progress | None) -> FittedHierarchy:
    first = DesignSpec.learn(X, features, settings.n_basis_parent)
    candidates = candidate_pairs(features, settings.interaction_candidates)
    screened = _screen(first, first.impute(X), y, segment, candidates, settings, fixed)
    pairs, screen = screened.pairs, screened.screen
    weights = screen.weights
    spec = DesignSpec.learn(X[_counted(weights)], features, settings.n_basis_parent) if np.any(weights < 1) else first
    Xi = spec.impute(X)
    counted = Xi[_counted(weights)]
    smooths = [found for s, _ in screened.smooths
               if (found := Smooth.learn(s.kind, s.a, s.b, spec, counted, s.n_basis)) is not None]
    top, _ = LevelFit.fit(spec, pairs, Xi, y, None, weights, smooths=smooths)
    inner = fold_ids(len(y), segment, settings.seed + 1, offset_folds) if offset_folds else None

    def offset_of(level: LevelFit, rows: np.ndarray, base: np.ndarray | None) -> np.ndarray:
        """The level's predictions on its own rows: in-sample, or cross-fitted over the inner folds."""
        if inner is None:
            return level.predict(Xi[rows])
        blocks = level.blocks(Xi[rows])
        return _crossfit(blocks, y[rows], None if base is None else base[rows], level.lambdas, inner[rows],
                         weights[rows])

    top_offset = offset_of(top, np.arange(len(y)), None)
    areas: dict[str, LevelFit] = {}
    area_rows = _rows_by(market_area)
    area_deleted = []
    for name, rows in area_rows.items():
        dev_spec = DesignSpec.learn(Xi[rows][_counted(weights[rows])], features, settings.n_basis_segment,
                                    deviation=True, scale_from=spec)
        areas[name], smoother = LevelFit.fit(dev_spec, pairs, Xi[rows], y[rows], top_offset[rows], weights[rows],
                                             (top,))
        area_deleted.append(Deleted.of(smoother))
    choices = list(screened.choices)
    step = 1 + max((c.step for c in choices), default=0)
    keep, chosen = _choose_pooling(Deleted.join(area_deleted), POOLING_AREAS, step)
    choices += chosen
    area_offset = np.empty(len(y))
    for name, rows in area_rows.items():
        area_offset[rows] = top_offset[rows] + keep * offset_of(areas[name], rows, top_offset)
        areas[name] = areas[name].shrunk(keep)

    seg_area = _segment_market_areas(segment, market_area)
    groups = _rows_by(segment)
    selecting = sum(len(rows) >= settings.min_sales_own_selection for rows in groups.values())
    segment_alpha = settings.alpha / max(selecting, 1)

    def run(names: Iterable[str], n_basis: int | None = None) -> dict[str, tuple[SegmentFit, Deleted | None]]:
        """Fit the named segments (on `jobs` workers); progress is reported for the first pass over all of them."""
        tasks = (delayed(_fit_segment)(name, seg_area[name], Xi[groups[name]], y[groups[name]],
                                       area_offset[groups[name]], spec, features, candidates, pairs, settings,
                                       segment_alpha, weights[groups[name]], (top, areas[seg_area[name]]), n_basis)
                 for name in names)
        done: dict[str, tuple[SegmentFit, Deleted | None]] = {}
        jobs = -1 if settings.scheduler else settings.jobs
        for result in Parallel(n_jobs=jobs, return_as="generator")(tasks):
            done[result[0].name] = result
            if progress is not None and n_basis is None:
                progress(len(done), len(groups))
        return done

    results = run(groups)
    thin = [name for name, (fit, _) in results.items()
            if fit.level is not None and fit.n_sales < settings.min_sales_own_selection]
    if thin and settings.n_basis_segment > THIN_BASIS:
        step += 1
        fewer = run(thin, THIN_BASIS)
        figures = [Deleted.join([d for _, d in (found[name] for name in thin) if d is not None]).criterion()
                   for found in (results, fewer)]
        use_fewer = figures[1] < figures[0]
        choices += [Choice(step, THIN_CURVES, f"{basis} basis functions", LOO, value, chosen)
                    for basis, value, chosen in ((settings.n_basis_segment, figures[0], not use_fewer),
                                                 (THIN_BASIS, figures[1], use_fewer))]
        if use_fewer:
            results |= fewer
    keep, chosen = _choose_pooling(Deleted.join([d for _, d in results.values() if d is not None]),
                                   POOLING_SEGMENTS, step + 1)
    choices += chosen
    fitted = {name: replace(fit, level=fit.level.shrunk(keep)) if fit.level is not None else fit
              for name, (fit, _) in results.items()}
    for name, area in (segments or {}).items():
        if name not in fitted:
            fitted[name] = SegmentFit(name, area, 0, "parent_only", NO_SALES, None)
    return FittedHierarchy(tuple(features), spec, top, areas, fitted,
                           SaleWeights(weights, screen.residual, screen.scale), tuple(choices))


def out_of_fold(X: np.ndarray, y: np.ndarray, segment: np.ndarray, market_area: np.ndarray,
                features: Sequence[Feature], settings: ModelSettings, *, offset_folds: int = 0,
                trusted: np.ndarray | None = None, fold_targets: Mapping[int, np.ndarray] | None = None,
                progress: Progress | None = None) -> np.ndarray:
    """Out-of-fold log predictions for every sale, the whole procedure (selection, penalties, robust weights and
    shape rules) redone per fold.

    `fold_targets[k]`, when given, is y as fold k's training sales alone make it (their own market trend):
    fold k is fitted on it, and its predictions are returned against y, so that exp(prediction - y) is the
    ratio of the held-out value to the held-out sale's price adjusted by the fold's own trend."""
    X, segment, market_area = _check_inputs(X, segment, market_area, len(features))
    y = np.asarray(y, dtype=float)
    folds = fold_ids(len(y), segment, settings.seed, settings.folds)
    fixed = np.zeros(len(y), dtype=bool) if trusted is None else np.asarray(trusted, dtype=bool)
    out = np.empty(len(y))
    for k in range(settings.folds):
        test = folds == k
        target = y if fold_targets is None else np.asarray(fold_targets[k], dtype=float)
        model = fit_hierarchy(X[~test], target[~test], segment[~test], market_area[~test], features, settings,
                              offset_folds=offset_folds, trusted=fixed[~test])
        out[test] = model.predict(X[test], segment[test], market_area[test]) + (y - target)[test]
        if progress is not None:
            progress(k + 1, settings.folds)
    return out


@dataclass(frozen=True)
class FittedHierarchy:
    """A fitted valuation model: predictions, exact contributions, and per-segment reports."""

    features: tuple[Feature, ...]
    spec: DesignSpec
    jurisdiction: LevelFit
    market_areas: dict[str, LevelFit]
    segments: dict[str, SegmentFit]
    sale_weights: SaleWeights | None = None  # the training sales' weights (None for a model built by hand)
    choices: tuple[Choice, ...] = ()  # the structure chosen by evidence and every candidate's figure

    # ---------------------------------------------------------------- routing
    def _chain(self, segment: str, market_area: str) -> tuple[list[LevelFit], str]:
        fit = self.segments.get(segment)
        area = fit.market_area if fit is not None else market_area
        chain = [self.jurisdiction]
        if area not in self.market_areas:
            return chain, f"market area {area!r} has no sales: jurisdiction model"
        chain.append(self.market_areas[area])
        if fit is None:
            return chain, f"segment {segment!r} not in the fitted model: market-area model"
        if fit.level is None:
            return chain, fit.reason
        return chain + [fit.level], ""

    def _groups(self, segment: np.ndarray, market_area: np.ndarray) -> Iterable[tuple[np.ndarray, list[LevelFit], str]]:
        codes, uniques = pd.MultiIndex.from_arrays([np.asarray(segment).astype(str),
                                                    np.asarray(market_area).astype(str)]).factorize()
        order = np.argsort(codes, kind="stable")
        bounds = np.searchsorted(codes[order], np.arange(len(uniques) + 1))
        for g, (seg, area) in enumerate(uniques):
            chain, reason = self._chain(seg, area)
            yield order[bounds[g]:bounds[g + 1]], chain, reason

    def _layers(self, segment: np.ndarray, market_area: np.ndarray) -> list[tuple[LevelFit, np.ndarray]]:
        """Every layer that applies to some rows, with those rows, so each layer builds one design for all of them.

        Layers come in first-use order, which is jurisdiction, market area, segment along every row's chain."""
        found: dict[int, tuple[LevelFit, list[np.ndarray]]] = {}
        for rows, chain, _ in self._groups(segment, market_area):
            for level in chain:
                found.setdefault(id(level), (level, []))[1].append(rows)
        return [(level, np.concatenate(parts)) for level, parts in found.values()]

    def reasons(self, segment: np.ndarray, market_area: np.ndarray) -> np.ndarray:
        """Per row, why it is valued with a parent's model ("" when its own segment model applies)."""
        out = np.empty(len(segment), dtype=object)
        for rows, _, reason in self._groups(segment, market_area):
            out[rows] = reason
        return out

    # ---------------------------------------------------------------- values
    def predict(self, X: np.ndarray, segment: np.ndarray, market_area: np.ndarray) -> np.ndarray:
        """Log value per row: the sum of the layers that apply to its segment."""
        Xi = self.spec.impute(np.asarray(X, dtype=float))
        out = np.zeros(Xi.shape[0])
        for level, rows in self._layers(segment, market_area):
            out[rows] += level.predict(Xi[rows])
        return out

    def contributions(self, X: np.ndarray, segment: np.ndarray, market_area: np.ndarray,
                      reference: np.ndarray) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """Base and per-term parts of each row's log value, measured from `reference` (raw rows: each row's
        reference parcel, e.g. reval.model.reference.reference_parcels). The base is the reference's log value;
        a feature at its reference value contributes 0; base + parts = `predict` exactly."""
        Xi = self.spec.impute(np.asarray(X, dtype=float))
        Ri = self.spec.impute(np.asarray(reference, dtype=float))
        n = Xi.shape[0]
        base = self.predict(Ri, segment, market_area)
        terms: dict[str, np.ndarray] = {f.name: np.zeros(n) for f in self.features}
        for level, rows in self._layers(segment, market_area):
            for term, part in level.contributions_from(Xi[rows], Ri[rows]).items():
                terms.setdefault(term, np.zeros(n))[rows] += part
        return base, terms

    # ---------------------------------------------------------------- reports per segment
    def _segment_chain(self, segment: str) -> tuple[list[LevelFit], SegmentFit]:
        if segment not in self.segments:
            raise ValueError(f"unknown segment {segment!r}")
        fit = self.segments[segment]
        return self._chain(segment, fit.market_area)[0], fit

    def curves(self, segment: str, feature: str, n_points: int = 50) -> pd.DataFrame:
        """The segment's curve for one feature with a 95% Bayesian band, beside its market area's curve."""
        chain, fit = self._segment_chain(segment)
        j = self.spec.index(feature)
        varying = [level for level in chain if not level.spec.transforms[j].constant]
        x = (varying or chain)[-1].spec.grid(feature, n_points)  # the segment's own range unless it is one value
        parts = [level.curve(feature, x) for level in chain]
        effect = np.sum([p[0] for p in parts], axis=0)
        se = np.sqrt(np.sum([p[1] for p in parts], axis=0))
        own = fit.level is not None
        parent = np.sum([p[0] for p in parts[:-1]], axis=0) if own else effect
        return pd.DataFrame({"x": x, "effect": effect, "lo": effect - 1.96 * se, "hi": effect + 1.96 * se,
                             "parent_effect": parent})

    def interactions(self, segment: str) -> pd.DataFrame:
        """Every interaction acting in the segment: total coefficient along the layers, its se and Wald p-value."""
        chain, _ = self._segment_chain(segment)
        terms = list(dict.fromkeys(f"{a}:{b}" for level in chain for a, b in level.pairs))
        rows = []
        for term in terms:
            parts = [level.term_coefficient(term) for level in chain]
            coef, var = sum(p[0] for p in parts), sum(p[1] for p in parts)
            se = float(np.sqrt(var))
            rows.append((term, coef, se, float(2 * norm.sf(abs(coef) / se)) if se > 0 else float("nan")))
        return pd.DataFrame(rows, columns=["term", "coef", "se", "p_value"])

    def marginal_effects(self, segment: str, X_segment: np.ndarray) -> pd.DataFrame:
        """Value per unit and elasticity of each non-categorical feature at the segment's typical parcel.

        The typical parcel takes `typical_value` of each column of `X_segment` (the rule used for
        imputation). Continuous: central finite difference of the log value, value per unit =
        value x d log value / dx, elasticity = d log value / d log x; ordinal: the value change
        one level up (down at the top level); binary: value at 1 minus value at 0.
        """
        fit = self.segments.get(segment)
        if fit is None:
            raise ValueError(f"unknown segment {segment!r}")
        X_segment = np.asarray(X_segment, dtype=float)
        base = np.array([typical_value(X_segment[:, j], f.kind) for j, f in enumerate(self.features)])
        rows, names, kinds, steps = [], [], [], []
        for j, t in enumerate(self.spec.transforms):
            if t.kind == "categorical":
                continue
            lo_x, hi_x = base.copy(), base.copy()
            if t.kind == "continuous":
                h = 1e-4 * max(t.raw_hi - t.raw_lo, 1e-12)
                lo_x[j], hi_x[j] = base[j] - h, base[j] + h
            elif t.kind == "ordinal":
                level = base[j]
                lo_x[j], hi_x[j] = (level, level + 1) if level < t.n_levels - 1 else (level - 1, level)
            else:
                lo_x[j], hi_x[j] = 0.0, 1.0
            rows += [lo_x, hi_x]
            names.append(t.name)
            kinds.append(t.kind)
            steps.append(hi_x[j] - lo_x[j])
        grid = np.vstack([base] + rows)
        logv = self.predict(grid, np.full(len(grid), segment), np.full(len(grid), fit.market_area))
        slope = (logv[2::2] - logv[1::2]) / np.array(steps)
        value = np.exp(logv[0])
        x0 = np.array([base[self.spec.index(nm)] for nm in names])
        continuous = np.array(kinds) == "continuous"
        per_unit = np.where(continuous, value * slope, np.exp(logv[2::2]) - np.exp(logv[1::2]))
        elasticity = np.where(continuous & (x0 > 0), slope * x0, np.nan)
        return pd.DataFrame({"feature": names, "value_per_unit": per_unit, "elasticity": elasticity})

    def summary(self, segment: str) -> dict[str, object]:
        """How the segment was modelled: sales, kind, reason, deviation edf and columns, the share borrowed
        (1 - edf / columns), the pairs in its own deviation (own or inherited) and its penalties. The share is of
        the columns a deviation of its market area's basis would have, so a thin segment's coarser curves
        (THIN_BASIS) count as borrowed."""
        chain, fit = self._segment_chain(segment)
        level = fit.level
        edf = level.edf if level is not None else 0.0
        share = 0.0
        if level is not None:
            curves = sum(t.kind == "continuous" and not t.constant for t in level.spec.transforms)
            full = level.n_columns + curves * max(chain[-2].spec.n_basis - level.spec.n_basis, 0)
            share = edf / full
        return {
            "segment": fit.name,
            "market_area": fit.market_area,
            "n_sales": fit.n_sales,
            "kind": fit.kind,
            "reason": fit.reason,
            "edf_deviation": edf,
            "deviation_columns": level.n_columns if level is not None else 0,
            "own_share": share,
            "borrowed_share": 1.0 - share,
            "interactions": [f"{a}:{b}" for a, b in (level.pairs if level is not None else ())],
            "lambdas": level.lambdas_by_term() if level is not None else {},
        }
