"""The bounded least-squares solver against closed-form and scipy answers."""
import numpy as np
import pytest
from scipy.optimize import least_squares

from orbweigh.bounded_least_squares import _Transform, fit_bounded

RNG = np.random.default_rng(7)
DESIGN = np.column_stack([np.ones(40), np.linspace(-1, 1, 40), np.linspace(-1, 1, 40) ** 2])
TRUTH = np.array([1.5, -0.7, 0.3])
DATA = DESIGN @ TRUTH + 0.05 * RNG.standard_normal(40)


def residuals(x):
    return (DESIGN @ x - DATA) / 0.05


def jacobian(x):
    return DESIGN / 0.05


@pytest.mark.parametrize("with_jacobian", [True, False])
def test_interior_solution_and_covariance_are_those_of_linear_least_squares(with_jacobian):
    # A linear model: the solution is numpy's lstsq and the covariance inv(J^T J)
    # (weighted least squares, any textbook), whatever the (inactive) bounds.
    expected = np.linalg.lstsq(DESIGN / 0.05, DATA / 0.05, rcond=None)[0]
    out = fit_bounded(residuals, [1.0, 0.0, 0.0], [0.0, -5.0, -np.inf], [10.0, np.inf, np.inf],
                      [True, True, True], jacobian if with_jacobian else None)
    assert out.success
    np.testing.assert_allclose(out.x, expected, rtol=1e-6)
    J = DESIGN / 0.05
    np.testing.assert_allclose(out.covariance, np.linalg.inv(J.T @ J), rtol=1e-4, atol=1e-10)


def test_active_bound_and_held_parameter_match_scipy_trust_region():
    # Slope held at -0.7, intercept bounded above by 1.2 (the data want about 1.5):
    # scipy's bounded trust-region solver on the two free parameters is the reference.
    def reduced(v):
        return residuals(np.array([v[0], -0.7, v[1]]))

    ref = least_squares(reduced, [1.0, 0.0], bounds=([0.0, -np.inf], [1.2, np.inf]),
                        xtol=1e-12, ftol=1e-12).x
    out = fit_bounded(residuals, [1.0, -0.7, 0.0], [0.0, -np.inf, -np.inf],
                      [1.2, np.inf, np.inf], [True, False, True], jacobian)
    assert out.x[1] == -0.7
    np.testing.assert_allclose(out.x[[0, 2]], ref, atol=1e-5)


def test_robust_loss_matches_scipy_directly():
    out = fit_bounded(residuals, [1.0, 0.0, 0.0], [-np.inf] * 3, [np.inf] * 3, [True] * 3,
                      jacobian, loss="soft_l1")
    ref = least_squares(residuals, [1.0, 0.0, 0.0], jac=jacobian, loss="soft_l1",
                        method="trf", ftol=1e-8, xtol=1e-8, gtol=1e-8)
    np.testing.assert_allclose(out.x, ref.x, rtol=1e-10)
    np.testing.assert_allclose(out.covariance, np.linalg.inv(ref.jac.T @ ref.jac), rtol=1e-8)


def test_spent_budget_returns_the_last_point_unconverged():
    calls = []

    def counted(x):
        calls.append(np.array(x))
        return residuals(x)

    out = fit_bounded(counted, [9.0, 3.0, -2.0], [-np.inf] * 3, [np.inf] * 3, [True] * 3,
                      max_nfev=2)
    assert not out.success and out.covariance is None
    np.testing.assert_array_equal(out.x, calls[-1])


@pytest.mark.parametrize("lower, upper", [(0.0, 1.0), (0.0, np.inf), (-np.inf, 2.0),
                                          (-np.inf, np.inf)])
def test_internal_variable_round_trip_and_derivative(lower, upper):
    transform = _Transform(np.array([lower]), np.array([upper]))
    x = np.array([0.3])
    u = transform.to_internal(x)
    np.testing.assert_allclose(transform.to_external(u), x, rtol=1e-12)
    h = 1e-6       # central difference of the external value
    numeric = (transform.to_external(u + h) - transform.to_external(u - h)) / (2 * h)
    np.testing.assert_allclose(transform.gradient(u), numeric, rtol=1e-6)


def test_nonlinear_fit_matches_minpack():
    # A damped oscillation started far from its solution: scipy's MINPACK
    # Levenberg-Marquardt (least_squares method='lm') is the reference solution, with and
    # without an analytic Jacobian, and inv(J^T J) there the reference covariance.
    t = np.linspace(0.0, 10.0, 80)
    truth = np.array([2.0, 0.3, 1.7, 0.4])
    rng = np.random.default_rng(5)

    def model(p):
        return p[0] * np.exp(-p[1] * t) * np.cos(p[2] * t + p[3])

    data = model(truth) + 0.02 * rng.standard_normal(t.size)

    def resid(p):
        return (model(p) - data) / 0.02

    def jac(p):
        decay, phase = np.exp(-p[1] * t), p[2] * t + p[3]
        return np.column_stack([decay * np.cos(phase), -t * p[0] * decay * np.cos(phase),
                                -t * p[0] * decay * np.sin(phase),
                                -p[0] * decay * np.sin(phase)]) / 0.02

    start = [1.0, 0.1, 1.6, 0.0]
    ref = least_squares(resid, start, jac=jac, method="lm", xtol=1e-15, ftol=1e-15)
    J = jac(ref.x)
    for jacobian in (jac, None):
        out = fit_bounded(resid, start, [-np.inf] * 4, [np.inf] * 4, [True] * 4, jacobian)
        assert out.success
        np.testing.assert_allclose(out.x, ref.x, rtol=1e-6)
        expected = np.linalg.inv(J.T @ J)   # forward differences: 1e-4 of the largest term
        np.testing.assert_allclose(out.covariance, expected, rtol=1e-4,
                                   atol=1e-4 * np.abs(expected).max())


def test_no_covariance_with_a_variance_not_above_zero():
    # The first two parameters enter only through their sum: J^T J is singular, and its
    # numerical inverse can come out with negative variances (this start does on x86-64
    # with OpenBLAS). A covariance is then either refused or has every variance positive
    # (a huge one, which the fit reports as undetermined), never a negative or zero one.
    def resid(x):
        return (DESIGN @ np.array([x[0] + x[1], x[2], x[3]]) - DATA) / 0.05

    for start in ([1.0, 0.3, 0.0, 0.0], [0.2, 0.9, -0.5, 0.1], [-1.0, 2.0, 0.3, 0.3]):
        out = fit_bounded(resid, start, [-np.inf] * 4, [np.inf] * 4, [True] * 4)
        assert out.covariance is None or np.all(np.diag(out.covariance) > 0.0)
