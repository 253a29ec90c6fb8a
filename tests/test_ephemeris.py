"""Unit tests of orbweigh.ephemeris: positions and their 68 % bands."""
import importlib

import numpy as np
import pytest
from scipy.stats import norm

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris, ephemeris_bands, xy_to_theta_rho
from orbweigh.kepler import eccentric_anomaly, mean_anomaly

# Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Example 57.a (the elements).
MEEUS = CampbellElements(41.623, 1934.008, 0.2763, 0.907, 59.025, 23.717, 219.907)


def test_meeus_example_57a():
    eph = ephemeris(MEEUS, 1980.0)
    # Meeus 1998, ch. 57, Example 57.a: theta = 318.4 deg, rho = 0.411" (book rounding).
    assert eph.theta_deg[0] == pytest.approx(318.4, abs=0.05)
    assert eph.rho_arcsec[0] == pytest.approx(0.411, abs=0.0005)


def test_meeus_example_57a_intermediate_anomalies():
    m = mean_anomaly(1980.0, MEEUS.period_yr, MEEUS.periastron_yr)
    # Meeus 1998, ch. 57, Example 57.a: M = 37.788 deg, E = 49.896 deg.
    assert np.degrees(m) == pytest.approx(37.788, abs=0.0005)
    assert np.degrees(eccentric_anomaly(m, MEEUS.e)) == pytest.approx(49.896, abs=0.0005)


def test_face_on_circular_orbit_turns_uniformly_north_through_east():
    # e = 0, i = 0: rho = a always and theta = Omega + omega + 360 (t - T) / P, increasing
    # (direct motion for i < 90 deg) -- elementary geometry (common practice, no source).
    el = CampbellElements(10.0, 2000.0, 0.0, 0.3, 0.0, 30.0, 20.0)
    t = np.array([2000.0, 2001.0, 2002.5, 2007.0])
    eph = ephemeris(el, t)
    np.testing.assert_allclose(eph.rho_arcsec, 0.3, rtol=1e-12)
    np.testing.assert_allclose(eph.theta_deg, np.mod(50.0 + 36.0 * (t - 2000.0), 360.0),
                               atol=1e-9)


def test_retrograde_orbit_turns_the_other_way():
    # i = 180 deg: theta decreases with time, theta = Omega - omega - 360 (t - T)/P
    # (common practice, no source).
    el = CampbellElements(10.0, 2000.0, 0.0, 0.3, 180.0, 30.0, 20.0)
    t = np.array([2000.0, 2001.0])
    np.testing.assert_allclose(ephemeris(el, t).theta_deg, [10.0, 334.0], atol=1e-9)


def test_edge_on_orbit_moves_on_the_line_of_nodes():
    # i = 90 deg: the companion stays on the line through the primary at PA Omega or
    # Omega + 180 (common practice, no source).
    el = CampbellElements(12.0, 2000.0, 0.5, 1.0, 90.0, 40.0, 75.0)
    theta = ephemeris(el, np.linspace(2000.1, 2011.9, 50)).theta_deg
    np.testing.assert_allclose(np.mod(theta - 40.0 + 1e-9, 180.0), 1e-9, atol=1e-7)


def test_positions_repeat_after_one_period_and_xy_match_theta_rho():
    t = np.linspace(1990.0, 2030.0, 23)
    a, b = ephemeris(MEEUS, t), ephemeris(MEEUS, t + MEEUS.period_yr)
    np.testing.assert_allclose(a.x_arcsec, b.x_arcsec, atol=1e-10)
    theta, rho = xy_to_theta_rho(a.x_arcsec, a.y_arcsec)
    np.testing.assert_allclose(a.rho_arcsec * np.cos(np.radians(a.theta_deg)), a.x_arcsec,
                               atol=1e-14)
    np.testing.assert_allclose(theta, a.theta_deg)


def _draws(elements, sigma, n=400, seed=5):
    rng = np.random.default_rng(seed)
    return np.array(elements.as_tuple()) + rng.standard_normal((n, 7)) * sigma


_SIGMA = np.array([0.2, 0.1, 0.01, 0.005, 0.5, 0.5, 0.5])


def test_bands_are_the_central_68_percent_of_the_draws():
    draws = _draws(MEEUS, _SIGMA)
    t = np.array([1975.0, 1980.0, 1990.0])
    bands = ephemeris_bands(MEEUS, draws, t)
    # Independent route: the positions of each draw one by one, then numpy quantiles at
    # the normal 1-sigma probabilities Phi(-1), Phi(1) (scipy.stats; common practice).
    rho = np.array([ephemeris(CampbellElements(*d), t).rho_arcsec for d in draws])
    lo, hi = norm.cdf([-1.0, 1.0])
    np.testing.assert_allclose(bands.rho_low_arcsec, np.quantile(rho, lo, axis=0), rtol=1e-12)
    np.testing.assert_allclose(bands.rho_high_arcsec, np.quantile(rho, hi, axis=0), rtol=1e-12)
    best = ephemeris(MEEUS, t)
    assert np.all(bands.rho_low_arcsec < best.rho_arcsec)
    assert np.all(best.rho_arcsec < bands.rho_high_arcsec)


def test_theta_band_through_north_is_the_rotated_band():
    # Rotating Omega by d rotates the whole apparent orbit by d (common practice, no
    # source), so a band straddling 0/360 must be the rotated copy of one that does not.
    t = np.array([1980.0])
    theta0 = ephemeris(MEEUS, t).theta_deg[0]
    shift = 360.0 - theta0          # moves the best prediction onto North exactly
    draws = _draws(MEEUS, _SIGMA)
    rotated_el = CampbellElements(*(np.array(MEEUS.as_tuple()) + [0, 0, 0, 0, 0, shift, 0]))
    rotated = draws + [0, 0, 0, 0, 0, shift, 0]
    plain = ephemeris_bands(MEEUS, draws, t)
    turned = ephemeris_bands(rotated_el, rotated, t)
    assert turned.theta_low_deg[0] > 300 and turned.theta_high_deg[0] < 60  # crosses North
    np.testing.assert_allclose(np.mod(plain.theta_low_deg + shift, 360.0),
                               turned.theta_low_deg, atol=1e-8)
    np.testing.assert_allclose(np.mod(plain.theta_high_deg + shift, 360.0),
                               turned.theta_high_deg, atol=1e-8)
    width = np.mod(turned.theta_high_deg - turned.theta_low_deg, 360.0)
    assert 0.1 < width[0] < 20.0    # a narrow band, not the whole circle


def test_bands_chunking_gives_the_same_answer(monkeypatch):
    module = importlib.import_module("orbweigh.ephemeris")  # the package shadows the name
    draws = _draws(MEEUS, _SIGMA, n=50)
    t = np.linspace(1970.0, 2000.0, 31)
    whole = ephemeris_bands(MEEUS, draws, t)
    monkeypatch.setattr(module, "_CHUNK", 200)   # 4 epochs per chunk
    parts = ephemeris_bands(MEEUS, draws, t)
    np.testing.assert_allclose(whole.theta_low_deg, parts.theta_low_deg, rtol=1e-12)
    np.testing.assert_allclose(whole.rho_high_arcsec, parts.rho_high_arcsec, rtol=1e-12)
