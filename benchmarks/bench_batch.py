"""Benchmark of ``orbweigh batch``: systems per second against the workers, the CPU time of
each step per system, a Dask LocalCluster against the local pool, and memory.

A synthetic catalogue (invented orbits, seeded noise) of N systems with ~50 measurements
each; half carry a previous orbit (some correct, some with P off by 10 %); ``--problems``
plants flips, outliers and short logs (see ``make_catalogue``). Each run is a full
``run_batch`` (revision check, fit without sampling, comparison, summary; pages as
``--pages``, default none) on a fresh output folder, in a fresh process, so its peak
memory is its own. Printed per run: wall time, systems/s, CPU of the main process and of
the workers, the main process's peak RSS, and the load average (the machine may be shared).

    python benchmarks/bench_batch.py                     # 1000 systems, 1 and 2 workers
    python benchmarks/bench_batch.py --systems 200 --workers 2 --pages flagged
    python benchmarks/bench_batch.py --systems 1000 --workers 2 --dask   # + LocalCluster
    python benchmarks/bench_batch.py --memory 200 1000   # peak RSS against catalogue size
    python benchmarks/bench_batch.py --profile 20        # cProfile of an inline run
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


def _one_run(manifest, out, workers, pages, dask):
    """One batch in this process; its figures as a dict (see main's table)."""
    import resource
    started, cpu = time.perf_counter(), time.process_time()
    if dask:
        from dask.distributed import LocalCluster
        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                          dashboard_address=None) as cluster:
            setup = time.perf_counter() - started
            overhead = _dask_task_overhead(cluster.scheduler_address)
            started = time.perf_counter()
            counts = run_batch(manifest, out, BatchOptions(seed=1, pages=pages),
                               scheduler=cluster.scheduler_address, progress=False)
            wall = time.perf_counter() - started
    else:
        setup, overhead = 0.0, None
        counts = run_batch(manifest, out, BatchOptions(seed=1, pages=pages), workers=workers,
                           progress=False)
        wall = time.perf_counter() - started
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return {"wall": wall, "setup": setup, "cpu_main": time.process_time() - cpu,
            "cpu_workers": children.ru_utime + children.ru_stime,
            "rss_main_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "failed": counts.n_failed, "n": counts.n_systems,
            "task_overhead_ms": overhead, "steps": _step_seconds(Path(out)),
            "disk": _disk_per_system(Path(out))}


def _noop(x):
    return x


def _dask_task_overhead(address, n=200):
    """Milliseconds per task of a do-nothing task: one at a time (latency) and n at once
    (throughput), on the running cluster."""
    from dask.distributed import Client
    with Client(address) as client:
        client.submit(_noop, -1, pure=False).result()
        started = time.perf_counter()
        for k in range(20):
            client.submit(_noop, k, pure=False).result()
        latency = (time.perf_counter() - started) / 20
        started = time.perf_counter()
        client.gather([client.submit(_noop, k, pure=False) for k in range(n)])
        throughput = (time.perf_counter() - started) / n
    return {"one at a time": 1000 * latency, f"{n} at once": 1000 * throughput}


def _step_seconds(out):
    """Mean CPU seconds per system of each step, from the records' ``cpu_seconds``."""
    import json
    totals, n = {}, 0
    for path in out.glob("systems/*/batch.json"):
        n += 1
        for step, seconds in json.loads(path.read_text()).get("cpu_seconds", {}).items():
            totals[step] = totals.get(step, 0.0) + seconds
    return {step: seconds / max(n, 1) for step, seconds in totals.items()}


def _disk_per_system(out):
    """Mean bytes per system of each output file name, and of all of them."""
    sizes, n = {}, max(1, len(list(out.glob("systems/*"))))
    for path in out.glob("systems/*/*"):
        sizes[path.name] = sizes.get(path.name, 0) + path.stat().st_size
    return {name: size / n for name, size in sorted(sizes.items())} | {
        "all": sum(sizes.values()) / n}


def _payload_bytes(manifest, scratch):
    """Pickled bytes per system sent to a worker (chunk arguments) and sent back."""
    import pickle

    from orbweigh.batch import _fit_chunk, input_hash
    from orbweigh.manifest import read_manifest
    options = BatchOptions(seed=1, pages="none")
    items = [(e, input_hash(e, options)) for e in read_manifest(manifest)[:8]]
    out = Path(scratch) / "out-payload"
    sent = len(pickle.dumps((items, options, out))) / len(items)
    back = len(pickle.dumps(_fit_chunk(items, options, out))) / len(items)
    return sent, back


def _in_fresh_process(manifest, out, workers, pages, dask):
    import json
    import subprocess
    import sys
    command = [sys.executable, __file__, "--one", str(manifest), str(out), str(workers), pages]
    result = subprocess.run(command + (["--dask"] if dask else []), capture_output=True,
                            text=True, check=True)
    return json.loads(result.stdout.splitlines()[-1])


def _report(label, n, run):
    load = os.getloadavg()[0]
    print(f"{label:>14s}  {run['wall']:7.1f}  {n / run['wall']:9.1f}  "
          f"{1000 * run['cpu_main'] / n:8.1f}  {1000 * run['cpu_workers'] / n:8.1f}  "
          f"{run['rss_main_mb']:7.0f}  {run['failed']:6d}  {load:5.2f}", flush=True)


def _print_steps(run, n):
    steps = run["steps"]
    print("  CPU per system by step [ms]: " + ", ".join(
        f"{k} {1000 * v:.1f}" for k, v in sorted(steps.items(), key=lambda kv: -kv[1])))
    accounted = sum(steps.values()) * n
    print(f"  workers' CPU not in a step (start-up, imports, transfer): "
          f"{1000 * (run['cpu_workers'] - accounted) / n:.1f} ms per system")
    print("  bytes per system on disk: " + ", ".join(
        f"{k} {v / 1024:.1f} KiB" for k, v in run["disk"].items()))


def main(argv=None):
    import json
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", type=int, default=1000)
    parser.add_argument("--points", type=int, default=50)
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--pages", choices=("none", "flagged", "all"), default="none")
    parser.add_argument("--problems", action="store_true")
    parser.add_argument("--dask", action="store_true",
                        help="also run on a Dask LocalCluster of the largest worker count")
    parser.add_argument("--memory", type=int, nargs="+", metavar="N",
                        help="peak RSS of 2-worker runs of these catalogue sizes instead")
    parser.add_argument("--profile", type=int, metavar="N", default=0,
                        help="profile an inline run of N systems instead")
    parser.add_argument("--one", nargs=4, metavar=("MANIFEST", "OUT", "WORKERS", "PAGES"),
                        help=argparse.SUPPRESS)     # one run, in the fresh process
    args = parser.parse_args(argv)
    if args.one:
        manifest, out, workers, pages = args.one
        print(json.dumps(_one_run(manifest, out, int(workers), pages, args.dask)))
        return
    with tempfile.TemporaryDirectory(prefix="orbweigh-bench-") as scratch:
        sizes = args.memory or [args.profile or args.systems]
        manifests = {n: make_catalogue(Path(scratch) / f"cat-{n}", n, args.points,
                                       problems=args.problems) for n in sizes}
        if args.profile:
            profile = cProfile.Profile()
            profile.enable()
            run_batch(manifests[args.profile], Path(scratch) / "out-profile",
                      BatchOptions(seed=1, pages=args.pages), workers=1, progress=False)
            profile.disable()
            pstats.Stats(profile).sort_stats("cumulative").print_stats(25)
            return
        print(f"{os.cpu_count()} CPUs; pages {args.pages}; "
              f"{'with' if args.problems else 'no'} planted problems; {args.points} points")
        print(f"{'run':>14s}  {'wall s':>7s}  {'systems/s':>9s}  {'main ms':>8s}  "
              f"{'work ms':>8s}  {'RSS MB':>7s}  {'failed':>6s}  {'load':>5s}")
        if args.memory:
            for n in sizes:
                _report(f"{n} systems", n, _in_fresh_process(
                    manifests[n], Path(scratch) / f"out-m{n}", 2, args.pages, False))
            return
        n = args.systems
        for workers in args.workers:
            run = _in_fresh_process(manifests[n], Path(scratch) / f"out-{workers}", workers,
                                    args.pages, False)
            _report(f"pool {workers}", n, run)
        _print_steps(run, n)
        if args.dask:
            workers = max(args.workers)
            run = _in_fresh_process(manifests[n], Path(scratch) / "out-dask", workers,
                                    args.pages, True)
            _report(f"dask {workers}", n, run)
            print(f"  cluster start {run['setup']:.1f} s (not in the wall time); per task: "
                  + ", ".join(f"{k} {v:.1f} ms" for k, v in run["task_overhead_ms"].items()))
            _print_steps(run, n)
        sent, back = _payload_bytes(manifests[n], scratch)
        print(f"  pickled per system: {sent:.0f} B to the worker, {back:.0f} B back")


if __name__ == "__main__":
    main()
