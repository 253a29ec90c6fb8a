"""Tests of the radial-velocity model and the classical spectroscopic formulas."""
import numpy as np
import pytest
from scipy.optimize import brentq

from orbweigh.spectroscopic import (a1_sin_i_km, component_masses_from_orbit,
                                    m_sin3i_msun, mass_function_msun, orbital_parallax_mas,
                                    radial_velocities, rv_semi_amplitude_kms,
                                    semi_major_axis_au_from_rv)

# 1 au per Julian year in km/s: Hipparcos Catalogue, ESA SP-1200 (1997), vol. 1 (memory);
# = 149597870.7 km / 31557600 s.
AU_PER_YR_KMS = 4.740470


def test_a1_sin_i_handbook_constant():
    # a1 sin i = 1.3751e4 km * K1 P sqrt(1-e^2): Hilditch, An Introduction to Close Binary
    # Stars (2001), ch. 2 (memory). Stated to 5 digits.
    assert f"{a1_sin_i_km(1.0, 1.0, 0.0):.4e}" == "1.3751e+04"
    # fuller value 13750.987 km (86400 s / 2 pi; /work/shared/REFERENCES.md, memory)
    assert a1_sin_i_km(1.0, 1.0, 0.0) == pytest.approx(13750.987, abs=1e-3)
    # scaling with K, P and sqrt(1-e^2) = 0.8 at e = 0.6
    assert a1_sin_i_km(25.0, 40.0, 0.6) == pytest.approx(1.3751e4 * 25 * 40 * 0.8, rel=5e-5)


def test_mass_function_handbook_constant():
    # f(M) = 1.0361e-7 (1-e^2)^(3/2) K1^3 P [M_sun; km/s; d]: Hilditch (2001), ch. 2 (memory)
    assert f"{mass_function_msun(1.0, 1.0, 0.0):.4e}" == "1.0361e-07"
    # fuller value 1.036149e-7 (/work/shared/REFERENCES.md, memory)
    assert mass_function_msun(1.0, 1.0, 0.0) == pytest.approx(1.036149e-7, rel=2e-6)
    # (1-e^2)^(3/2) = 0.512 at e = 0.6
    assert mass_function_msun(30.0, 12.0, 0.6) == pytest.approx(
        1.0361e-7 * 0.512 * 30.0**3 * 12.0, rel=5e-5)


def test_minimum_masses_handbook_and_mass_function_identity():
    K1, K2, P, e = 32.0, 41.0, 17.5, 0.3
    m1, m2 = m_sin3i_msun(K1, K2, P, e)
    # M1 sin^3 i = 1.0361e-7 (1-e^2)^(3/2) (K1+K2)^2 K2 P: Hilditch (2001), ch. 2 (memory)
    factor = 1.0361e-7 * (1 - e**2) ** 1.5 * (K1 + K2) ** 2 * P
    assert m1 == pytest.approx(factor * K2, rel=5e-5)
    assert m2 == pytest.approx(factor * K1, rel=5e-5)
    # identity f(M) = (M2 sin^3 i)^3 / ((M1 + M2) sin^3 i)^2 (definition of f(M))
    assert mass_function_msun(K1, P, e) == pytest.approx(m2**3 / (m1 + m2) ** 2, rel=1e-12)


def test_semi_amplitude_of_earth_orbit():
    # a = 1 au, P = 1 Julian year, circular, edge-on: K = 2 pi au/yr = 29.785 km/s, the
    # Earth's mean orbital speed (memory; 2 pi x 4.740470).
    assert rv_semi_amplitude_kms(1.0, 1.0, 0.0, 90.0) == pytest.approx(
        2 * np.pi * AU_PER_YR_KMS, rel=2e-7)
    assert rv_semi_amplitude_kms(1.0, 1.0, 0.0, 90.0) == pytest.approx(29.785, abs=1e-3)


def test_orbital_parallax_hand_evaluation():
    # a_au = (K1+K2) P sqrt(1-e^2) / (2 pi sin i) evaluated by hand with the Hipparcos
    # au/yr factor: K1+K2 = 25 km/s = 5.273739 au/yr; x 20 yr x 0.8 / (2 pi x 0.5)
    # = 84.37982 / pi = 26.85893 au; parallax = 0.5" / 26.85893 au = 18.61578 mas.
    K1, K2, P, e, i = 10.0, 15.0, 20.0, 0.6, 30.0
    expected_a = 25.0 / AU_PER_YR_KMS * P * 0.8 / (2 * np.pi * 0.5)
    assert expected_a == pytest.approx(26.85893, rel=1e-6)       # the hand value above
    assert semi_major_axis_au_from_rv(K1, K2, P, e, i) == pytest.approx(expected_a, rel=1e-6)
    assert orbital_parallax_mas(0.5, K1, K2, P, e, i) == pytest.approx(18.61578, rel=1e-6)


def test_component_masses_earth_year_and_split():
    # a = 1 au, P = 1 Julian year: M = (365.2568983 / 365.25)^2 = 1.0000378 M_sun with the
    # IAU nominal GM_sun (Gaussian year 2 pi / k; /work/shared/REFERENCES.md)
    m1, m2 = component_masses_from_orbit(1.0, 1.0, 1.0, 1.0)
    assert m1 + m2 == pytest.approx((365.2568983 / 365.25) ** 2, rel=1e-8)
    # q = M2/M1 = K1/K2 (DESIGN.md conventions): K1 = 3, K2 = 4 -> M1 = 4/7, M2 = 3/7 of M
    m1, m2 = component_masses_from_orbit(20.0, 60.0, 3.0, 4.0)
    total = 20.0**3 / 60.0**2 * 1.0000378
    assert m1 == pytest.approx(total * 4 / 7, rel=1e-6)
    assert m2 == pytest.approx(total * 3 / 7, rel=1e-6)


def test_periastron_at_ascending_node_secondary_recedes():
    # omega = 0: periastron lies at the ascending node, where by definition the secondary
    # recedes. At t = T (nu = 0) the relative line-of-sight velocity is at its maximum
    # (K1+K2)(1+e): the secondary recedes at gamma + K2(1+e), the primary approaches at
    # gamma - K1(1+e) (omega1 = 180 deg: cos(omega1) = -1).
    e, K1, K2, gamma = 0.4, 6.0, 8.0, -5.0
    V1, V2 = radial_velocities(2000.0, 50.0, 2000.0, e, 0.0, K1, K2, gamma)
    assert V1 == pytest.approx(gamma - K1 * (1 + e), abs=1e-12)
    assert V2 == pytest.approx(gamma + K2 * (1 + e), abs=1e-12)


def test_periastron_behind_the_primary_then_approaching():
    # omega = 90: periastron lies a quarter turn past the ascending node, so there the
    # secondary is farthest behind the primary (z = r sin(nu+omega) sin i at its maximum),
    # moving across the line of sight: V1 = V2 = gamma. Just after periastron the
    # secondary swings towards us (V2 < gamma) and the primary away (V1 > gamma).
    e, K1, K2, gamma, P, T = 0.5, 6.0, 8.0, 12.0, 50.0, 2000.0
    V1, V2 = radial_velocities([T, T + 0.01 * P], P, T, e, 90.0, K1, K2, gamma)
    assert V1[0] == pytest.approx(gamma, abs=1e-12)
    assert V2[0] == pytest.approx(gamma, abs=1e-12)
    assert V1[1] > gamma + 1.0 and V2[1] < gamma - 1.0


def _line_of_sight_distance_au(t, P, T, e, a_au, i_deg, omega_deg):
    """z = r sin(nu + omega) sin i of the secondary behind the primary, solved here with
    scipy's brentq (independent of orbweigh's Kepler solver)."""
    M = 2 * np.pi * (t - T) / P
    E = brentq(lambda x: x - e * np.sin(x) - M, M - 1.0, M + 1.0, xtol=1e-15)
    nu = 2 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
    r = a_au * (1 - e * np.cos(E))
    return r * np.sin(nu + np.radians(omega_deg)) * np.sin(np.radians(i_deg))


@pytest.mark.parametrize("omega_deg", [0.0, 131.7, 250.0])
def test_velocity_difference_is_rate_of_line_of_sight_distance(omega_deg):
    # V2 - V1 must equal dz/dt of the geometric orbit (z grows away from us, the sense in
    # which the ascending node is defined); central difference in au/yr converted with the
    # Hipparcos factor. K1 + K2 from the same a, P, e, i.
    P, T, e, a_au, i_deg = 68.4, 2009.35, 0.53, 20.8, 57.0
    K = rv_semi_amplitude_kms(a_au, P, e, i_deg)
    h = 1e-4
    for t in (1995.0, 2009.0, 2009.6, 2030.0):
        dz = (_line_of_sight_distance_au(t + h, P, T, e, a_au, i_deg, omega_deg)
              - _line_of_sight_distance_au(t - h, P, T, e, a_au, i_deg, omega_deg)) / (2 * h)
        V1, V2 = radial_velocities(t, P, T, e, omega_deg, 0.4 * K, 0.6 * K, 0.0)
        assert float(V2 - V1) == pytest.approx(dz * AU_PER_YR_KMS, abs=1e-5)


def test_node_shift_flips_the_velocities():
    # (Omega, omega) -> (Omega + 180, omega + 180) leaves positions unchanged but turns
    # approach into recession: V - gamma changes sign (the reason RVs fix the node).
    t = np.linspace(1990.0, 2030.0, 7)
    V1, V2 = radial_velocities(t, 68.4, 2009.35, 0.53, 131.7, 3.9, 5.0, -14.6)
    W1, W2 = radial_velocities(t, 68.4, 2009.35, 0.53, 311.7, 3.9, 5.0, -14.6)
    np.testing.assert_allclose(W1 + 14.6, -(V1 + 14.6), atol=1e-12)
    np.testing.assert_allclose(W2 + 14.6, -(V2 + 14.6), atol=1e-12)
    assert V1.shape == V2.shape == t.shape


def test_mass_ratio_from_velocities():
    # momentum balance: M1 (V1 - gamma) = -M2 (V2 - gamma), so (V1-gamma)/(V2-gamma) = -K1/K2
    t = np.array([1991.3, 2004.0, 2012.7])
    V1, V2 = radial_velocities(t, 68.4, 2009.35, 0.53, 131.7, 3.9, 5.0, -14.6)
    np.testing.assert_allclose((V1 + 14.6) / (V2 + 14.6), -3.9 / 5.0, rtol=1e-12)
