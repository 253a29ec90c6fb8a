"""Speed of the visual-orbit posterior: likelihood evaluations and a default sampled fit,
this checkout against a baseline checkout, interleaved.

1. Chain-target evaluations per second (CPU) on a 100-point synthetic log, vectorised over
   8, 16 and 32 walkers: the marginal target (Thiele-Innes constants integrated out, the
   default) and the exact seven-element likelihood (the direct sampler, as the baseline
   sampled every run). One evaluation = one walker position.
2. The default ``orbweigh fit sample_measurements/measurements.csv --target-ra ..
   --target-dec .. --parallax 40.68 0.40 --mass-ratio 0.78 0.03 --sample --quiet --out
   DIR``: in a child process per run, the sampling alone (fit first, then
   ``sampling.sample_document`` with the defaults: wall, CPU, walkers x steps evaluated,
   tau) and the whole command (wall, user + system CPU), alternating baseline and this
   checkout ``--rounds`` times; the load average is printed before every run.

    git archive 61b8f6e | tar -x -C /tmp/orbweigh-baseline     # the baseline checkout
    python benchmarks/bench_likelihood.py --baseline /tmp/orbweigh-baseline [--rounds 3]

Without --baseline only this checkout is measured. The machine may be shared: compare the
CPU figures first, and the wall figures only beside the load average. Seeded.
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SAMPLE_LOG = ROOT / "sample_measurements" / "measurements.csv"
COMMAND = ["fit", str(SAMPLE_LOG), "--target-ra", "14h27m13.4s", "--target-dec",
           "+38d41m06s", "--parallax", "40.68", "0.40", "--mass-ratio", "0.78", "0.03",
           "--sample", "--quiet"]
N_POINTS = 100
SIGMA_THETA, SIGMA_RHO = 1.0, 0.01   # deg, arcsec

# Run in a child with PYTHONPATH at a checkout's src: fit, then time the sampling alone.
# The baseline's sample_document returned (sample, posterior); this one returns an object.
_SAMPLING_CHILD = r"""
import json, sys, time
from orbweigh.fitting import fit_orbit
from orbweigh.measurements import read_measurements
from orbweigh.sampling import sample_document
data = read_measurements(sys.argv[1], target_ra_deg="14h27m13.4s", target_dec_deg="+38d41m06s")
doc = fit_orbit(data).to_document()
c0, w0 = time.process_time(), time.perf_counter()
out = sample_document(doc, seed=1)
cpu, wall = time.process_time() - c0, time.perf_counter() - w0
sample = out[0] if isinstance(out, tuple) else out.sample
steps, walkers, _ = sample.chain.shape
print(json.dumps({"wall": wall, "cpu": cpu, "walkers": walkers, "steps": steps,
                  "tau": float(max(sample.autocorr_time)), "converged": bool(sample.converged),
                  "draws": int(len(sample.draws()))}))
"""


def _load():
    return os.getloadavg()[0]


def synthetic_models(rng):
    """Marginal and direct posteriors of a 100-point log of a known orbit, and the truth."""
    from orbweigh.elements import CampbellElements
    from orbweigh.ephemeris import ephemeris
    from orbweigh.orbit_posterior import DirectPosterior, MarginalPosterior, Positions
    from orbweigh.priors import ElementPriors

    truth = CampbellElements(31.0, 2003.0, 0.6, 0.9, 62.0, 130.0, 75.0)
    t = np.sort(rng.uniform(1950.0, 2025.0, N_POINTS))
    eph = ephemeris(truth, t)
    theta = np.radians(eph.theta_deg + rng.normal(0, SIGMA_THETA, N_POINTS))
    rho = eph.rho_arcsec + rng.normal(0, SIGMA_RHO, N_POINTS)
    pos = Positions(t, np.cos(theta), np.sin(theta), rho,
                    np.full(N_POINTS, 1.0 / np.radians(SIGMA_THETA)),
                    np.full(N_POINTS, 1.0 / SIGMA_RHO))
    priors = ElementPriors(period_range=(1.0, 1000.0), a_range=(0.009, 90.0))
    marginal = MarginalPosterior(pos, priors, {}, truth.periastron_yr)
    direct = DirectPosterior(pos, priors, {}, truth.periastron_yr,
                             (np.radians(truth.node_deg), np.radians(truth.omega_deg)))
    return marginal, direct, truth


def rate(func, q, seconds):
    """Best-of-3 evaluations per CPU second of func(q)."""
    best = 0.0
    for _ in range(3):
        n, c0, w0 = 0, time.process_time(), time.perf_counter()
        while time.perf_counter() - w0 < seconds / 3:
            func(q)
            n += 1
        best = max(best, n * len(q) / max(time.process_time() - c0, 1e-9))
    return best


def bench_evaluations(seconds):
    rng = np.random.default_rng(1)
    marginal, direct, truth = synthetic_models(rng)
    q_m = marginal.coordinates(truth) + 1e-4 * rng.standard_normal((32, 3))
    q_d = direct.coordinates(truth) + 1e-4 * rng.standard_normal((32, 7))
    print(f"chain-target evaluations per CPU second, {N_POINTS} points (load "
          f"{_load():.1f})")
    print(f"{'walkers':>8} {'marginal (3 coords)':>20} {'exact (7 coords)':>17}")
    for walkers in (8, 16, 32):
        print(f"{walkers:>8} {rate(marginal, q_m[:walkers], seconds):>20.3g} "
              f"{rate(direct, q_d[:walkers], seconds):>17.3g}")


def _sampling_run(src):
    env = {**os.environ, "PYTHONPATH": str(Path(src) / "src")}
    out = subprocess.run([sys.executable, "-c", _SAMPLING_CHILD, str(SAMPLE_LOG)], env=env,
                         check=True, capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def _command_run(src):
    env = {**os.environ, "PYTHONPATH": str(Path(src) / "src")}
    with tempfile.TemporaryDirectory() as tmp:
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        w0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "orbweigh.cli.main", *COMMAND, "--out", tmp],
                       env=env, check=True, stdout=subprocess.DEVNULL)
        wall = time.perf_counter() - w0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return {"wall": wall, "cpu": cpu}


def bench_runs(checkouts, rounds):
    print(f"\nsampling alone (default walkers and steps), then the whole default command; "
          f"{rounds} rounds, interleaved")
    print(f"{'checkout':<10} {'load':>5} {'sample wall':>12} {'sample CPU':>11} "
          f"{'walkers x steps':>16} {'evals/CPU s':>12} {'tau':>5} {'command wall':>13} "
          f"{'command CPU':>12}")
    results = {name: [] for name in checkouts}
    for _ in range(rounds):
        for name, src in checkouts.items():
            load = _load()
            s = _sampling_run(src)
            c = _command_run(src)
            evals = s["walkers"] * s["steps"]
            results[name].append((s["wall"], s["cpu"], c["wall"], c["cpu"], evals / s["cpu"]))
            print(f"{name:<10} {load:>5.1f} {s['wall']:>11.2f}s {s['cpu']:>10.2f}s "
                  f"{s['walkers']:>6} x {s['steps']:<6} {evals / s['cpu']:>12.3g} "
                  f"{s['tau']:>5.0f} {c['wall']:>12.2f}s {c['cpu']:>11.2f}s")
    print("\nmedians over the rounds")
    med = {n: np.median(np.array(r), axis=0) for n, r in results.items()}
    for name, m in med.items():
        print(f"{name:<10} sampling wall {m[0]:.2f} s, CPU {m[1]:.2f} s; command wall "
              f"{m[2]:.2f} s, CPU {m[3]:.2f} s; {m[4]:.3g} evaluations per CPU second")
    if "baseline" in med:
        b, n = med["baseline"], med["this"]
        print(f"ratio baseline / this: sampling wall {b[0] / n[0]:.1f}x, CPU "
              f"{b[1] / n[1]:.1f}x; command wall {b[2] / n[2]:.1f}x, CPU {b[3] / n[3]:.1f}x")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", metavar="DIR",
                        help="a checkout of the baseline commit (its src/ is imported)")
    parser.add_argument("--rounds", type=int, default=3, help="interleaved rounds (default 3)")
    parser.add_argument("--seconds", type=float, default=2.0,
                        help="time spent per rate measurement (default 2)")
    parser.add_argument("--no-runs", action="store_true", help="skip the sampled-fit runs")
    args = parser.parse_args()
    print(f"load average {_load():.1f} on {os.cpu_count()} cores")
    bench_evaluations(args.seconds)
    if not args.no_runs:
        checkouts = {"baseline": args.baseline} if args.baseline else {}
        checkouts["this"] = str(ROOT)
        bench_runs(checkouts, args.rounds)


if __name__ == "__main__":
    main()
