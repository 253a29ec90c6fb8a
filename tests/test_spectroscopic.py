"""Tests of the radial-velocity model and the classical spectroscopic formulas."""
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from orbweigh.errors import LogFormatError
from orbweigh.spectroscopic import (a1_sin_i_km, component_masses_from_orbit,
                                    m_sin3i_msun, mass_function_msun, orbital_parallax_mas,
                                    radial_velocities, read_velocities, rv_semi_amplitude_kms,
                                    semi_major_axis_au_from_rv)

# 1 au per Julian year in km/s: Hipparcos Catalogue, ESA SP-1200 (1997), vol. 1 (memory);
# = 149597870.7 km / 31557600 s.
AU_PER_YR_KMS = 4.740470


def test_a1_sin_i_handbook_constant():
    # a1 sin i = 1.3751e4 km * K1 P sqrt(1-e^2): Hilditch, An Introduction to Close Binary
    # Stars (2001), ch. 2 (memory). Stated to 5 digits.
    assert f"{a1_sin_i_km(1.0, 1.0, 0.0):.4e}" == "1.3751e+04"
    # fuller value 13750.987 km (86400 s / 2 pi: the SI day and the definition of K; arithmetic)
    assert a1_sin_i_km(1.0, 1.0, 0.0) == pytest.approx(13750.987, abs=1e-3)
    # scaling with K, P and sqrt(1-e^2) = 0.8 at e = 0.6
    assert a1_sin_i_km(25.0, 40.0, 0.6) == pytest.approx(1.3751e4 * 25 * 40 * 0.8, rel=5e-5)


def test_mass_function_handbook_constant():
    # f(M) = 1.0361e-7 (1-e^2)^(3/2) K1^3 P [M_sun; km/s; d]: Hilditch (2001), ch. 2 (memory)
    assert f"{mass_function_msun(1.0, 1.0, 0.0):.4e}" == "1.0361e-07"
    # fuller value 1.036149e-7 = 86400 s x (1 km)^3 / (2 pi GM_sun), GM_sun the nominal
    # value of IAU 2015 Resolution B3 (arithmetic)
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
    # IAU nominal GM_sun (Gaussian year 2 pi / k, k = 0.01720209895 of the IAU 1976 System of
    # Astronomical Constants; memory)
    m1, m2 = component_masses_from_orbit(1.0, 1.0, 1.0, 1.0)
    assert m1 + m2 == pytest.approx((365.2568983 / 365.25) ** 2, rel=1e-8)
    # q = M2/M1 = K1/K2 (momentum conservation M1 a1 = M2 a2; Hilditch 2001, ch. 2,
    # memory): K1 = 3, K2 = 4 -> M1 = 4/7, M2 = 3/7 of M
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


# ------------------------------------------------------------------------ velocity logs

DATA = Path(__file__).parent / "data"
SAMPLE = Path(__file__).parents[1] / "sample_measurements" / "velocities.csv"


def _julian_year_of_jd(jd):
    # Julian epoch: J2000.0 = JD 2451545.0, year of 365.25 d (IAU 1976 definitions; memory)
    return 2000.0 + (jd - 2451545.0) / 365.25


def test_read_velocities_good_log():
    vs = read_velocities(DATA / "rv_good.csv")
    # header on line 2 after a comment line: data lines 3..7, all accepted
    assert list(vs.line) == [3, 4, 5, 6, 7] and vs.n_lines == 5 and not vs.rejected
    assert list(vs.component) == [1, 2, 1, 2, 1]
    np.testing.assert_allclose(vs.rv_kms, [-10.2, -18.9, -11.0, -19.5, -10.5])
    np.testing.assert_allclose(vs.sigma_rv_kms, [0.4, 0.8, 0.4, 0.9, 0.5])
    # 'x' excludes, 'no' keeps (the flag rule of measurement logs); the note with a comma
    # in quotes arrives whole
    assert list(vs.excluded) == [False, False, False, True, False]
    assert vs.note[3] == "thin cloud, low S/N"
    # epochs: JD, BJD read as JD, MJD = JD - 2400000.5, and a Besselian year
    # B = 1900.0 + (JD - 2415020.31352) / 365.242198781 (Lieske 1979; memory)
    jd_b = 2415020.31352 + (2009.5 - 1900.0) * 365.242198781
    expected = [_julian_year_of_jd(j) for j in (2455000.5, 2455000.5, 2455100.25,
                                                55200.0 + 2400000.5, jd_b)]
    np.testing.assert_allclose(vs.epoch_yr, expected, atol=1e-8)
    assert vs.epoch_scale == "jd" and "rows mix epoch scales" in vs.meta["epoch_scale_note"]
    assert vs.epoch_text[2] == "BJD2455100.25"              # kept as written
    assert vs.double_lined


def test_read_velocities_rejects_bad_rows_with_line_and_column():
    vs = read_velocities(DATA / "rv_bad_rows.csv")
    assert list(vs.line) == [2, 12]
    assert vs.n_lines == 11 == len(vs) + len(vs.rejected)    # every data line accounted for
    found = {(p.line, p.column): p.reason for p in vs.rejected}
    expected = {(3, "component"): "expected 1 (primary) or 2", (4, "rv"): "'fast' is not a number",
                (5, "sigma_rv"): "'0' is not > 0", (6, "sigma_rv"): "'-0.3' is not > 0",
                (7, "sigma_rv"): "missing", (8, "epoch"): "cannot read 'yesterday'",
                (9, None): "duplicate of line 2", (10, None): "found 3 value(s)",
                (11, "component"): "'1.5' is not a component"}
    assert set(found) == set(expected)
    for key, text in expected.items():
        assert text in found[key]


def test_read_velocities_strict_raises_on_first_bad_row():
    with pytest.raises(LogFormatError, match=r"rv_bad_rows\.csv, line 3, column 'component'"):
        read_velocities(DATA / "rv_bad_rows.csv", strict=True)


def test_read_velocities_mapping_and_ecsv_units():
    vs = read_velocities(DATA / "rv_mapped.ecsv",
                         columns={"epoch": "mjd", "component": "comp", "rv": "v", "sigma_rv": "ev"})
    # m/s -> km/s; a plain number in a column of unit d below 100000 is an MJD
    np.testing.assert_allclose(vs.rv_kms, [-10.2, -18.9])
    np.testing.assert_allclose(vs.sigma_rv_kms, [0.4, 0.8])
    np.testing.assert_allclose(vs.epoch_yr, _julian_year_of_jd(55000.0 + 2400000.5), atol=1e-9)
    assert vs.epoch_scale == "mjd"


def test_read_velocities_file_level_errors():
    with pytest.raises(LogFormatError, match="unit 'deg'; expected a velocity"):
        read_velocities(DATA / "rv_wrong_unit.ecsv",
                        columns={"epoch": "mjd", "component": "comp", "rv": "v", "sigma_rv": "ev"})
    with pytest.raises(LogFormatError,
                       match=r"required column\(s\) rv not found.*--rv-columns rv=velocity"):
        read_velocities(DATA / "rv_missing_column.csv")


def test_sample_velocities_match_their_true_orbit():
    # True values stated in sample_measurements/README.md (the invented pair)
    vs = read_velocities(SAMPLE)
    assert len(vs) == vs.n_lines == 51 and list(vs.line[vs.excluded]) == [19]
    V1, V2 = radial_velocities(vs.epoch_yr, 68.40, 2009.350, 0.530, 131.70, 3.9298, 5.0381,
                               -14.60)
    z = (vs.rv_kms - np.where(vs.component == 1, V1, V2)) / vs.sigma_rv_kms
    # the flagged row was shifted by +3 sigma; the others are pure seeded noise:
    # chi^2 of 50 values within 3 standard deviations (sqrt(2 x 50) = 10) of 50
    assert z[vs.excluded][0] > 2.0
    assert abs(np.sum(z[vs.usable] ** 2) - 50) < 30
