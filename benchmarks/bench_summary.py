"""Benchmark of the batch's final summary step alone: peak memory and time against the
catalogue size, without any fit.

A synthetic stream (``summary.running.jsonl``) of N systems is written as the main process
writes it during a batch: one line per system, ``{"key", "files", "summary"}``, the summary
row made by ``batch._summary_row`` from a record of the worker's shape (invented numbers,
seeded; every sixth system failed, a third of the rest with warnings, verdicts mixed);
each fitted system gets the part of a ``result.json`` the LaTeX table reads (elements,
mass, version). Then, in a fresh process per N, the step that turns the stream into
``summary.ecsv``, ``summary.csv``, ``summary.tex`` and ``index.html`` is timed and its
peak memory taken twice: the growth of the process's peak RSS over the RSS just before
the step (``resource.getrusage``), and, in another fresh process, the peak of the Python
allocations during the step (``tracemalloc``; numpy's arrays included).

    python benchmarks/bench_summary.py                       # N = 1000 10000 100000
    python benchmarks/bench_summary.py --systems 1000 10000
    PYTHONPATH=/path/to/older/src python benchmarks/bench_summary.py   # older code

The step is ``batch_summary.write_summary`` when that module exists; with the older code
(before the summary was written in chunks) it is ``batch._write_summary`` of the rows
``batch._streamed_rows`` reads, which is what ``run_batch`` called.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

__all__ = ["make_stream", "main"]

_VERDICTS = ("consistent", "consistent", "consistent", "drifting", "contradicted",
             "no previous orbit", "no new data")


def _record(k, rng):
    """A record of the worker's shape (see ``batch.process_system``), invented numbers."""
    from orbweigh.batch import system_key
    verdict = _VERDICTS[k % len(_VERDICTS)]
    failed = k % 6 == 5
    p_yr, e, a = rng.uniform(5, 60), rng.uniform(0, 0.8), rng.uniform(0.1, 2.0)
    red = rng.uniform(0.5, 3.0)
    revision = None if verdict == "no previous orbit" else {
        "n_new": 8, "dof_new": 16, "chi2_new": 16 * red, "reduced_chi2_new": red,
        "p_value": rng.uniform(), "p_value_inflated": rng.uniform(), "p_systematic":
        rng.uniform(), "decided_by": "p_value", "p_decisive": rng.uniform(),
        "mean_z_theta": rng.normal(), "mean_z_rho": rng.normal(),
        "reason": f"chi2 {16 * red:.1f} for 16 dof"}
    doc = None if failed else {
        "version": "bench", "elements": {
            "P": {"value": p_yr, "error": 0.01 * p_yr, "unit": "yr"},
            "T": {"value": rng.uniform(1990, 2010), "error": 0.05, "unit": "yr",
                  "scale": "julian"},
            "e": {"value": e, "error": 0.01}, "a": {"value": a, "error": 0.001 * a,
                                                   "unit": "arcsec"},
            "i": {"value": rng.uniform(10, 170), "error": 0.3, "unit": "deg"},
            "Omega": {"value": rng.uniform(0, 180), "error": 0.2, "unit": "deg"},
            "omega": {"value": rng.uniform(0, 360), "error": 0.4, "unit": "deg"}},
        "statistics": {"reduced_chi2": rng.uniform(0.8, 1.5)},
        "mass": {"total": {"value": 2.1, "low": 1.9, "high": 2.3}} if k % 3 == 0 else None}
    warnings = ([f"flipped: 1 (line {k % 40 + 2})", "short arc: 80% of the period"]
                if k % 3 == 1 else [])
    return {"id": f"bench {k:06d}", "key": system_key(f"bench {k:06d}"),
            "verdict": verdict, "status": "failed" if failed else "done",
            "fitted": doc is not None, "seed": k, "error": "fit: did not converge" if failed
            else None, "revision": revision, "document": doc, "warnings": warnings,
            "comparison": None if revision is None else {
                "elements": {"P": {"n_sigma": rng.normal(0, 3)}},
                "max_separation_arcsec": rng.uniform(0, 0.1),
                "max_separation_sigma": rng.uniform(0, 5)}}


def make_stream(out, n, seed=0):
    """Write the stream of N systems and the fitted ones' result.json into ``out``.

    A fitted system's row carries what summary.tex takes of its result, as a worker sends
    it (``batch_summary.latex_part``), except every fourth: the row of a system saved by
    an earlier run or found on disk after Ctrl-C, whose part is read from result.json.
    """
    from orbweigh.batch import STREAM_NAME, _stream_row, _summary_row
    from orbweigh.batch_summary import latex_part
    rng = np.random.default_rng(seed)
    out.mkdir(parents=True, exist_ok=True)
    with open(out / STREAM_NAME, "w", encoding="utf-8") as stream:
        for k in range(n):
            record = _record(k, rng)
            files = {"batch.json": "0" * 64}
            if record["document"] is not None:
                folder = out / "systems" / record["key"]
                folder.mkdir(parents=True, exist_ok=True)
                (folder / "result.json").write_text(json.dumps(record["document"]))
                files["result.json"] = "0" * 64
            row = {"key": record["key"], "files": files, "summary": _summary_row(record)}
            if record["document"] is not None and k % 4:
                row["latex"] = latex_part(record["document"])
            stream.write(_stream_row(row) + "\n")
    (out / "manifest.csv").write_text("id,log\n")
    return out


def _summary_step(out):
    """The final summary step of the code imported (see the module notes)."""
    from orbweigh.batch import STREAM_NAME, BatchOptions
    options, manifest = BatchOptions(seed=1), out / "manifest.csv"
    try:
        from orbweigh.batch_summary import write_summary
    except ImportError:
        from orbweigh.batch import _streamed_rows, _write_summary
        return lambda: _write_summary(out, _streamed_rows(out / STREAM_NAME), manifest,
                                      options)
    return lambda: write_summary(out, out / STREAM_NAME, manifest, options)


def _measure(out, trace):
    """Seconds, peak RSS growth [MB] or traced peak [MB] of one summary step."""
    import resource
    import tracemalloc

    import astropy.table  # noqa: F401  (imported before, as run_batch does)
    step = _summary_step(out)
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    if trace:
        tracemalloc.start()
    started = time.perf_counter()
    step()
    seconds = time.perf_counter() - started
    if trace:
        return {"traced_mb": tracemalloc.get_traced_memory()[1] / 2**20}
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return {"seconds": seconds, "rss_before_mb": before, "rss_growth_mb": peak - before,
            "index_mb": (out / "index.html").stat().st_size / 2**20}


def _fresh(out, trace):
    command = [sys.executable, __file__, "--one", str(out)] + (["--trace"] if trace else [])
    done = subprocess.run(command, capture_output=True, text=True, check=True)
    return json.loads(done.stdout.splitlines()[-1])


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", type=int, nargs="+", default=[1000, 10000, 100000])
    parser.add_argument("--one", metavar="OUT", help=argparse.SUPPRESS)
    parser.add_argument("--trace", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.one:
        print(json.dumps(_measure(Path(args.one), args.trace)))
        return
    import orbweigh
    print(f"code: {Path(orbweigh.__file__).parent}")
    print(f"{'systems':>8s}  {'time s':>7s}  {'RSS before MB':>13s}  {'RSS growth MB':>13s}  "
          f"{'traced peak MB':>14s}  {'index.html MB':>13s}")
    for n in args.systems:
        with tempfile.TemporaryDirectory(prefix="orbweigh-bench-summary-") as scratch:
            out = make_stream(Path(scratch) / "out", n)
            run, traced = _fresh(out, False), _fresh(out, True)
            print(f"{n:8d}  {run['seconds']:7.2f}  {run['rss_before_mb']:13.0f}  "
                  f"{run['rss_growth_mb']:13.1f}  {traced['traced_mb']:14.1f}  "
                  f"{run['index_mb']:13.1f}", flush=True)


if __name__ == "__main__":
    main()
