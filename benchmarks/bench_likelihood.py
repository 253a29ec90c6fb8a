"""Speed of the astrometric log-posterior and of a default ``orbweigh fit --sample`` run.

1. Log-posterior evaluations per second for a 100-point log, vectorised over 32, 64 and
   256 walkers (goal: >= 1e5 per second on one core), beside a plain reference that
   evaluates the same chi2 through ``model.normalised_residuals`` (the fit's own residuals,
   with ``kepler.eccentric_anomaly``) broadcast over the walkers.
2. Wall and CPU time of sampling the sample pair with the default walkers and steps, and
   of the whole default command
   ``orbweigh fit sample_measurements/measurements.csv --target-ra .. --target-dec ..
   --sample --out DIR --quiet`` (fit included).

    python benchmarks/bench_likelihood.py [--seconds 2] [--no-command]

Times are best-of-3 process (CPU) time per call and wall time; other load on the machine
inflates the wall figures, the load average is printed. Seeded.
"""
from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from orbweigh.elements import CampbellElements, thiele_innes_from_campbell
from orbweigh.ephemeris import ephemeris
from orbweigh.model import normalised_residuals
from orbweigh.sampling import DEFAULT_STEPS, DEFAULT_WALKERS, AstrometricPosterior

ROOT = Path(__file__).resolve().parent.parent
SAMPLE_LOG = ROOT / "sample_measurements" / "measurements.csv"
TARGET = ["--target-ra", "14h27m13.4s", "--target-dec", "+38d41m06s"]
N_POINTS = 100
SIGMA_THETA, SIGMA_RHO = 1.0, 0.01   # deg, arcsec


def synthetic_posterior(rng):
    """A 100-point log of a known orbit and its posterior; the true walker position."""
    truth = CampbellElements(31.0, 2003.0, 0.6, 0.9, 62.0, 130.0, 75.0)
    t = np.sort(rng.uniform(1950.0, 2025.0, N_POINTS))
    eph = ephemeris(truth, t)
    theta = np.radians(eph.theta_deg + rng.normal(0, SIGMA_THETA, N_POINTS))
    rho = eph.rho_arcsec + rng.normal(0, SIGMA_RHO, N_POINTS)
    post = AstrometricPosterior(
        t=t, cos_theta=np.cos(theta), sin_theta=np.sin(theta), rho=rho,
        inv_sigma_theta=np.full(N_POINTS, 1.0 / np.radians(SIGMA_THETA)),
        inv_sigma_rho=np.full(N_POINTS, 1.0 / SIGMA_RHO), period_range=(1.0, 1000.0),
        a_range=(0.009, 90.0), t_ref=truth.periastron_yr,
        angle_ref=(np.radians(truth.node_deg), np.radians(truth.omega_deg)))
    data = (t, np.degrees(theta), rho, np.full(N_POINTS, SIGMA_THETA),
            np.full(N_POINTS, SIGMA_RHO))
    return post, post.coordinates(truth), data


def reference_log_likelihood(post, data, q):
    """-chi2/2 through model.normalised_residuals, broadcast over the walkers."""
    el = post.elements(q)
    A, B, F, G = thiele_innes_from_campbell(el[:, 3], *np.radians(el[:, 4:7]).T)
    params = [c[:, None] for c in (el[:, 0], el[:, 1], el[:, 2], A, B, F, G)]
    r_t, r_r, _, _ = normalised_residuals(params, *data)
    return -0.5 * np.sum(r_t**2 + r_r**2, axis=1)


def rate(func, q, seconds):
    """Best-of-3 (CPU, wall) evaluations per second of func(q)."""
    best_cpu = best_wall = 0.0
    for _ in range(3):
        n, c0, w0 = 0, time.process_time(), time.perf_counter()
        while time.perf_counter() - w0 < seconds / 3:
            func(q)
            n += 1
        cpu, wall = time.process_time() - c0, time.perf_counter() - w0
        best_cpu = max(best_cpu, n * len(q) / max(cpu, 1e-9))
        best_wall = max(best_wall, n * len(q) / wall)
    return best_cpu, best_wall


def bench_likelihood(seconds):
    rng = np.random.default_rng(1)
    post, q0, data = synthetic_posterior(rng)
    q = q0 + 1e-4 * rng.standard_normal((256, 7))
    agree = np.max(np.abs(post(q) - post.log_prior(q) - reference_log_likelihood(post, data, q)))
    print(f"log-posterior, {N_POINTS} points (max |difference| from the reference "
          f"-chi2/2: {agree:.1e})")
    print(f"{'walkers':>8} {'evals/s (CPU)':>15} {'evals/s (wall)':>15} "
          f"{'reference (CPU)':>16} {'speed-up':>9}")
    for walkers in (32, 64, 256):
        cpu, wall = rate(post, q[:walkers], seconds)
        ref_cpu, _ = rate(lambda x: reference_log_likelihood(post, data, x), q[:walkers],
                          seconds)
        print(f"{walkers:>8} {cpu:>15.3g} {wall:>15.3g} {ref_cpu:>16.3g} {cpu / ref_cpu:>8.1f}x")


def bench_sampling():
    """Sampling alone on the sample pair (fit once, then sample with the defaults)."""
    from orbweigh.fitting import fit_orbit
    from orbweigh.measurements import read_measurements
    from orbweigh.sampling import sample_document

    data = read_measurements(SAMPLE_LOG, target_ra_deg=TARGET[1], target_dec_deg=TARGET[3])
    doc = fit_orbit(data).to_document()
    c0, w0 = time.process_time(), time.perf_counter()
    sample, _ = sample_document(doc, seed=1)
    cpu, wall = time.process_time() - c0, time.perf_counter() - w0
    print(f"\nsampling the sample pair ({DEFAULT_WALKERS} walkers x {DEFAULT_STEPS} steps, "
          f"{len(doc['residuals'])} rows): wall {wall:.1f} s, CPU {cpu:.1f} s; "
          f"tau max {np.max(sample.autocorr_time):.0f} steps, converged {sample.converged}")


def bench_command():
    with tempfile.TemporaryDirectory() as tmp:
        cmd = [str(Path(sys.executable).with_name("orbweigh")), "fit", str(SAMPLE_LOG), *TARGET,
               "--sample", "--quiet", "--out", tmp]
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        w0 = time.perf_counter()
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
        wall = time.perf_counter() - w0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(f"default command (fit + sampling + writing): wall {wall:.1f} s, user CPU "
          f"{after.ru_utime - before.ru_utime:.1f} s, system "
          f"{after.ru_stime - before.ru_stime:.1f} s")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=2.0,
                        help="time spent per rate measurement (default 2)")
    parser.add_argument("--no-command", action="store_true",
                        help="skip the sample-pair sampling and command runs")
    args = parser.parse_args()
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    bench_likelihood(args.seconds)
    if not args.no_command:
        bench_sampling()
        bench_command()


if __name__ == "__main__":
    main()
