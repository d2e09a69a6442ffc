"""The jurisdiction model's structure chosen by evidence on the training sales: which two-feature smooths enter,
and which loss the fit uses.

Two kinds of smooth interaction can enter beside the main-effect curves and the product pairs of
reval.model.interactions:
- "by": a curve of a continuous feature per level of a categorical or yes/no feature, penalised toward the common
  curve (a factor-by smooth, Wood 2017, Generalized Additive Models, 2nd ed., section 5.3.2, from memory): each
  level other than the most common one gets a deviation curve, averaging zero over its own sales (so it is no
  level effect), with a second-difference penalty and a ridge on the straight line it leaves unpenalised (the
  double penalty of Marra & Wood 2011); with both penalties large the level follows the common curve exactly.
  A level gets its own curve only when it has ten sales per column of it (the common-practice ten per term of
  reval.model.interactions): measured on Ames, a building type of 8-70 sales given a basement-area curve raised the
  out-of-fold COD by 0.1.
- "tensor": a tensor-product smooth of two continuous features, built from marginal P-spline bases of TENSOR_BASIS
  functions, each centred over the training rows, so the term holds the pair's joint effect only, not the main
  effects (the "ti" construction of Wood 2017, section 5.6.3, from memory); one penalty per margin (the Kronecker
  products S_a x I and I x S_b). Latitude x longitude is the 2-D location surface.

Which enter: forward selection by GCV = n RSS / (n - gamma edf)^2 (Craven & Wahba 1979; Wood 2017, section
4.2.3), edf the trace of the hat matrix, the criterion the penalised fits already use for their smoothing. Each
round scores every remaining candidate at its best smoothing multiplier (a grid of decades, the other terms'
penalties held) and adds the best one if it lowers GCV; the rounds stop when none does. A candidate's score needs
no refit: with A0 = X'WX + S the current system and Z the candidate's columns, block elimination gives the
candidate's coefficients from the q x q system (M + t S_z) c = Z'W r0, M = Z'WZ - Z'WX A0^-1 X'WZ, r0 the current
residuals; the residuals become r0 - Zt c and the hat matrix grows by Zt (M + t S_z)^-1 Zt'W, Zt = Z - X A0^-1 X'WZ,
so RSS = r0'Wr0 - 2 c'Zt'W r0 + c'Zt'WZt c and edf = edf0 + tr((M + t S_z)^-1 Zt'WZt) follow from p x q products
computed once (tests/test_structure.py checks them against full refits and an explicit hat matrix).

Loss: "auto" compares least squares and Huber's loss on the same screening model by the mean absolute
leave-one-out residual of the training sales (r_i / (1 - h_ii), exact for a linear smoother at fixed penalties and
weights; Huber's weights held at their converged values). The absolute value because the ratio study's COD is a
mean absolute deviation: a criterion in squares would favour chasing the gross errors Huber's loss discounts.

Honesty: the choice uses only the sales the model is fitted on. `reval fit` makes it on all sales for the
roll's model and again inside every outer fold on that fold's training sales alone, so no held-out sale ever
informs the structure that values it, and the out-of-fold ratio study judges the whole procedure.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Literal, Sequence

import numpy as np
from scipy.linalg import block_diag, cho_factor, cho_solve
from scipy.stats import norm

from reval.model.design import Block, DesignSpec, sum_to_zero_basis
from reval.model.interactions import DF_PER_CANDIDATE
from reval.model.penalised import JITTER, LOG10_GRID, TIE, PenalisedLS
from reval.model.splines import bspline_basis, difference_matrix

TENSOR_BASIS = 5  # basis functions per margin of a tensor smooth (mgcv's default for te/ti; Wood 2017, from memory)
SmoothKind = Literal["by", "tensor"]
GCV = "GCV"
FoldPart = tuple[np.ndarray, np.ndarray, np.ndarray]  # an inner fold's rows, its X'WX and X'W target
INNER_CV = "inner 5-fold mean |error|"
LOO = "mean |leave-one-out residual|"
MIN_SLACK = 1e-3  # 1 - leverage is held at least this far from 0 in a deleted residual (a sale that alone fits a term)


@dataclass(frozen=True)
class Choice:
    """One candidate of one step of the structure choice: its criterion's value and whether it was chosen."""

    step: int
    choice: str
    candidate: str
    criterion: str
    value: float
    chosen: bool


@dataclass(frozen=True)
class Smooth:
    """A two-feature smooth term learned from training rows (see the module docstring): `a` is the curve's feature
    (by) or the first margin (tensor), `b` the factor (by) or the second margin; `levels` the factor levels with a
    curve of their own (by); `bases` the sum-to-zero null-space bases, per level (by) or per margin (tensor)."""

    kind: SmoothKind
    a: str
    b: str
    n_basis: int
    levels: tuple[int, ...]
    bases: tuple[np.ndarray, ...]

    @property
    def term(self) -> str:
        return term_name(self.kind, self.a, self.b)

    @classmethod
    def learn(cls, kind: SmoothKind, a: str, b: str, spec: DesignSpec, X: np.ndarray, n_basis: int) -> Smooth | None:
        """The term learned on raw training rows X, or None when the rows cannot support it (a constant feature,
        no level other than the most common with enough sales)."""
        ta, tb = spec.transforms[spec.index(a)], spec.transforms[spec.index(b)]
        if ta.constant or tb.constant or ta.kind != "continuous":
            return None
        T = spec.transformed(X)
        if kind == "by":
            if tb.kind not in ("binary", "categorical"):
                return None
            basis = _margin(T, spec, a, n_basis)
            codes = np.rint(T[:, spec.index(b)]).astype(np.intp)
            seen, counts = np.unique(codes, return_counts=True)
            common = seen[np.argmax(counts)]
            need = DF_PER_CANDIDATE * (n_basis - 1)  # sales per column of the level's curve
            levels = tuple(int(v) for v, c in zip(seen, counts) if v != common and c >= need)
            if not levels:
                return None
            bases = tuple(sum_to_zero_basis(basis[codes == v].mean(axis=0)) for v in levels)
            return cls(kind, a, b, n_basis, levels, bases)
        if tb.kind != "continuous":
            return None
        margins = tuple(sum_to_zero_basis(_margin(T, spec, f, TENSOR_BASIS).mean(axis=0)) for f in (a, b))
        return cls(kind, a, b, TENSOR_BASIS, (), margins)

    def columns(self, spec: DesignSpec, X: np.ndarray) -> np.ndarray:
        """The term's columns for raw rows X (imputed and clamped to the training range like every curve)."""
        T = spec.transformed(X)
        basis = _margin(T, spec, self.a, self.n_basis)
        if self.kind == "by":
            codes = np.rint(T[:, spec.index(self.b)])
            return np.hstack([(codes == v)[:, None] * (basis @ z) for v, z in zip(self.levels, self.bases)])
        ma = basis @ self.bases[0]
        mb = _margin(T, spec, self.b, self.n_basis) @ self.bases[1]
        return (ma[:, :, None] * mb[:, None, :]).reshape(len(T), -1)

    def penalties(self) -> tuple[tuple[np.ndarray, np.ndarray], ...]:
        """(matrix, root) of every penalty over the term's columns. A by term has two, shared by its levels: the
        wiggle of every level's curve and the straight line each leaves free (one smoothing multiplier each, as
        mgcv's factor-smooth interaction "fs" shares them; Wood 2017, section 5.8, from memory): fewer penalties
        for GCV to search, and a thin level borrows its smoothness from the others."""
        d = difference_matrix(self.n_basis, 2)
        if self.kind == "by":
            roots = [z.T @ d.T for z in self.bases]
            lines = []
            for root in roots:
                vals, vecs = np.linalg.eigh(root @ root.T)
                lines.append(vecs[:, vals < 1e-9 * max(float(vals.max()), 1.0)])  # the line the wiggle leaves free
            return tuple((r @ r.T, r) for r in (block_diag(*roots), block_diag(*lines)))
        ra, rb = (z.T @ d.T for z in self.bases)
        ia, ib = np.eye(ra.shape[0]), np.eye(rb.shape[0])
        return tuple((root @ root.T, root) for root in (np.kron(ra, ib), np.kron(ia, rb)))

    def block(self, spec: DesignSpec, X: np.ndarray) -> Block:
        pens = self.penalties()
        return Block(self.term, self.columns(spec, X), tuple(m for m, _ in pens), tuple(r for _, r in pens))


def term_name(kind: SmoothKind, a: str, b: str) -> str:
    """The term's name in contributions and tables: "living_area by waterfront", "latitude x longitude"."""
    return f"{a} by {b}" if kind == "by" else f"{a} x {b}"


def _margin(T: np.ndarray, spec: DesignSpec, feature: str, n_basis: int) -> np.ndarray:
    """B-spline basis of one continuous feature over its training range (modelling scale, clamped)."""
    t = spec.transforms[spec.index(feature)]
    x = np.clip(T[:, spec.index(feature)], t.lo, t.hi)
    return bspline_basis((x - t.lo) / (t.hi - t.lo if t.hi > t.lo else 1.0), 0.0, 1.0, n_basis)


def candidate_smooths(spec: DesignSpec, X: np.ndarray, n_basis: int, pairs: Sequence[tuple[str, str]] = (),
                      surface: Sequence[str] = ()) -> list[Smooth]:
    """The candidate smooth terms the training rows X support, in feature order: every by term (continuous feature x
    categorical or yes/no feature), a tensor smooth for each product pair of two continuous features (to replace
    the product), and the location surface (the two features of `surface`).

    Tensor smooths of every continuous pair were measured and rejected: on Ames they stood in for the segments'
    own curves and raised the out-of-fold COD from 7.64 to 7.78 (docs/model.md, section 11); refitting selected
    pairs as 2-D smooths and a location surface were the measured gains (docs/model.md, section 1)."""
    for name in surface:
        if name not in spec.names:
            raise ValueError(f"location_surface: unknown feature {name!r}")
        if spec.transforms[spec.index(name)].kind != "continuous":
            raise ValueError(f"location_surface: feature {name!r} is not continuous")
    kinds = [(t.name, t.kind) for t in spec.transforms if not t.constant]
    curves = [name for name, kind in kinds if kind == "continuous"]
    factors = [name for name, kind in kinds if kind in ("binary", "categorical")]
    found = [Smooth.learn("by", x, g, spec, X, n_basis) for g in factors for x in curves]
    tensors = [tuple(surface)] if surface else []
    tensors += [p for p in pairs if p[0] in curves and p[1] in curves and set(p) != set(surface)]
    found += [Smooth.learn("tensor", a, b, spec, X, n_basis) for a, b in tensors]
    return [s for s in found if s is not None]


@dataclass
class _Current:
    """The current model of the forward selection: design, weighted products and its factorised system."""

    X: np.ndarray
    penalty: np.ndarray  # the p x p penalty at the current multipliers
    gram: np.ndarray
    xtr: np.ndarray  # X'W target
    target: np.ndarray
    w: np.ndarray
    gamma: float

    def __post_init__(self) -> None:
        p = self.gram.shape[0]
        jitter = JITTER * max(float(np.trace(self.gram)) / max(p, 1), 1e-12)
        self.chol = cho_factor(self.gram + self.penalty + jitter * np.eye(p), lower=True)
        self.coef = cho_solve(self.chol, self.xtr)
        self.resid = self.target - self.X @ self.coef
        self.rss = float(self.w @ self.resid**2)
        self.edf = float(np.einsum("ij,ji->", cho_solve(self.chol, np.eye(p)), self.gram))
        self.gcv = _gcv(len(self.target), self.rss, self.edf, self.gamma)


def _gcv(n: int, rss: float, edf: float, gamma: float) -> float:
    dof = n - gamma * edf
    return n * rss / dof**2 if dof > 1e-8 else float("inf")


def _score(cur: _Current, Z: np.ndarray, xtz: np.ndarray, pens: Sequence[np.ndarray]) -> tuple[float, float]:
    """The lowest GCV of the current model + columns Z over the grid of multipliers of Z's penalties (moved
    together, each on the scale of Z's Gram matrix), and the multiplier (log10) reaching it."""
    n = len(cur.target)
    wz = Z * cur.w[:, None]
    ztz = Z.T @ wz
    sol = cho_solve(cur.chol, xtz)  # A0^-1 X'WZ
    M = ztz - xtz.T @ sol
    K = ztz - xtz.T @ sol - sol.T @ xtz + sol.T @ cur.gram @ sol  # Zt'W Zt
    g = wz.T @ cur.resid  # Z'W r0: the candidate's right-hand side
    h = g - sol.T @ (cur.X.T @ (cur.w * cur.resid))  # Zt'W r0 (X'W r0 = S b0 is not zero under a penalty)
    S = sum(f * s for f, s in zip(_scales(ztz, pens), pens))
    q = Z.shape[1]
    jitter = JITTER * max(float(np.trace(ztz)) / max(q, 1), 1e-12) * np.eye(q)
    # M + t S = L (I + t U diag(s) U') L' with L L' = M and L^-1 S L^-T = U diag(s) U', so each t costs O(q^2)
    try:
        root = np.linalg.cholesky(M + jitter)
    except np.linalg.LinAlgError:
        return float("inf"), float(LOG10_GRID[-1])
    half = np.linalg.solve(root, np.column_stack([S, g, h, K]))  # L^-1 [S | g | h | K]
    inner = np.linalg.solve(root, half[:, :q].T).T  # L^-1 S L^-T
    s_vals, U = np.linalg.eigh((inner + inner.T) / 2)
    a = U.T @ half[:, q]  # U' L^-1 g
    e = U.T @ half[:, q + 1]  # U' L^-1 h
    B = U.T @ np.linalg.solve(root, half[:, q + 2:].T).T @ U  # U' L^-1 K L^-T U
    t = 10.0 ** LOG10_GRID[::-1, None]  # from the smoothest down, so ties favour smoothing
    d = 1.0 / (1.0 + t * np.maximum(s_vals, 0.0)[None, :])  # (grid, q)
    ad = a[None, :] * d  # U' L' c for every t
    rss = np.maximum(cur.rss - 2.0 * ad @ e + np.einsum("ti,ij,tj->t", ad, B, ad), 0.0)
    edf = cur.edf + d @ np.diag(B)
    values = np.array([_gcv(n, r, f, cur.gamma) for r, f in zip(rss, edf)])
    best, where = np.inf, float(LOG10_GRID[-1])
    for value, rho in zip(values, LOG10_GRID[::-1]):
        if value < best * (1 - TIE):
            best, where = float(value), float(rho)
    return best, where


def _scales(ztz: np.ndarray, pens: Sequence[np.ndarray]) -> list[float]:
    """Each penalty's factor putting it on the scale of its term's Gram matrix, so one multiplier suits them all."""
    size = float(np.linalg.norm(ztz))
    return [size / max(float(np.linalg.norm(s)), 1e-300) for s in pens]


def _fold_parts(X: np.ndarray, target: np.ndarray, w: np.ndarray, folds: np.ndarray) -> list[FoldPart]:
    """Per inner fold: its rows, and their X'WX and X'W target (subtracted from the whole to leave the fold out)."""
    out: list[FoldPart] = []
    for k in np.unique(folds):
        rows = np.flatnonzero(folds == k)
        xw = X[rows] * w[rows, None]
        out.append((rows, xw.T @ X[rows], xw.T @ target[rows]))
    return out


def _augmented(parts: list[FoldPart], X: np.ndarray, Z: np.ndarray, target: np.ndarray,
               w: np.ndarray) -> list[FoldPart]:
    """The fold parts of the design [X, Z] from those of X."""
    out: list[FoldPart] = []
    for rows, gram, xty in parts:
        zw = Z[rows] * w[rows, None]
        cross = X[rows].T @ zw
        out.append((rows, np.block([[gram, cross], [cross.T, zw.T @ Z[rows]]]), np.concatenate([xty, zw.T @ target[rows]])))
    return out


def _held_out(cur: _Current, parts: list[FoldPart]) -> np.ndarray:
    """Each row's residual when its inner fold is left out of the fit, at the current penalties."""
    out = np.empty(len(cur.target))
    p = cur.gram.shape[0]
    for rows, gram, xty in parts:
        train = cur.gram - gram
        jitter = JITTER * max(float(np.trace(train)) / max(p, 1), 1e-12)
        coef = cho_solve(cho_factor(train + cur.penalty + jitter * np.eye(p), lower=True), cur.xtr - xty)
        out[rows] = cur.target[rows] - cur.X[rows] @ coef
    return out


def choose_smooths(base: PenalisedLS, spec: DesignSpec, X: np.ndarray, candidates: Sequence[Smooth],
                   max_terms: int, gamma: float, folds: np.ndarray,
                   alpha: float = 0.05) -> tuple[list[tuple[Smooth, tuple[float, ...]]], list[Choice]]:
    """Forward selection of smooth terms on top of a fitted smoother (its design, weights and penalties held): the
    terms chosen with the penalties (lambdas) they entered at, and every candidate's figures per round.

    Each round's best candidate by GCV must also pass the inner cross-validation over `folds` (the training rows
    only): the mean absolute held-out error must fall by more than one standard error of the paired differences
    (the one-standard-error rule, Hastie, Tibshirani & Friedman 2009, The Elements of Statistical Learning,
    section 7.10), because GCV alone, minimised over many candidates, admits terms that only fit noise (on the
    demo four such terms raised the out-of-fold COD). X are the raw rows the smoother was fitted on; at most
    `max_terms` terms enter."""
    w = np.ones(base.n_) if base.weights_ is None else base.weights_
    design = base.design_
    penalty = np.zeros((design.shape[1], design.shape[1]))
    for lam, pen in zip(base.lambdas_, base.penalties_):
        penalty[pen.cols, pen.cols] += lam * pen.matrix
    blocks = [s.block(spec, X) for s in candidates]
    widths = np.cumsum([0] + [b.columns.shape[1] for b in blocks])
    Z_all = np.hstack([b.columns for b in blocks]) if blocks else np.zeros((len(w), 0))
    xtz_all = design.T @ (Z_all * w[:, None])
    cur = _Current(design, penalty, base.gram_, base.xty_, base.target_, w, gamma)
    parts: list[FoldPart] = []  # computed when a candidate first passes GCV
    error = np.zeros(0)
    log: list[Choice] = []
    chosen: list[tuple[Smooth, tuple[float, ...]]] = []
    left = list(range(len(blocks)))
    step = 0
    while left and len(chosen) < max_terms:
        step += 1
        scores = {i: _score(cur, blocks[i].columns, xtz_all[:, widths[i]:widths[i + 1]], blocks[i].penalties)
                  for i in left}
        best = min(left, key=lambda i: (scores[i][0], i))
        enters = scores[best][0] < cur.gcv * (1 - TIE)
        rows = [Choice(step, "smooth interactions", candidates[i].term, GCV, scores[i][0], False) for i in left]
        if enters:
            Z, pens = blocks[best].columns, blocks[best].penalties
            wz = Z * w[:, None]
            ztz = Z.T @ wz
            lambdas = tuple(10.0 ** scores[best][1] * f for f in _scales(ztz, pens))
            q = Z.shape[1]
            new_penalty = np.zeros((cur.X.shape[1] + q,) * 2)
            new_penalty[: -q, : -q] = cur.penalty
            new_penalty[-q:, -q:] = sum(lam * s for lam, s in zip(lambdas, pens))
            xtz = xtz_all[:, widths[best]:widths[best + 1]]
            new = _Current(np.hstack([cur.X, Z]), new_penalty, np.block([[cur.gram, xtz], [xtz.T, ztz]]),
                           np.concatenate([cur.xtr, wz.T @ cur.target]), cur.target, w, gamma)
            if not parts:
                parts = _fold_parts(cur.X, cur.target, w, folds)
                error = np.abs(_held_out(cur, parts))
            new_parts = _augmented(parts, cur.X, Z, cur.target, w)
            new_error = np.abs(_held_out(new, new_parts))
            gain = error - new_error
            z = gain.mean() / max(gain.std(ddof=1) / np.sqrt(len(gain)), 1e-300)
            enters = bool(z > norm.ppf(1 - alpha))
            log += [Choice(step, "smooth interactions", "(none further)", INNER_CV, float(error.mean()), not enters),
                    Choice(step, "smooth interactions", candidates[best].term, INNER_CV, float(new_error.mean()),
                           enters)]
        log += [Choice(step, "smooth interactions", "(none further)", GCV, cur.gcv, not enters)]
        log += [r if r.candidate != candidates[best].term else dataclasses.replace(r, chosen=enters) for r in rows]
        if not enters:
            break
        before = cur.gcv
        cur, parts, error = new, new_parts, new_error
        xtz_all = np.vstack([xtz_all, wz.T @ Z_all])
        chosen.append((candidates[best], lambdas))
        # later rounds score only the candidates that improved on the model before this round's term
        left = [i for i in left if i != best and scores[i][0] < before * (1 - TIE)]
    return chosen, log


def loo_criterion(smoother: PenalisedLS, residual: np.ndarray | None = None) -> float:
    """Mean absolute leave-one-out residual of a fitted smoother's rows (r / (1 - h) at its weights), or of the
    given deleted residuals."""
    if residual is None:
        residual = smoother.resid_ / np.maximum(1.0 - smoother.leverage(), MIN_SLACK)
    return float(np.mean(np.abs(residual)))


@dataclass(frozen=True)
class Deleted:
    """A deviation layer's leave-one-out view of its sales: the target it fitted (y - parent offset), its fitted
    deviation and each sale's leverage (at its weight), from which the deletion residual of any share `keep` of
    the deviation follows without a refit."""

    target: np.ndarray
    fitted: np.ndarray
    leverage: np.ndarray

    @classmethod
    def of(cls, smoother: PenalisedLS) -> Deleted:
        return cls(smoother.target_, smoother.target_ - smoother.resid_, smoother.leverage())

    @classmethod
    def join(cls, parts: Sequence[Deleted]) -> Deleted:
        return cls(*(np.concatenate([getattr(p, f) for p in parts]) if parts else np.zeros(0)
                     for f in ("target", "fitted", "leverage")))

    def criterion(self, keep: float = 1.0) -> float:
        """Mean absolute leave-one-out residual with the deviation scaled by `keep` (`loo_criterion`'s
        figure): the sale's own deviation prediction without it is (f - h t) / (1 - h), exact for a linear smoother
        at fixed penalties and weights (Wood 2017, section 6.2.2, from memory)."""
        if not len(self.target):
            return float("nan")
        h = np.minimum(self.leverage, 1.0 - MIN_SLACK)
        without = (self.fitted - h * self.target) / (1.0 - h)
        return float(np.mean(np.abs(self.target - keep * without)))
