"""Tests of posterior sampling (orbweigh.sampling) and of ``orbweigh fit --sample``.

Synthetic logs come from tests/synthetic.py (brentq Kepler, 3-D rotations), independent
of orbweigh's orbit model. Statistical checks are seeded; their bounds are stated.
"""
import json
import math

import numpy as np
import pytest
from scipy import stats
from synthetic import make_log, write_log_csv

from orbweigh.cli.main import main
from orbweigh.elements import ELEMENT_KEYS
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.kepler import eccentric_anomaly
from orbweigh.model import normalised_residuals, wrap_degrees
from orbweigh.orbit_posterior import DirectPosterior, cos_sin_eccentric_anomaly
from orbweigh.priors import ElementPriors
from orbweigh.result import elements_from_document, read_draws
from orbweigh.sampling import (
    BURN_TAU_MULTIPLE, VISUAL_WALKERS, posterior_block, sample_document, sample_posterior,
    write_draws,
)

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)
EPOCHS = np.linspace(2000.0, 2000.0 + 1.6 * 24.0, 40)    # 1.6 periods, evenly
SIGMA_THETA, SIGMA_RHO = 0.5, 0.005                      # deg, arcsec
PERIOD_RANGE = (10.0, 60.0)
STEPS = 3000                    # at most; the chain stops at ~50 tau (tau ~ 10 steps)


def _document(seed=11):
    log = make_log(TRUTH, EPOCHS, SIGMA_THETA, SIGMA_RHO, seed=seed)
    return fit_orbit(log, FitOptions(period_range=PERIOD_RANGE, seed=seed)).to_document()


@pytest.fixture(scope="module")
def fitted():
    return _document()


@pytest.fixture(scope="module")
def sampled(fitted):
    return fitted, sample_document(fitted, steps=STEPS, seed=3)


# --- the likelihood -------------------------------------------------------------------------

def test_kepler_kernel_matches_the_reference_solver():
    # reference: kepler.eccentric_anomaly (bracketed Newton, itself checked against
    # Meeus' worked examples and mpmath in test_kepler.py)
    m = np.linspace(-20.0, 20.0, 20001)[None, :]
    e = np.linspace(0.0, 0.99, 67)[:, None]
    E = eccentric_anomaly(m, e)
    cos_E, sin_E = cos_sin_eccentric_anomaly(m, e)
    assert np.max(np.abs(cos_E - np.cos(E))) < 1e-11
    assert np.max(np.abs(sin_E - np.sin(E))) < 1e-11


def _fitted_columns(doc):
    rows = [r for r in doc["residuals"] if r["status"] == "used"]
    return [np.array([r[k] for r in rows]) for k in (
        "epoch_yr", "theta_deg", "rho_arcsec", "sigma_theta_deg", "sigma_rho_arcsec")]


def test_exact_chi2_is_the_fits_chi2(sampled):
    doc, result = sampled
    best = elements_from_document(doc)
    pos = result.model.positions
    X, Y = pos.basis(np.array([[best.period_yr]]), np.array([[best.periastron_yr]]),
                     np.array([[best.e]]))
    # reference: the fit's own chi2 (LM on model.normalised_residuals)
    assert pos.chi2(X, Y, *(np.array([[v]]) for v in best.thiele_innes()))[0] == \
        pytest.approx(doc["statistics"]["chi2"], rel=1e-9)


def test_linear_solution_matches_an_independent_least_squares(sampled):
    # reference: numpy least squares on design rows written out from the definitions
    # (radial residual (rho - u.p)/sigma_rho, tangential -(v.p)/(rho sigma_theta), with
    # p = (A X + F Y, B X + G Y)); X, Y from kepler.eccentric_anomaly
    doc, result = sampled
    t, theta, rho, st, sr = _fitted_columns(doc)
    best = elements_from_document(doc)
    P, T, e = best.period_yr * 1.002, best.periastron_yr + 0.05, best.e - 0.01
    E = eccentric_anomaly(2 * np.pi * (t - T) / P, e)
    X, Y = np.cos(E) - e, np.sqrt(1 - e * e) * np.sin(E)
    c, s = np.cos(np.radians(theta)), np.sin(np.radians(theta))
    radial = np.column_stack([c * X, s * X, c * Y, s * Y]) / sr[:, None]
    tangential = np.column_stack([-s * X, c * X, -s * Y, c * Y]) / (
        rho * np.radians(st))[:, None]
    design = np.vstack([radial, tangential])
    target = np.concatenate([rho / sr, np.zeros(t.size)])
    beta, res, _, _ = np.linalg.lstsq(design, target, rcond=None)
    model = result.model
    _, _, _, mu, chi2_min, log_det, _ = model._solve(np.array([P]), np.array([T]),
                                                     np.array([e]))
    np.testing.assert_allclose(mu[0], beta, rtol=1e-8)
    assert chi2_min[0] == pytest.approx(res[0], rel=1e-8)
    assert log_det[0] == pytest.approx(np.linalg.slogdet(design.T @ design)[1], rel=1e-10)


def test_thiele_innes_jacobian_is_a_cubed_sin_squared_i():
    # the importance weights divide by d(A,B,F,G)/d(a, cos i, Omega, omega) = a^3 sin^2 i;
    # reference: the determinant of a central-difference Jacobian of the Thiele-Innes
    # formulae (Heintz, Double Stars, 1978, ch. 5)
    from orbweigh.elements import thiele_innes_from_campbell

    def ti(p):
        a, cos_i, node, omega = p
        return np.array(thiele_innes_from_campbell(a, np.arccos(cos_i), node, omega))

    for p in ([0.9, 0.3, 1.1, 4.0], [2.5, -0.8, 2.9, 0.4], [0.1, 0.97, 0.2, 5.5]):
        p = np.array(p)
        h = 1e-6
        jac = np.column_stack([(ti(p + h * np.eye(4)[k]) - ti(p - h * np.eye(4)[k])) / (2 * h)
                               for k in range(4)])
        assert abs(np.linalg.det(jac)) == pytest.approx(p[0] ** 3 * (1 - p[1] ** 2), rel=1e-6)


# --- the posterior of a well-covered orbit -----------------------------------------------------

def _truth_vector():
    return np.array([TRUTH[k] for k in ELEMENT_KEYS])


def test_posterior_medians_recover_the_truth(sampled):
    doc, result = sampled
    block = posterior_block(doc, result, None)
    for key, truth in zip(ELEMENT_KEYS, _truth_vector()):
        s = block["summary"][key]
        half = 0.5 * (s["high"] - s["low"])
        diff = s["median"] - truth
        if key in ("i", "Omega", "omega"):
            diff = float(wrap_degrees(diff))
        # bound: 3 posterior sigma (truth drawn once; common practice, no source)
        assert abs(diff) < 3.0 * half, key


def test_posterior_widths_match_the_covariance_errors(sampled):
    doc, result = sampled
    block = posterior_block(doc, result, None)
    for key in ELEMENT_KEYS:
        s = block["summary"][key]
        half = 0.5 * (s["high"] - s["low"])
        # reference: the fit's covariance error; for a well-constrained orbit the posterior
        # is near Gaussian, so the 68 % half-width equals sigma. Bound 30 % (Monte Carlo
        # noise of a percentile from ~1000 effective draws is a few per cent)
        assert half == pytest.approx(doc["elements"][key]["error"], rel=0.3), key


def test_chain_diagnostics_follow_the_stated_rules(sampled):
    _, result = sampled
    sample = result.sample
    steps = sample.chain.shape[0]
    tau = sample.autocorr_time
    assert np.all(np.isfinite(tau)) and sample.converged
    assert steps < STEPS                     # stopped by the rule, not by the cap
    assert steps >= 50 * tau.max()
    assert sample.burn == min(math.ceil(BURN_TAU_MULTIPLE * tau.max()), steps // 2)
    assert sample.thin == max(1, int(0.5 * tau.min()))
    # differential-evolution moves accept ~ 20-40 % on a near-Gaussian target
    # (common practice, no source)
    assert 0.15 < sample.acceptance < 0.5
    assert sample.names == ("ln_P", "T", "e")
    assert sample.draws().shape == (VISUAL_WALKERS * len(range(sample.burn, steps,
                                                               sample.thin)), 3)
    # a well-covered orbit is near Gaussian in the Thiele-Innes constants: weights even
    assert result.effective > 0.9 * result.weighted


def test_draws_round_trip_through_read_draws(sampled, tmp_path):
    _, result = sampled
    path = tmp_path / "draws.ecsv"
    n = write_draws(path, result)
    draws, meta = read_draws(path)
    assert n == len(result.elements)
    np.testing.assert_array_equal(draws, result.elements)
    assert meta["seed"] == 3 and meta["walkers"] == VISUAL_WALKERS
    assert meta["steps"] == result.sample.chain.shape[0]
    assert meta["burn"] == result.sample.burn and meta["thin"] == result.sample.thin
    assert set(meta["priors"]) == set(ELEMENT_KEYS)
    assert np.all((draws[:, 5] >= 0) & (draws[:, 5] < 180))       # Omega in [0, 180)
    assert np.all((draws[:, 6] >= 0) & (draws[:, 6] < 360))
    assert np.all(np.abs(draws[:, 1] - result.model.t_ref) <= 0.5 * draws[:, 0])
    with pytest.raises(Exception, match="no parallax column"):
        read_draws(path, with_parallax=True)


def test_same_seed_gives_identical_draws(fitted):
    doc = fitted
    first = sample_document(doc, steps=60, seed=9)
    again = sample_document(doc, steps=60, seed=9)
    other = sample_document(doc, steps=60, seed=10)
    np.testing.assert_array_equal(first.sample.chain, again.sample.chain)
    np.testing.assert_array_equal(first.elements, again.elements)
    assert not np.array_equal(first.sample.chain, other.sample.chain)


def test_short_chain_is_flagged(fitted):
    result = sample_document(fitted, steps=60, seed=9)
    assert not result.sample.converged
    text = " ".join(result.warnings)
    assert "chain too short" in text and "--steps" in text


# --- the priors --------------------------------------------------------------------------------

def _flat_priors():
    return ElementPriors(period_range=(5.0, 80.0), a_range=(0.0085, 85.0))


def test_default_prior_densities_are_the_stated_ones():
    # with a flat likelihood the direct sampler's target is the prior alone; its draws
    # must follow the stated distributions (KS tests, scipy.stats)
    priors = _flat_priors()
    flat = DirectPosterior(None, priors, {}, 2000.0, (1.0, 2.0))
    lo, hi = np.log(priors.period_range)

    def log_prior(q):        # DirectPosterior without the chi2 term
        el, col = flat._columns(q)
        out = priors.log_nonlinear(el["P"], el["T"], el["e"])
        inside = (np.abs(col["cos_i"]) <= 1) & (np.abs(el["T"] - 2000.0) < el["P"]) & (
            np.abs(col["Omega"] - 1.0) < 2 * np.pi) & (np.abs(col["omega"] - 2.0) < 2 * np.pi)
        out = np.where(inside, out, -np.inf)
        ok = np.isfinite(out)
        out[ok] += priors.log_linear(el["a"][ok], col["cos_i"][ok], el["Omega"][ok],
                                     el["omega"][ok]) + np.log(el["a"][ok])
        return out

    start = [0.5 * (lo + hi), 2000.0, 0.5, np.log(0.85), 0.0, 1.0, 2.0]
    scales = [5 * (hi - lo), 200.0, 5.0, 50.0, 10.0, 50.0, 50.0]   # balls fill the prior
    steps = 1500                                                   # ~12 tau
    sample = sample_posterior(log_prior, [start], scales, flat.names, walkers=128,
                              steps=steps, seed=4)
    q = sample.chain[[steps // 3, 2 * steps // 3, steps - 1]].reshape(-1, 7)  # ~4 tau apart
    el = flat.draw(q, None)[0]
    a_lo, a_hi = np.log(priors.a_range)
    expected = [(q[:, 4], stats.uniform(-1.0, 2.0)),                  # cos i
                (q[:, 2], stats.uniform(0.0, 0.99)),                  # e
                (q[:, 0], stats.uniform(lo, hi - lo)),                # ln P
                (q[:, 3], stats.uniform(a_lo, a_hi - a_lo)),          # ln a
                ((el[:, 1] - 2000.0) / el[:, 0], stats.uniform(-0.5, 1.0)),  # T phase
                (el[:, 5], stats.uniform(0.0, 180.0)),                # Omega
                (el[:, 6], stats.uniform(0.0, 360.0))]                # omega
    # KS tests against the stated priors on 384 draws, seeded; bound p > 0.01
    for k, (draws, prior) in enumerate(expected):
        assert stats.kstest(draws, prior.cdf).pvalue > 0.01, k
    # the test has power: i itself is not uniform (that would be a different prior)
    assert stats.kstest(np.arccos(q[:, 4]), stats.uniform(0.0, math.pi).cdf).pvalue < 1e-3


# --- the command line --------------------------------------------------------------------------

def _write_log(path, seed=11):
    return write_log_csv(path, make_log(TRUTH, EPOCHS, SIGMA_THETA, SIGMA_RHO, seed=seed))


def _fit_args(log, *extra):
    return ["fit", str(log), "--period-range", *map(str, PERIOD_RANGE), "--sample",
            "--steps", "400", "--quiet", "--parallax", "40.0", "0.4", *extra]


def test_fit_sample_saves_draws_and_masses_use_them(tmp_path, capsys):
    log = _write_log(tmp_path / "pair.csv")
    out = tmp_path / "run"
    assert main(_fit_args(log, "--out", str(out), "--json", str(tmp_path / "copy.json"))) == 0
    doc = json.loads((out / "result.json").read_text())
    post = doc["posterior"]
    assert post["draws_file"] == "draws.ecsv" and post["walkers"] == VISUAL_WALKERS
    assert post["seed"] == 1
    draws, meta = read_draws(out / "draws.ecsv")
    assert len(draws) == post["n_draws"] and meta["burn"] == post["burn"]
    assert doc["mass"]["draws_source"] == "posterior draws"
    # the second document names the same draws file, relative to itself
    copy = json.loads((tmp_path / "copy.json").read_text())
    assert (tmp_path / copy["posterior"]["draws_file"]).resolve() == (out / "draws.ecsv")
    assert "_path" not in doc and "_path" not in copy
    # reference: the linear (covariance) mass; the parallax dominates, so the posterior
    # median agrees within 1 % (bound: 0.1 of the 3 % parallax-driven error)
    total = doc["mass"]["total"]
    assert total["value"] == pytest.approx(total["linear"]["value"], rel=0.01)
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        assert entry["low"] < entry["value"] < entry["high"]
    assert f"Posterior ({VISUAL_WALKERS} walkers x 400 steps" in capsys.readouterr().out
    # the mass command finds the saved draws again
    assert main(["mass", str(out / "result.json"), "--parallax", "40.0", "0.4"]) == 0
    assert "(P, a) from posterior draws" in capsys.readouterr().out


def test_fit_sample_with_json_path_puts_draws_beside_it(tmp_path):
    log = _write_log(tmp_path / "pair.csv")
    assert main(_fit_args(log, "--json", str(tmp_path / "pair.json"))) == 0
    doc = json.loads((tmp_path / "pair.json").read_text())
    assert doc["posterior"]["draws_file"] == "pair.draws.ecsv"
    assert (tmp_path / "pair.draws.ecsv").is_file()


@pytest.mark.parametrize("extra, message", [
    (["--json", "-"], "give --out DIR"),
    ([], "give --out DIR"),
    (["--out", "x", "--walkers", "10"], "--walkers 10 is outside 14..1,000"),
])
def test_fit_sample_refuses_unusable_options(tmp_path, capsys, extra, message):
    log = tmp_path / "never-read.csv"
    assert main(_fit_args(log, *extra)) == 2
    assert message in capsys.readouterr().err


def test_walkers_without_sample_is_refused(tmp_path, capsys):
    assert main(["fit", str(tmp_path / "never-read.csv"), "--steps", "100"]) == 2
    assert "add --sample" in capsys.readouterr().err
