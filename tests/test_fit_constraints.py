"""Held elements (--fix), the period bound (--period-range) and the analytic Campbell
covariance, on synthetic logs from tests/synthetic.py (independent of orbweigh's model:
brentq Kepler solutions and 3-D rotation matrices)."""
import json
import math

import mpmath
import numpy as np
import pytest

from orbweigh.errors import InputError
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.report.tables import element_name
from orbweigh.solution import campbell_covariance
from orbweigh.summary import format_result
from synthetic import make_log

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


def _log(truth, n=30, cycles=1.3, seed=7, sigma_theta=0.5, sigma_rho=0.005):
    epochs = np.linspace(2000.0, 2000.0 + cycles * truth["P"], n)
    return make_log(truth, epochs, sigma_theta, sigma_rho, seed=seed)


# A circular truth: omega = 0, so T = 2015.0 is a passage through the node Omega.
CIRCULAR = dict(TRUTH, e=0.0, omega=0.0)


def _off(value, truth, period):
    """|value - truth| with the difference wrapped into a half period either way."""
    return abs(math.remainder(value - truth, period))


@pytest.mark.parametrize("node", [112.0, 292.0])
def test_circular_orbit_with_e_held_has_omega_0_and_t_at_the_node(node):
    # e held at 0: omega is held at 0 by convention and T is the epoch of passage through
    # the node Omega (common practice, no source). With the node on the far side (292
    # deg) the orbit is reported with Omega = 112 and T half a period later (same orbit).
    data = _log(dict(CIRCULAR, Omega=node))
    free = fit_orbit(data)
    sol = fit_orbit(data, FitOptions(fixed={"e": 0.0}))
    el = sol.elements
    assert el.e == 0.0 and el.omega_deg == 0.0
    assert sol.errors["e"] is None and sol.errors["omega"] is None
    assert sol.dof == 2 * 30 - 5                  # P, T, a, i, Omega free
    doc = sol.to_document()
    assert doc["elements"]["omega"] == {"value": 0.0, "error": None, "unit": "deg",
                                        "fixed": True}
    assert doc["fit"] == {"fixed": {"e": 0.0}, "period_bounds": None}   # as given
    assert ("Circular orbit (e held at 0): omega is 0 by convention and T is the epoch of "
            "passage through the node Omega.") in sol.notes
    assert not any("undetermined" in w or "poorly defined" in w for w in sol.warnings)
    assert any("omega = 0 by convention" in w for w in sol.warnings)
    # T is named for what it is, in the printed summary and in the report's tables
    assert "T (node passage)" in format_result(doc)
    assert element_name("T", doc["elements"]) == "Epoch of node passage"
    assert element_name("T", free.to_document()["elements"]) == "Epoch of periastron"
    # errors as those of the free fit of the same log (within 3x) and far below the values
    for key in ("P", "a", "i"):
        ratio = sol.errors[key] / free.errors[key]
        assert 1 / 3 < ratio < 3, (key, ratio)
    assert sol.errors["P"] < 1e-3 * 24.0 and sol.errors["a"] < 1e-2 * 0.85
    assert sol.errors["i"] < 1.0 and sol.errors["T"] < 1e-2 * 24.0
    # the truth within 4 sigma (common practice, no source); T modulo P
    t_node = 2015.0 + (12.0 if node >= 180.0 else 0.0)
    assert abs(el.period_yr - 24.0) < 4 * sol.errors["P"]
    assert _off(el.periastron_yr, t_node, el.period_yr) < 4 * sol.errors["T"]
    assert abs(el.a_arcsec - 0.85) < 4 * sol.errors["a"]
    assert abs(el.i_deg - 48.0) < 4 * sol.errors["i"]
    assert abs(el.node_deg - 112.0) < 4 * sol.errors["Omega"]
    # and T nearest the middle of the data, as the free fit's
    assert abs(el.periastron_yr - np.mean(data.epoch_yr)) <= 0.5 * el.period_yr


def test_circular_orbit_with_the_node_held_on_the_far_branch():
    # e = 0 and Omega = 292 held (the truth's 112 + 180): the same apparent orbit, reported
    # as Omega = 112 exactly with omega still 0 and T moved by half a period, back at the
    # truth's node passage 2015.0 (within 4 sigma; common practice, no source).
    sol = fit_orbit(_log(CIRCULAR), FitOptions(fixed={"e": 0.0, "Omega": 292.0}))
    el = sol.elements
    assert el.node_deg == 112.0 and el.omega_deg == 0.0 and sol.dof == 2 * 30 - 4
    assert _off(el.periastron_yr, 2015.0, el.period_yr) < 4 * sol.errors["T"]
    assert any("reported as Omega = 112 deg with T half a period away" in w
               for w in sol.warnings)
    assert any("(Omega + 180, T + P/2) is the same apparent orbit" in n for n in sol.notes)


def test_circular_orbit_with_t_held_keeps_omega_free():
    # e and T held: omega then places the node passage, so no convention applies; the
    # truth's T = 2015 is a node passage, so omega comes out near 0 (within 4 sigma).
    sol = fit_orbit(_log(CIRCULAR), FitOptions(fixed={"e": 0.0, "T": 2015.0}))
    assert sol.dof == 2 * 30 - 5 and sol.errors["omega"] is not None   # P, a, i, Omega, omega
    assert abs(math.remainder(sol.elements.omega_deg, 360.0)) < 4 * sol.errors["omega"]
    assert not any("by convention" in n for n in sol.notes + sol.warnings)


def test_fixed_period_is_held_and_the_rest_recovered():
    # P held at its true value on a 40 % arc: the other elements from the arc alone.
    sol = fit_orbit(_log(TRUTH, n=20, cycles=0.4), FitOptions(fixed={"P": 24.0}))
    assert sol.elements.period_yr == 24.0 and sol.errors["P"] is None
    assert sol.dof == 2 * 20 - 6
    for key, true in (("e", 0.5), ("a", 0.85), ("i", 48.0)):
        assert abs(sol.elements.to_keys()[key] - true) < 4 * sol.errors[key], key


def test_fixed_campbell_angle_is_a_constrained_refinement():
    # i held 10 deg off the truth: the refinement must keep i exactly, and the fit is
    # then worse than the free one by far more than the noise (chi2 difference >> 1).
    data = _log(TRUTH)
    free = fit_orbit(data)
    held = fit_orbit(data, FitOptions(fixed={"i": 58.0, "a": 0.85}))
    assert held.elements.i_deg == pytest.approx(58.0, abs=1e-9)
    assert held.elements.a_arcsec == pytest.approx(0.85, abs=1e-12)
    assert held.errors["i"] is None and held.errors["a"] is None
    assert held.dof == free.dof + 2 and held.chi2 > free.chi2 + 100
    # held at the truth instead, the constrained fit is as good as the free one
    truth_held = fit_orbit(data, FitOptions(fixed={"i": 48.0, "Omega": 112.0}))
    assert truth_held.chi2 < free.chi2 + 10
    assert abs(truth_held.elements.period_yr - 24.0) < 4 * truth_held.errors["P"]


def test_a_node_held_far_from_the_truth_stays_as_held_when_the_fit_goes_face_on():
    # Omega held 92 deg off the truth: the best orbit allowed is face-on (i near 0),
    # where Omega has no effect. The reported Omega must be exactly the held value (not
    # a new split of Omega + omega from the Thiele-Innes constants), the reported
    # elements must still be the fitted orbit, and the user is told the data disfavour
    # the held value.
    from orbweigh.ephemeris import ephemeris
    from orbweigh.model import predict_theta_rho

    data = make_log(TRUTH, np.linspace(2000, 2030, 40), 0.5, 0.005, seed=3)
    held = fit_orbit(data, FitOptions(fixed={"Omega": 20.0}))
    assert held.elements.node_deg == 20.0 and held.errors["Omega"] is None
    assert held.elements.i_deg < 1.0
    theta, rho = predict_theta_rho(held.params, data.epoch_yr)
    shown = ephemeris(held.elements, data.epoch_yr)
    assert np.allclose(shown.rho_arcsec, rho, atol=1e-9)
    assert np.allclose(np.mod(shown.theta_deg - theta + 180, 360) - 180, 0, atol=1e-6)
    said = [w for w in held.warnings if w.startswith("With Omega held the fit went face-on")]
    assert len(said) == 1 and "the data disfavour the held value" in said[0]
    assert not any("went face-on" in w for w in fit_orbit(data).warnings)


def test_fixed_periastron_in_the_log_scale():
    # T given in the log's scale (here Julian years, the synthetic logs' scale)
    sol = fit_orbit(_log(TRUTH), FitOptions(fixed={"T": 2015.0}))
    assert sol.elements.periastron_yr == pytest.approx(2015.0, abs=1e-9)
    assert sol.to_document()["elements"]["T"]["fixed"] is True


def test_period_range_is_a_bound():
    # The truth (24 yr) lies outside 30-40 yr: the answer must stay inside and say so.
    sol = fit_orbit(_log(TRUTH), FitOptions(period_bounds=(30.0, 40.0)))
    assert 30.0 <= sol.elements.period_yr <= 40.0
    assert any("sits on the bound" in w for w in sol.warnings)
    assert sol.to_document()["fit"]["period_bounds"] == [30.0, 40.0]
    inside = fit_orbit(_log(TRUTH), FitOptions(period_bounds=(20.0, 30.0)))
    assert abs(inside.elements.period_yr - 24.0) < 4 * inside.errors["P"]
    assert not any("sits on the bound" in w for w in inside.warnings)


@pytest.mark.parametrize("fixed", [{"x": 1.0}, {"e": 1.2}, {"P": -3.0}, {"i": 200.0}])
def test_bad_fixed_values_are_refused(fixed):
    with pytest.raises(InputError):
        FitOptions(fixed=fixed)


def _campbell_mp(A, B, F, G):
    """(a, i, Omega, omega) [deg] from (A, B, F, G) with mpmath, on the continuous branch
    of Omega near the given one (no 180 deg normalisation): the sums w +- W from atan2
    (Heintz, Double Stars, 1978, ch. 4, the Thiele-Innes relations)."""
    p = mpmath.sqrt((A + G) ** 2 + (B - F) ** 2)
    q = mpmath.sqrt((A - G) ** 2 + (B + F) ** 2)
    wp, wm = mpmath.atan2(B - F, A + G), mpmath.atan2(-B - F, A - G)
    return [(p + q) / 2, mpmath.degrees(2 * mpmath.atan2(mpmath.sqrt(q), mpmath.sqrt(p))),
            mpmath.degrees((wp - wm) / 2), mpmath.degrees((wp + wm) / 2)]


@pytest.mark.parametrize("node_deg", [1e-5, 179.99999, 90.0])
def test_campbell_covariance_across_the_node_seam(node_deg):
    from orbweigh.elements import thiele_innes_from_campbell

    mpmath.mp.dps = 40
    a, i, omega = 0.85, 48.0, 250.0
    ti = thiele_innes_from_campbell(a, *np.radians([i, node_deg, omega]))
    params = np.array([24.0, 2015.0, 0.5, *ti])
    cov = np.diag([0.1, 0.2, 0.01, 1e-6, 2e-6, 3e-6, 4e-6])
    # independent Jacobian: mpmath central differences on the continuous branch
    jac = np.eye(7)
    x = [mpmath.mpf(float(v)) for v in ti]
    h = mpmath.mpf("1e-15")
    for k in range(4):
        up, down = list(x), list(x)
        up[k] += h
        down[k] -= h
        jac[3:, 3 + k] = [float((u - d) / (2 * h))
                          for u, d in zip(_campbell_mp(*up), _campbell_mp(*down))]
    expected = jac @ cov @ jac.T
    got = campbell_covariance(params, cov)
    np.testing.assert_allclose(got, expected, rtol=1e-6, atol=1e-12)
    assert math.sqrt(got[6, 6]) < 1.0    # sigma(omega) a fraction of a degree, not 4e4


# --- short arcs with a quadrant error -------------------------------------------------------

ARC = dict(P=25.0, T=2012.0, e=0.4, a=0.8, i=55.0, Omega=60.0, omega=120.0)


@pytest.mark.parametrize("seed", [1, 3])
def test_short_arc_with_one_quadrant_error(seed):
    # 10 points over 10 yr of a 25-yr pair, row 6 turned by 180 deg. Without searching
    # under the flip hypothesis the fit lands on P ~ 300 yr, e ~ 0.97, reduced chi2 ~ 1700.
    epochs = np.linspace(2005.0, 2015.0, 10)
    sol = fit_orbit(make_log(ARC, epochs, 0.5, 0.005, seed=seed, flips=(6,)))
    assert list(np.flatnonzero(sol.status == "flipped")) == [6]
    assert sol.reduced_chi2 < 3.0   # chi2 for 13 dof: 3 is beyond its 99.9 % point
    for key in ("P", "e", "a"):
        assert abs(sol.elements.to_keys()[key] - ARC[key]) < 4 * sol.errors[key], key
    from unittest import mock

    from orbweigh import fitting
    counter = mock.Mock(wraps=fitting._search_under)
    with mock.patch.object(fitting, "_search_under", counter):
        clean = fit_orbit(make_log(ARC, epochs, 0.5, 0.005, seed=seed))
    assert not (clean.status == "flipped").any()
    # With a chi2 at most FLIP_MIN_GAIN no flip hypothesis can score lower (each flip adds
    # FLIP_MIN_GAIN), so the ten single-row hypotheses are not searched (seed 1: chi2 4.8);
    # above it (seed 3: chi2 25.5) they are.
    gate = clean.chi2 <= fitting.FLIP_MIN_GAIN
    assert gate == (seed == 1) and counter.call_count == (1 if gate else 11)


WIDE = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


@pytest.mark.parametrize("flips", [(20,), (10, 30, 50, 70)])
def test_long_log_searches_flip_hypotheses_only_when_the_null_orbit_fails(flips):
    # 80 points over 2.5 periods: the quadrant errors cannot drag the global search, the
    # null orbit's flip correction finds them, so the suspects' hypotheses (1 and 15 global
    # searches more) are not searched; the planted rows are the ones corrected.
    from unittest import mock

    from orbweigh import fitting

    data = make_log(WIDE, np.linspace(1960.0, 2020.0, 80), 0.5, 0.005, seed=5, flips=flips)
    usable = np.flatnonzero(data.usable)
    assert len(fitting._flip_hypotheses(80, fitting._suspected_flips(data, usable))) > 1
    counter = mock.Mock(wraps=fitting._search_under)
    with mock.patch.object(fitting, "_search_under", counter):
        sol = fit_orbit(data)
    assert counter.call_count == 1
    assert list(np.flatnonzero(sol.status == "flipped")) == list(flips)
    assert abs(sol.elements.period_yr - 24.0) < 4 * sol.errors["P"]


# --- an undetermined orbit gives no mass, parallax or plan ------------------------------

def test_undetermined_orbit_prints_no_mass_nor_plan(tmp_path, capsys):
    # 8 points over 3 yr of a 60-yr pair: P and a come out undetermined (error above
    # half the value), so fit, mass and plan give reasons instead of numbers.
    from orbweigh.cli.main import main

    truth = dict(P=60.0, T=2030.0, e=0.3, a=1.0, i=50.0, Omega=60.0, omega=120.0)
    ms = make_log(truth, np.linspace(2005.0, 2008.0, 8), 1.0, 0.01, seed=4)
    log = tmp_path / "arc.csv"
    log.write_text("epoch,theta,rho,sigma_theta,sigma_rho\n" + "".join(
        f"J{t:.3f},{th:.2f},{r:.4f},1.0,0.01\n"
        for t, th, r in zip(ms.epoch_yr, ms.theta_deg, ms.rho_arcsec)))
    result = tmp_path / "r.json"
    assert main(["fit", str(log), "--magnitudes", "5", "6", "--band", "K",
                 "--json", str(result)]) == 0
    out = capsys.readouterr().out
    assert "no mass and no dynamical parallax: P and a undetermined" in out
    assert "M_sun" not in out and "mass" not in json.loads(result.read_text())
    assert main(["mass", str(result), "--parallax", "20", "1"]) == 2
    assert "What would fix it" in capsys.readouterr().err
    assert main(["plan", str(result), "--window", "2026", "2030"]) == 2
    assert "no plan" in capsys.readouterr().err


# ------------------------------------------------- a held node on either branch (--fix)
#: A true orbit with its node on the far branch: (Omega, omega) = (200, 70) deg is the
#: apparent orbit (20, 250) deg (positions alone cannot tell them apart).
FAR = dict(TRUTH, Omega=200.0, omega=70.0)


def _fit_cli(tmp_path, name, *fix):
    from orbweigh.cli.main import main
    from synthetic import write_log_csv

    log = tmp_path / "far.csv"
    if not log.exists():
        write_log_csv(log, _log(FAR))
    out = tmp_path / f"{name}.json"
    args = [a for item in fix for a in ("--fix", item)]
    assert main(["fit", str(log), *args, "--json", str(out)]) == 0
    return json.loads(out.read_text())


def _values(doc):
    return np.array([doc["elements"][k]["value"] for k in ("P", "T", "e", "a", "i",
                                                           "Omega", "omega")])


def test_a_node_held_on_the_far_branch_is_the_same_orbit_and_said_so(tmp_path, capsys):
    far = _fit_cli(tmp_path, "far", "Omega=200")
    near = _fit_cli(tmp_path, "near", "Omega=20")
    printed = capsys.readouterr().out
    # the same fit: identical elements and chi2 (the refinement holds 200 or 20, and
    # the reported orbit has Omega in [0, 180) either way)
    np.testing.assert_allclose(_values(far), _values(near), rtol=0, atol=1e-6)
    assert far["statistics"]["chi2"] == pytest.approx(near["statistics"]["chi2"], rel=1e-9)
    # and it is the truth on the reported branch: Omega 20, omega 70 + 180 = 250
    assert far["elements"]["Omega"]["value"] == pytest.approx(20.0, abs=1e-9)
    omega = far["elements"]["omega"]
    assert abs(omega["value"] - 250.0) < 4 * omega["error"]
    # nothing the user gave is lost, and the shift is said, not done silently
    assert far["fit"]["fixed"] == {"Omega": 200.0}
    said = [w for w in far["warnings"] if w.startswith("Held Omega = 200 deg is reported as "
                                                       "Omega = 20,")]
    assert len(said) == 1 and "(Omega + 180, omega + 180) cannot be told apart" in said[0]
    assert "Held Omega = 200 deg is reported as Omega = 20," in printed
    assert not any(w.startswith("Held Omega") for w in near["warnings"])


def test_both_angles_held_on_the_far_branch(tmp_path):
    far = _fit_cli(tmp_path, "far2", "Omega=200", "omega=70")
    near = _fit_cli(tmp_path, "near2", "Omega=20", "omega=250")
    np.testing.assert_allclose(_values(far), _values(near), rtol=0, atol=1e-6)
    assert far["elements"]["omega"]["value"] == pytest.approx(250.0, abs=1e-9)
    assert any(w.startswith("Held Omega = 200, omega = 70 deg is reported as") for w in
               far["warnings"])
    # the held pair is the truth: the other elements within 4 sigma (common practice)
    for key in ("P", "e", "a", "i"):
        entry = far["elements"][key]
        assert abs(entry["value"] - FAR[key]) < 4 * entry["error"], key


def test_held_omega_alone_is_reported_on_the_fits_branch(tmp_path):
    # omega = 70 held, Omega free: the fit finds Omega = 200 and reports (20, 250)
    doc = _fit_cli(tmp_path, "omega", "omega=70")
    assert doc["elements"]["omega"]["value"] == pytest.approx(250.0, abs=1e-9)
    node = doc["elements"]["Omega"]
    assert abs(node["value"] - 20.0) < 4 * node["error"]
    assert any(w.startswith("Held omega = 70 deg is reported as") for w in doc["warnings"])


def test_posterior_holds_the_angle_on_the_reported_branch(tmp_path):
    # The draws must show the orbit of the reported elements: Omega exactly 20 (not the
    # 200 given), omega near 250. Before, the given value was written into every draw
    # beside angles of the other branch (a different orbit).
    from orbweigh.sampling import sample_document

    doc = _fit_cli(tmp_path, "far3", "Omega=200")
    result = sample_document(doc, steps=600, seed=4)
    assert np.all(result.elements[:, 5] == 20.0)
    omega = result.elements[:, 6]
    assert abs(np.median(omega) - 250.0) < 4 * doc["elements"]["omega"]["error"]
    alone = _fit_cli(tmp_path, "omega2", "omega=70")
    result = sample_document(alone, steps=600, seed=4)
    assert np.all(result.elements[:, 6] == pytest.approx(250.0, abs=1e-9))
    assert np.all(result.elements[:, 5] < 180.0)
