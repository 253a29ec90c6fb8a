"""Cost of the quadrant-flip hypotheses searched before the global search.

``fit_orbit`` runs one global search per flip hypothesis (``fitting._flip_hypotheses``):
the rows ``check`` suspects and, in a small log, every single row. This script times the
whole fit three ways, interleaved: with the hypotheses as the fit runs them ("with"),
with every listed hypothesis searched whatever the null orbit explains ("eager", the
behaviour before the gate ``fitting._null_suffices``), and with the null hypothesis alone
("without": the post-search flip correction still runs), on

* a 10-point short arc of a 25-yr pair with one row turned by 180 deg (the case the
  pre-search exists for),
* the same arc without the quadrant error,
* 50- and 80-point logs of a well-covered orbit without a quadrant error,
* a 50-point log with one quadrant error (a row ``check`` suspects),
* an 80-point log with four quadrant errors (four suspects: 15 hypotheses).

    python benchmarks/bench_flips.py [--repeats 5]

Prints the load average, then per log the hypotheses listed ("hyp") and the global
searches the fit ran with them ("run": a log of more than 15 points searches the other
hypotheses only when the null orbit leaves a suspected row unexplained), the median and the best
wall time of each variant over the repeats, the extra time of the pre-search, and the
fitted P and flipped rows of each variant (the pre-search must not change a normal log's
answer, and must fix the short arc's). Seeded: the same logs every run.
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path
from unittest import mock

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from synthetic import make_log  # noqa: E402  (independent generator of the test suite)

from orbweigh import fitting  # noqa: E402
from orbweigh.fitting import FitOptions, fit_orbit  # noqa: E402

ARC = dict(P=25.0, T=2012.0, e=0.4, a=0.8, i=55.0, Omega=60.0, omega=120.0)
WIDE = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)


def logs():
    """(name, MeasurementSet) of the benchmark, fixed seeds."""
    return [
        ("10-pt arc, 1 flip", make_log(ARC, np.linspace(2005, 2015, 10), 0.5, 0.005, seed=1,
                                       flips=(6,))),
        ("10-pt arc, clean", make_log(ARC, np.linspace(2005, 2015, 10), 0.5, 0.005, seed=1)),
        ("50-pt normal", make_log(WIDE, np.linspace(1980, 2020, 50), 0.5, 0.005, seed=2)),
        ("80-pt normal", make_log(WIDE, np.linspace(1960, 2020, 80), 0.5, 0.005, seed=3)),
        ("50-pt, 1 flip", make_log(WIDE, np.linspace(1980, 2020, 50), 0.5, 0.005, seed=4,
                                   flips=(20,))),
        ("80-pt, 4 flips", make_log(WIDE, np.linspace(1960, 2020, 80), 0.5, 0.005, seed=5,
                                    flips=(10, 30, 50, 70))),
    ]


def _null_only(n, suspects):
    return [np.zeros(n, bool)]


VARIANTS = ("with", "eager", "without")


def timed(data, variant):
    """(wall seconds, solution, global searches run) of one fit."""
    counter = mock.Mock(wraps=fitting._search_under)
    patches = {"with": {"FLIP_MIN_GAIN": fitting.FLIP_MIN_GAIN}, "eager": {"_null_suffices": lambda *a: False},
               "without": {"_flip_hypotheses": _null_only}}[variant]
    started = time.perf_counter()
    with mock.patch.object(fitting, "_search_under", counter), \
            mock.patch.multiple(fitting, **patches):
        sol = fit_orbit(data, FitOptions())
    return time.perf_counter() - started, sol, counter.call_count


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())} "
          f"({os.cpu_count()} cores)")
    print(f"{'log':<18} {'hyp':>3}" + "".join(f" {v + ' med/min [s] (runs)':>27}"
                                             for v in VARIANTS) + "  P yr, flipped rows (each variant)")
    for name, data in logs():
        usable = np.flatnonzero(data.usable)
        n_hyp = len(fitting._flip_hypotheses(usable.size,
                                             fitting._suspected_flips(data, usable)))
        times = {v: [] for v in VARIANTS}
        sols, runs = {}, {}
        timed(data, "with")   # warm-up: imports and the search's anomaly tables
        for k in range(args.repeats):
            order = VARIANTS[k % 3:] + VARIANTS[:k % 3]   # interleaved, rotating order
            for variant in order:
                seconds, sols[variant], runs[variant] = timed(data, variant)
                times[variant].append(seconds)
        cells = "".join(f" {statistics.median(times[v]):>13.3f}/{min(times[v]):<6.3f} "
                        f"({runs[v]:>2})" for v in VARIANTS)
        answers = " | ".join(f"{sols[v].elements.period_yr:.2f}, "
                             f"{np.flatnonzero(sols[v].status == 'flipped').tolist()}"
                             for v in VARIANTS)
        print(f"{name:<18} {n_hyp:>3}{cells}  {answers}")
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
