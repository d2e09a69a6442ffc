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


class Layer(Protocol):
    """A fitted parent layer: the effect of some features at given rows (reval.model.hierarchy.LevelFit)."""

    def curves_at(self, X: np.ndarray, names: Sequence[str]) -> dict[str, np.ndarray]: ...


def shape_constraint(spec: DesignSpec, slices: dict[str, slice], n_columns: int,
                     parents: Sequence[Layer] = ()) -> LinearConstraint | None:
    """The inequalities of every shaped, non-constant feature of a layer (None if it has none): matrix @ coef +
    floor >= 0 holds the signed differences of parents + this layer between neighbouring grid points."""
    grid, shaped = spec.shape_grids(GRID_POINTS)
    shaped = [(name, shape, used) for name, shape, used in shaped if name in slices]
    if not shaped:
        return None
    names = [name for name, _, _ in shaped]
    own = spec.feature_columns(grid, names)
    above = [p.curves_at(grid, names) for p in parents]
    rows, floors = [], []
    for name, shape, used in shaped:
        sign = DIRECTION[shape]
        steps = np.zeros((used - 1, n_columns))
        steps[:, slices[name]] = sign * np.diff(own[name][:used], axis=0)
        parent = np.zeros(used)
        for part in above:
            parent += part.get(name, np.zeros(len(grid)))[:used]
        rows.append(steps)
        floors.append(sign * np.diff(parent))
    return LinearConstraint(np.vstack(rows), np.concatenate(floors))
