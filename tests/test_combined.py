"""Tests of the combined visual-spectroscopic solution (positions + radial velocities)."""
import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.combined import (add_to_document, combined_blocks, fit_combined, format_combined,
                               parameter_draws, sample_combined)
from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.masses import THIRD_LAW_FACTOR
from orbweigh.measurements import read_measurements
from orbweigh.spectroscopic import (mass_function_msun, radial_velocities,
                                    read_velocities, rv_semi_amplitude_kms)
from synthetic import KEYS, radial_velocities_3d

SAMPLE = Path(__file__).resolve().parents[1] / "sample_measurements"

# Invented synthetic pair (no source needed: the truth is the generator's input).
TRUE = CampbellElements(50.0, 2012.3, 0.45, 0.5, 118.0, 300.0, 40.0)
PLX_MAS, Q, GAMMA = 30.0, 0.7, 8.5
A_AU = TRUE.a_arcsec / (PLX_MAS * 1e-3)
# Third law M = f a^3 / P^2 with f from the IAU constants (tested in test_masses.py)
M_TOTAL = THIRD_LAW_FACTOR * A_AU**3 / TRUE.period_yr**2
M1, M2 = M_TOTAL / (1 + Q), M_TOTAL * Q / (1 + Q)
K_SUM = rv_semi_amplitude_kms(A_AU, TRUE.period_yr, TRUE.e, TRUE.i_deg)
K1, K2 = K_SUM * Q / (1 + Q), K_SUM / (1 + Q)
SIGMA_THETA, SIGMA_RHO, SIGMA_RV = 0.5, 0.01, (0.3, 0.4)
SEED = 5


def _write_positions(path, rng, true=TRUE, n=40):
    t = np.sort(rng.uniform(1975.0, 2024.0, n))
    eph = ephemeris(true, t)
    theta = np.mod(eph.theta_deg + rng.normal(0, SIGMA_THETA, t.size), 360.0)
    rho = eph.rho_arcsec + rng.normal(0, SIGMA_RHO, t.size)
    rows = [f"J{a:.4f},{b:.3f},{c:.4f},{SIGMA_THETA},{SIGMA_RHO},speckle"
            for a, b, c in zip(t, theta, rho)]
    path.write_text("epoch,theta,rho,sigma_theta,sigma_rho,technique\n" + "\n".join(rows) + "\n")
    return path


def _true_dict(node_deg, omega_deg, true=TRUE):
    return dict(zip(KEYS, (*true.as_tuple()[:5], node_deg, omega_deg)))


def _write_velocities(path, seed, node_deg, omega_deg, components=(1, 2), sigma=SIGMA_RV,
                      true=TRUE, n=30):
    """Velocities of the true orbit with the given node choice, from the independent
    generator (z away from the observer, velocities by differentiating z)."""
    assert (node_deg - true.node_deg) % 180 == 0
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2000.0, 2024.0, n))
    v1, v2 = radial_velocities_3d(_true_dict(node_deg, omega_deg, true), t, PLX_MAS, Q, GAMMA)
    rows = []
    for k in range(t.size):
        for comp, v, s in ((1, v1[k], sigma[0]), (2, v2[k], sigma[1])):
            if comp in components:
                rows.append(f"J{t[k]:.5f},{comp},{v + rng.normal(0, s):.3f},{s}")
    path.write_text("epoch,component,rv,sigma_rv\n" + "\n".join(rows) + "\n")
    return path


@pytest.mark.parametrize("node, omega", [(300.0, 40.0), (120.0, 220.0), (15.0, 95.0)])
def test_velocity_convention_against_the_independent_generator(node, omega):
    # The package's V(t) for the astrometric omega must equal the derivative of z (away
    # from the observer) of the 3-D orbit with the ascending node at Omega; the other node
    # choice (omega + 180) gives the velocities with the opposite sign.
    t = np.linspace(2000.0, 2050.0, 60)
    true = _true_dict(node, omega)
    w1, w2 = radial_velocities_3d(true, t, PLX_MAS, Q, GAMMA)
    v1, v2 = radial_velocities(t, TRUE.period_yr, TRUE.periastron_yr, TRUE.e, omega,
                               K1, K2, GAMMA)
    assert np.allclose(v1, w1, rtol=0, atol=1e-5) and np.allclose(v2, w2, rtol=0, atol=1e-5)
    u1, _ = radial_velocities(t, TRUE.period_yr, TRUE.periastron_yr, TRUE.e, omega + 180.0,
                              K1, K2, GAMMA)
    assert np.allclose(u1 - GAMMA, -(w1 - GAMMA), rtol=0, atol=1e-5)


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory):
    """The visual fit of the synthetic positions (done once) and a folder for logs."""
    folder = tmp_path_factory.mktemp("combined")
    _write_positions(folder / "positions.csv", np.random.default_rng(SEED))
    data = read_measurements(folder / "positions.csv")
    solution = fit_orbit(data, FitOptions(period_range=(30.0, 80.0)))
    return solution, folder


def _angle_off(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


@pytest.mark.parametrize("node, omega", [(300.0, 40.0), (120.0, 220.0)])
def test_node_recovered_and_wrong_one_loses(synthetic, node, omega):
    # The two choices share the apparent orbit; only the velocities' sign tells them apart.
    solution, folder = synthetic
    assert solution.elements.node_deg == pytest.approx(120.0, abs=1.0)  # visual: [0, 180)
    vs = read_velocities(_write_velocities(folder / f"rv_{node:.0f}.csv", 11, node, omega))
    sol = fit_combined(solution, vs)
    v, err = sol.values, sol.errors
    assert _angle_off(v["Omega"], node) < 3 * err["Omega"]
    assert _angle_off(v["omega"], omega) < 3 * err["omega"]
    assert 0.0 <= v["Omega"] < 360.0
    assert _angle_off(sol.other_node["values"]["Omega"], node) == pytest.approx(180.0, abs=1.0)
    assert sol.node_delta_chi2 > 100.0          # decisive: far beyond the 9 of the warning
    assert not any("not decided" in w for w in sol.warnings)
    for key, truth in (("gamma", GAMMA), ("K1", K1), ("K2", K2)):
        assert abs(v[key] - truth) < 3 * err[key], key
    assert sol.chi2 == pytest.approx(sol.chi2_astrometric + sol.chi2_rv, rel=1e-12)
    assert sol.dof == 2 * 40 + 60 - 10


def test_a_faulty_velocity_is_named_for_flagging(synthetic):
    # One velocity 30 sigma off (line 8 of the log): named by its line, with the advice
    # to flag it if faulty, since nothing held explains it.
    solution, folder = synthetic
    path = _write_velocities(folder / "rv_faulty.csv", 11, 300.0, 40.0)
    lines = path.read_text().splitlines()
    epoch, comp, rv, sigma = lines[7].split(",")
    lines[7] = ",".join([epoch, comp, f"{float(rv) + 30 * float(sigma):.3f}", sigma])
    path.write_text("\n".join(lines) + "\n")
    sol = fit_combined(solution, read_velocities(path))
    far = [w for w in sol.warnings if "beyond 4 sigma of the combined orbit" in w]
    assert len(far) == 1 and "(line 8)" in far[0]
    assert far[0].endswith("flag them in the log if they are faulty.")


def test_masses_and_orbital_parallax_within_intervals(synthetic):
    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_masses.csv", 12, 300.0, 40.0))
    blocks = combined_blocks(fit_combined(solution, vs), seed=3)
    plx = blocks["orbital_parallax"]
    assert plx["low95"] < PLX_MAS < plx["high95"]
    assert plx["error"] < 0.05 * PLX_MAS                 # informative, not a wide net
    assert blocks["parallax"]["kind"] == "orbital"
    mass = blocks["mass"]
    for key, truth in (("total", M_TOTAL), ("primary", M1), ("secondary", M2)):
        assert mass[key]["low95"] < truth < mass[key]["high95"], key
        assert mass[key]["high"] - mass[key]["low"] < 0.3 * truth
    assert mass["parallax_used"] == "orbital" and mass["seed"] == 3


def test_uninformative_velocities_leave_the_node_open(synthetic):
    # sigma_rv of 100 km/s against K of a few km/s: both node choices fit alike.
    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_poor.csv", 13, 300.0, 40.0,
                                           sigma=(100.0, 100.0)))
    sol = fit_combined(solution, vs)
    assert sol.node_delta_chi2 < 9.0
    assert any("node is not decided" in w for w in sol.warnings)


def test_single_lined_with_parallax(synthetic):
    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_sb1.csv", 14, 300.0, 40.0,
                                           components=(1,)))
    sol = fit_combined(solution, vs)
    assert "K2" not in sol.keys and not sol.double_lined
    assert _angle_off(sol.values["Omega"], 300.0) < 3 * sol.errors["Omega"]
    blocks = combined_blocks(sol, parallax=(PLX_MAS + 0.1, 0.3), seed=4)
    assert "orbital_parallax" not in blocks
    for key, truth in (("total", M_TOTAL), ("primary", M1), ("secondary", M2)):
        assert blocks["mass"][key]["low95"] < truth < blocks["mass"][key]["high95"], key
    f_true = mass_function_msun(K1, TRUE.period_yr * 365.25, TRUE.e)
    f = blocks["mass_function"]
    assert f["low95"] < f_true < f["high95"]
    # without a parallax: mass function only, and a warning saying what is missing
    bare = combined_blocks(sol, seed=4)
    assert "mass" not in bare and "mass_function" in bare
    assert any("only the mass function" in w for w in bare["warnings"])


def test_single_lined_route_obeys_the_mass_function(synthetic):
    # Route: M = f (a/plx)^3/P^2, M2 = M a1/a with a1 = K1 P sqrt(1-e^2)/(2 pi sin i).
    # Independent check: the definition f(M) = (M2 sin i)^3 / (M1 + M2)^2 must hold.
    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_sb1b.csv", 15, 300.0, 40.0,
                                           components=(1,)))
    sol = fit_combined(solution, vs)
    sharp = dataclasses.replace(sol, covariance=sol.covariance * 1e-14)  # draws = best
    mass = combined_blocks(sharp, parallax=(PLX_MAS, 1e-9), n_draws=50)["mass"]
    v = sol.values
    f = mass_function_msun(v["K1"], v["P"] * 365.25, v["e"])
    m2, total = mass["secondary"]["value"], mass["total"]["value"]
    assert (m2 * np.sin(np.radians(v["i"]))) ** 3 / total**2 == pytest.approx(f, rel=1e-5)
    assert mass["primary"]["value"] + m2 == pytest.approx(total, rel=1e-9)


def test_combined_parallax_and_agreement(synthetic):
    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_comb.csv", 16, 300.0, 40.0))
    sol = fit_combined(solution, vs)
    trig = (29.2, 0.4)
    blocks = combined_blocks(sol, parallax=trig, combine=True, seed=2)
    orb, plx = blocks["orbital_parallax"], blocks["parallax"]
    # inverse-variance weighted mean and its error (common practice, no source)
    w1, w2 = 1 / orb["error"] ** 2, 1 / trig[1] ** 2
    assert plx["combined"]["value"] == pytest.approx((w1 * orb["value"] + w2 * trig[0])
                                                     / (w1 + w2), rel=1e-12)
    assert plx["combined"]["error"] == pytest.approx((w1 + w2) ** -0.5, rel=1e-12)
    assert plx["orbital"]["agreement_sigma"] == pytest.approx(
        (orb["value"] - trig[0]) / np.hypot(orb["error"], trig[1]), rel=1e-12)
    assert blocks["mass"]["parallax_used"] == "combined"
    assert blocks["mass"]["total"]["low95"] < M_TOTAL < blocks["mass"]["total"]["high95"]


def test_sample_pair_combined_solution():
    # True values: sample_measurements/README.md (invented pair, seed 47047).
    data = read_measurements(SAMPLE / "measurements.csv", target_ra_deg="14h27m13.4s",
                             target_dec_deg="+38d41m06s")
    sol = fit_combined(fit_orbit(data, FitOptions(seed=1)),
                       read_velocities(SAMPLE / "velocities.csv"))
    v, err = sol.values, sol.errors
    assert abs(v["Omega"] - 236.40) < 3 * err["Omega"]
    assert abs(v["omega"] - 131.70) < 3 * err["omega"]
    assert sol.node_delta_chi2 > 100.0
    for key, truth in (("gamma", -14.60), ("K1", 3.930), ("K2", 5.038)):
        assert abs(v[key] - truth) < 3 * err[key], key
    flagged = sol.velocities.line[sol.velocities.excluded]
    assert list(flagged) == [19] and sol.data.t_rv.size == 50
    blocks = combined_blocks(sol, parallax=(40.68, 0.40), seed=1)
    for key, truth in (("total", 1.9300), ("primary", 1.0842), ("secondary", 0.8457)):
        assert blocks["mass"][key]["low95"] < truth < blocks["mass"][key]["high95"], key
    orbital = blocks["parallax"]["orbital"]
    assert orbital["low95"] < 41.30 < orbital["high95"]
    assert abs(orbital["agreement_sigma"]) < 3.0


def _run(capsys, *argv):
    status = main(["fit", *map(str, argv)])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return status, out, err


def test_cli_fit_with_velocities(synthetic, capsys, tmp_path):
    _, folder = synthetic
    rv = _write_velocities(folder / "rv_cli.csv", 17, 300.0, 40.0)
    out_json = tmp_path / "result.json"
    status, out, _ = _run(capsys, folder / "positions.csv", "--rv", rv, "--period-range", 30, 80,
                          "--parallax", 30.1, 0.3, "--json", out_json)
    assert status == 0
    doc = json.loads(out_json.read_text())
    assert 180.0 <= doc["elements"]["Omega"]["value"] < 360.0        # true node 300 deg
    assert doc["node"]["decisive"] and doc["node"]["delta_chi2"] > 100
    assert {doc[k]["unit"] for k in ("gamma", "K1", "K2")} == {"km/s"}
    assert doc["orbital_parallax"]["unit"] == "mas"
    assert doc["parallax"]["kind"] == "trigonometric" and "orbital" in doc["parallax"]
    rows = doc["rv_residuals"]
    assert len(rows) == 60 and all(r["status"] == "used" for r in rows)
    assert rows[0]["residual"] == pytest.approx(rows[0]["rv"] - rows[0]["model"], abs=1e-12)
    assert doc["mass"]["primary"]["low95"] < M1 < doc["mass"]["primary"]["high95"]
    assert "Omega runs over [0, 360)" in doc["node"]["note"]
    assert "orbital parallax" in out and "delta chi2" in out


def test_cli_refuses_conflicting_options(synthetic, capsys):
    _, folder = synthetic
    status, _, err = _run(capsys, folder / "positions.csv", "--rv", folder / "rv_cli.csv",
                          "--mass-ratio", 0.7, 0.05)
    assert status == 2 and "drop --mass-ratio" in err
    status, _, err = _run(capsys, folder / "positions.csv", "--combine-parallax")
    assert status == 2 and "--rv RVLOG" in err


def test_cli_bad_velocity_log(tmp_path, synthetic, capsys):
    _, folder = synthetic
    bad = tmp_path / "bad.csv"
    bad.write_text("epoch,component,rv,sigma_rv\nJ2010.5,3,1.0,0.2\n")
    status, _, err = _run(capsys, folder / "positions.csv", "--rv", bad, "--strict")
    assert status == 2 and "line 2" in err and "component" in err


def test_joint_posterior_matches_least_squares(synthetic):
    # With many data the posterior is nearly Gaussian: its medians and spreads must agree
    # with the least-squares values and errors (Laplace approximation; common practice).
    from orbweigh.combined import sample_combined

    solution, folder = synthetic
    vs = read_velocities(_write_velocities(folder / "rv_post.csv", 18, 300.0, 40.0))
    sol = fit_combined(solution, vs)
    draws, info = sample_combined(sol, walkers=22, steps=300, seed=7)
    assert info["seed"] == 7 and info["n_draws"] == len(draws) > 100
    assert sol.parameters == sol.keys           # nothing held
    for j, key in enumerate(sol.parameters):
        assert abs(np.median(draws[:, j]) - sol.values[key]) < 0.5 * sol.errors[key], key
        assert 0.6 < np.std(draws[:, j]) / sol.errors[key] < 1.5, key
    for j in (5, 6):   # angles on the branch of the best value (within 180 deg of it)
        assert np.all(np.abs(draws[:, j] - sol.values[sol.parameters[j]]) <= 180.0)
    blocks = combined_blocks(sol, draws=draws, seed=7)
    assert blocks["mass"]["draws_source"] == "posterior"
    assert blocks["mass"]["draws"] == len(draws)
    assert blocks["mass"]["total"]["low95"] < M_TOTAL < blocks["mass"]["total"]["high95"]


def test_report_shows_the_combined_solution_as_tables(synthetic, capsys, tmp_path):
    from report_fixtures import TableCells

    _, folder = synthetic
    rv = _write_velocities(folder / "rv_page.csv", 19, 300.0, 40.0)
    status, _, _ = _run(capsys, folder / "positions.csv", "--rv", rv, "--period-range", 30, 80,
                        "--parallax", 30.1, 0.3, "--out", tmp_path / "fit", "--report",
                        tmp_path / "page", "--name", "Synthetic AB")
    assert status == 0
    doc = json.loads((tmp_path / "fit" / "result.json").read_text())
    html = (tmp_path / "page" / "report.html").read_text(encoding="utf-8")
    assert "<title>Orbit of Synthetic AB</title>" in html and doc["name"] == "Synthetic AB"
    page = TableCells()
    page.feed(html)
    rows = {r[0]: r for r in page.rows if r}
    for label, key in (("Systemic velocity", "gamma"), ("Velocity amplitude, primary", "K1"),
                       ("Velocity amplitude, secondary", "K2")):
        value, error = rows[label][2].replace("\u2212", "-"), rows[label][3]
        assert float(value) == pytest.approx(doc[key]["value"], abs=0.51 * 10 ** -len(
            value.split(".")[1])) and rows[label][4] == "km/s"
        assert float(error) == pytest.approx(doc[key]["error"], rel=0.05)
    orbital, trig = rows["orbital \u03d6"], rows["trigonometric \u03d6"]
    assert orbital[-1] == "used for the masses" and trig[-1] == ""
    low, high = (float(x) for x in orbital[2].split(" to "))
    o = doc["parallax"]["orbital"]
    assert low == pytest.approx(o["low"], abs=0.01) and high == pytest.approx(o["high"], abs=0.01)
    agreement = f"{o['agreement_sigma']:.1f}".replace("-", "\u2212")
    assert f"minus the trigonometric one is {agreement}\u03c3" in html
    assert "orbital.low95" not in html and "agreement_sigma" not in html
    tex = (tmp_path / "page" / "elements.tex").read_text()
    assert r"\caption{Orbital elements of Synthetic AB" in tex
    assert "Parallax, orbital (used for the masses)" in tex and r"$\gamma$" in tex


def test_joint_posterior_epoch_in_the_log_scale():
    # Besselian epoch of a Julian year through astropy's Time (independent of reductions).
    from types import SimpleNamespace

    from astropy.time import Time

    from orbweigh.combined import _posterior_summary

    rng = np.random.default_rng(5)
    draws = np.column_stack([rng.normal(v, s, 4000) for v, s in
                             ((50.0, 0.2), (1930.25, 0.05), (0.4, 0.01), (1.0, 0.01),
                              (60.0, 1.0), (120.0, 1.0), (40.0, 1.0), (-5.0, 0.1),
                              (10.0, 0.2), (12.0, 0.2))])
    sol = SimpleNamespace(parameters=("P", "T", "e", "a", "i", "Omega", "omega", "gamma", "K1",
                                      "K2"),
                          visual=SimpleNamespace(data=SimpleNamespace(epoch_scale="besselian"),
                                                 options=SimpleNamespace(fixed={})))
    t = _posterior_summary(sol, draws)["T"]
    assert t["scale"] == "besselian"
    expected = Time(np.median(draws[:, 1]), format="jyear", scale="tt").byear
    assert t["value"] == pytest.approx(expected, abs=1e-6)
    assert t["value"] - np.median(draws[:, 1]) == pytest.approx(
        Time(1930.25, format="jyear", scale="tt").byear - 1930.25, abs=1e-6)


# ------------------------------------------------------------ held elements (--fix)
# Invented circular pair: the eccentric one with e = 0 (truth = the generator's input).
CIRCULAR = dataclasses.replace(TRUE, e=0.0)
K_SUM_CIRCULAR = rv_semi_amplitude_kms(A_AU, CIRCULAR.period_yr, 0.0, CIRCULAR.i_deg)
K1_CIRCULAR, K2_CIRCULAR = K_SUM_CIRCULAR * Q / (1 + Q), K_SUM_CIRCULAR / (1 + Q)


@pytest.fixture(scope="module")
def circular(tmp_path_factory):
    """A circular SB2 pair: positions, velocities, and the visual fit with e held at 0."""
    folder = tmp_path_factory.mktemp("circular")
    positions = _write_positions(folder / "positions.csv", np.random.default_rng(21),
                                 CIRCULAR, n=30)
    rv = _write_velocities(folder / "rv.csv", 22, 300.0, 40.0, true=CIRCULAR, n=20)
    solution = fit_orbit(read_measurements(positions),
                         FitOptions(period_range=(30.0, 80.0), fixed={"e": 0.0}))
    return solution, read_velocities(rv), folder


def _within(sol, truths, n_sigma=4.0):
    """Keys whose value misses the truth by more than n_sigma errors (angles wrapped)."""
    return [k for k, truth in truths.items()
            if _angle_off(sol.values[k], truth) > n_sigma * sol.errors[k]]


#: The circular truth's passage through the ascending node: only omega + 2 pi (t - T) / P
#: counts, so with omega = 40 deg the node is passed 40/360 of a period before T.
T_NODE_CIRCULAR = CIRCULAR.periastron_yr - CIRCULAR.omega_deg / 360.0 * CIRCULAR.period_yr


def _off_in_phase(value, truth, period):
    return abs(math.remainder(value - truth, period))


def test_held_eccentricity_of_a_circular_pair(circular):
    # e held at 0: exactly 0, no error, not fitted; omega held at 0 by convention and T
    # the epoch of passage through the ascending node (common practice, no source); two
    # degrees of freedom more than the free fit. The velocities pick Omega = 300 where
    # the visual fit reports 120: T half a period from the visual one, omega still 0.
    solution, vs, _ = circular
    sol = fit_combined(solution, vs)
    assert sol.values["e"] == 0.0 and sol.errors["e"] is None and "e" not in sol.keys
    assert sol.values["omega"] == 0.0 and sol.errors["omega"] is None
    assert sol.held == {"e": 0.0, "omega": 0.0} and len(sol.keys) == 8
    assert sol.held_angles == ()            # the convention's omega does not pick the node
    assert sol.dof == 2 * 30 + 2 * 20 - 8
    assert not _within(sol, {"P": 50.0, "a": 0.5, "i": 118.0, "Omega": 300.0, "gamma": GAMMA,
                             "K1": K1_CIRCULAR, "K2": K2_CIRCULAR})
    assert _off_in_phase(sol.values["T"], T_NODE_CIRCULAR, sol.values["P"]) < \
        4 * sol.errors["T"]
    assert sol.errors["T"] < 0.01 * sol.values["P"]
    assert sol.node_delta_chi2 > 100.0
    assert sol.other_node["values"]["omega"] == 0.0
    assert abs(sol.values["T"] - np.mean(sol.data.t_ast)) <= 0.5 * sol.values["P"]
    assert sol.chi2_astrometric + sol.chi2_rv == pytest.approx(sol.chi2, rel=1e-9)
    # errors as those of the free combined fit of the same logs (within 3x)
    free = fit_combined(fit_orbit(solution.data, FitOptions(period_range=(30.0, 80.0))), vs)
    for key in ("P", "a", "i", "Omega", "K1", "K2"):
        ratio = sol.errors[key] / free.errors[key]
        assert 1 / 3 < ratio < 3, (key, ratio)
    blocks = combined_blocks(sol, seed=3)
    assert blocks["orbital_parallax"]["low95"] < PLX_MAS < blocks["orbital_parallax"]["high95"]
    draws = parameter_draws(sol, 50, seed=3)
    assert np.all(draws[:, sol.parameters.index("e")] == 0.0)
    assert np.all(draws[:, sol.parameters.index("omega")] == 0.0)
    doc = add_to_document(solution.to_document(), sol, blocks)
    assert doc["elements"]["omega"] == {"value": 0.0, "error": None, "unit": "deg",
                                        "fixed": True}
    assert doc["fit"]["fixed"] == {"e": 0.0}     # as given; the convention in the notes
    assert any(n.startswith("Circular orbit (e held at 0)") for n in doc["notes"])
    assert not any("undetermined" in w for w in doc["warnings"])


def test_held_period(synthetic):
    solution, folder = synthetic
    held = fit_orbit(solution.data, FitOptions(fixed={"P": 50.0}))
    vs = read_velocities(_write_velocities(folder / "rv_held_p.csv", 23, 300.0, 40.0))
    sol = fit_combined(held, vs)
    assert sol.values["P"] == 50.0 and sol.errors["P"] is None and "P" not in sol.keys
    assert sol.dof == 2 * 40 + 60 - 9
    assert not _within(sol, {"T": 2012.3, "e": 0.45, "a": 0.5, "i": 118.0, "Omega": 300.0,
                             "omega": 40.0, "gamma": GAMMA, "K1": K1, "K2": K2})


def test_held_true_node_is_kept(synthetic):
    # Omega held at its true 300 deg: the visual fit reports it as 120 (Omega in [0, 180));
    # with velocities it is 300 exactly, and the other choice loses decisively.
    solution, folder = synthetic
    held = fit_orbit(solution.data, FitOptions(period_range=(30.0, 80.0),
                                               fixed={"Omega": 300.0}))
    assert held.elements.node_deg == pytest.approx(120.0)
    vs = read_velocities(_write_velocities(folder / "rv_held_node.csv", 24, 300.0, 40.0))
    sol = fit_combined(held, vs)
    assert sol.values["Omega"] == 300.0 and sol.errors["Omega"] is None
    assert sol.dof == 2 * 40 + 60 - 9
    assert sol.other_node["values"]["Omega"] == 120.0
    assert sol.node_delta_chi2 > 100.0
    assert not any("prefer" in w or "not decided" in w for w in sol.warnings)
    assert not _within(sol, {"omega": 40.0, "i": 118.0, "K1": K1, "K2": K2})
    doc = add_to_document(held.to_document(), sol, combined_blocks(sol, seed=1))
    assert doc["elements"]["Omega"] == {"value": 300.0, "error": None, "unit": "deg",
                                        "fixed": True}
    assert doc["node"]["held"] == ["Omega"] and doc["combined"]["fixed"] == {"Omega": 300.0}
    assert not any("[0, 180)" in w for w in doc["warnings"])   # the visual branch note
    assert "Omega = 300.00 deg held (--fix); Omega = 120.00 deg fits worse" in \
        format_combined(doc)


def test_node_held_on_the_wrong_side_is_kept_with_a_warning(synthetic):
    # Omega held at true + 180 = 120 deg: kept as held, the other choice (300 deg) fitted
    # for comparison, and the warning says the velocities prefer it, with the delta chi2.
    solution, folder = synthetic
    held = fit_orbit(solution.data, FitOptions(period_range=(30.0, 80.0),
                                               fixed={"Omega": 120.0}))
    vs = read_velocities(_write_velocities(folder / "rv_wrong_node.csv", 25, 300.0, 40.0))
    sol = fit_combined(held, vs)
    assert sol.values["Omega"] == 120.0 and sol.errors["Omega"] is None
    other = sol.other_node
    assert other["values"]["Omega"] == 300.0
    assert _angle_off(other["values"]["omega"], 40.0) < 3.0
    assert sol.node_delta_chi2 == pytest.approx(other["chi2"] - sol.chi2) and \
        sol.node_delta_chi2 < -100.0
    said = [w for w in sol.warnings if w.startswith("The velocities prefer the other node")]
    assert len(said) == 1
    assert "Omega = 300.00 deg" in said[0] and f"{-sol.node_delta_chi2:.1f}" in said[0]
    assert "held Omega = 120 deg was kept" in said[0]
    # the velocities far from this orbit are put down to the held node, not to the data
    far = [w for w in sol.warnings if "beyond 4 sigma of the combined orbit" in w]
    assert len(far) == 1 and "because of the held node" in far[0]
    assert "flag them in the log" not in far[0]
    doc = add_to_document(held.to_document(), sol, combined_blocks(sol, seed=1))
    assert doc["node"]["decisive"] and doc["node"]["delta_chi2"] < 0
    assert "fits BETTER by delta chi2" in format_combined(doc)
    from orbweigh.report.html import _node_sentence
    assert _node_sentence(doc["node"]).startswith("A held angle (--fix) fixes the node")
    assert _node_sentence(doc["node"]).endswith("fits better by \u0394\u03c7\u00b2 = "
                                                f"{-sol.node_delta_chi2:.1f}: the velocities "
                                                "prefer it.")


def test_joint_posterior_with_a_held_element(circular):
    solution, vs, _ = circular
    sol = fit_combined(solution, vs)
    draws, info = sample_combined(sol, walkers=20, steps=150, seed=9)
    assert draws.shape[1] == len(sol.parameters) == len(sol.keys) + 2     # e and omega held
    assert np.all(draws[:, sol.parameters.index("e")] == 0.0)
    assert info["fixed"] == {"e": 0.0, "omega": 0.0} and "held fixed at 0" in info["priors"]["e"]
    assert "by convention (circular orbit" in info["priors"]["omega"]
    assert np.all(draws[:, sol.parameters.index("omega")] == 0.0)
    for key in ("P", "a", "K1"):    # free ones do move
        assert np.std(draws[:, sol.parameters.index(key)]) > 0.2 * sol.errors[key]
    doc = add_to_document(solution.to_document(), sol,
                          combined_blocks(sol, draws=draws, seed=9), (draws, info))
    summary = doc["combined"]["posterior"]["parameters"]
    assert summary["e"]["fixed"] is True and summary["e"]["value"] == 0.0
    assert summary["e"]["low95"] == summary["e"]["high95"] == 0.0
    assert summary["omega"]["fixed"] is True and summary["omega"]["high95"] == 0.0
    # T is well defined: its 95 % interval holds the truth's node passage and spans a
    # small part of the period (not spread over it)
    t = summary["T"]
    assert t["high95"] - t["low95"] < 0.05 * sol.values["P"]
    assert _off_in_phase(t["value"], T_NODE_CIRCULAR, sol.values["P"]) < \
        0.5 * (t["high95"] - t["low95"])
    assert doc["mass"]["draws_source"] == "posterior"


def test_cli_fit_with_velocities_and_held_elements(circular, capsys, tmp_path):
    _, _, folder = circular
    out_json = tmp_path / "held.json"
    status, out, _ = _run(capsys, folder / "positions.csv", "--rv", folder / "rv.csv",
                          "--period-range", 30, 80, "--fix", "e=0", "--fix", "Omega=300",
                          "--json", out_json)
    assert status == 0
    doc = json.loads(out_json.read_text())
    for key, value in (("e", 0.0), ("Omega", 300.0)):
        assert doc["elements"][key] == {"value": value, "error": None, "unit": doc["elements"][
            key]["unit"], "fixed": True}
    # e = 0 held and omega = 0 by convention (circular orbit)
    assert doc["elements"]["omega"]["fixed"] is True and doc["elements"]["omega"]["value"] == 0
    assert doc["statistics"]["dof"] == 2 * 30 + 2 * 20 - 7
    assert doc["combined"]["parameters"] == ["P", "T", "a", "i", "gamma", "K1", "K2"]
    assert doc["combined"]["fixed"] == {"e": 0.0, "Omega": 300.0, "omega": 0.0}
    assert doc["fit"]["fixed"] == {"e": 0.0, "Omega": 300.0}
    assert len(doc["combined"]["covariance"]) == 7
    assert [row[2] for row in doc["covariance"]["matrix"]] == [0.0] * 7   # e's column
    assert "e                         0 (fixed)" in out
    assert "Omega = 300.00 deg held (--fix)" in out


def test_held_periastron_epoch_in_a_besselian_log(tmp_path):
    # T held in the log's scale (plain decimal years: Besselian); the combined fit holds
    # the same instant as a Julian year, converted by astropy's Time here (independent).
    from astropy.time import Time

    rng = np.random.default_rng(26)
    t = np.sort(rng.uniform(1975.0, 2024.0, 30))
    eph = ephemeris(TRUE, t)
    rows = [f"{b:.5f},{th:.3f},{r:.4f},{SIGMA_THETA},{SIGMA_RHO}" for b, th, r in zip(
        Time(t, format="jyear", scale="tt").byear,
        np.mod(eph.theta_deg + rng.normal(0, SIGMA_THETA, t.size), 360.0),
        eph.rho_arcsec + rng.normal(0, SIGMA_RHO, t.size))]
    log = tmp_path / "besselian.csv"
    log.write_text("epoch,theta,rho,sigma_theta,sigma_rho\n" + "\n".join(rows) + "\n")
    t_besselian = float(Time(TRUE.periastron_yr, format="jyear", scale="tt").byear)
    held = fit_orbit(read_measurements(log), FitOptions(period_range=(30.0, 80.0),
                                                        fixed={"T": t_besselian}))
    vs = read_velocities(_write_velocities(tmp_path / "rv.csv", 27, 300.0, 40.0))
    sol = fit_combined(held, vs)
    assert sol.values["T"] == pytest.approx(TRUE.periastron_yr, abs=1e-9)
    assert sol.errors["T"] is None and "T" not in sol.keys
    doc = add_to_document(held.to_document(), sol, combined_blocks(sol, seed=1))
    assert doc["elements"]["T"]["value"] == t_besselian and doc["elements"]["T"]["fixed"]
