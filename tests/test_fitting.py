"""Orbit fits of synthetic logs: recovery within the reported uncertainties, pulls,
planted quadrant flips and outliers.

The logs come from tests/synthetic.py, which computes positions without orbweigh's
orbit model (brentq Kepler solutions, 3-D rotation matrices). "Recovered" means
|fit - true| < N_SIGMA reported sigma for each well-defined quantity; Omega and omega
are compared modulo the common 180 deg shift that positions cannot resolve.
"""
import math

import numpy as np

from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.solution import undetermined_advice
from synthetic import make_log, rotation

#: Recovery bound in reported sigmas (4: a 6e-5 two-sided Gaussian tail per quantity).
N_SIGMA = 4.0
ELEMENT_INDEX = {k: j for j, k in enumerate(("P", "T", "e", "a", "i", "Omega", "omega"))}


def wrap180(angle):
    """Angle difference [deg] wrapped into (-180, 180]."""
    return 180.0 - np.mod(180.0 - angle, 360.0)


def differences(elements, truth):
    """fit - true per element: T at the fitted passage nearest the true one, and
    (Omega, omega) with the common 180 deg shift that brings Omega closest."""
    fit = elements.to_keys()
    d = {k: fit[k] - truth[k] for k in ("P", "e", "a", "i")}
    k_periods = round((fit["T"] - truth["T"]) / fit["P"])
    d["T"] = fit["T"] - k_periods * fit["P"] - truth["T"]
    shift = round((fit["Omega"] - truth["Omega"]) / 180.0)
    d["Omega"] = fit["Omega"] - truth["Omega"] - 180.0 * shift
    d["omega"] = wrap180(fit["omega"] - truth["omega"] - 180.0 * shift)
    return d, shift


def assert_recovered(sol, truth, keys=("P", "T", "e", "a", "i", "Omega", "omega")):
    d, _ = differences(sol.elements, truth)
    for k in keys:
        err = sol.errors[k]
        assert err is not None and np.isfinite(err) and err > 0, (k, err)
        assert abs(d[k]) < N_SIGMA * err, f"{k}: fit - true = {d[k]:.4g}, sigma = {err:.4g}"


def sigma_of(sol, gradient):
    """1-sigma error of a linear combination of the elements, from the covariance."""
    g = np.zeros(7)
    for k, v in gradient.items():
        g[ELEMENT_INDEX[k]] = v
    return math.sqrt(g @ sol.covariance @ g)


def true_thiele_innes(truth):
    """(A, B, F, G) from the rotation matrix: x = A X + F Y, y = B X + G Y with the
    in-plane (a X, a Y) = (r cos nu, r sin nu), so A, F (B, G) are a times the first
    (second) row's first two entries."""
    R = truth["a"] * rotation(truth)
    return {"A": R[0, 0], "B": R[1, 0], "F": R[0, 1], "G": R[1, 1]}


def fit(truth, epochs, seed, sigma_theta=0.5, sigma_rho=0.005, **options):
    ms = make_log(truth, epochs, sigma_theta, sigma_rho, seed=seed,
                  flips=options.pop("plant_flips", ()),
                  outliers=options.pop("plant_outliers", ()))
    return fit_orbit(ms, FitOptions(seed=seed, **options))


def over_periods(truth, n, cycles, start=2000.0):
    """n epochs evenly over ``cycles`` periods from ``start`` [Julian yr]."""
    return np.linspace(start, start + cycles * truth["P"], n)


# --- recovery -----------------------------------------------------------------------------

WELL_COVERED = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


def test_well_covered_orbit():
    sol = fit(WELL_COVERED, over_periods(WELL_COVERED, 40, 1.6), seed=101)
    assert_recovered(sol, WELL_COVERED)
    # honest noise level: chi2/dof near 1 for 80 - 7 dof (+- 3 sigma = +- 0.5), and the
    # errors are not inflated: a Fisher estimate gives sigma_a/a ~ 0.005/(0.85 sqrt 40)
    # ~ 1e-3, sigma_P/P of the same order (bound: 10 times that)
    assert 0.5 < sol.reduced_chi2 < 1.5
    assert sol.errors["P"] / 24.0 < 0.01 and sol.errors["a"] / 0.85 < 0.01
    assert (sol.status == "used").all()
    assert 0.0 <= sol.elements.node_deg < 180.0


def test_eccentric_orbit():
    truth = dict(P=30.0, T=2020.0, e=0.93, a=1.2, i=62.0, Omega=35.0, omega=80.0)
    sol = fit(truth, over_periods(truth, 40, 1.6), seed=102)
    assert_recovered(sol, truth)
    assert sol.elements.e >= 0.9


def test_near_circular_orbit():
    # e ~ 0: omega and T trade off; the position along the orbit at a reference epoch,
    # lambda = omega + 360 (t_ref - T) / P [deg] (mean anomaly plus omega), is defined.
    truth = dict(P=18.0, T=2013.0, e=0.01, a=0.6, i=40.0, Omega=150.0, omega=30.0)
    sol = fit(truth, over_periods(truth, 40, 1.6), seed=103)
    assert_recovered(sol, truth, keys=("P", "e", "a", "i", "Omega"))
    t_ref = 2014.0
    el = sol.elements
    lam = el.omega_deg + 360.0 * (t_ref - el.periastron_yr) / el.period_yr
    lam_true = truth["omega"] + 360.0 * (t_ref - truth["T"]) / truth["P"]
    _, shift = differences(el, truth)
    d_lam = wrap180(lam - lam_true - 180.0 * shift)
    s_lam = sigma_of(sol, {"omega": 1.0, "T": -360.0 / el.period_yr,
                           "P": -360.0 * (t_ref - el.periastron_yr) / el.period_yr**2})
    assert abs(d_lam) < N_SIGMA * s_lam
    assert s_lam < 0.2 * sol.errors["omega"]   # indeed far better defined than omega


def test_face_on_orbit():
    # i ~ 5 deg: Omega and omega are individually ill-defined, Omega + omega (the
    # periastron's position angle direction) and the Thiele-Innes constants are not.
    truth = dict(P=20.0, T=2016.0, e=0.4, a=0.7, i=5.0, Omega=70.0, omega=140.0)
    sol = fit(truth, over_periods(truth, 40, 1.6), seed=104)
    assert_recovered(sol, truth, keys=("P", "T", "e", "a"))
    el = sol.elements
    d_sum = wrap180(el.node_deg + el.omega_deg - truth["Omega"] - truth["omega"])
    assert abs(d_sum) < N_SIGMA * sigma_of(sol, {"Omega": 1.0, "omega": 1.0})
    for key, value in true_thiele_innes(truth).items():
        assert abs(sol.thiele_innes[key] - value) < N_SIGMA * sol.thiele_innes_errors[key]


def test_edge_on_orbit():
    truth = dict(P=22.0, T=2017.0, e=0.35, a=0.9, i=89.0, Omega=20.0, omega=300.0)
    sol = fit(truth, over_periods(truth, 40, 1.6), seed=105)
    assert_recovered(sol, truth)


def test_retrograde_orbit():
    truth = dict(P=26.0, T=2019.0, e=0.45, a=1.0, i=131.0, Omega=160.0, omega=45.0)
    sol = fit(truth, over_periods(truth, 40, 1.6), seed=106)
    assert_recovered(sol, truth)
    assert sol.elements.i_deg > 90.0


def test_partially_covered_orbit():
    # 40 % of the period, through periastron: the truth must lie within the reported
    # errors of the best solution or of one of the alternatives (with the best's errors
    # as the yardstick), and the fit must say that the arc is partial.
    truth = dict(P=60.0, T=2012.0, e=0.55, a=1.1, i=58.0, Omega=75.0, omega=120.0)
    sol = fit(truth, np.linspace(2000.0, 2024.0, 30), seed=107)
    candidates = [sol.elements] + [el for el, _ in sol.alternatives]
    keys = ("P", "T", "e", "a", "i", "Omega", "omega")

    def consistent(el):
        d, _ = differences(el, truth)
        return all(abs(d[k]) < N_SIGMA * sol.errors[k] for k in keys)
    assert any(consistent(el) for el in candidates)
    assert any("partial arc" in w for w in sol.warnings)


# --- pulls --------------------------------------------------------------------------------

def test_pulls_over_noise_realisations():
    # 50 logs of one fast case (period range given, so each fit is quick); pull =
    # (fit - true) / reported sigma. For calibrated errors: mean 0 +- 1/sqrt(50) = 0.14,
    # spread 1 +- 1/sqrt(100) = 0.1; bounds ~3 sigma: |mean| < 0.4, spread in [0.7, 1.35].
    truth = dict(P=12.0, T=2009.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)
    epochs = over_periods(truth, 24, 1.5)
    pulls = {k: [] for k in ("P", "a", "e")}
    flagged = 0
    for seed in range(1000, 1050):           # seeds 1000..1049
        sol = fit(truth, epochs, seed=seed, period_range=(9.0, 16.0))
        d, _ = differences(sol.elements, truth)
        for k in pulls:
            pulls[k].append(d[k] / sol.errors[k])
        flagged += int((sol.status != "used").sum())
    for k, p in pulls.items():
        assert abs(np.mean(p)) < 0.4, (k, np.mean(p))
        assert 0.7 < np.std(p, ddof=1) < 1.35, (k, np.std(p, ddof=1))
    # no planted points: 1200 Gaussian points, P(chi2_2 > 16) = 3.4e-4 each -> 0.4
    # false outliers expected; more than 3 would be a Poisson 0.1 % event
    assert flagged <= 3


# --- planted flips and outliers -----------------------------------------------------------

PLANTED_FLIPS = (4, 19)
PLANTED_OUTLIERS = ((9, 10.0), (27, 8.0))


def test_planted_flips_and_outliers_are_found_and_only_those():
    epochs = over_periods(WELL_COVERED, 40, 1.6)
    sol = fit(WELL_COVERED, epochs, seed=108, plant_flips=PLANTED_FLIPS,
              plant_outliers=PLANTED_OUTLIERS)
    expected = np.full(40, "used", dtype=object)
    expected[list(PLANTED_FLIPS)] = "flipped"
    expected[[k for k, _ in PLANTED_OUTLIERS]] = "outlier"
    assert sol.status.tolist() == expected.tolist()
    assert_recovered(sol, WELL_COVERED)
    # the document keeps every row, with its line number and status
    doc = sol.to_document()
    assert [r["status"] for r in doc["residuals"]] == expected.tolist()
    assert [r["line"] for r in doc["residuals"]] == list(range(1, 41))
    assert doc["statistics"]["n_used"] == 38
    # flipped rows are corrected: their residual is small after the 180 deg correction
    assert np.all(np.abs(sol.d_theta_deg[list(PLANTED_FLIPS)]) < N_SIGMA * 0.5)


def test_flips_switched_off_are_not_corrected():
    epochs = over_periods(WELL_COVERED, 40, 1.6)
    sol = fit(WELL_COVERED, epochs, seed=108, plant_flips=PLANTED_FLIPS, flips=False)
    assert "flipped" not in sol.status.tolist()
    # the 180 deg points cannot be fitted, so they end up set aside, and nothing else
    assert np.flatnonzero(sol.status == "outlier").tolist() == list(PLANTED_FLIPS)
    assert_recovered(sol, WELL_COVERED)


# --- a published orbit of a real binary as the check value -------------------------------

# eta Coronae Borealis AB as in Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57,
# Example 57.a (values as printed in the book): the star's
# identity is from memory. The book's ephemeris for 1980.0 is theta = 318.4 deg,
# rho = 0.411" (book rounding). No real measurement log is at hand, so the log is built
# from the published elements (independent generator, speckle-like noise over
# 1900-2000) and the fit must give back the published orbit and the book's position
# (tolerance: the book's rounding plus about 3 sigma of the fitted prediction, 3 x 0.087 deg
# and 3 x 0.0005" for this log).
ETA_CRB = dict(P=41.623, T=1934.008, e=0.2763, a=0.907, i=59.025, Omega=23.717, omega=219.907)


def test_published_orbit_of_eta_crb_is_recovered():
    epochs = np.sort(np.random.default_rng(57).uniform(1900.0, 2000.0, 80))
    sol = fit(ETA_CRB, epochs, seed=57, sigma_theta=0.2, sigma_rho=0.004)
    assert_recovered(sol, ETA_CRB)
    from orbweigh.ephemeris import ephemeris
    at_1980 = ephemeris(sol.elements, [1980.0])
    assert abs(wrap180(at_1980.theta_deg[0] - 318.4)) < 0.3     # book gives 0.1 deg
    assert abs(at_1980.rho_arcsec[0] - 0.411) < 0.003           # book gives 0.001"


# --- logs that cannot support an orbit ----------------------------------------------------

def test_one_night_is_refused():
    import pytest
    from orbweigh.errors import FitError
    ms = make_log(WELL_COVERED, np.full(6, 2020.25), 0.5, 0.005, seed=3)
    with pytest.raises(FitError, match="1 distinct epoch"):
        fit_orbit(ms)


def test_short_arc_is_flagged_undetermined():
    # 3 years of a 300-year orbit: the arc fixes the motion, not P or a.
    truth = dict(WELL_COVERED, P=300.0, T=2100.0, a=2.0)
    sol = fit(truth, np.linspace(2010.0, 2013.0, 12), seed=4)
    # P and a either come with errors above half their values or with none at all
    # (degenerate covariance: a change at the last digit decides which); either way no
    # mass, dynamical parallax or plan may follow from them.
    assert any("undetermined" in w or "covariance could not be estimated" in w
               for w in sol.warnings)
    assert undetermined_advice(sol.to_document(), "mass") is not None


def test_a_fit_without_any_uncertainty_gives_no_mass():
    # The same rule for a degenerate fit whose covariance is missing: no error to judge
    # by, so no mass; published elements without errors are not a fit and still give one.
    doc = fit(WELL_COVERED, over_periods(WELL_COVERED, 24, 1.5), seed=1).to_document()
    assert undetermined_advice(doc, "mass") is None
    doc["covariance"] = None
    for entry in doc["elements"].values():
        entry["error"] = None
    advice = undetermined_advice(doc, "mass")
    assert advice is not None and "covariance could not be estimated" in advice
    del doc["statistics"]
    assert undetermined_advice(doc, "mass") is None


def test_flips_never_exceed_a_quarter_of_the_points():
    # Half the points planted as flips: no longer "occasional quadrant errors"; at most a
    # quarter may be corrected (the rest show up as outliers or a poor fit, not silently).
    epochs = over_periods(WELL_COVERED, 24, 1.5)
    sol = fit(WELL_COVERED, epochs, seed=5, plant_flips=tuple(range(0, 24, 2)))
    assert (sol.status == "flipped").sum() <= 6


def test_warnings_count_in_the_singular_for_one_row():
    # The sample log has one outlier (line 16) and two flips: one row is 'an outlier'.
    from pathlib import Path

    from orbweigh.measurements import read_measurements
    log = Path(__file__).resolve().parents[1] / "sample_measurements" / "measurements.csv"
    sol = fit_orbit(read_measurements(log), FitOptions(seed=1))
    assert "1 measurement left out as an outlier beyond 4 sigma (line 16)." in sol.warnings
    assert "2 measurements corrected for a 180 deg quadrant error (lines 56, 69)." \
        in sol.warnings
