"""Time and peak memory of the commands at the bounds of their count options.

The bounds of ``orbweigh.cli.common.LIMITS``, ``MAX_SAMPLER_EVALUATIONS`` and
``orbweigh.cli.ephemeris.MAX_BAND_POINTS`` keep memory and time in reach; this script
measures what a command costs at (or towards) them. An invented orbit (seeded noise, 24
points) is fitted once; each case then runs the real command in a child process, and the
child's wall time and its own peak resident memory (``getrusage`` in the child) are
printed.

    python benchmarks/bench_option_limits.py            # every case
    python benchmarks/bench_option_limits.py --quick    # small counts only (a smoke run)
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris

__all__ = ["main"]

_ORBIT = dict(P=31.7, T=2001.3, e=0.42, a=0.84, i=63.0, Omega=118.0, omega=241.0)


def _write_log(path, seed=7, n=24):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1975.0, 2024.0, n))
    eph = ephemeris(CampbellElements.from_keys(_ORBIT), t)
    theta = np.mod(eph.theta_deg + rng.normal(0.0, 0.6, n), 360.0)
    rho = eph.rho_arcsec + rng.normal(0.0, 0.008, n)
    rows = "".join(f"{a:.3f},{b:.2f},{c:.4f},0.6,0.008\n" for a, b, c in zip(t, theta, rho))
    path.write_text("epoch,theta,rho,sigma_theta,sigma_rho\n" + rows, encoding="utf-8")


def _cases(folder, quick):
    doc = str(folder / "r.json")
    scale = 10 if quick else 1
    return [
        ("mass --draws", ["mass", doc, "--parallax", "20", "1", "--draws",
                          str(200_000 // scale)]),
        ("compare --draws", ["compare", doc, doc, "--window", "2025", "2035", "--draws",
                             str(10_000 // scale)]),
        ("ephemeris --draws x epochs", ["ephemeris", doc, "--start", "2000", "--stop",
                                        "2100", "--step", str(0.0101 * scale), "--draws",
                                        str(10_000 // scale)]),
        ("plan --draws, grid", ["plan", doc, "--window", "2025", "2125", "--step", "0.00101",
                                "--draws", str(10_000 // scale)]),
        ("fit --sample (default 32 x 5000)" if not quick else "fit --sample 32 x 500",
         ["fit", str(folder / "pair.csv"), "--sample", "--quiet", "--out",
          str(folder / "s"), "--steps", "5000" if not quick else "500"]),
    ]


#: The child: the real command, then its own peak resident memory on the last line.
_CHILD = ("import resource, sys\n"
          "from orbweigh.cli.main import main\n"
          "status = main(sys.argv[1:])\n"
          "use = resource.getrusage(resource.RUSAGE_SELF)\n"
          "sys.stderr.write(f'\\ncpu {use.ru_utime + use.ru_stime} peak {use.ru_maxrss}\\n')\n"
          "sys.exit(status)\n")


def _run(argv):
    """(wall seconds, CPU seconds, peak MB) of one command in a child process."""
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", _CHILD, *argv],
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"orbweigh {' '.join(argv)} failed: {done.stderr}")
    cpu, peak_kb = done.stderr.rstrip().rsplit("\ncpu ", 1)[1].split(" peak ")
    return seconds, float(cpu), float(peak_kb) / 1024.0   # ru_maxrss is in kB on Linux


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small counts only")
    args = parser.parse_args(argv)
    print(f"load average {os.getloadavg()[0]:.2f} (figures are noisy when it is high)")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        _write_log(folder / "pair.csv")
        _run(["fit", str(folder / "pair.csv"), "--json", str(folder / "r.json")])
        for name, case in _cases(folder, args.quick):
            seconds, cpu, peak = _run(case)
            print(f"{name:36s} wall {seconds:7.1f} s  cpu {cpu:7.1f} s  peak {peak:6.0f} MB")


if __name__ == "__main__":
    main()
