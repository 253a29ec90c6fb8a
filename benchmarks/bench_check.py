"""Benchmark of ``orbweigh check`` on logs whose rows all share one epoch.

The same-epoch rule of ``measurements.suspicious_rows`` compares rows within
``SAME_EPOCH_YR`` of each other; a log of N rows at one epoch is its worst case. Each row
alternates theta by 5 deg (sigma 0.1 deg), so every row from the second on is discordant
and named. Printed per N: the time to read the log, the time and traced peak memory of
``suspicious_rows``, the time of a whole ``orbweigh check LOG --json FILE`` in this
process, and the number of discordant rows found.

    python benchmarks/bench_check.py                       # 3,000 and 20,000 rows
    python benchmarks/bench_check.py --rows 1000 3000 --repeat 3
"""
from __future__ import annotations

import argparse
import contextlib
import os
import tempfile
import time
import tracemalloc
from pathlib import Path

from orbweigh.cli.main import main as orbweigh_main
from orbweigh.measurements import read_measurements, suspicious_rows

__all__ = ["write_same_epoch_log", "main"]


def write_same_epoch_log(path, n_rows):
    """A log of ``n_rows`` rows at epoch 2000.0, theta alternating 10 / 15 deg."""
    rows = "".join(f"2000.0,{10 + (k % 2) * 5 + k * 1e-6:.6f},1.0,0.1,0.001\n"
                   for k in range(n_rows))
    Path(path).write_text("epoch,theta,rho,sigma_theta,sigma_rho\n" + rows)


def _time(call):
    start = time.perf_counter()
    value = call()
    return time.perf_counter() - start, value


def bench(n_rows, repeat, folder):
    log, out = os.path.join(folder, f"same{n_rows}.csv"), os.path.join(folder, "check.json")
    write_same_epoch_log(log, n_rows)
    read_s, ms = min((_time(lambda: read_measurements(log)) for _ in range(repeat)),
                     key=lambda r: r[0])
    rule_s, found = min((_time(lambda: suspicious_rows(ms)) for _ in range(repeat)),
                        key=lambda r: r[0])
    tracemalloc.start()
    suspicious_rows(ms)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    with open(os.devnull, "w") as sink, contextlib.redirect_stdout(sink):  # the text report
        check_s = min(_time(lambda: orbweigh_main(["check", log, "--json", out]))[0]
                      for _ in range(repeat))
    n_found = sum(s.rule == "discordant_same_epoch" for s in found)
    print(f"{n_rows:>8d} {read_s:>9.3f} {rule_s:>10.3f} {peak / 2 ** 20:>10.2f} "
          f"{check_s:>10.3f} {n_found:>11d}", flush=True)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, nargs="+", default=[3000, 20000])
    parser.add_argument("--repeat", type=int, default=1, help="best of this many runs")
    args = parser.parse_args(argv)
    print(f"load average {os.getloadavg()[0]:.2f}")
    print(f"{'rows':>8} {'read [s]':>9} {'rule [s]':>10} {'peak [MiB]':>10} "
          f"{'check [s]':>10} {'discordant':>11}")
    with tempfile.TemporaryDirectory() as folder:
        for n in args.rows:
            bench(n, args.repeat, folder)


if __name__ == "__main__":
    main()
