"""CPU time of one batch fit, where it goes, and whether a change altered what it finds.

Fits the logs of the batch benchmark's synthetic catalogue (``bench_batch.make_catalogue``,
~50 points; with ``--problems`` also planted quadrant flips, outliers and short logs)
exactly as ``orbweigh batch`` does (``read_measurements`` then ``fit_orbit`` with the
system's seed) and prints the process (CPU) time per fit and the machine's load average.

    python benchmarks/bench_fit_cpu.py --systems 40 --problems --save before.json
    python benchmarks/bench_fit_cpu.py --systems 40 --problems --compare before.json
    python benchmarks/bench_fit_cpu.py --systems 20 --stages     # split by fit stage

``--save`` writes every system's elements, chi2 and row statuses; ``--compare`` reports the
largest relative difference of each element against such a file (and any row whose
status changed), so a speed-up can be shown not to change the results.
"""
from __future__ import annotations

import argparse
import cProfile
import json
import os
import pstats
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_batch import make_catalogue  # noqa: E402

from orbweigh.batch import system_seed  # noqa: E402
from orbweigh.fitting import FitOptions, fit_orbit  # noqa: E402
from orbweigh.manifest import read_manifest  # noqa: E402
from orbweigh.measurements import read_measurements  # noqa: E402

__all__ = ["main"]

#: Functions whose cumulative time is a stage of the fit (module file, function name).
STAGES = (("global search: grid", "search.py", "grid_search"),
          ("global search: polish (P, e, T)", "refine.py", "polish_cells"),
          ("full refinement of candidates", "fitting.py", "refine_candidates"),
          ("flip correction", "fitting.py", "_correct_flips"),
          ("outliers", "fitting.py", "_set_aside_outliers"),
          ("flip hypotheses (list)", "fitting.py", "_flip_hypotheses"),
          ("solution and document", "solution.py", "build_solution"),
          ("  of which Kepler's equation", "kepler.py", "eccentric_anomaly"))


def _fit_all(entries, seed=1):
    """(id, data, solution, cpu seconds) of each system, fitted as the batch does."""
    out = []
    for entry in entries:
        data = read_measurements(entry.log, target_ra_deg=entry.ra_deg,
                                 target_dec_deg=entry.dec_deg)
        started = time.process_time()
        solution = fit_orbit(data, FitOptions(seed=system_seed(seed, entry.id)))
        out.append((entry.id, solution, time.process_time() - started))
    return out


def _summary(solution):
    doc = solution.to_document()
    return {"elements": {k: v["value"] for k, v in doc["elements"].items()},
            "errors": {k: v.get("error") for k, v in doc["elements"].items()},
            "chi2": float(solution.chi2),
            "status": [str(s) for s in solution.status],
            "alternatives": len(solution.alternatives)}


def _relative(a, b):
    if a is None or b is None:
        return 0.0 if a is b else np.inf
    return abs(a - b) / max(abs(a), abs(b), 1e-300)


def _compare(saved, now):
    """Largest relative difference per quantity and the systems whose rows changed."""
    worst, changed = {}, []
    for key, new in now.items():
        old = saved[key]
        for k in old["elements"]:
            for what in ("elements", "errors"):
                name = k if what == "elements" else f"{k}_err"
                worst[name] = max(worst.get(name, 0.0), _relative(old[what][k], new[what][k]))
        worst["chi2"] = max(worst.get("chi2", 0.0), _relative(old["chi2"], new["chi2"]))
        if old["status"] != new["status"] or old["alternatives"] != new["alternatives"]:
            changed.append(key)
    return worst, changed


def _stage_table(profile, n):
    stats = pstats.Stats(profile).stats
    print(f"{'stage (cumulative, profiled)':36s} {'ms/system':>9s}")
    for label, module, name in STAGES:
        total = sum(v[3] for (path, _, func), v in stats.items()
                    if func == name and path.endswith(module))
        print(f"{label:36s} {1000 * total / n:9.1f}")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", type=int, default=40)
    parser.add_argument("--points", type=int, default=50)
    parser.add_argument("--problems", action="store_true",
                        help="plant flips, outliers and short logs (see make_catalogue)")
    parser.add_argument("--save", metavar="FILE", help="write the results to FILE (JSON)")
    parser.add_argument("--compare", metavar="FILE", help="compare with a saved FILE")
    parser.add_argument("--stages", action="store_true", help="profile the fit's stages")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="orbweigh-fitcpu-") as scratch:
        entries = read_manifest(make_catalogue(scratch, args.systems + 1, args.points,
                                               problems=args.problems))
        _fit_all(entries[:1])                      # imports and first-call set-up
        profile = cProfile.Profile() if args.stages else None
        if profile:
            profile.enable()
        fits = _fit_all(entries[1:])
        if profile:
            profile.disable()
    cpu = np.array([c for _, _, c in fits])
    print(f"{len(fits)} fits of ~{args.points} points{' with problems' if args.problems else ''}"
          f": CPU per fit mean {1000 * cpu.mean():.1f} ms, median {1000 * np.median(cpu):.1f} ms,"
          f" max {1000 * cpu.max():.1f} ms; load average {os.getloadavg()[0]:.2f}")
    if profile:
        _stage_table(profile, len(fits))
    results = {key: _summary(s) for key, s, _ in fits}
    if args.save:
        Path(args.save).write_text(json.dumps(results, indent=1))
    if args.compare:
        worst, changed = _compare(json.loads(Path(args.compare).read_text()), results)
        print("largest relative difference against", args.compare)
        print("  " + ", ".join(f"{k} {v:.1e}" for k, v in worst.items()))
        print(f"  systems whose row statuses or alternatives changed: {changed or 'none'}")


if __name__ == "__main__":
    main()
