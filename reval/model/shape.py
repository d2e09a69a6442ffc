"""Shape rules: a curve or ordinal effect that never decreases ("increasing") or never increases ("decreasing").

Method: the fit minimises the penalised least-squares objective subject to linear inequalities, one per pair of
neighbouring points of the curve: the difference between them must not go the wrong way. This is a monotone
P-spline in the sense of Bollaerts, Eilers & van Mechelen (2006, Statistical Modelling 6(3)), solved exactly
instead of through their asymmetric penalty: that penalty needs a weight of about 10^6 relative to the data, which
on our nearly singular deviation systems (ridge 10^-9) left Cholesky factors without a correct digit. The
inequality-constrained problem is a least-distance problem after a change of variables and is solved by the
algorithm of Lawson & Hanson (1974, Solving Least Squares Problems, chapter 23) on scipy's non-negative least
squares (reval.model.penalised). Pya & Wood (2015, Statistics and Computing 25(3)) instead reparametrise with
positive increments, which needs a non-linear optimiser and a single basis per curve.

Which curve obeys the rule: the TOTAL curve of a parcel's segment (jurisdiction + market area + segment
deviation), since that is the curve that values a parcel. Constraining each layer on its own would be too
strong: a segment whose living-area curve rises less steeply than its market area's has a decreasing
deviation. So each layer is fitted with its parents' curves held fixed and constrains parents + its own, at points
evenly spaced on the modelling scale over its own training range (every level for an ordinal feature); the
parents, fitted the same way, obey the rule over their wider ranges, so a flat deviation always satisfies it, and
beyond a layer's range its curve is clamped flat. With different knots per layer the total is checked on a fine
grid (GRID_POINTS, about 13 per knot interval of a deviation) rather than through the B-spline coefficients, whose
monotone differences suffice only for a single basis. The rule acts on a feature's curve, i.e. at the mean of its
interaction partners; a selected interaction may still tilt it for parcels far from that mean.

GCV chooses the smoothing penalties of the unconstrained fit; the constraint then acts at those penalties.
"""
from __future__ import annotations

from typing import Protocol, Sequence

import numpy as np

from reval.model.design import DesignSpec
from reval.model.penalised import LinearConstraint

GRID_POINTS = 64  # points per continuous curve where the rule is checked
DIRECTION = {"increasing": 1.0, "decreasing": -1.0}


class Curves(Protocol):
    """A fitted parent layer: its effect of one feature at raw values (reval.model.hierarchy.LevelFit)."""

    def curve(self, feature: str, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]: ...


def shape_constraint(spec: DesignSpec, slices: dict[str, slice], n_columns: int,
                     parents: Sequence[Curves] = ()) -> LinearConstraint | None:
    """The inequalities of every shaped, non-constant feature of a layer (None if it has none): matrix @ coef +
    floor >= 0 holds the signed differences of parents + this layer between neighbouring grid points."""
    rows, floors = [], []
    for t in spec.transforms:
        if t.shape == "free" or t.name not in slices:
            continue
        sign = DIRECTION[t.shape]
        x = spec.shape_grid(t.name, GRID_POINTS)
        steps = np.zeros((len(x) - 1, n_columns))
        steps[:, slices[t.name]] = sign * np.diff(spec.term_columns(t.name, x), axis=0)
        parent = np.sum([p.curve(t.name, x)[0] for p in parents], axis=0) if parents else np.zeros(len(x))
        rows.append(steps)
        floors.append(sign * np.diff(parent))
    if not rows:
        return None
    return LinearConstraint(np.vstack(rows), np.concatenate(floors))
