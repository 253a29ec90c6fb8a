"""CPU time of the global (P, e, T) grid search against the chunk size of its numpy passes.

The grid evaluates trials x points in chunks (``search._CHUNK_ELEMENTS``); the float32 work
arrays of one chunk should stay in the processor's cache. Twenty synthetic logs of 50
points at random epochs over 34 years (invented orbit, seeded noise), each searched over its
default period range; CPU milliseconds per search for each chunk size given. The chi2 profile
depends on the chunk size only through the float32 rounding of the sums (2e-8 relative: the
matrix product may sum a column in another order). BLAS runs on one thread, as
in ``fit_orbit`` (idle BLAS threads would otherwise add their spinning to the CPU time).

    python benchmarks/bench_grid.py                       # default sizes
    python benchmarks/bench_grid.py 3000000 300000 150000 50000
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from synthetic import make_log  # noqa: E402

import orbweigh.search as search  # noqa: E402

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


def _inputs():
    out = []
    for k in range(20):
        epochs = np.sort(np.random.default_rng(k).uniform(1990.0, 2024.0, 50))
        d = make_log(TRUTH, epochs, 0.5, 0.005, seed=k)
        theta = np.radians(d.theta_deg)
        w = search.isotropic_weights(d.rho_arcsec, d.sigma_rho_arcsec,
                                     np.radians(d.sigma_theta_deg))
        out.append((d.epoch_yr, d.rho_arcsec * np.cos(theta), d.rho_arcsec * np.sin(theta), w,
                    search.default_period_range(d.epoch_yr)))
    return out


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [3_000_000, 1_000_000, 300_000, 150_000, 50_000]
    threadpool_limits(limits=1)
    inputs = _inputs()
    for args in inputs:                       # warm the anomaly tables
        search.grid_search(*args, n_best=6)
    print("chunk elements   CPU ms per search")
    for size in sizes:
        search._CHUNK_ELEMENTS = size
        start = time.process_time()
        for _ in range(2):
            for args in inputs:
                search.grid_search(*args, n_best=6)
        print(f"{size:14d}   {1000 * (time.process_time() - start) / (2 * len(inputs)):8.1f}")


if __name__ == "__main__":
    main()
