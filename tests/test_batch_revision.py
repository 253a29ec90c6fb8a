"""Tests of the orbit-revision verdict and of the old-versus-new comparison."""
from __future__ import annotations

import math

import numpy as np
import pytest

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.measurements import MeasurementSet
from orbweigh.revision import chi2_tail, check_revision, compare_orbits, old_orbit_residuals

OLD = CampbellElements(20.0, 2001.3, 0.35, 0.8, 55.0, 140.0, 75.0)
SIGMA_THETA, SIGMA_RHO = 0.5, 0.01


def _data(t, z_theta=0.0, z_rho=0.0, elements=OLD):
    """Measurements displaced from ``elements`` by exactly z sigma in each component."""
    eph = ephemeris(elements, t)
    return MeasurementSet.from_arrays(t, eph.theta_deg + np.asarray(z_theta) * SIGMA_THETA,
                                      eph.rho_arcsec + np.asarray(z_rho) * SIGMA_RHO,
                                      SIGMA_THETA, SIGMA_RHO)


def _chi2_sf_even(x, dof):
    """chi2 tail for even dof = 2n: exp(-x/2) sum_{k<n} (x/2)^k / k!.

    Abramowitz & Stegun (1964), Handbook of Mathematical Functions, eq. 26.4.21
    (the chi2 / Poisson relation).
    """
    n, h = dof // 2, x / 2.0
    return math.exp(-h) * sum(h**k / math.factorial(k) for k in range(n))


def test_wrapped_theta_and_flips():
    t = np.array([2000.0, 2003.0, 2006.0])
    eph = ephemeris(OLD, t)
    theta = eph.theta_deg + np.array([0.2, -0.3, 180.0])   # the last is a quadrant flip
    data = MeasurementSet.from_arrays(t, np.mod(theta, 360.0), eph.rho_arcsec, SIGMA_THETA,
                                      SIGMA_RHO)
    oc = old_orbit_residuals(OLD, data)
    np.testing.assert_allclose(oc["d_theta_deg"], [0.2, -0.3, 0.0], atol=1e-9)
    assert oc["flipped"].tolist() == [False, False, True]
    assert abs(old_orbit_residuals(OLD, data, flips=False)["d_theta_deg"][2]) == \
        pytest.approx(180.0, abs=1e-9)


def test_wrap_across_north():
    # A prediction of 359.9 deg and a measurement of 0.1 deg differ by +0.2 deg, not -359.8.
    t = np.linspace(1990.0, 2010.0, 400)
    eph = ephemeris(OLD, t)
    k = int(np.argmin(np.abs(np.mod(eph.theta_deg + 180.0, 360.0) - 180.0)))
    data = MeasurementSet.from_arrays(t[k:k + 1], np.mod(eph.theta_deg[k:k + 1] + 0.2, 360.0),
                                      eph.rho_arcsec[k:k + 1], SIGMA_THETA, SIGMA_RHO)
    assert old_orbit_residuals(OLD, data)["d_theta_deg"][0] == pytest.approx(0.2, abs=1e-9)


@pytest.mark.parametrize("z_theta, verdict", [
    (np.tile([0.5, -0.5], 5), "consistent"),     # chi2 = 2.5 for 20 dof
    (np.full(10, 2.0), "drifting"),              # chi2 = 40: rejected, but not with sigma x3
    (np.full(10, 10.0), "contradicted"),         # chi2 = 1000: chi2/9 = 111 rejects too
])
def test_verdict_rule_on_exact_offsets(z_theta, verdict):
    t_old, t_new = np.linspace(1980.0, 2000.0, 8), np.linspace(2001.0, 2010.0, 10)
    z_all = np.concatenate([np.full(8, 30.0), z_theta])  # old points are far off: no vote
    check = check_revision(OLD, _data(np.concatenate([t_old, t_new]), z_theta=z_all),
                           last_epoch_yr=2000.5)
    assert check.verdict == verdict
    assert check.n_new == 10 and check.dof_new == 20 and check.n_all == 18
    chi2 = float(np.sum(z_theta**2))
    assert check.chi2_new == pytest.approx(chi2, rel=1e-6)
    assert check.p_value == pytest.approx(_chi2_sf_even(chi2, 20), rel=1e-6, abs=1e-300)
    assert check.p_value_inflated == pytest.approx(_chi2_sf_even(chi2 / 9.0, 20), rel=1e-6)
    assert check.mean_z_theta == pytest.approx(np.mean(z_theta), abs=1e-6)
    assert f"chi2 = {chi2:.1f} for 20 dof" in check.reason and len(check.residuals) == 18


def test_reason_never_prints_an_underflowed_p_as_zero():
    """Offsets of 100 sigma: chi2 = 1e5 for 20 dof, whose tail (exactly Q(10, 5e4), about
    1e-21700 by mpmath) underflows to 0 in floating point, with sigma x3 too; the reason
    gives the bound."""
    import mpmath
    t_new = np.linspace(2001.0, 2010.0, 10)
    check = check_revision(OLD, _data(t_new, z_theta=np.full(10, 100.0)), last_epoch_yr=2000.5)
    assert check.verdict == "contradicted" and check.p_value == check.p_value_inflated == 0.0
    assert mpmath.gammainc(10, check.chi2_new / 2, mpmath.inf, regularized=True) < 1e-300
    assert "(p < 1e-300; sigmas x3: p < 1e-300)" in check.reason
    assert "p = 0" not in check.reason


def test_small_coherent_offset_is_drifting_through_the_systematic_test():
    t = np.linspace(2001.0, 2010.0, 30)
    check = check_revision(OLD, _data(t, z_theta=0.8), last_epoch_yr=None)
    # chi2 = 30 * 0.64 = 19.2 for 60 dof passes; offset+trend chi2 = 19.2 for 4 dof fails.
    assert check.p_value > 0.99
    assert check.chi2_systematic == pytest.approx(19.2, rel=1e-6)
    assert check.dof_systematic == 4
    assert check.p_systematic == pytest.approx(_chi2_sf_even(19.2, 4), rel=1e-6)
    assert check.verdict == "drifting"
    # A linear drift z = 0.2 (t - t_mean) [1/yr] is measured as that slope.
    drift = check_revision(OLD, _data(t, z_rho=0.2 * (t - t.mean())))
    assert drift.trend_z_rho_per_yr == pytest.approx(0.2, rel=1e-6)
    assert drift.mean_z_rho == pytest.approx(0.0, abs=1e-9)


def test_no_new_data_and_excluded_rows():
    t = np.linspace(1990.0, 2000.0, 6)
    data = _data(t, z_theta=50.0)
    assert check_revision(OLD, data, last_epoch_yr=2005.0).verdict == "no new data"
    data.excluded[:] = [False, False, False, False, True, True]
    check = check_revision(OLD, data, last_epoch_yr=1995.0)
    # Only 1996 (index 3) is new and usable; the excluded rows are listed, not voting.
    assert check.n_new == 1 and check.dof_systematic == 2
    assert [r["status"] for r in check.residuals].count("excluded") == 2


def test_compare_same_orbit_in_other_guise_is_identical():
    shifted = CampbellElements(OLD.period_yr, OLD.periastron_yr + 2 * OLD.period_yr, OLD.e,
                               OLD.a_arcsec, OLD.i_deg, OLD.node_deg + 180.0,
                               OLD.omega_deg + 180.0)
    comp = compare_orbits(OLD, shifted, 2010.0, 0.01, {"P": 0.1}, {"P": 0.1})
    assert comp["max_separation_arcsec"] < 1e-9
    assert all(abs(v["difference"]) < 1e-9 for v in comp["elements"].values())
    assert comp["elements"]["P"]["n_sigma"] == 0.0 and comp["elements"]["e"]["n_sigma"] is None


def test_compare_scaled_circular_face_on_orbit():
    # Face-on circle: the positions of a 10 % larger orbit are 0.1 a away at every epoch.
    old = CampbellElements(10.0, 2000.0, 0.0, 1.0, 0.0, 30.0, 0.0)
    new = CampbellElements(10.0, 2000.0, 0.0, 1.1, 0.0, 30.0, 0.0)
    comp = compare_orbits(old, new, 2020.0, 0.02, {"a": 0.03}, {"a": 0.04})
    assert comp["max_separation_arcsec"] == pytest.approx(0.1, rel=1e-9)
    assert comp["max_separation_sigma"] == pytest.approx(5.0, rel=1e-9)
    assert comp["elements"]["a"]["n_sigma"] == pytest.approx(0.1 / 0.05, rel=1e-9)
    assert comp["window_yr"] == [2020.0, 2030.0]


@pytest.mark.parametrize("scale, written, shown", [
    ("besselian", 2012.0, "newer than 2012.000 (Besselian year)"),
    ("julian", 2012.0, "newer than 2012.000 (Julian year)")])
def test_reason_names_the_last_epoch_in_the_log_scale(scale, written, shown):
    # A last epoch written 2012.0 in a Besselian log is J2011.998 inside (astropy's Time,
    # byear -> jyear); the verdict's reason must give it back as written, in the log's scale.
    from astropy.time import Time

    last = float(Time(written, format="byear" if scale == "besselian" else "jyear").jyear)
    t = np.linspace(2005.0, 2020.0, 16)
    eph = ephemeris(OLD, t)
    data = MeasurementSet.from_arrays(t, eph.theta_deg, eph.rho_arcsec, SIGMA_THETA, SIGMA_RHO,
                                      epoch_scale=scale)
    check = check_revision(OLD, data, last_epoch_yr=last)
    assert shown in check.reason and "2011.998" not in check.reason
    assert f"; {int((t > last).sum())} points newer" in check.reason


@pytest.mark.parametrize("dof", [1, 2, 3, 4, 7, 20, 101, 1000, 4001, 10000])
def test_chi2_tail_matches_mpmath(dof):
    # Q(dof/2, x/2) by mpmath's regularized incomplete gamma at 40 digits, from the
    # bulk of the distribution to both tails; below 1e-290 only an underflow is asked.
    import mpmath
    mpmath.mp.dps = 40
    for x in dof * np.array([0.0, 1e-6, 0.01, 0.3, 0.8, 1.0, 1.2, 2.0, 5.0, 20.0, 100.0]):
        ref = float(mpmath.gammainc(mpmath.mpf(dof) / 2, mpmath.mpf(x) / 2, mpmath.inf,
                                    regularized=True))
        if ref > 1e-290:
            assert chi2_tail(x, dof) == pytest.approx(ref, rel=2e-10)
        else:
            assert chi2_tail(x, dof) < 1e-280
    assert chi2_tail(np.inf, dof) == 0.0


def test_a_new_t_moved_by_whole_periods_carries_the_period_error():
    # The new orbit's T, 2017.8, lies one period (12.6 yr) after the old one's, 2005.2:
    # compared there, T = T_new - P_new, whose variance is sT^2 + sP^2 - 2 cov(P, T)
    # (a linear combination of correlated variables); with sT = 0.002, sP = 0.064 and
    # cov = 1e-5 yr^2 that is sqrt(4e-6 + 4.096e-3 - 2e-5) = 0.06388 yr, not 0.002.
    old = CampbellElements(12.58, 2005.21, 0.79, 0.38, 124.0, 148.6, 331.4)
    new = CampbellElements(12.64, 2017.79, 0.79, 0.38, 124.0, 148.6, 331.4)
    comp = compare_orbits(old, new, 2024.0, 0.005, old_errors={},
                          new_errors={"T": 0.002, "P": 0.064}, new_pt_covariance=1e-5)
    t = comp["elements"]["T"]
    assert t["new"] == pytest.approx(2017.79 - 12.64)
    assert t["sigma"] == pytest.approx(math.sqrt(0.002**2 + 0.064**2 - 2e-5), rel=1e-12)
    assert t["new_error"] == t["sigma"]          # the old T has no error here
    assert abs(t["n_sigma"]) == pytest.approx(abs(2005.15 - 2005.21) / 0.06388, rel=1e-3)
    # Not moved: T keeps its own error.
    same = compare_orbits(old, CampbellElements(12.64, 2005.15, 0.79, 0.38, 124.0, 148.6,
                                                331.4), 2024.0, 0.005, old_errors={},
                          new_errors={"T": 0.002, "P": 0.064}, new_pt_covariance=1e-5)
    assert same["elements"]["T"]["sigma"] == pytest.approx(0.002)
