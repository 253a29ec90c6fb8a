"""Speed and reliability of ``fit_orbit`` against a naive multi-start reference.

For synthetic logs of N points (random orbits, periods 5-300 yr, a 100-yr span of
epochs, 1 deg / 10 mas noise), time the whole fit over the 1-1000 yr period range and
count how often it finds the global minimum (chi2 no worse than that of the true
elements plus 1). The naive reference runs Levenberg-Marquardt on the seven Campbell
elements from random starts (log-uniform P over the same range) until its budget of
starts is spent, keeping the best.

    python benchmarks/bench_fit.py [--systems 10] [--sizes 30,100,1000] [--naive-starts 60]

Prints CPU seconds per fit (process time, so other load on the machine matters less)
and success counts. Seeded: the same arguments give the same systems.
"""
from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.optimize import least_squares

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.measurements import MeasurementSet
from orbweigh.model import normalised_residuals, wrap_degrees
from orbweigh.elements import thiele_innes_from_campbell

PERIOD_RANGE = (1.0, 1000.0)
SIGMA_THETA, SIGMA_RHO = 1.0, 0.01


def random_system(rng, n):
    el = CampbellElements(period_yr=float(np.exp(rng.uniform(np.log(5), np.log(300)))),
                          periastron_yr=float(rng.uniform(1950, 2050)),
                          e=float(rng.uniform(0, 0.9)), a_arcsec=float(rng.uniform(0.3, 2.0)),
                          i_deg=float(np.degrees(np.arccos(rng.uniform(-1, 1)))),
                          node_deg=float(rng.uniform(0, 180)),
                          omega_deg=float(rng.uniform(0, 360)))
    t = np.sort(rng.uniform(1925, 2025, n))
    eph = ephemeris(el, t)
    theta = np.mod(eph.theta_deg + rng.normal(0, SIGMA_THETA, n), 360)
    rho = np.abs(eph.rho_arcsec + rng.normal(0, SIGMA_RHO, n))
    return el, MeasurementSet.from_arrays(t, theta, rho, SIGMA_THETA, SIGMA_RHO)


def chi2_of(params, ms):
    r_t, r_r, _, _ = normalised_residuals(params, ms.epoch_yr, ms.theta_deg, ms.rho_arcsec,
                                          ms.sigma_theta_deg, ms.sigma_rho_arcsec)
    return float(np.sum(r_t**2 + r_r**2))


def true_params(el):
    ti = thiele_innes_from_campbell(el.a_arcsec, *np.radians([el.i_deg, el.node_deg, el.omega_deg]))
    return np.array([el.period_yr, el.periastron_yr, el.e, *ti])


def naive_fit(ms, rng, starts):
    """Best of `starts` Levenberg-Marquardt runs on Campbell elements from random starts."""
    t, th, rh = ms.epoch_yr, ms.theta_deg, ms.rho_arcsec

    def resid(q):
        P, T, e, a, i, node, w = q
        e = min(abs(e), 0.99)
        params = np.array([abs(P), T, e, *thiele_innes_from_campbell(a, i, node, w)])
        r_t, r_r, _, _ = normalised_residuals(params, t, th, rh, SIGMA_THETA, SIGMA_RHO)
        return np.concatenate([r_t, r_r])

    best = np.inf
    for _ in range(starts):
        q0 = [np.exp(rng.uniform(*np.log(PERIOD_RANGE))), rng.uniform(t.min(), t.max()),
              rng.uniform(0, 0.9), np.max(rh) * rng.uniform(0.5, 1.5),
              np.arccos(rng.uniform(-1, 1)), rng.uniform(0, np.pi), rng.uniform(0, 2 * np.pi)]
        sol = least_squares(resid, q0, method="lm", max_nfev=400)
        best = min(best, float(np.sum(sol.fun**2)))
    return best


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--systems", type=int, default=10)
    ap.add_argument("--sizes", default="30,100,1000")
    ap.add_argument("--naive-starts", type=int, default=60)
    ap.add_argument("--seed", type=int, default=2026)
    args = ap.parse_args()
    print(f"seed {args.seed}, {args.systems} systems per size, period range {PERIOD_RANGE} yr")
    print(f"{'N':>5} {'fit s/system':>13} {'fit found':>10} {'naive s/system':>15} "
          f"{'naive found':>12} {'speed-up':>9}")
    for n in map(int, args.sizes.split(",")):
        rng = np.random.default_rng([args.seed, n])
        fit_cpu = naive_cpu = 0.0
        fit_ok = naive_ok = 0
        for _ in range(args.systems):
            el, ms = random_system(rng, n)
            target = chi2_of(true_params(el), ms) + 1.0
            t0 = time.process_time()
            sol = fit_orbit(ms, FitOptions(period_range=PERIOD_RANGE, flips=False,
                                           outlier_sigma=1e6))
            fit_cpu += time.process_time() - t0
            fit_ok += sol.chi2 <= target
            if args.naive_starts:
                t0 = time.process_time()
                naive_ok += naive_fit(ms, rng, args.naive_starts) <= target
                naive_cpu += time.process_time() - t0
        s = args.systems
        speed = (naive_cpu / fit_cpu) if fit_cpu and naive_cpu else float("nan")
        print(f"{n:>5} {fit_cpu / s:>13.3f} {fit_ok:>7}/{s:<2} {naive_cpu / s:>15.3f} "
              f"{naive_ok:>9}/{s:<2} {speed:>9.1f}")


if __name__ == "__main__":
    main()
