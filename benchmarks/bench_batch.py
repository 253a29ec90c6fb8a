"""Benchmark of ``orbweigh batch``: systems per second against the number of workers.

A synthetic catalogue (invented orbits, seeded noise) of N systems with ~50 measurements
each; half carry a previous orbit (some correct, some with P off by 10 %). Each run is a
full ``run_batch`` (revision check, fit without sampling, comparison, summary) without
HTML reports, on a fresh output folder.

    python benchmarks/bench_batch.py                 # 1000 systems, 1 and 2 workers
    python benchmarks/bench_batch.py --systems 200 --workers 2
    python benchmarks/bench_batch.py --profile 20    # where the time goes, inline
"""
from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import tempfile
import time
from pathlib import Path

import numpy as np

from orbweigh.batch import BatchOptions, run_batch
from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris

__all__ = ["make_catalogue", "main"]


def make_catalogue(folder, n_systems, n_points=50, seed=0, problems=False):
    """Write N synthetic logs and a manifest into ``folder``; returns the manifest path.

    ``problems`` plants what real logs have: one point of every 5th system turned by
    180 deg (a quadrant error), one of every 7th displaced by 20 sigma in rho (an
    outlier), and every 10th log cut to 12 points (small logs get a flip search per row).
    """
    rng = np.random.default_rng(seed)
    planted = np.random.default_rng([seed, 1])
    logs = Path(folder) / "logs"
    logs.mkdir(parents=True, exist_ok=True)
    rows = ["id,log,P,T,e,a,i,Omega,omega,last_epoch"]
    for k in range(n_systems):
        el = CampbellElements(rng.uniform(5.0, 60.0), rng.uniform(1990.0, 2010.0),
                              rng.uniform(0.0, 0.8), rng.uniform(0.1, 2.0),
                              rng.uniform(10.0, 170.0), rng.uniform(0.0, 180.0),
                              rng.uniform(0.0, 360.0))
        span = el.period_yr * rng.uniform(0.8, 1.5)
        t = np.sort(2024.0 - rng.uniform(0.0, span, n_points))
        sigma_theta, sigma_rho = 0.5, 0.005 * el.a_arcsec / 0.5
        eph = ephemeris(el, t)
        theta = np.mod(eph.theta_deg + rng.normal(0.0, sigma_theta, n_points), 360.0)
        rho = np.abs(eph.rho_arcsec + rng.normal(0.0, sigma_rho, n_points))
        if problems:
            t, theta, rho = _plant(planted, k, t, theta, rho, sigma_rho)
        (logs / f"s{k:04d}.csv").write_text(
            "epoch,theta,rho,sigma_theta,sigma_rho\n" + "".join(
                f"J{a:.4f},{b:.3f},{c:.5f},{sigma_theta},{sigma_rho:.5f}\n"
                for a, b, c in zip(t, theta, rho)))
        old = ""
        if k % 2 == 0:
            p = el.period_yr * (1.1 if k % 4 == 0 else 1.0)
            old = (f"{p},J{el.periastron_yr},{el.e},{el.a_arcsec},{el.i_deg},{el.node_deg},"
                   f"{el.omega_deg},J{t[int(0.8 * t.size)]:.4f}")
        rows.append(f"s{k:04d},logs/s{k:04d}.csv,{old or ',,,,,,,'}")
    manifest = Path(folder) / "manifest.csv"
    manifest.write_text("\n".join(rows) + "\n")
    return manifest


def _plant(rng, k, t, theta, rho, sigma_rho):
    """The planted problems of system k (see make_catalogue)."""
    theta, rho = theta.copy(), rho.copy()
    if k % 5 == 1:
        j = rng.integers(t.size)
        theta[j] = np.mod(theta[j] + 180.0, 360.0)
    if k % 7 == 3:
        rho[rng.integers(t.size)] += 20.0 * sigma_rho
    if k % 10 == 7:
        keep = np.sort(rng.choice(t.size, 12, replace=False))
        t, theta, rho = t[keep], theta[keep], rho[keep]
    return t, theta, rho


def _run(manifest, out, workers):
    started = time.perf_counter()
    table = run_batch(manifest, out, BatchOptions(seed=1, pages="none"), workers=workers,
                      progress=False)
    seconds = time.perf_counter() - started
    failed = int((table["status"] == "failed").sum())
    return seconds, failed


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", type=int, default=1000)
    parser.add_argument("--points", type=int, default=50)
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--profile", type=int, metavar="N", default=0,
                        help="profile an inline run of N systems instead")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="orbweigh-bench-") as scratch:
        manifest = make_catalogue(scratch, args.profile or args.systems, args.points)
        if args.profile:
            profile = cProfile.Profile()
            profile.enable()
            _run(manifest, Path(scratch) / "out-profile", 1)
            profile.disable()
            pstats.Stats(profile).sort_stats("cumulative").print_stats(25)
            return
        print(f"{args.systems} systems x {args.points} points, {os.cpu_count()} CPUs")
        print("workers  seconds  systems/s  failed")
        for workers in args.workers:
            seconds, failed = _run(manifest, Path(scratch) / f"out-{workers}", workers)
            print(f"{workers:7d}  {seconds:7.1f}  {args.systems / seconds:9.2f}  {failed:6d}",
                  flush=True)


if __name__ == "__main__":
    main()
