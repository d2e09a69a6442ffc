"""B-spline basis and difference penalty against textbook properties."""

import numpy as np
import pytest
from scipy.interpolate import BSpline

from reval.model.splines import bspline_basis, difference_penalty, equal_knots


def test_basis_is_a_partition_of_unity() -> None:
    # de Boor (1978), A Practical Guide to Splines: B-splines of one degree sum to 1 inside the knot range.
    x = np.random.default_rng(1).uniform(3.0, 11.0, 500)
    B = bspline_basis(x, 3.0, 11.0, n_basis=10)
    assert B.shape == (500, 10)
    np.testing.assert_allclose(B.sum(axis=1), 1.0, atol=1e-12)
    assert B.min() >= 0.0


def test_uniform_cubic_values_at_a_knot() -> None:
    # Uniform cubic B-spline at an interior knot takes the values 1/6, 2/3, 1/6 on its three
    # non-zero basis functions (standard result, e.g. Eilers & Marx 1996, Statistical Science, fig. 1).
    knots = equal_knots(0.0, 1.0, n_basis=8)
    x_knot = knots[5]  # an interior knot (third inner breakpoint)
    row = bspline_basis(np.array([x_knot]), 0.0, 1.0, n_basis=8)[0]
    nonzero = row[row > 1e-12]
    np.testing.assert_allclose(nonzero, [1 / 6, 2 / 3, 1 / 6], atol=1e-12)


def test_basis_reproduces_scipy_spline_evaluation() -> None:
    # Reference library: scipy.interpolate.BSpline evaluates sum_j c_j B_j(x) directly from the knots.
    knots = equal_knots(-2.0, 5.0, n_basis=12)
    coef = np.random.default_rng(2).normal(size=12)
    x = np.linspace(-2.0, 5.0, 97)
    np.testing.assert_allclose(bspline_basis(x, -2.0, 5.0, 12) @ coef, BSpline(knots, coef, 3)(x), atol=1e-12)


@pytest.mark.parametrize("n_basis", [4, 5, 8, 12, 20])
def test_closed_form_cubic_basis_equals_scipys_design_matrix(n_basis: int) -> None:
    # Reference library: scipy.interpolate.BSpline.design_matrix on the same knots, at random points, at every
    # knot and at both ends (the right end belongs to the last interval).
    knots = equal_knots(-1.0, 3.0, n_basis)
    x = np.r_[np.random.default_rng(3).uniform(-1.0, 3.0, 400), knots[3:-3], -1.0, 3.0]
    reference = BSpline.design_matrix(x, knots, 3, extrapolate=False).toarray()
    np.testing.assert_allclose(bspline_basis(x, -1.0, 3.0, n_basis), reference, atol=1e-13)


def test_values_outside_the_range_are_clamped_to_the_boundary() -> None:
    # docs/model.md, section 1, point 4: a parcel outside the training range gets the boundary value, no extrapolation.
    B = bspline_basis(np.array([-10.0, 0.0, 1.0, 40.0]), 0.0, 1.0, n_basis=9)
    np.testing.assert_array_equal(B[0], B[1])
    np.testing.assert_array_equal(B[3], B[2])


@pytest.mark.parametrize("order", [1, 2, 3])
def test_difference_penalty_null_space_is_polynomials_below_the_order(order: int) -> None:
    # Eilers & Marx (1996): a difference penalty of order d leaves polynomials of degree < d in the
    # coefficients unpenalised, so its rank is n - d.
    n = 10
    S = difference_penalty(n, order)
    idx = np.arange(n, dtype=float)
    for degree in range(order):
        np.testing.assert_allclose(S @ idx**degree, 0.0, atol=1e-9)
    assert np.linalg.matrix_rank(S) == n - order
    assert idx**order @ S @ idx**order > 0


def test_second_difference_penalty_matches_the_worked_form() -> None:
    # b'D'Db = sum_i (b_i - 2 b_{i+1} + b_{i+2})^2 (Eilers & Marx 1996, eq. 5).
    b = np.array([1.0, 4.0, 2.0, 7.0, 3.0])
    expected = sum((b[i] - 2 * b[i + 1] + b[i + 2]) ** 2 for i in range(3))
    assert b @ difference_penalty(5, 2) @ b == pytest.approx(expected, rel=1e-12)


def test_bad_arguments_are_refused() -> None:
    with pytest.raises(ValueError):
        bspline_basis(np.zeros(3), 1.0, 1.0, 8)
    with pytest.raises(ValueError):
        bspline_basis(np.zeros(3), 0.0, 1.0, 3)
