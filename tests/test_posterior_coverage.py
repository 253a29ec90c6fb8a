"""Coverage of the posterior's intervals (``fit --sample``: ``sampling.sample_document``)
on independent synthetic systems: a small, fast version of benchmarks/bench_coverage.py.

Each system is drawn from a seeded generator and its log made by tests/synthetic.py
(brentq Kepler and 3-D rotation matrices, independent of orbweigh's orbit model). The
fit and the posterior run with their defaults, so the chain stops by the real rule (50
autocorrelation times, settled); only the number of systems is small.

Bound: for n independent systems whose intervals are honest, the number holding the
truth is Binomial(n, p) with p = 0.6827 (68 % intervals) or 0.95 (95 % intervals); the
test asks each count to lie in the central 99.9 % interval of that distribution
(scipy.stats.binom.interval). Eight counts (P, a, e, i at two levels) are checked, so a
correct sampler fails by chance with probability at most 0.8 %; the seed is fixed, so the
outcome is the same on every run. It can fail: halving every interval about its median
(a scratch run) gave 3 and 6 of 14 for P at 68 % and 95 % (bounds 4-14 and 10-14) and 8 of
14 for e at 95 %; the honest intervals give 6-14 of 14 (benchmarks/bench_coverage.py
measures the same on 200 systems).
"""
import numpy as np
import pytest
from scipy import stats
from synthetic import make_log

from orbweigh.elements import ELEMENT_KEYS
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.sampling import sample_document

N_SYSTEMS = 14
CHECKED = ("P", "a", "e", "i")
LEVELS = {0.6827: (15.865525393145708, 84.13447460685429), 0.95: (2.5, 97.5)}


def _system(rng):
    """True elements, epochs and noise of one well-covered random binary.

    P log-uniform 8-40 yr, T uniform over a period, e uniform 0-0.8, a log-uniform
    0.3-1.5 arcsec, isotropic orientation; 15-25 epochs over 1-1.8 periods; sigma_theta
    0.5-2 deg, sigma_rho 1-3 % of a.
    """
    period = float(np.exp(rng.uniform(np.log(8.0), np.log(40.0))))
    a = float(np.exp(rng.uniform(np.log(0.3), np.log(1.5))))
    truth = {"P": period, "T": 2000.0 + float(rng.uniform(0.0, period)),
             "e": float(rng.uniform(0.0, 0.8)), "a": a,
             "i": float(np.degrees(np.arccos(rng.uniform(-1.0, 1.0)))),
             "Omega": float(rng.uniform(0.0, 360.0)), "omega": float(rng.uniform(0.0, 360.0))}
    n = int(rng.integers(15, 26))
    epochs = np.sort(1990.0 + rng.uniform(0.0, period * rng.uniform(1.0, 1.8), n))
    return truth, epochs, float(rng.uniform(0.5, 2.0)), a * float(rng.uniform(0.01, 0.03))


def interval(values, level):
    """Central interval of the draws at ``level``."""
    return np.percentile(values, LEVELS[level])


@pytest.fixture(scope="module")
def hits():
    rng = np.random.default_rng(2026)
    count = {(key, level): 0 for key in CHECKED for level in LEVELS}
    for k in range(N_SYSTEMS):
        truth, epochs, sigma_theta, sigma_rho = _system(rng)
        log = make_log(truth, epochs, sigma_theta, sigma_rho, seed=100 + k)
        result = sample_document(fit_orbit(log, FitOptions(seed=k)).to_document(), seed=k)
        assert result.sample.converged, k
        for key in CHECKED:
            draws = result.elements[:, ELEMENT_KEYS.index(key)]
            for level in LEVELS:
                low, high = interval(draws, level)
                count[key, level] += bool(low <= truth[key] <= high)
    return count


@pytest.mark.parametrize("level", sorted(LEVELS))
@pytest.mark.parametrize("key", CHECKED)
def test_intervals_hold_the_truth_in_a_binomially_plausible_share(hits, key, level):
    low, high = stats.binom.interval(0.999, N_SYSTEMS, level)
    assert low <= hits[key, level] <= high, (key, level, hits[key, level], (low, high))
