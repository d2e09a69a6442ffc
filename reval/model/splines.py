"""P-spline building blocks: a cubic B-spline basis on equally spaced knots and a difference penalty.

Equal knot spacing with a generous number of basis functions and a difference penalty on
adjacent coefficients is the P-spline recipe of Eilers & Marx (1996, Statistical Science 11(2)).
We prefer it to knots at quantiles because the penalty then has a constant meaning along the
axis (a second difference of coefficients approximates a second derivative only when the knots
are equally spaced), and smoothness comes from the penalty, not from where the knots sit.
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import BSpline


def equal_knots(lo: float, hi: float, n_basis: int, degree: int = 3) -> np.ndarray:
    """Full knot vector for `n_basis` B-splines of `degree` with equally spaced knots on [lo, hi]."""
    if n_basis < degree + 1:
        raise ValueError(f"n_basis must be at least degree + 1 = {degree + 1}, got {n_basis}")
    if not hi > lo:
        raise ValueError(f"the range must have hi > lo, got [{lo}, {hi}]")
    inner = np.linspace(lo, hi, n_basis - degree + 1)  # exact end points, so clamped values stay inside
    step = inner[1] - inner[0]
    outer = step * np.arange(1, degree + 1, dtype=float)
    return np.concatenate([lo - outer[::-1], inner, hi + outer])


def bspline_basis(x: np.ndarray, lo: float, hi: float, n_basis: int, degree: int = 3) -> np.ndarray:
    """Dense (n, n_basis) B-spline design matrix on equally spaced knots over [lo, hi].

    Values outside [lo, hi] are clamped to the range first, so a parcel beyond the training
    range gets the boundary value of the curve instead of a polynomial extrapolation.
    """
    knots = equal_knots(lo, hi, n_basis, degree)
    xc = np.clip(np.asarray(x, dtype=float), lo, hi)
    if degree == 3:
        return _cubic_basis(xc, lo, knots[degree + 1] - knots[degree], n_basis)
    return BSpline.design_matrix(xc, knots, degree, extrapolate=False).toarray()


def _cubic_basis(x: np.ndarray, lo: float, step: float, n_basis: int) -> np.ndarray:
    """The cubic case in closed form (`cubic_pieces`), about ten times faster than building scipy's sparse design
    matrix."""
    first, values = _pieces(x, lo, step, n_basis)
    out = np.zeros((len(x), n_basis))
    rows = np.arange(len(x))[:, None]
    out[rows, first[:, None] + np.arange(4)] = values
    return out


def cubic_pieces(x: np.ndarray, n_basis: int) -> tuple[np.ndarray, np.ndarray]:
    """For x clamped to [0, 1]: the index of the first of the four cubic B-splines (equally spaced knots) that are
    non-zero at each value, and their values (n, 4), i.e. the non-zero entries of each row of `bspline_basis`."""
    knots = equal_knots(0.0, 1.0, n_basis)
    return _pieces(np.clip(x, 0.0, 1.0), 0.0, knots[4] - knots[3], n_basis)


def _pieces(x: np.ndarray, lo: float, step: float, n_basis: int) -> tuple[np.ndarray, np.ndarray]:
    """On equally spaced knots the four B-splines that are non-zero in a knot interval are fixed cubics of the
    position t in it (de Boor 2001, A Practical Guide to Splines, the uniform B-spline)."""
    u = (x - lo) / step
    first = np.minimum(np.floor(u), n_basis - 4).astype(np.intp)  # x = hi belongs to the last interval
    t = u - first
    t2, t3 = t * t, t * t * t
    values = np.column_stack([(1.0 - t) ** 3, 3.0 * t3 - 6.0 * t2 + 4.0, -3.0 * t3 + 3.0 * t2 + 3.0 * t + 1.0, t3]) / 6.0
    return first, values


def difference_matrix(n_basis: int, order: int = 2) -> np.ndarray:
    """D, which takes `order`-th differences of adjacent coefficients."""
    if order >= n_basis:
        raise ValueError(f"difference order {order} needs more than {order} coefficients, got {n_basis}")
    return np.diff(np.eye(n_basis), n=order, axis=0)


def difference_penalty(n_basis: int, order: int = 2) -> np.ndarray:
    """Penalty D'D (D from `difference_matrix`)."""
    d = difference_matrix(n_basis, order)
    return d.T @ d
