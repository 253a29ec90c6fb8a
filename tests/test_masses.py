"""Tests of orbweigh.masses: third law, propagation, component masses, dynamical parallax."""
import math

import numpy as np
import pytest

from orbweigh import formatting as fmt
from orbweigh.errors import InputError
from orbweigh.spectroscopic import orbital_parallax_mas
from orbweigh.masses import (implausible_total, 
    KMS_PER_AU_YR, THIRD_LAW_FACTOR, dynamical_parallax, eker_log_luminosity,
    eker_mass_from_log_luminosity, format_mass_blocks, linear_propagation, mann_mass_from_mks,
    mass_blocks, mass_from_absolute_magnitude, total_mass_msun,
)

JULIAN_YEAR_D = 365.25


# ------------------------------------------------------------------ constants, Sun-Earth
def test_sun_earth_sidereal_year_gives_sun_plus_earth():
    # Sidereal year 365.256363 d (IERS / Astronomical Almanac, memory);
    # M_earth/M_sun = 3.003e-6 (IAU 2015 nominal GM_earth/GM_sun, memory).
    # a = 1 au seen from 1 pc: a = 1", parallax = 1000 mas.
    mass = total_mass_msun(1.0, 1000.0, 365.256363 / JULIAN_YEAR_D)
    assert mass == pytest.approx(1.0 + 3.003e-6, rel=1e-6)
    # A tropical year (365.24219 d, memory) would be 1e-4 off: the check can fail.
    assert abs(total_mass_msun(1.0, 1000.0, 365.24219 / JULIAN_YEAR_D) - 1.0) > 5e-5


def test_gaussian_year_gives_exactly_one():
    # Gaussian gravitational constant k = 0.01720209895 (Gauss 1809; IAU 1976 system):
    # the year of a massless body at 1 au is 2 pi / k = 365.2568983 d.
    year_d = 2.0 * math.pi / 0.01720209895
    assert year_d == pytest.approx(365.2568983, abs=1e-7)
    assert total_mass_msun(1.0, 1000.0, year_d / JULIAN_YEAR_D) == pytest.approx(1.0, rel=1e-8)


def test_third_law_factor_and_velocity_unit():
    # f = 1.0000378 for Julian years (derived from IAU 2012 B2 au and IAU 2015 B3 GM_sun).
    assert THIRD_LAW_FACTOR == pytest.approx(1.0000378, abs=1e-7)
    # 1 au/yr = 4.740470 km/s (Hipparcos Catalogue, ESA SP-1200, 1997, vol. 1; memory).
    assert KMS_PER_AU_YR == pytest.approx(4.740470, abs=1e-6)
    from astropy import constants
    from astropy import units as u
    assert KMS_PER_AU_YR == pytest.approx((u.au / u.yr).to(u.km / u.s), rel=1e-12)
    # orbweigh.constants, written as numbers, are astropy's (IAU 2012 au, IAU 2015 GM_sun).
    expected = (4 * np.pi**2 * constants.au**3 / (constants.GM_sun * (1 * u.yr) ** 2))
    assert THIRD_LAW_FACTOR == pytest.approx(expected.decompose().value, rel=1e-14)


# ----------------------------------------------------------------- published binaries
@pytest.mark.parametrize("period, a, plx, published, tol", [
    # Sirius AB: Bond et al. 2017, ApJ 840, 70: 2.063 + 1.018 M_sun with the Hipparcos
    # 2007 parallax; recomputed total 0.24 % low, tolerance 0.5 %.
    (50.1284, 7.4957, 379.21, 2.063 + 1.018, 0.005),
    # Procyon AB: Bond et al. 2015, ApJ 813, 106: 1.478 + 0.592 M_sun; 0.46 % high, 1 %.
    (40.840, 4.3075, 284.56, 1.478 + 0.592, 0.01),
])
def test_published_binaries(period, a, plx, published, tol):
    assert total_mass_msun(a, plx, period) == pytest.approx(published, rel=tol)


def test_sirius_component_masses_from_published_ratio():
    # Bond et al. 2017: M_A = 2.063, M_B = 1.018 M_sun, so q = 1.018 / 2.063.
    rng = np.random.default_rng(5)
    period, a = rng.normal(50.1284, 0.0043, 4000), rng.normal(7.4957, 0.0025, 4000)
    blocks = mass_blocks(period, a, parallax=(379.21, 1.58), mass_ratio=(1.018 / 2.063, 0.0),
                         seed=2)
    assert blocks["mass"]["primary"]["value"] == pytest.approx(2.063, rel=0.005)
    assert blocks["mass"]["secondary"]["value"] == pytest.approx(1.018, rel=0.005)
    # The published errors (+/- 0.023, 0.011) are of the size the 0.42 % parallax error gives.
    assert blocks["mass"]["primary"]["linear"]["error"] == pytest.approx(0.023, rel=0.3)


# ------------------------------------------------------------ mass-luminosity relations
@pytest.mark.parametrize("mass, log_l", [
    # Hand evaluation of Eker et al. 2018, MNRAS 479, 5491, Table 4 coefficients.
    (0.3, 2.028 * -0.5228787 - 0.976),
    (0.6, 4.572 * -0.2218487 - 0.102),
    (1.0, -0.007),
    (2.0, 4.329 * 0.3010300 + 0.010),
    (4.0, 3.967 * 0.6020600 + 0.093),
    (10.0, 2.865 + 1.105),
])
def test_eker_forward_and_inverse(mass, log_l):
    assert eker_log_luminosity(mass) == pytest.approx(log_l, abs=1e-6)
    # The hand logarithms carry 7 decimals: 1e-6 relative in mass.
    assert eker_mass_from_log_luminosity(log_l) == pytest.approx(mass, rel=1e-6)


def test_eker_inverse_across_breaks_is_continuous_and_increasing():
    # Rule of the inverse (see its docstring): blend in overlaps, break mass in gaps.
    log_l = np.linspace(-2.6, 5.5, 200001)
    log_m = np.log10(eker_mass_from_log_luminosity(log_l))
    steps = np.diff(log_m)
    assert np.all(steps >= 0)
    # Steepest piece: d log M / d log L = 1/2.028; the blends reach 0.98. The dynamical
    # parallax iteration contracts while (2/3) * slope < 1, i.e. slope < 1.5.
    assert np.max(steps / np.diff(log_l)) < 1.0
    # Gap at 7 M_sun: pieces give log L 3.4455 (below) and 3.5262 (above) at the break.
    assert eker_mass_from_log_luminosity(3.48) == pytest.approx(7.0)
    # Overlap at 2.4 M_sun: log L = 1.63 lies between the two pieces' inverses.
    m = eker_mass_from_log_luminosity(1.63)
    assert 10 ** ((1.63 - 0.010) / 4.329) < m < 10 ** ((1.63 - 0.093) / 3.967)


def test_mann_relation():
    # Mann et al. 2019, ApJ 871, 63, Table 6: M_Ks = 7.5 -> 0.22803 M_sun (= 10**-0.642).
    assert mann_mass_from_mks(7.5) == pytest.approx(0.22803, abs=5e-6)
    assert mass_from_absolute_magnitude(7.5, "Ks") == pytest.approx(0.22803, abs=5e-6)
    # Every term of the polynomial, evaluated by hand from the coefficients of Mann et al.
    # 2019, Table 6 (a0..a5 = -0.642, -0.208, -8.43e-4, 7.87e-3, 1.42e-4, -2.13e-4), with
    # x = M_Ks - 7.5:
    #   x = -2.5: -0.642 + 0.520 - 0.00526875 - 0.12296875 + 0.00554688 + 0.02080078
    #           = -0.22388984 -> 0.59719 M_sun
    #   x = -1.5: -0.642 + 0.312 - 0.00189675 - 0.02656125 + 0.00071888 + 0.00161747
    #           = -0.35612165 -> 0.44043 M_sun
    #   x = +1.5: -0.642 - 0.312 - 0.00189675 + 0.02656125 + 0.00071888 - 0.00161747
    #           = -0.93023409 -> 0.11743 M_sun
    #   x = +3.0: -0.642 - 0.624 - 0.0075870 + 0.212490 + 0.0115020 - 0.0517590
    #           = -1.1013540 -> 0.07919 M_sun
    hand = {5.0: 0.59719, 6.0: 0.44043, 9.0: 0.11743, 10.5: 0.07919}
    for mks, mass in hand.items():
        assert mann_mass_from_mks(mks) == pytest.approx(mass, abs=1e-5)


def test_unsupported_band_is_refused():
    with pytest.raises(InputError, match="'V' is not supported.*'bol'.*'K'"):
        mass_from_absolute_magnitude(5.0, "V")


# ------------------------------------------------------------------ dynamical parallax
def _synthetic_bol(m1, m2, plx_mas, period):
    """Apparent bolometric magnitudes and a of a pair obeying the relation exactly."""
    # Third law with f = 1.0000378 (derived from the IAU values; 7 decimals, so the
    # recovered parallax is good to ~1e-8, not to the iteration's 1e-10).
    a = plx_mas * 1e-3 * ((m1 + m2) * period**2 / 1.0000378) ** (1 / 3)
    dm = -5.0 - 5.0 * np.log10(plx_mas * 1e-3)
    mags = [4.74 - 2.5 * eker_log_luminosity(m) + dm for m in (m1, m2)]  # M_bol,sun = 4.74
    return a, mags


def test_dynamical_parallax_recovers_true_distance():
    a, (mag1, mag2) = _synthetic_bol(1.3, 0.6, 40.0, 25.0)
    result = dynamical_parallax(a, 25.0, mag1, mag2, "bol")
    assert result.converged and 3 <= result.iterations < 60
    assert result.parallax_mas[0] == pytest.approx(40.0, rel=1e-7)
    assert result.mass1_msun[0] == pytest.approx(1.3, rel=1e-7)
    assert result.mass2_msun[0] == pytest.approx(0.6, rel=1e-7)
    # First step starts from M1 + M2 = 2 (Russell & Moore 1940 start).
    assert result.history[0][0][0] == pytest.approx(40.0 * (1.9 / 2.0) ** (1 / 3), rel=1e-7)


def test_dynamical_parallax_k_band():
    # Two M dwarfs at M_Ks = 6 and 8 (Mann et al. 2019 relation) seen at 100 mas.
    m1, m2 = mann_mass_from_mks(6.0), mann_mass_from_mks(8.0)
    a = 0.1 * ((m1 + m2) * 12.0**2 / 1.0000378) ** (1 / 3)
    result = dynamical_parallax(a, 12.0, 6.0 - 5.0 - 5.0 * np.log10(0.1),
                                8.0 - 5.0 - 5.0 * np.log10(0.1), "K")
    assert result.parallax_mas[0] == pytest.approx(100.0, rel=1e-7)


def test_mass_error_gives_a_third_in_parallax():
    # Stars 10 % heavier than the relation says. Classic rule: a mass error delta gives
    # delta/3 in the parallax (Russell & Moore 1940). Refined by the magnitude feedback
    # (d log M / d log plx = -2/alpha on one Eker piece):
    # ln(plx_dyn/plx) = ln(1+delta)/(3 - 2/alpha).
    delta, alpha = 0.10, 4.329  # both stars on the 1.05-2.4 M_sun piece
    a, mags = _synthetic_bol(1.3, 1.8, 40.0, 25.0)
    a_heavy = a * (1 + delta) ** (1 / 3)  # same distance, masses (1 + delta) times larger
    plx = dynamical_parallax(a_heavy, 25.0, *mags, "bol").parallax_mas[0]
    assert math.log(plx / 40.0) == pytest.approx(math.log(1 + delta) / (3 - 2 / alpha), rel=1e-6)
    assert plx / 40.0 - 1 == pytest.approx(delta / 3, rel=0.25)


def test_dynamical_blocks_and_validity_warning():
    a, mags = _synthetic_bol(1.3, 0.6, 40.0, 25.0)
    rng = np.random.default_rng(3)
    blocks = mass_blocks(rng.normal(25.0, 0.05, 500), rng.normal(a, 1e-4, 500),
                         magnitudes=mags, band="bol", seed=4, best=(25.0, a))
    plx = blocks["parallax"]
    assert plx["kind"] == "dynamical"
    assert plx["at_best"] == pytest.approx(40.0, rel=1e-7)
    assert plx["steps"][-1]["parallax_mas"] == pytest.approx(40.0, rel=1e-7)
    # the median of 500 draws (relation scatter included) within 3 of its standard errors,
    # 1.25 sigma / sqrt(n) for a median of normal draws (common practice, no source)
    assert plx["value"] == pytest.approx(40.0, abs=3 * 1.25 * plx["error"] / np.sqrt(500))
    total = blocks["mass"]["total"]
    assert total["value"] == pytest.approx(1.9, abs=3 * 1.25 * (total["high"] - total["low"])
                                           / 2 / np.sqrt(500))
    assert not any("validity range" in w for w in blocks["warnings"])
    # A 0.1 M_sun star is below the relation's 0.179 M_sun limit.
    a, mags = _synthetic_bol(0.6, 0.1, 40.0, 25.0)
    blocks = mass_blocks([25.0, 25.01], [a, a], magnitudes=mags, band="bol")
    assert any("validity range" in w for w in blocks["warnings"])


# ------------------------------------------------------------------ propagation
def test_linear_error_matches_monte_carlo_with_correlation():
    # First-order propagation (common practice) vs the spread of the draws, small errors.
    rng = np.random.default_rng(11)
    sp, sa, rho = 0.3, 0.01, 0.8
    cov = [[sp**2, rho * sp * sa], [rho * sp * sa, sa**2]]
    period, a = rng.multivariate_normal([30.0, 1.0], cov, 40000).T
    blocks = mass_blocks(period, a, parallax=(50.0, 0.5), seed=1, best=(30.0, 1.0), cov_Pa=cov)
    total = blocks["mass"]["total"]
    rel_mc = (total["high"] - total["low"]) / 2 / total["value"]
    rel_lin = total["linear"]["error"] / total["linear"]["value"]
    assert rel_lin == pytest.approx(rel_mc, rel=0.03)
    # Hand value: 9(0.01)^2 + 4(0.01)^2 + 9(0.01)^2 - 12(0.8)(0.01)(0.01) = 0.00124.
    assert rel_lin == pytest.approx(math.sqrt(0.00124), rel=1e-9)


def test_budget_shares():
    # sa/a = 0.001, sP/P = 0.002, splx/plx = 0.01, no covariance: variances 9e-6, 16e-6, 9e-4.
    _, rel, budget = linear_propagation(10.0, 1.0, [[0.02**2, 0], [0, 0.001**2]], 50.0, 0.5)
    assert rel == pytest.approx(math.sqrt(9.25e-4), rel=1e-12)
    assert budget["parallax"] == pytest.approx(9e-4 / 9.25e-4, rel=1e-12)
    assert budget["a"] == pytest.approx(9e-6 / 9.25e-4, rel=1e-12)
    assert budget["P"] == pytest.approx(16e-6 / 9.25e-4, rel=1e-12)
    assert budget["a_P_covariance"] == 0.0


def test_low_parallax_snr_warns_and_counts_nonpositive_draws():
    period, a = np.full(4000, 10.0), np.full(4000, 0.1)
    blocks = mass_blocks(period, a, parallax=(1.0, 0.5), seed=7)
    n_bad = blocks["mass"]["draws_nonpositive_parallax"]
    # Expected share Phi(-2) = 0.02275 (normal table); binomial sd 9.4 draws; 4 sd allowed.
    assert abs(n_bad - 4000 * 0.02275) < 4 * math.sqrt(4000 * 0.02275 * 0.97725)
    assert any("below 10" in w for w in blocks["warnings"])
    assert any(f"{n_bad} of 4000 parallax draws" in w for w in blocks["warnings"])
    # With Phi(-1.5) = 6.7 % unbounded draws the 97.5 % point is unbounded, the 84 % is not.
    blocks = mass_blocks(period, a, parallax=(1.5, 1.0), seed=7)
    assert blocks["mass"]["total"]["high95"] is None
    assert blocks["mass"]["total"]["high"] is not None
    # Good parallax: no warning.
    assert mass_blocks(period, a, parallax=(100.0, 1.0), seed=7)["warnings"] == []


@pytest.mark.parametrize("plx", [0.0, -3.0])
def test_nonpositive_parallax_refused(plx):
    with pytest.raises(InputError, match="not positive"):
        mass_blocks([10.0, 10.1], [0.1, 0.1], parallax=(plx, 1.0))


def test_needs_exactly_one_distance():
    with pytest.raises(InputError, match="either a trigonometric parallax"):
        mass_blocks([10.0, 10.1], [0.1, 0.1])
    with pytest.raises(InputError, match="not both"):
        mass_blocks([10.0, 10.1], [0.1, 0.1], parallax=(10.0, 1.0), magnitudes=(5, 6),
                    band="bol")


def test_components_from_ratio_and_from_velocities():
    rng = np.random.default_rng(2)
    period, a = rng.normal(10.0, 0.05, 20000), rng.normal(0.3, 0.003, 20000)
    by_q = mass_blocks(period, a, parallax=(100.0, 1.0), mass_ratio=(0.5, 0.0), seed=3)
    by_k = mass_blocks(period, a, parallax=(100.0, 1.0), rv_amplitudes=(10.0, 0.0, 20.0, 0.0),
                       seed=3)
    total = by_q["mass"]["total"]["value"]
    for blocks in (by_q, by_k):  # q = K1/K2 = M2/M1 = 0.5: M1 = 2/3 M, M2 = 1/3 M
        assert blocks["mass"]["primary"]["value"] == pytest.approx(total * 2 / 3, rel=1e-12)
        assert blocks["mass"]["secondary"]["value"] == pytest.approx(total / 3, rel=1e-12)
    # With an error on q, the linear component errors match the draws' spread.
    blocks = mass_blocks(period, a, parallax=(100.0, 1.0), mass_ratio=(0.5, 0.05), seed=3)
    for name in ("primary", "secondary"):
        m = blocks["mass"][name]
        assert m["linear"]["error"] == pytest.approx((m["high"] - m["low"]) / 2, rel=0.05)


def test_orbital_parallax():
    # Earth: mean orbital speed 29.78 km/s (NASA planetary fact sheet, memory), e ~ 0,
    # seen edge-on from 1 pc: a = 1", orbital parallax 1000 mas.
    assert orbital_parallax_mas(1.0, 29.78, 0.0, 365.256363 / JULIAN_YEAR_D, 0.0, 90.0) == \
        pytest.approx(1000.0, rel=3e-4)
    # Consistency with the spectroscopic mass relation (Hilditch 2001, ch. 2; memory):
    # (M1 + M2) sin^3 i = 1.036149e-7 (1 - e^2)^(3/2) (K1 + K2)^3 P[d].
    a, period, e, i, k = 0.5, 10.0, 0.4, 60.0, 15.0
    mass = total_mass_msun(a, orbital_parallax_mas(a, k, 0.0, period, e, i), period)
    expected = 1.036149e-7 * (1 - e**2) ** 1.5 * k**3 * period * JULIAN_YEAR_D
    assert mass * math.sin(math.radians(i)) ** 3 == pytest.approx(expected, rel=2e-6)


def test_same_seed_same_result_and_seed_reported():
    rng = np.random.default_rng(0)
    period, a = rng.normal(10.0, 0.1, 1000), rng.normal(0.3, 0.003, 1000)
    one = mass_blocks(period, a, parallax=(100.0, 5.0), seed=9)
    two = mass_blocks(period, a, parallax=(100.0, 5.0), seed=9)
    other = mass_blocks(period, a, parallax=(100.0, 5.0), seed=10)
    assert one == two and one["mass"]["seed"] == 9
    assert one["mass"]["total"]["value"] != other["mass"]["total"]["value"]
    text = format_mass_blocks(one)
    m = one["mass"]["total"]
    assert fmt.interval_parts(m["value"], m["low"], m["high"])[0] in text and "seed 9" in text


# ---------------------------------------------------------------- statistical coverage
def test_interval_coverage_on_synthetic_systems():
    """The 68 % and 95 % intervals contain the true mass as often as they claim."""
    # True system and Gaussian measurement errors (synthetic, invented).
    period, a, plx = 20.0, 1.0, 50.0
    sp, sa, splx = 0.2, 0.02, 2.5
    truth = total_mass_msun(a, plx, period)
    rng = np.random.default_rng(2024)
    trials, inside68, inside95 = 200, 0, 0
    for trial in range(trials):
        p_obs, a_obs, plx_obs = rng.normal([period, a, plx], [sp, sa, splx])
        draws_p, draws_a = rng.normal(p_obs, sp, 1000), rng.normal(a_obs, sa, 1000)
        total = mass_blocks(draws_p, draws_a, parallax=(plx_obs, splx), seed=trial)["mass"]["total"]
        inside68 += total["low"] <= truth <= total["high"]
        inside95 += total["low95"] <= truth <= total["high95"]
    # Binomial standard errors for 200 trials: sqrt(.683 .317/200) = 0.033,
    # sqrt(.954 .046/200) = 0.015; allow 3 of them.
    assert inside68 / trials == pytest.approx(0.6827, abs=3 * 0.033)
    assert inside95 / trials == pytest.approx(0.9545, abs=3 * 0.015)


def test_runaway_dynamical_parallax_is_refused():
    # A K = -1.4 star at the Sirius orbit is ~12 mag brighter than the Mann et al. 2019
    # range (4 < M_Ks < 11): the polynomial blows up and the command must say so.
    with pytest.raises(InputError, match="runs away"):
        mass_blocks([50.1284, 50.13], [7.4957, 7.4957], magnitudes=(-1.4, 8.4), band="K")


def test_v_band_needs_bolometric_corrections_and_then_equals_the_bolometric_route():
    # m_bol = m_V + BC_V (definition of the bolometric correction): V magnitudes with BCs
    # must give exactly the parallax of the equivalent bolometric magnitudes.
    period, a = np.array([50.0, 52.0]), np.array([1.0, 1.02])
    with pytest.raises(InputError, match="bolometric-corrections"):
        mass_blocks(period, a, magnitudes=(5.0, 6.0), band="V")
    with pytest.raises(InputError, match="not to band 'bol'"):
        mass_blocks(period, a, magnitudes=(5.0, 6.0), band="bol",
                    bolometric_corrections=(-0.1, -0.3))
    via_v = mass_blocks(period, a, magnitudes=(5.0, 6.0), band="V",
                        bolometric_corrections=(-0.1, -0.3))
    via_bol = mass_blocks(period, a, magnitudes=(4.9, 5.7), band="bol")
    assert via_v["parallax"]["value"] == pytest.approx(via_bol["parallax"]["value"], rel=1e-12)
    assert via_v["parallax"]["input_band"] == "V"
    assert via_v["parallax"]["bolometric_corrections"] == [-0.1, -0.3]


@pytest.mark.parametrize("a_arcsec, period_yr, expected", [
    (1.74, 22.2, "more than any binary known"),       # (68.8 au)^3 / (22.2 yr)^2 = 660 M_sun
    (0.5, 39.4, None),                                # (19.8 au)^3 / (39.4 yr)^2 = 5.0 M_sun
    (0.02, 39.4, "less than any pair"),               # (0.79 au)^3 / (39.4 yr)^2 = 3e-4 M_sun
])
def test_a_total_mass_no_known_binary_has_is_flagged(a_arcsec, period_yr, expected):
    # Kepler's third law in solar units, M = (a / plx)^3 / P^2, by hand beside each case;
    # the bounds are the order of magnitude of the known binaries (common practice).
    rng = np.random.default_rng(3)
    blocks = mass_blocks(rng.normal(period_yr, 0.01, 400), rng.normal(a_arcsec, 1e-4, 400),
                         parallax=(25.3, 0.05), seed=1)
    total = blocks["mass"]["total"]["value"]
    assert total == pytest.approx((a_arcsec / 0.0253) ** 3 / period_yr**2, rel=0.01)
    flagged = [w for w in blocks["warnings"] if "The total mass" in w]
    if expected is None:
        assert not flagged and implausible_total(total) is None
    else:
        assert len(flagged) == 1 and expected in flagged[0]
        assert flagged[0] == implausible_total(total)
