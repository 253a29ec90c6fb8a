"""Kepler's equation: published values, an mpmath reference, residuals, properties."""
import math

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from orbweigh.kepler import (anomaly_near, eccentric_anomaly, mean_anomaly, sin_cos_anomaly,
                            true_anomaly)

#: The solver's contract: max |E - e sin E - M| below this [rad].
RESIDUAL_TOL = 1e-12

eccentricities = st.floats(0.0, 0.999)
mean_anomalies = st.floats(-1e3, 1e3)


def residual(E, e, M):
    """E - e sin E - M, with E - M formed first: exact for |E - M| < |M| (Sterbenz)."""
    return (E - M) - e * np.sin(E)


# --- published values --------------------------------------------------------------------

@pytest.mark.parametrize("e, M_deg, E_deg, digits", [
    # Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 30, Examples 30.a/30.b (secondary)
    (0.100, 5.0, 5.554589254, 9),
    # Meeus 1998, ch. 30: the hard case e = 0.99, M = 2 deg (secondary)
    (0.99, 2.0, 32.361007, 6),
    # Colwell, Solving Kepler's Equation over Three Centuries (1993), table, M = 5 deg
    # (secondary)
    (0.1, 5.0, 5.554589, 6),
    (0.2, 5.0, 6.246908, 6),
    (0.3, 5.0, 7.134960, 6),
    (0.4, 5.0, 8.313903, 6),
    (0.5, 5.0, 9.950063, 6),
    (0.6, 5.0, 12.356653, 6),
    (0.7, 5.0, 16.167990, 6),
    (0.8, 5.0, 22.656579, 6),
    (0.9, 5.0, 33.344447, 6),
    (0.99, 5.0, 45.361023, 6),
])
def test_published_values_deg(e, M_deg, E_deg, digits):
    E = np.degrees(eccentric_anomaly(np.radians(M_deg), e))
    assert abs(E - E_deg) <= 0.6 * 10.0**-digits


def test_published_value_rad():
    # Meeus 1998, ch. 30, p. 205: e = 0.99, M = 0.2 rad -> E = 1.066997365282 rad (secondary)
    assert abs(eccentric_anomaly(0.2, 0.99) - 1.066997365282) <= 6e-13


# --- mpmath reference at 50 digits -------------------------------------------------------

def mpmath_root(M, e):
    """E from mpmath at 50 digits, bracketed by [M - e, M + e] (|E - M| = |e sin E| <= e)."""
    with mpmath.workdps(50):
        M, e = mpmath.mpf(M), mpmath.mpf(e)  # the exact binary values the solver sees
        if e == 0:
            return M
        return mpmath.findroot(lambda x: x - e * mpmath.sin(x) - M, (M - e, M + e),
                               solver="anderson")


GRID_E = [0.0, 1e-6, 0.1, 0.5, 0.9, 0.99, 0.995, 0.999]
GRID_M = [0.0, 1e-300, 1e-12, 1e-8, 1e-5, 1e-3, 0.05, 0.5, 1.0, 2.0, 3.0,
          math.pi - 1e-3, math.pi - 1e-8, math.pi - 1e-12, math.pi, math.pi + 1e-9,
          -1e-10, -2.5, 7.0, -40.0, 1000.0]


@pytest.mark.parametrize("e", GRID_E)
def test_against_mpmath_grid(e):
    M = np.array(GRID_M)
    E = eccentric_anomaly(M, e)
    ref = np.array([float(mpmath_root(m, e)) for m in M])
    # Conditioning: a residual r moves E by r / (1 - e cos E); allow a few ulp of the
    # residual's scale max(1, |M|) through that derivative, and never more than 1e-12 rel.
    slope = 1.0 / (1.0 - e * np.cos(ref))
    tol = 4 * np.finfo(float).eps * np.maximum(1.0, np.abs(M)) * slope
    assert np.all(np.abs(E - ref) <= np.maximum(tol, 1e-300)), np.abs(E - ref) / tol


def test_tiny_mean_anomaly_relative_accuracy():
    # Near periastron with e -> 1, E ~ (6M)^(1/3) is far larger than M: check E to a
    # relative 1e-12 against mpmath where an absolute test would be empty.
    for e in (0.99, 0.999):
        for M in (1e-15, 1e-10, 1e-6):
            ref = float(mpmath_root(M, e))
            assert abs(eccentric_anomaly(M, e) / ref - 1.0) < 1e-12


# --- residual over many random (M, e) -----------------------------------------------------

def test_residual_random_million():
    rng = np.random.default_rng(20240611)  # seed reported: 20240611
    n = 1_000_000
    M = rng.uniform(-1e3, 1e3, n)
    e = rng.uniform(0.0, 0.999, n)
    # a quarter of the points in the hard corners: e near 0.999 and M near 0 or pi
    k = n // 4
    e[:k] = rng.uniform(0.99, 0.999, k)
    M[:k] = rng.choice([0.0, math.pi, -math.pi], k) + rng.uniform(-1e-3, 1e-3, k)
    E = eccentric_anomaly(M, e)
    assert np.max(np.abs(residual(E, e, M))) < RESIDUAL_TOL


def test_rejects_bad_eccentricity():
    for bad in (-0.1, 1.0, 1.5):
        with pytest.raises(ValueError, match="eccentricity"):
            eccentric_anomaly(1.0, bad)


def test_broadcasting_shape():
    E = eccentric_anomaly(np.linspace(0, 6, 5)[:, None], np.array([0.1, 0.5, 0.9]))
    assert E.shape == (5, 3)
    assert E[2, 1] == eccentric_anomaly(np.linspace(0, 6, 5)[2], 0.5)


# --- hypothesis properties ----------------------------------------------------------------

@settings(max_examples=300, deadline=None)
@given(mean_anomalies, eccentricities)
def test_property_residual(M, e):
    assert abs(residual(eccentric_anomaly(M, e), e, M)) < RESIDUAL_TOL


@settings(max_examples=200, deadline=None)
@given(mean_anomalies, st.floats(1e-9, 10.0), eccentricities)
def test_property_monotonic_in_M(M, dM, e):
    # dE/dM = 1 / (1 - e cos E) >= 1 / (1 + e): a step dM moves E by at least dM / 2
    E1, E2 = eccentric_anomaly([M, M + dM], e)
    assert E2 - E1 >= 0.5 * dM * (1 - 1e-6)


@settings(max_examples=200, deadline=None)
@given(mean_anomalies, eccentricities)
def test_property_odd_symmetry(M, e):
    E_pos, E_neg = eccentric_anomaly([M, -M], e)
    assert abs(E_pos + E_neg) <= 2 * np.finfo(float).eps * max(1.0, abs(M))


@settings(max_examples=200, deadline=None)
@given(st.integers(-300, 300), eccentricities)
def test_property_E_equals_M_at_k_pi(k, e):
    # M = k pi (as a float) is within |k| pi eps of the exact k pi, where E = M exactly;
    # that offset is magnified by 1 / (1 - e) at k even (periastron).
    M = k * math.pi
    E = eccentric_anomaly(M, e)
    offset = 4 * np.finfo(float).eps * max(1.0, abs(M))
    assert abs(E - M) <= offset / (1.0 - e)


@settings(max_examples=200, deadline=None)
@given(mean_anomalies)
def test_property_circular_orbit(M):
    assert abs(eccentric_anomaly(M, 0.0) - M) <= 2 * np.finfo(float).eps * max(1.0, abs(M))


@settings(max_examples=300, deadline=None)
@given(mean_anomalies, eccentricities)
def test_property_true_anomaly(M, e):
    E = float(eccentric_anomaly(M, e))
    nu = float(true_anomaly(E, e))
    # same turn as E (nu and E share their multiples of pi), and
    # cos nu = (cos E - e)/(1 - e cos E), sin nu = sqrt(1-e^2) sin E/(1 - e cos E)
    # (textbook relations, e.g. Meeus 1998, ch. 30)
    assert abs(nu - E) < math.pi
    q = 1.0 - e * math.cos(E)
    assert math.cos(nu) == pytest.approx((math.cos(E) - e) / q, abs=1e-12 / (1 - e))
    assert math.sin(nu) == pytest.approx(math.sqrt(1 - e * e) * math.sin(E) / q,
                                         abs=1e-12 / (1 - e))
    # tan(nu/2) = sqrt((1+e)/(1-e)) tan(E/2), away from the poles of tan
    if abs(math.cos(E / 2)) > 1e-3:
        lhs, rhs = math.tan(nu / 2), math.sqrt((1 + e) / (1 - e)) * math.tan(E / 2)
        assert lhs == pytest.approx(rhs, rel=1e-9, abs=1e-12)


def test_mean_anomaly_quarter_period():
    # M = 2 pi (t - T)/P by definition; a quarter period after periastron M = pi/2
    P, T = 41.623, 1934.008
    M = mean_anomaly([T, T + P / 4, T + P / 2, T - P / 4, T + 3 * P], P, T)
    expected = np.array([0.0, math.pi / 2, math.pi, 1.5 * math.pi, 0.0])
    assert np.all((M >= 0) & (M < 2 * math.pi))
    # compared on the circle: T + 3P may round to just below a whole turn
    assert np.allclose(np.angle(np.exp(1j * (M - expected))), 0.0, atol=1e-12)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-300.0, 300.0), min_size=1, max_size=20), st.floats(0.05, 80.0),
       st.floats(-100.0, 100.0), eccentricities)
def test_sine_and_cosine_at_epochs_are_those_of_the_anomaly(t, period, t_peri, e):
    # sin_cos_anomaly forms M from the phase reduced to a whole turn, and returns the
    # solver's own sin E and cos E (first-order rotation through its last step): they
    # must agree with numpy's sin and cos of eccentric_anomaly(mean_anomaly(...)) within
    # the rounding of M itself (a few turns times the epsilon of 2 pi (t - T) / P).
    from orbweigh.kepler import sin_cos_anomaly
    t = np.array(t)
    M = mean_anomaly(t, period, t_peri)
    E = eccentric_anomaly(M, e)
    sin_e, cos_e = sin_cos_anomaly(t, period, t_peri, e)
    turns = np.abs(t - t_peri) / period
    rounding = 1e-13 * (1.0 + turns) / (1.0 - e)
    assert np.all(np.abs(sin_e - np.sin(E)) < rounding)
    assert np.all(np.abs(cos_e - np.cos(E)) < rounding)


@pytest.mark.parametrize("e", [0.0, 0.3, 0.9, 0.995])
@pytest.mark.parametrize("shift", [1e-7, 1e-3, 0.2, 5.0])
def test_a_solve_started_near_another_solves_kepler_equation(e, shift):
    # The start from a nearby orbit's solution (a least-squares fit's last point) changes
    # only where the iteration begins: the result satisfies Kepler's equation as the cold
    # solve does, however far the "near" orbit is (shift in T, e changed too), across the
    # turn's end (epochs spanning many periods) and at the bracket's corner e -> 1.
    t = np.linspace(1990.0, 2030.0, 97)
    near = anomaly_near(t, 7.3, 2001.2, max(e - 0.01, 0.0))
    sin_e, cos_e, m_red, _ = anomaly_near(t, 7.3, 2001.2 + shift, e, near)
    E = np.arctan2(sin_e, cos_e)
    assert np.max(np.abs(E - e * np.sin(E) - m_red)) < 1e-12
    cold = sin_cos_anomaly(t, 7.3, 2001.2 + shift, e)
    np.testing.assert_allclose(sin_e, cold[0], atol=1e-13)
    np.testing.assert_allclose(cos_e, cold[1], atol=1e-13)
