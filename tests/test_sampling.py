"""Tests of posterior sampling (orbweigh.sampling) and of ``orbweigh fit --sample``.

Synthetic logs come from tests/synthetic.py (brentq Kepler, 3-D rotations), independent
of orbweigh's orbit model. Statistical checks are seeded; their bounds are stated.
"""
import json
import math

import numpy as np
import pytest
from scipy import stats
from synthetic import make_log

from orbweigh.cli.main import main
from orbweigh.elements import ELEMENT_KEYS
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.kepler import eccentric_anomaly
from orbweigh.model import normalised_residuals, wrap_degrees
from orbweigh.result import elements_from_document, read_draws
from orbweigh.sampling import (
    BURN_TAU_MULTIPLE, AstrometricPosterior, cos_sin_eccentric_anomaly, posterior_block,
    sample_document, sample_posterior, write_draws,
)

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)
EPOCHS = np.linspace(2000.0, 2000.0 + 1.6 * 24.0, 40)    # 1.6 periods, evenly
SIGMA_THETA, SIGMA_RHO = 0.5, 0.005                      # deg, arcsec
PERIOD_RANGE = (10.0, 60.0)
STEPS = 3000                                             # ~40 tau (tau ~ 70 steps)


def _document(seed=11):
    log = make_log(TRUTH, EPOCHS, SIGMA_THETA, SIGMA_RHO, seed=seed)
    return fit_orbit(log, FitOptions(period_range=PERIOD_RANGE, seed=seed)).to_document()


@pytest.fixture(scope="module")
def fitted():
    return _document()


@pytest.fixture(scope="module")
def sampled(fitted):
    sample, posterior = sample_document(fitted, walkers=32, steps=STEPS, seed=3)
    return fitted, sample, posterior


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


def test_log_likelihood_is_minus_half_the_fits_chi2(sampled):
    doc, _, posterior = sampled
    best = elements_from_document(doc)
    # reference: the fit's own chi2 (LM on model.normalised_residuals)
    assert posterior.log_likelihood(posterior.coordinates(best))[0] == pytest.approx(
        -0.5 * doc["statistics"]["chi2"], rel=1e-9)
    # and away from the optimum, for a few walkers at once: the same residuals recomputed
    # with model.normalised_residuals from Thiele-Innes constants
    rows = [r for r in doc["residuals"] if r["status"] == "used"]
    t, theta, rho, st, sr = (np.array([r[k] for r in rows]) for k in (
        "epoch_yr", "theta_deg", "rho_arcsec", "sigma_theta_deg", "sigma_rho_arcsec"))
    rng = np.random.default_rng(5)
    q = posterior.coordinates(best) + rng.normal(0.0, 0.02, (5, 7))
    got = posterior.log_likelihood(q)
    for k, row in enumerate(posterior.elements(q)):
        P, T, e, a, i, node, omega = row
        from orbweigh.elements import thiele_innes_from_campbell
        ti = thiele_innes_from_campbell(a, *np.radians([i, node, omega]))
        r_t, r_r, _, _ = normalised_residuals((P, T, e, *ti), t, theta, rho, st, sr)
        assert got[k] == pytest.approx(-0.5 * np.sum(r_t**2 + r_r**2), rel=1e-9)


# --- the posterior of a well-covered orbit -----------------------------------------------------

def _truth_vector():
    return np.array([TRUTH[k] for k in ELEMENT_KEYS])


def test_posterior_medians_recover_the_truth(sampled):
    doc, sample, posterior = sampled
    block = posterior_block(doc, sample, posterior, None)
    for key, truth in zip(ELEMENT_KEYS, _truth_vector()):
        s = block["summary"][key]
        half = 0.5 * (s["high"] - s["low"])
        diff = s["median"] - truth
        if key in ("i", "Omega", "omega"):
            diff = float(wrap_degrees(diff))
        # bound: 3 posterior sigma (truth drawn once; common practice, no source)
        assert abs(diff) < 3.0 * half, key


def test_posterior_widths_match_the_covariance_errors(sampled):
    doc, sample, posterior = sampled
    block = posterior_block(doc, sample, posterior, None)
    for key in ELEMENT_KEYS:
        s = block["summary"][key]
        half = 0.5 * (s["high"] - s["low"])
        # reference: the fit's covariance error; for a well-constrained orbit the posterior
        # is near Gaussian, so the 68 % half-width equals sigma. Bound 30 % (Monte Carlo
        # noise of a percentile from ~1000 effective draws is a few per cent)
        assert half == pytest.approx(doc["elements"][key]["error"], rel=0.3), key


def test_chain_diagnostics_follow_the_stated_rules(sampled):
    _, sample, _ = sampled
    tau = sample.autocorr_time
    assert np.all(np.isfinite(tau))
    assert sample.burn == min(math.ceil(BURN_TAU_MULTIPLE * tau.max()), STEPS // 2)
    assert sample.thin == max(1, int(0.5 * tau.min()))
    # affine-invariant stretch moves accept 20-60 % on a near-Gaussian target
    # (common practice, no source)
    assert 0.2 < sample.acceptance < 0.6
    assert sample.draws().shape == (32 * len(range(sample.burn, STEPS, sample.thin)), 7)


def test_draws_round_trip_through_read_draws(sampled, tmp_path):
    _, sample, posterior = sampled
    path = tmp_path / "draws.ecsv"
    n = write_draws(path, sample, posterior)
    draws, meta = read_draws(path)
    expected = posterior.elements(sample.draws())
    assert n == len(expected)
    np.testing.assert_array_equal(draws, expected)
    assert meta["seed"] == 3 and meta["walkers"] == 32 and meta["steps"] == STEPS
    assert meta["burn"] == sample.burn and meta["thin"] == sample.thin
    assert set(meta["priors"]) == set(ELEMENT_KEYS)
    assert np.all((draws[:, 5] >= 0) & (draws[:, 5] < 180))       # Omega in [0, 180)
    assert np.all((draws[:, 6] >= 0) & (draws[:, 6] < 360))
    assert np.all(np.abs(draws[:, 1] - posterior.t_ref) <= 0.5 * draws[:, 0])


def test_same_seed_gives_identical_draws(fitted):
    doc = fitted
    first, _ = sample_document(doc, walkers=16, steps=60, seed=9)
    again, _ = sample_document(doc, walkers=16, steps=60, seed=9)
    other, _ = sample_document(doc, walkers=16, steps=60, seed=10)
    np.testing.assert_array_equal(first.chain, again.chain)
    assert not np.array_equal(first.chain, other.chain)


def test_short_chain_is_flagged(fitted):
    sample, _ = sample_document(fitted, walkers=16, steps=60, seed=9)
    assert not sample.converged
    text = " ".join(sample.warnings)
    assert "chain too short" in text and "--steps" in text


# --- the priors --------------------------------------------------------------------------------

def test_flat_likelihood_returns_the_priors(fitted):
    # with a flat likelihood the log-posterior is the log-prior alone
    flat = AstrometricPosterior.from_document(fitted)
    lo, hi = np.log(flat.period_range)
    start = [0.5 * (lo + hi), flat.t_ref, 0.5, np.log(0.85), 0.0, *flat.angle_ref]
    scales = [5 * (hi - lo), 200.0, 5.0, 50.0, 10.0, 50.0, 50.0]   # balls fill the prior
    steps = 1500                                                   # ~12 tau
    sample = sample_posterior(flat.log_prior, [start], scales, flat.NAMES, walkers=128,
                              steps=steps, seed=4)
    q = sample.chain[[steps // 3, 2 * steps // 3, steps - 1]].reshape(-1, 7)  # ~4 tau apart
    el = flat.elements(q)
    a_lo, a_hi = np.log(flat.a_range)
    expected = [(q[:, 4], stats.uniform(-1.0, 2.0)),                  # cos i
                (q[:, 2], stats.uniform(0.0, 0.99)),                  # e
                (q[:, 0], stats.uniform(lo, hi - lo)),                # ln P
                (q[:, 3], stats.uniform(a_lo, a_hi - a_lo)),          # ln a
                ((el[:, 1] - flat.t_ref) / el[:, 0], stats.uniform(-0.5, 1.0)),  # T phase
                (el[:, 5], stats.uniform(0.0, 180.0)),                # Omega
                (el[:, 6], stats.uniform(0.0, 360.0))]                # omega
    # KS tests against the stated priors on 384 draws, seeded; bound p > 0.01
    for k, (draws, prior) in enumerate(expected):
        assert stats.kstest(draws, prior.cdf).pvalue > 0.01, k
    # the test has power: i itself is not uniform (that would be a different prior)
    assert stats.kstest(np.arccos(q[:, 4]), stats.uniform(0.0, math.pi).cdf).pvalue < 1e-3


# --- the command line --------------------------------------------------------------------------

def _write_log(path, seed=11):
    log = make_log(TRUTH, EPOCHS, SIGMA_THETA, SIGMA_RHO, seed=seed)
    lines = ["epoch,theta,rho,sigma_theta,sigma_rho"]
    lines += [f"J{t:.6f},{th:.4f},{r:.5f},{st},{sr}" for t, th, r, st, sr in zip(
        log.epoch_yr, log.theta_deg, log.rho_arcsec, log.sigma_theta_deg,
        log.sigma_rho_arcsec)]
    path.write_text("\n".join(lines) + "\n")
    return path


def _fit_args(log, *extra):
    return ["fit", str(log), "--period-range", *map(str, PERIOD_RANGE), "--sample",
            "--steps", "400", "--quiet", "--parallax", "40.0", "0.4", *extra]


def test_fit_sample_saves_draws_and_masses_use_them(tmp_path, capsys):
    log = _write_log(tmp_path / "pair.csv")
    out = tmp_path / "run"
    assert main(_fit_args(log, "--out", str(out), "--json", str(tmp_path / "copy.json"))) == 0
    doc = json.loads((out / "result.json").read_text())
    post = doc["posterior"]
    assert post["draws_file"] == "draws.ecsv" and post["walkers"] == 32 and post["seed"] == 1
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
    assert "Posterior (32 walkers x 400 steps" in capsys.readouterr().out
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
