"""Priors, held elements, period bounds and the sampled parallax of the visual-orbit
posterior (``sampling.sample_document``, ``fit --sample --prior``).

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
from orbweigh.errors import InputError
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.orbit_posterior import DirectPosterior
from orbweigh.result import read_draws, validate_document
from orbweigh.sampling import posterior_block, sample_document, sample_posterior

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)
EPOCHS = np.linspace(2000.0, 2000.0 + 1.6 * 24.0, 40)
SIGMA_THETA, SIGMA_RHO = 0.5, 0.005
PERIOD_RANGE = (10.0, 60.0)


def _doc(truth=TRUTH, epochs=EPOCHS, sigmas=(SIGMA_THETA, SIGMA_RHO), seed=11, **options):
    log = make_log(truth, epochs, *sigmas, seed=seed)
    opts = {"period_range": PERIOD_RANGE, "seed": seed, **options}
    return fit_orbit(log, FitOptions(**opts)).to_document()


@pytest.fixture(scope="module")
def well_covered():
    return _doc()


def _gaussian_product(mean1, sigma1, mean2, sigma2):
    """Mean and sigma of the product of two Gaussians (precision-weighted mean)."""
    w1, w2 = sigma1 ** -2, sigma2 ** -2
    return (w1 * mean1 + w2 * mean2) / (w1 + w2), (w1 + w2) ** -0.5


@pytest.mark.parametrize("key", ["e", "a"])
def test_strong_prior_pulls_as_the_product_of_gaussians(well_covered, key):
    # Linear-Gaussian limit: the likelihood of a well-covered orbit is near Gaussian in
    # each element, N(fit value, covariance error); a Gaussian prior N(m, s) then gives
    # the product of the two Gaussians (e.g. Gelman et al., Bayesian Data Analysis, 3rd
    # ed., 2013, eq. 2.12). e is a chain coordinate; a goes through the importance
    # weights of the Thiele-Innes draws, so both paths are checked.
    doc = well_covered
    value, error = doc["elements"][key]["value"], doc["elements"][key]["error"]
    m, s = value + 2.0 * error, error
    mean, sigma = _gaussian_product(value, error, m, s)
    result = sample_document(doc, seed=5, priors={key: (m, s)})
    block = posterior_block(doc, result, None)["summary"][key]
    # bounds: 0.15 sigma on the median (Monte Carlo error of ~1000 effective draws is
    # ~0.04 sigma) and 15 % on the 68 % half-width
    assert block["median"] == pytest.approx(mean, abs=0.15 * sigma)
    assert 0.5 * (block["high"] - block["low"]) == pytest.approx(sigma, rel=0.15)
    # the pull is real: without the prior the median sits near the fit's value
    free = posterior_block(doc, sample_document(doc, seed=5), None)["summary"][key]
    assert abs(free["median"] - value) < 0.3 * error < abs(block["median"] - value)
    assert result.priors[key].startswith("Gaussian N(")


def test_effective_draws_by_hand():
    # Kish's effective sample size (sum w)^2 / sum w^2 (Kish, Survey Sampling, 1965,
    # from memory), by hand: equal weights count fully; weights 1, 1, 0, 0 count as 2;
    # weights 1, 0.5, 0.5 as 4 / 1.5 = 2.6667.
    from orbweigh.sampling import _resample
    rng = np.random.default_rng(0)
    draws = np.arange(12.0).reshape(4, 3)
    assert _resample(draws, np.zeros(4), rng)[1] == pytest.approx(4.0)
    assert _resample(draws, np.array([0.0, 0.0, -np.inf, -np.inf]), rng)[1] == pytest.approx(2.0)
    assert _resample(draws[:3], np.log([1.0, 0.5, 0.5]), rng)[1] == pytest.approx(8 / 3)


def test_a_narrow_prior_leaves_few_effective_draws_and_says_so(well_covered):
    # A prior on a ten times narrower than the data's error: the Thiele-Innes draws are
    # weighted to it, so few of them count. For a Gaussian spread of a with sigma s_d
    # weighted by a Gaussian of sigma s the effective share is s sqrt(s^2 + 2 s_d^2) /
    # (s^2 + s_d^2) (the Kish formula integrated by hand), 0.14 at s = s_d / 10: below
    # the warning's threshold of a quarter either way.
    doc = well_covered
    value, error = doc["elements"]["a"]["value"], doc["elements"]["a"]["error"]
    narrow = sample_document(doc, seed=5, priors={"a": (value, error / 10)})
    assert narrow.effective < 0.25 * narrow.weighted
    block = posterior_block(doc, narrow, None)
    warned = [w for w in block["warnings"] if w.startswith("uneven importance weights")]
    assert len(warned) == 1
    assert f"count as {round(narrow.effective)} independent ones" in warned[0]
    from orbweigh.sampling import format_posterior
    assert (f"effective draws {round(narrow.effective)} of {narrow.weighted}"
            in format_posterior(block))
    # the same orbit without the prior: weights nearly even, no warning
    free = sample_document(doc, seed=5)
    assert free.effective > 0.9 * free.weighted
    assert not any("uneven" in w for w in free.warnings)


def test_held_elements_stay_exactly_fixed():
    # a, i held: the direct sampler over the other five; e held in the marginal one
    direct = sample_document(_doc(fixed={"a": 0.85, "i": 48.0}), steps=400, seed=2)
    assert direct.method == "direct" and direct.sample.names == (
        "ln_P", "T", "e", "Omega", "omega")
    assert np.all(direct.elements[:, 3] == 0.85) and np.all(direct.elements[:, 4] == 48.0)
    marginal = sample_document(_doc(fixed={"e": 0.5, "P": 24.0}), steps=400, seed=2)
    assert marginal.method == "marginal" and marginal.sample.names == ("T",)
    assert np.all(marginal.elements[:, 2] == 0.5) and np.all(marginal.elements[:, 0] == 24.0)
    # the free elements still vary, and the summary marks the held ones
    assert np.std(marginal.elements[:, 3]) > 0
    doc = _doc(fixed={"e": 0.5, "P": 24.0})
    summary = posterior_block(doc, marginal, None)["summary"]
    assert summary["e"]["fixed"] and summary["e"]["low"] == summary["e"]["high"] == 0.5
    assert marginal.priors["P"].startswith("held fixed at 24")


# A circular truth: omega = 0, so T = 2015 is a passage through the node Omega.
CIRCULAR = dict(TRUTH, e=0.0, omega=0.0)


@pytest.mark.parametrize("node, seed", [(112.0, 21), (112.0, 22), (179.9, 23)])
def test_circular_orbit_posterior_has_omega_0_and_a_well_defined_t(node, seed):
    # e held at 0: omega is held at 0 by convention (common practice, no source), so the
    # direct sampler runs over (P, T, a, i, Omega) and T is the epoch of passage through
    # the node, well defined. Near the node seam (179.9 deg) draws on either side of
    # 180 deg are the same orbit with T half a period apart: the summary must not split.
    truth = dict(CIRCULAR, Omega=node)
    doc = _doc(truth=truth, seed=seed, fixed={"e": 0.0})
    result = sample_document(doc, seed=seed)
    assert result.method == "direct"
    assert result.sample.names == ("ln_P", "T", "ln_a", "cos_i", "Omega")
    assert np.all(result.elements[:, 2] == 0.0) and np.all(result.elements[:, 6] == 0.0)
    assert np.all((result.elements[:, 5] >= 0.0) & (result.elements[:, 5] < 180.0))
    assert result.priors["omega"].startswith("held at 0 by convention (circular orbit")
    summary = posterior_block(doc, result, None)["summary"]
    assert summary["omega"]["fixed"] and summary["omega"]["high95"] == 0.0
    # the truth inside each 95 % interval; T of the truth on the reported node's branch
    reported = doc["elements"]["Omega"]["value"]
    turned = abs(math.remainder(reported - node, 360.0)) > 90.0
    t_node = 2015.0 + (12.0 if turned else 0.0)
    t = summary["T"]
    truths = {"P": 24.0, "a": 0.85, "i": 48.0,
              "T": t["median"] + math.remainder(t_node - t["median"], 24.0)}
    for key, value in truths.items():
        assert summary[key]["low95"] <= value <= summary[key]["high95"], key
    # T not spread over the period (nor split by the seam): its 95 % interval is a small
    # part of it, and its 68 % half-width is the fit's error (within 30 %)
    assert t["high95"] - t["low95"] < 0.01 * 24.0
    half = 0.5 * (t["high"] - t["low"])
    assert half == pytest.approx(doc["elements"]["T"]["error"], rel=0.3)


def test_every_element_held_but_the_linear_ones_draws_without_a_chain():
    result = sample_document(_doc(fixed={"P": 24.0, "T": 2015.0, "e": 0.5}), seed=1)
    assert result.sample is None and len(result.elements) == 4000
    assert np.all(result.elements[:, 1] == 2015.0)
    assert np.std(result.elements[:, 3]) > 0


def test_draws_respect_the_period_bounds():
    # a short arc (a quarter of the orbit) leaves P loose; the bounds cut the posterior
    epochs = np.linspace(2000.0, 2000.0 + 0.25 * 24.0, 25)
    doc = _doc(epochs=epochs, sigmas=(1.0, 0.01), period_range=None,
               period_bounds=(20.0, 30.0))
    result = sample_document(doc, steps=1500, seed=4)
    period = result.elements[:, 0]
    assert np.all((period >= 20.0) & (period <= 30.0))
    assert "the period bounds" in result.priors["P"]
    # the bounds are active: the draws reach both ends' neighbourhoods
    assert period.min() < 21.0 and period.max() > 29.0


def test_parallax_posterior_is_its_prior(tmp_path):
    # weak astrometric information: 10 points over half the orbit, large errors
    epochs = np.linspace(2000.0, 2012.0, 10)
    doc = _doc(epochs=epochs, sigmas=(3.0, 0.03), seed=3, period_range=None,
               period_bounds=PERIOD_RANGE)
    result = sample_document(doc, steps=600, seed=8, parallax=(25.0, 2.5))
    # reference: the Gaussian prior N(25, 2.5) mas, scipy.stats; KS bound p > 0.01
    assert stats.kstest(result.parallax, stats.norm(25.0, 2.5).cdf).pvalue > 0.01
    assert len(result.parallax) == len(result.elements)
    assert "parallax" in result.priors


def _write_log(path, seed=11):
    return write_log_csv(path, make_log(TRUTH, EPOCHS, SIGMA_THETA, SIGMA_RHO, seed=seed))


def test_fit_prints_and_records_the_priors_and_masses_use_the_sampled_parallax(
        tmp_path, capsys):
    log = _write_log(tmp_path / "pair.csv")
    out = tmp_path / "run"
    assert main(["fit", str(log), "--period-range", "10", "60", "--sample", "--quiet",
                 "--prior", "e=0.5,0.01", "--prior", "parallax=40,0.4", "--out",
                 str(out)]) == 0
    text = capsys.readouterr().out
    assert "Gaussian N(0.5, 0.01) on [0, 0.99) (--prior)" in text
    assert "parallax Gaussian N(40, 0.4) mas" in text
    assert "parallax sampled with the elements" in text
    doc = json.loads((out / "result.json").read_text())
    post = doc["posterior"]
    assert post["gaussian_priors"] == {"e": {"mean": 0.5, "sigma": 0.01}}
    assert post["parallax_prior"] == {"value": 40.0, "error": 0.4, "unit": "mas"}
    assert doc["mass"]["parallax_draws"].startswith("sampled with the elements")
    # reference: the third law on the saved (a, P, parallax) rows, M = a^3 / (plx^3 P^2)
    draws, _ = read_draws(out / "draws.ecsv", with_parallax=True)
    mass = draws[:, 3] ** 3 / ((draws[:, 7] * 1e-3) ** 3 * draws[:, 0] ** 2)
    assert doc["mass"]["total"]["value"] == pytest.approx(np.median(mass), rel=0.01)
    # the document is validated with its priors; a broken sigma is refused
    validate_document(doc, str(out / "result.json"))
    doc["posterior"]["gaussian_priors"]["e"]["sigma"] = 0.0
    with pytest.raises(InputError, match="gaussian_priors.e.sigma"):
        validate_document(doc, str(out / "result.json"))


@pytest.mark.parametrize("extra, message", [
    (["--sample", "--prior", "q=1,2"], "--prior q: no such element"),
    (["--sample", "--prior", "e=0.3,0"], "--prior e: the width SIGMA must be a positive"),
    (["--sample", "--prior", "e=0.3,-1"], "the width SIGMA must be a positive"),
    (["--sample", "--prior", "e=1.2,0.1"], "--prior e: the mean must be an eccentricity"),
    (["--sample", "--prior", "i=190,5"], "the mean must be an inclination in [0, 180]"),
    (["--sample", "--prior", "P=-3,1"], "the mean must be a positive period"),
    (["--sample", "--prior", "parallax=0,1"], "the mean must be a positive parallax"),
    (["--sample", "--prior", "a=-1,0.1"], "--prior a: the mean must be a positive semi-major"),
    (["--sample", "--prior", "Omega=400,5"], "--prior Omega: the mean must be a node in [0, 360)"),
    (["--sample", "--prior", "i=-5,5"], "the mean must be an inclination in [0, 180]"),
    (["--sample", "--prior", "e=0.3,nan"], "the width SIGMA must be a positive number, got nan"),
    (["--sample", "--prior", "P=20,inf"], "the width SIGMA must be a positive number, got inf"),
    (["--sample", "--prior", "P=nan,1"], "the mean must be a positive period"),
    (["--sample", "--prior", "e=0.3"], "expected NAME=MEAN,SIGMA"),
    (["--sample", "--prior", "e=0.3,0.1", "--prior", "e=0.2,0.1"], "gives e twice"),
    (["--sample", "--fix", "e=0", "--prior", "e=0.1,0.1"], "e is held fixed"),
    (["--sample", "--fix", "e=0", "--prior", "omega=30,5"],
     "--prior omega: with e held at 0 (a circular orbit) omega has no meaning and is held "
     "at 0 by convention"),
    (["--prior", "e=0.3,0.1"], "add --sample"),
    (["--sample", "--parallax", "40", "1", "--prior", "parallax=40,1"],
     "the parallax is given twice"),
    (["--sample", "--rv", "v.csv", "--prior", "e=0.3,0.1"], "drop --prior or --rv"),
])
def test_bad_priors_are_refused_before_any_work(tmp_path, capsys, extra, message):
    log = tmp_path / "never-read.csv"       # refused before the log is read
    assert main(["fit", str(log), "--out", str(tmp_path / "o"), *extra]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_marginal_sampler_agrees_with_direct_sampling():
    # Rigour of the importance weights: a weakly determined, fairly face-on orbit (12
    # points, large errors, i = 25 deg), where the flat prior on the Thiele-Innes
    # constants (density a^3 sin^2 i relative to the stated one) would visibly pull a and
    # i. Reference: the direct seven-element sampler with the exact likelihood and the
    # stated priors (a separate code path through thiele_innes_from_campbell).
    truth = dict(TRUTH, i=25.0, Omega=40.0)
    epochs = np.linspace(2000.0, 2000.0 + 1.2 * 24.0, 12)
    doc = _doc(truth=truth, epochs=epochs, sigmas=(2.5, 0.03), seed=21)
    marginal = sample_document(doc, seed=6)
    from orbweigh.result import elements_from_document
    from orbweigh.sampling import _start_scales
    best = elements_from_document(doc)
    model = marginal.model
    direct = DirectPosterior(model.positions, model.priors, {}, model.t_ref,
                             (math.radians(best.node_deg), math.radians(best.omega_deg)))
    chain = sample_posterior(direct, [direct.coordinates(best)],
                             _start_scales(doc, best, direct.names), direct.names,
                             walkers=32, steps=6000, seed=6)
    assert chain.converged
    reference = direct.draw(chain.draws(), None)[0]
    for key in ("P", "e", "a", "i"):
        j = ELEMENT_KEYS.index(key)
        low, med, high = np.percentile(reference[:, j], [15.87, 50, 84.13])
        got_low, got_med, got_high = np.percentile(marginal.elements[:, j], [15.87, 50, 84.13])
        half = 0.5 * (high - low)
        # bounds: 0.2 of the half-width on the median and 20 % on the half-width (Monte
        # Carlo error of both runs, a few hundred effective draws each)
        assert got_med == pytest.approx(med, abs=0.2 * half), key
        assert 0.5 * (got_high - got_low) == pytest.approx(half, rel=0.2), key
