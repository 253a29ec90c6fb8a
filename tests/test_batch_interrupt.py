"""A real 2-worker batch interrupted (Ctrl-C), killed (SIGKILL) or run twice at once into
one folder: it stops within seconds keeping what finished, leaves no live child process,
and never lets two runs write one folder."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from astropy.table import Table

from test_batch import TRUE, _write_log

pytestmark = pytest.mark.skipif(not Path("/proc/self/status").exists(),
                                reason="needs /proc to list child processes (Linux)")
N_SYSTEMS = 40


@pytest.fixture(scope="module")
def manifest(tmp_path_factory):
    cat = tmp_path_factory.mktemp("interrupt")
    (cat / "logs").mkdir()
    rows = ["id,log"]
    for k in range(N_SYSTEMS):
        _write_log(cat / "logs" / f"s{k:02d}.csv", TRUE, seed=100 + k)
        rows.append(f"s{k:02d},logs/s{k:02d}.csv")
    (cat / "manifest.csv").write_text("\n".join(rows) + "\n")
    return cat / "manifest.csv"


def _start(manifest, out):
    return subprocess.Popen([sys.executable, "-m", "orbweigh.cli.main", "batch", str(manifest),
                             "--out", str(out), "--workers", "2", "--pages", "none",
                             "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, preexec_fn=_interruptible)


def _interruptible():
    # A shell starts background jobs with SIGINT ignored, and a child inherits that; the
    # batch under test must see Ctrl-C as a user's terminal would deliver it.
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def _children(pid):
    """Live processes whose parent is ``pid`` (from /proc)."""
    found = []
    for entry in Path("/proc").iterdir():
        try:
            status = (entry / "status").read_text()
        except OSError:
            continue
        fields = dict(line.split(":\t", 1) for line in status.splitlines() if ":\t" in line)
        if fields.get("PPid", "").strip() == str(pid) and not fields["State"].startswith("Z"):
            found.append(int(entry.name))
    return found


def _wait_for_records(out, n, proc, timeout=120.0):
    """Until ``n`` systems are written, then the batch's children (2 workers + tracker)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        assert proc.poll() is None, proc.communicate()
        if len(list(out.glob("systems/*/batch.json"))) >= n:
            return _children(proc.pid)
        time.sleep(0.05)
    pytest.fail("the batch wrote no record in time")


def _gone(pids, timeout):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        alive = [p for p in pids if Path(f"/proc/{p}").exists()
                 and not Path(f"/proc/{p}/status").read_text().count("State:\tZ")]
        if not alive:
            return []
        time.sleep(0.1)
    return alive


def test_ctrl_c_stops_within_seconds_keeping_what_finished(manifest, tmp_path):
    out = tmp_path / "out"
    proc = _start(manifest, out)
    children = _wait_for_records(out, 1, proc)
    assert len(children) >= 2                        # the two workers (+ resource tracker)
    sent = time.monotonic()
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=30)
    stopped = time.monotonic() - sent
    assert proc.returncode == 130 and "interrupted" in err
    assert stopped < 5.0, stopped                    # a few seconds, not the whole queue
    assert _gone(children, 5.0) == []
    done = len(list(out.glob("systems/*/batch.json")))
    assert 1 <= done < N_SYSTEMS
    summary = Table.read(out / "summary.ecsv")
    assert len(summary) == done and "interrupted" in summary.meta
    assert not (out / ".orbweigh-batch.lock").exists()


def test_sigkill_leaves_no_orphans_and_the_next_run_takes_the_lock(manifest, tmp_path):
    out = tmp_path / "out"
    proc = _start(manifest, out)
    children = _wait_for_records(out, 1, proc)
    assert len(children) >= 2
    proc.kill()
    proc.communicate()
    assert _gone(children, 5.0) == []                # the workers notice within a second
    assert (out / ".orbweigh-batch.lock").read_text().split() == [str(proc.pid)]
    # The stale lock is taken over with a note; --resume keeps the systems already done.
    done = {p.parent.name: p.stat().st_mtime_ns for p in out.glob("systems/*/batch.json")}
    result = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", "batch", str(manifest),
                             "--out", str(out), "--workers", "2", "--pages", "none",
                             "--resume", "--quiet"],
                            capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert f"left by process {proc.pid}" in result.stderr
    assert len(Table.read(out / "summary.ecsv")) == N_SYSTEMS
    for key, mtime in done.items():
        assert (out / "systems" / key / "batch.json").stat().st_mtime_ns == mtime


def test_two_batches_never_share_a_folder(manifest, tmp_path):
    out = tmp_path / "out"
    first = _start(manifest, out)
    _wait_for_records(out, 0, first)
    deadline = time.monotonic() + 30
    while not (out / ".orbweigh-batch.lock").exists() and time.monotonic() < deadline:
        time.sleep(0.05)
    second = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", "batch", str(manifest),
                             "--out", str(out), "--workers", "1", "--quiet"],
                            capture_output=True, text=True, timeout=60)
    assert second.returncode == 2
    assert f"another batch (process {first.pid})" in second.stderr
    first.send_signal(signal.SIGINT)
    first.communicate(timeout=30)
