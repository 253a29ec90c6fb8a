"""The synthetic-log generator: agreement with orbweigh's ephemeris (the one place the
two independent code paths meet), its noise, planted flips and outliers."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from synthetic import make_log, sky_positions, solve_kepler

ORBIT = dict(P=24.0, T=2003.3, e=0.62, a=0.85, i=48.0, Omega=112.0, omega=250.0)
EPOCHS = np.linspace(1995.0, 2030.0, 40)


@settings(max_examples=60, deadline=None)
@given(P=st.floats(0.5, 800.0), T=st.floats(1900.0, 2100.0), e=st.floats(0.0, 0.97),
       a=st.floats(0.01, 20.0), i=st.floats(0.0, 180.0), Omega=st.floats(0.0, 360.0),
       omega=st.floats(0.0, 360.0))
def test_agrees_with_orbweigh_ephemeris(P, T, e, a, i, Omega, omega):
    el = dict(P=P, T=T, e=e, a=a, i=i, Omega=Omega, omega=omega)
    t = T + P * np.linspace(-1.3, 2.1, 37)
    _, _, x, y = sky_positions(el, t)
    eph = ephemeris(CampbellElements.from_keys(el), t)
    # both solve Kepler to ~1e-15 rad; M carries the rounding of 2 pi (t - T) / P
    # (~1e-13 here), magnified at periastron by 1 / (1 - e) <= 33
    assert np.allclose(eph.x_arcsec, x, rtol=0, atol=1e-10 * a)
    assert np.allclose(eph.y_arcsec, y, rtol=0, atol=1e-10 * a)


def test_agrees_with_meeus_57a():
    # Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Ex. 57.a (secondary):
    # theta = 318.4 deg, rho = 0.411" at 1980.0 (book rounding)
    el = dict(P=41.623, T=1934.008, e=0.2763, a=0.907, i=59.025, Omega=23.717,
              omega=219.907)
    theta, rho, _, _ = sky_positions(el, [1980.0])
    assert theta[0] == pytest.approx(318.4, abs=0.05)
    assert rho[0] == pytest.approx(0.411, abs=5e-4)


def test_solve_kepler_meeus_hard_case():
    # Meeus 1998, ch. 30: e = 0.99, M = 0.2 rad -> E = 1.066997365282 rad (secondary)
    assert solve_kepler(0.2, 0.99) == pytest.approx(1.066997365282, abs=1e-12)


def test_noise_statistics():
    n = 4000
    t = np.linspace(1990.0, 2040.0, n)
    ms = make_log(ORBIT, t, 0.5, 0.01, seed=11)
    theta, rho, _, _ = sky_positions(ORBIT, t)
    d_theta = (ms.theta_deg - theta + 180.0) % 360.0 - 180.0
    z_t, z_r = d_theta / 0.5, (ms.rho_arcsec - rho) / 0.01
    # Gaussian with unit variance: mean 0 +- 3/sqrt(n), std 1 +- 3/sqrt(2n) (3 sigma bounds)
    for z in (z_t, z_r):
        assert abs(z.mean()) < 3 / math.sqrt(n)
        assert abs(z.std() - 1.0) < 3 / math.sqrt(2 * n)
    assert abs(np.corrcoef(z_t, z_r)[0, 1]) < 3 / math.sqrt(n)
    np.testing.assert_array_equal(ms.sigma_theta_deg, 0.5)
    np.testing.assert_array_equal(ms.sigma_rho_arcsec, 0.01)
    assert "seed=11" in ms.source and ms.epoch_scale == "julian"


def test_same_seed_same_log_and_other_seed_differs():
    a = make_log(ORBIT, EPOCHS, 0.5, 0.01, seed=3)
    b = make_log(ORBIT, EPOCHS, 0.5, 0.01, seed=3)
    c = make_log(ORBIT, EPOCHS, 0.5, 0.01, seed=4)
    np.testing.assert_array_equal(a.theta_deg, b.theta_deg)
    assert np.all(a.rho_arcsec != c.rho_arcsec)


def test_planted_flips_and_outliers_touch_only_their_rows():
    plain = make_log(ORBIT, EPOCHS, 0.5, 0.01, seed=5)
    planted = make_log(ORBIT, EPOCHS, [0.5] * 40, 0.01, seed=5, flips=[3, 17],
                       outliers=[(8, 10.0), (30, 6.5)])
    d_theta = (planted.theta_deg - plain.theta_deg + 180.0) % 360.0 - 180.0
    d_rho = planted.rho_arcsec - plain.rho_arcsec
    touched = np.flatnonzero((np.abs(d_theta) > 1e-9) | (np.abs(d_rho) > 1e-12))
    assert touched.tolist() == [3, 8, 17, 30]
    assert np.allclose(np.abs(d_theta[[3, 17]]), 180.0, atol=1e-9)
    np.testing.assert_allclose(d_rho[[3, 17]], 0.0, atol=1e-15)
    # outliers: displaced by exactly n_sigma in the normalised plane
    size = np.hypot(d_theta[[8, 30]] / 0.5, d_rho[[8, 30]] / 0.01)
    np.testing.assert_allclose(size, [10.0, 6.5], rtol=1e-9)


def test_rejects_noise_that_makes_rho_negative():
    with pytest.raises(ValueError, match="smaller sigma_rho"):
        make_log(ORBIT, EPOCHS, 0.5, 5.0, seed=1)
