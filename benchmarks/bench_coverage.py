"""Coverage of the posterior's 68 % and 95 % intervals on independent synthetic systems.

For each of ``--systems`` seeded random binaries (P log-uniform 5-60 yr, T uniform over a
period, e uniform 0-0.9, a log-uniform 0.2-2 arcsec, isotropic orientation, Omega and
omega uniform; 15-60 epochs spread over 0.6-2 periods; sigma_theta 0.5-2 deg, sigma_rho
1-3 % of a; true parallax 10-100 mas measured with a 1-5 % error) the log is made by
tests/synthetic.py (brentq Kepler and 3-D rotations, independent of orbweigh's model),
fitted with ``fit_orbit`` (default options) and sampled with ``sample_document``
(defaults, the measured parallax as the parallax prior). Counted: how often the central
68.27 % and 95 % intervals of the draws hold the true P, a, e, i and total mass
(a^3 / (parallax^3 P^2), parallax from the draws). Binomial 1-sigma of a fraction p over
n systems: sqrt(p (1 - p) / n).

    python benchmarks/bench_coverage.py [--systems 200] [--seed 2026] [--src DIR]

``--src DIR`` imports orbweigh from DIR/src (e.g. a baseline checkout, whose
``sample_document`` returned (sample, posterior) and drew the parallax separately).
Systems whose fit or sampling fails are counted and listed, not dropped silently.
"""
from __future__ import annotations

import argparse
import math
import os
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
KEYS = ("P", "a", "e", "i", "mass")
_LEVELS = ((15.865525393145708, 84.13447460685429), (2.5, 97.5))


def random_system(rng):
    """True elements, epochs, noise levels and the true and measured parallax."""
    period = float(np.exp(rng.uniform(np.log(5.0), np.log(60.0))))
    a = float(np.exp(rng.uniform(np.log(0.2), np.log(2.0))))
    truth = {"P": period, "T": float(2000.0 + rng.uniform(0.0, period)),
             "e": float(rng.uniform(0.0, 0.9)), "a": a,
             "i": float(np.degrees(np.arccos(rng.uniform(-1.0, 1.0)))),
             "Omega": float(rng.uniform(0.0, 360.0)), "omega": float(rng.uniform(0.0, 360.0))}
    n = int(rng.integers(15, 61))
    span = period * rng.uniform(0.6, 2.0)
    epochs = np.sort(1990.0 + rng.uniform(0.0, span, n))
    sigma_theta = float(rng.uniform(0.5, 2.0))
    sigma_rho = float(a * rng.uniform(0.01, 0.03))
    plx_true = float(rng.uniform(10.0, 100.0))
    plx_err = plx_true * float(rng.uniform(0.01, 0.05))
    plx_obs = float(rng.normal(plx_true, plx_err))
    return truth, epochs, sigma_theta, sigma_rho, plx_true, (plx_obs, plx_err)


def draws_of(doc, parallax, seed):
    """(n, 7) element draws and paired parallax draws, for either sampling API."""
    from orbweigh.sampling import sample_document

    try:
        out = sample_document(doc, seed=seed, parallax=parallax)
    except TypeError:                       # the baseline: no parallax argument
        out = sample_document(doc, seed=seed)
    if isinstance(out, tuple):              # baseline: (sample, posterior), plx drawn apart
        sample, posterior = out
        draws = posterior.elements(sample.draws())
        plx = np.random.default_rng(seed + 1).normal(parallax[0], parallax[1], len(draws))
        return draws, plx, sample.converged
    return out.elements, out.parallax, out.sample is None or out.sample.converged


def covered(values, truth):
    return [bool(np.percentile(values, lo) <= truth <= np.percentile(values, hi))
            for lo, hi in _LEVELS]


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", type=int, default=200)
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--src", metavar="DIR", help="import orbweigh from DIR/src")
    args = parser.parse_args()
    if args.src:
        sys.path.insert(0, str(Path(args.src) / "src"))
    sys.path.insert(0, str(ROOT / "tests"))
    from synthetic import make_log

    import orbweigh
    from orbweigh.fitting import fit_orbit

    print(f"orbweigh from {Path(orbweigh.__file__).parent}; load average "
          f"{os.getloadavg()[0]:.1f}; {args.systems} systems, seed {args.seed}")
    rng = np.random.default_rng(args.seed)
    hits = {k: np.zeros(2) for k in KEYS}
    n_ok, failed, unconverged = 0, [], 0
    cpu0, wall0 = time.process_time(), time.perf_counter()
    for k in range(args.systems):
        truth, epochs, st, sr, plx_true, plx = random_system(rng)
        try:
            log = make_log(truth, epochs, st, sr, seed=args.seed * 1000 + k)
            doc = fit_orbit(log).to_document()
            draws, plx_draws, converged = draws_of(doc, plx, seed=k)
        except Exception as exc:            # counted and named, never dropped silently
            failed.append((k, f"{type(exc).__name__}: {str(exc)[:120]}"))
            continue
        n_ok += 1
        unconverged += not converged
        mass = draws[:, 3] ** 3 / ((plx_draws * 1e-3) ** 3 * draws[:, 0] ** 2)
        true_mass = truth["a"] ** 3 / ((plx_true * 1e-3) ** 3 * truth["P"] ** 2)
        values = {"P": (draws[:, 0], truth["P"]), "a": (draws[:, 3], truth["a"]),
                  "e": (draws[:, 2], truth["e"]), "i": (draws[:, 4], truth["i"]),
                  "mass": (mass[np.isfinite(mass) & (plx_draws > 0)], true_mass)}
        for key, (v, t) in values.items():
            hits[key] += covered(v, t)
        if (k + 1) % 25 == 0:
            print(f"  {k + 1} systems done, CPU {time.process_time() - cpu0:.0f} s", flush=True)
    cpu, wall = time.process_time() - cpu0, time.perf_counter() - wall0
    print(f"{n_ok} systems sampled ({unconverged} not converged), {len(failed)} failed; "
          f"CPU {cpu:.0f} s, wall {wall:.0f} s")
    for k, why in failed:
        print(f"  system {k} failed: {why}")
    print(f"{'element':<8} {'68 % intervals':>15} {'95 % intervals':>15}")
    for key in KEYS:
        f68, f95 = hits[key] / max(n_ok, 1)
        e68 = math.sqrt(0.6827 * 0.3173 / max(n_ok, 1))
        e95 = math.sqrt(0.95 * 0.05 / max(n_ok, 1))
        print(f"{key:<8} {100 * f68:>8.1f} ± {100 * e68:.1f} {100 * f95:>8.1f} ± {100 * e95:.1f}")
    print("(± is the binomial 1-sigma of the nominal 68.27 % and 95 %)")


if __name__ == "__main__":
    main()
