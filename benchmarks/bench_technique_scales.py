"""Cost of ``fit --technique-scales`` (sigma factor per technique, iterated with the fit).

Logs from the test suite's independent generator (tests/synthetic.py): two techniques
observed one after the other over 60 yr, their stated sigmas wrong by known factors
(micrometer 2.5 times too small, speckle twice too large), 50 and 80 points in all. Each
log is fitted with and without the option, interleaved, ``--repeats`` times.

    python benchmarks/bench_technique_scales.py [--repeats 5]

Prints the load average, the median and best wall time of each variant, the rounds the
factors took and the factors recovered (truth 2.5 and 0.5). Seeded: the same logs every run.
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from synthetic import make_log  # noqa: E402

from orbweigh.fitting import FitOptions, fit_orbit  # noqa: E402
from orbweigh.measurements import MeasurementSet  # noqa: E402

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


def mixed_log(n, seed):
    half = n // 2
    technique = np.array(["micrometer"] * half + ["speckle"] * (n - half))
    true_theta = np.where(technique == "micrometer", 1.0, 0.3)
    true_rho = np.where(technique == "micrometer", 0.05, 0.004)
    wrong = np.where(technique == "micrometer", 2.5, 0.5)
    log = make_log(TRUTH, np.linspace(1960.0, 2020.0, n), true_theta, true_rho, seed=seed)
    return MeasurementSet.from_arrays(log.epoch_yr, log.theta_deg, log.rho_arcsec,
                                      true_theta / wrong, true_rho / wrong, technique=technique)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())} "
          f"({os.cpu_count()} cores)")
    print(f"{'points':>6} {'plain med/min [s]':>18} {'scaled med/min [s]':>19} {'rounds':>6}  "
          "factors (micrometer, speckle)")
    for n in (50, 80):
        data = mixed_log(n, seed=n)
        fit_orbit(data)   # warm-up
        times = {False: [], True: []}
        for k in range(args.repeats):
            for scaled in ((False, True) if k % 2 == 0 else (True, False)):
                started = time.perf_counter()
                sol = fit_orbit(data, FitOptions(technique_scales=scaled))
                times[scaled].append(time.perf_counter() - started)
                if scaled:
                    scales = sol.statistics["technique_scales"]
        f = scales["factors"]
        print(f"{n:>6} {statistics.median(times[False]):>10.3f}/{min(times[False]):<7.3f} "
              f"{statistics.median(times[True]):>11.3f}/{min(times[True]):<7.3f} "
              f"{scales['rounds']:>6}  {f['micrometer']['factor']:.2f} ± "
              f"{f['micrometer']['error']:.2f}, {f['speckle']['factor']:.3f} ± "
              f"{f['speckle']['error']:.3f}")
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
