"""Outputs are whole: one writer (orbweigh.files), full disk, umask, refused targets.

The full-disk tests run the command in a subprocess with RLIMIT_FSIZE (the "file size"
limit of ``ulimit -f``) and SIGXFSZ ignored, so a write past the limit fails with EFBIG as
it does on a full disk; the previous output must survive untouched.
"""
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from orbweigh.batch import system_key
from orbweigh.cli.main import main
from orbweigh.errors import OutputError
from orbweigh.files import replace_folder, write_atomic

from report_fixtures import write_document

SAMPLE = Path(__file__).parent.parent / "sample_measurements" / "measurements.csv"
SIRIUS = Path(__file__).parent / "data" / "mass_sirius.json"
OLD = "previous content\n"

_LIMITED = """
import resource, signal, sys
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, ({limit}, {limit}))
from orbweigh.cli.main import main
sys.exit(main(sys.argv[1:]))
"""


def _run_limited(argv, cwd, limit=64):
    env = {**os.environ, "MPLBACKEND": "Agg"}
    return subprocess.run([sys.executable, "-c", _LIMITED.format(limit=limit), *map(str, argv)],
                          cwd=cwd, capture_output=True, text=True, env=env, timeout=300)


def _assert_refused(proc, target):
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    assert str(target) in proc.stderr and ".tmp" not in proc.stderr
    assert "File too large" in proc.stderr


@pytest.fixture
def result(tmp_path):
    return write_document(tmp_path)


@pytest.mark.parametrize("command", [
    ["fit", SAMPLE, "--json", "{out}"],
    ["mass", SIRIUS, "--parallax", "379.21", "1.58", "--json", "{out}"],
    ["check", SAMPLE, "--json", "{out}"],
    ["ephemeris", "{result}", "--start", "2000", "--stop", "2010", "--json", "{out}"],
    ["ephemeris", "{result}", "--start", "2000", "--stop", "2010", "--ecsv", "{out}"],
    ["plan", "{result}", "--window", "2030", "2040", "--json", "{out}"],
    ["compare", SIRIUS, "{result}", "--json", "{out}"],
    ["compare", SIRIUS, "{result}", "--figure", "{out}.png"],
], ids=["fit-json", "mass-json", "check-json", "ephemeris-json", "ephemeris-ecsv",
        "plan-json", "compare-json", "compare-figure"])
def test_full_disk_keeps_previous_file(tmp_path, result, command):
    out = tmp_path / ("out.file.png" if "--figure" in command else "out.file")
    out.write_text(OLD)
    argv = [str(a).format(out=tmp_path / "out.file", result=result) for a in command]
    proc = _run_limited(argv, tmp_path)
    _assert_refused(proc, out)
    assert out.read_text() == OLD
    assert not list(tmp_path.glob(".out.file*"))    # no temporary file left behind


def test_full_disk_keeps_previous_result_in_out_folder(tmp_path):
    folder = tmp_path / "fitted"
    folder.mkdir()
    (folder / "result.json").write_text(OLD)
    proc = _run_limited(["fit", SAMPLE, "--out", folder], tmp_path)
    _assert_refused(proc, folder / "result.json")
    assert [p.name for p in folder.iterdir()] == ["result.json"]
    assert (folder / "result.json").read_text() == OLD


def test_full_disk_keeps_previous_batch_summary(tmp_path):
    # A finished batch, resumed under a full disk: the systems are not refitted, the
    # summary files are rewritten, and the first of them that does not fit is named.
    (tmp_path / "logs").mkdir()
    (tmp_path / "logs" / "pair.csv").write_bytes(SAMPLE.read_bytes())
    manifest = tmp_path / "manifest.csv"
    manifest.write_text("id,log\npair,logs/pair.csv\n")
    out = tmp_path / "batch"
    assert main(["batch", str(manifest), "--out", str(out), "--pages", "none", "--quiet"]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()}
    proc = _run_limited(["batch", manifest, "--out", out, "--pages", "none", "--quiet",
                         "--resume"], tmp_path, limit=256)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr, proc.stderr
    assert "File too large" in proc.stderr and ".tmp" not in proc.stderr
    # the summary rows are streamed first (summary.running.jsonl, removed after a failure)
    named = [name for name in [*before, "summary.running.jsonl"]
             if str(out / name) in proc.stderr]
    assert named and named[0].startswith(("summary", "index"))
    assert {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()} == before


def test_full_disk_stops_the_batch_at_the_first_failed_write(tmp_path):
    # A finished batch of three systems, run again (no --resume) with a disk that takes
    # no file of a result's size: the first system's result.json cannot be written, and
    # the batch stops there - the other two are not written (the second is fitted while
    # the first is written, then dropped), nothing is announced, the message names the
    # file, and every file of the previous run is as it was.
    (tmp_path / "logs").mkdir()
    ids = ("first", "second", "third")
    for name in ids:
        (tmp_path / "logs" / f"{name}.csv").write_bytes(SAMPLE.read_bytes())
    manifest = tmp_path / "manifest.csv"
    manifest.write_text("id,log\n" + "".join(f"{n},logs/{n}.csv\n" for n in ids))
    out = tmp_path / "batch"
    assert main(["batch", str(manifest), "--out", str(out), "--pages", "none", "--quiet",
                 "--workers", "1"]) == 0

    def files():
        return {str(p.relative_to(out)): (p.stat().st_ino, p.read_bytes())
                for p in out.rglob("*") if p.is_file()}
    before = files()
    proc = _run_limited(["batch", manifest, "--out", out, "--pages", "none", "--workers", "1"],
                        tmp_path, limit=4096)
    failed = out / "systems" / system_key("first") / "result.json"
    _assert_refused(proc, failed)
    assert proc.stderr.count(str(out)) == 1, proc.stderr     # one message, one file
    assert not any(f"[{k}/3]" in proc.stdout for k in (1, 2, 3)), proc.stdout
    # Same inode and bytes: no system's files were rewritten, no summary was made, and
    # the summary stream is gone.
    assert files() == before


def test_full_disk_keeps_previous_draws(tmp_path):
    out, draws = tmp_path / "r.json", tmp_path / "r.draws.ecsv"
    out.write_text(OLD)
    draws.write_text(OLD)
    proc = _run_limited(["fit", SAMPLE, "--sample", "--walkers", 14, "--steps", 20, "--quiet",
                         "--json", out], tmp_path)
    _assert_refused(proc, draws)
    assert draws.read_text() == OLD and out.read_text() == OLD


def test_full_disk_keeps_previous_report(tmp_path, result):
    folder = tmp_path / "report"
    assert main(["report", str(result), "--out", str(folder), "--formats", "png"]) == 0
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    proc = _run_limited(["report", result, "--out", folder, "--formats", "png"], tmp_path,
                        limit=4096)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr, proc.stderr
    assert "File too large" in proc.stderr and ".tmp" not in proc.stderr
    assert str(folder) in proc.stderr
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


def test_report_replaces_folder_as_a_whole(tmp_path, result):
    folder = tmp_path / "report"
    assert main(["report", str(result), "--out", str(folder), "--formats", "png,svg"]) == 0
    assert (folder / "orbit.svg").exists()
    assert main(["report", str(result), "--out", str(folder), "--formats", "png"]) == 0
    assert not (folder / "orbit.svg").exists()       # nothing of the old report is left
    assert (folder / "orbit.png").exists() and (folder / "report.html").exists()


def test_report_refuses_folder_with_other_files(tmp_path, result, capsys):
    # The result document itself lives in tmp_path: replacing it would destroy the input.
    assert main(["report", str(result), "--out", str(tmp_path)]) == 2
    assert "result.json" in capsys.readouterr().err
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "notes.txt").write_text("keep me")
    assert main(["report", str(result), "--out", str(folder)]) == 2
    assert "notes.txt" in capsys.readouterr().err
    assert (folder / "notes.txt").read_text() == "keep me"


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o002, 0o664), (0o077, 0o600)])
def test_files_honour_umask(tmp_path, umask, mode):
    # A new file gets 0666 & ~umask (POSIX open(2) with mode 0666, common practice).
    old = os.umask(umask)
    try:
        write_atomic(tmp_path / "a.json", "{}")
        with replace_folder(tmp_path / "folder") as build:
            write_atomic(build / "b.txt", "b")
    finally:
        os.umask(old)
    assert (tmp_path / "a.json").stat().st_mode & 0o777 == mode
    assert (tmp_path / "folder" / "b.txt").stat().st_mode & 0o777 == mode
    assert (tmp_path / "folder").stat().st_mode & 0o777 == mode | (mode & 0o444) >> 2


def test_refuses_output_onto_input_log(tmp_path, capsys):
    log = tmp_path / "x.csv"
    log.write_bytes(SAMPLE.read_bytes())
    assert main(["fit", str(log), "--json", str(log)]) == 2
    assert main(["check", str(log), "--json", str(log)]) == 2
    err = capsys.readouterr().err
    assert "input" in err and str(log) in err and "Traceback" not in err
    assert log.read_bytes() == SAMPLE.read_bytes()
    # The report folder would be swapped as a whole, taking the result with it: refused
    # before the fit, nothing written.
    assert main(["fit", str(log), "--out", str(tmp_path / "d"), "--report",
                 str(tmp_path / "d")]) == 2
    assert "result.json" in capsys.readouterr().err and not (tmp_path / "d").exists()


def test_refuses_symlink_out_of_folder(tmp_path):
    outside, folder = tmp_path / "outside.txt", tmp_path / "out"
    folder.mkdir()
    outside.write_text(OLD)
    (folder / "link.json").symlink_to(outside)
    with pytest.raises(OutputError, match="symbolic link"):
        write_atomic(folder / "link.json", "new")
    assert outside.read_text() == OLD
    (folder / "inner.json").write_text(OLD)
    (folder / "near.json").symlink_to(folder / "inner.json")
    write_atomic(folder / "near.json", "new")          # a link inside its folder is followed
    assert (folder / "inner.json").read_text() == "new" and (folder / "near.json").is_symlink()


def test_failed_folder_build_keeps_old(tmp_path):
    folder = tmp_path / "f"
    with replace_folder(folder) as build:
        write_atomic(build / "a.txt", "old")
    with pytest.raises(RuntimeError):
        with replace_folder(folder) as build:
            write_atomic(build / "a.txt", "new")
            raise RuntimeError("drawing failed")
    assert (folder / "a.txt").read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["f"]


def test_figure_name_with_dots_is_written_as_given(tmp_path):
    # Found by the full-disk test of compare --figure: 'out.file.png' was written as
    # 'out.png' (the stem's last dot taken for a suffix), possibly over another file.
    from orbweigh.report.style import new_figure, save_figure
    fig, _ = new_figure(3.0, 2.0)
    written = save_figure(fig, tmp_path / "orbit.v2", ["png", "svg"])
    assert sorted(written) == ["orbit.v2.png", "orbit.v2.svg"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["orbit.v2.png", "orbit.v2.svg"]


def test_table_digits_do_not_follow_numpy_print_options(tmp_path):
    # A library imported beside orbweigh may switch numpy to its legacy printing (12
    # digits); a written table must still hold every digit of a float64 (round trip).
    import numpy as np
    from astropy.table import Table

    from orbweigh.files import write_table

    value = 1.0 / 3.0
    with np.printoptions(legacy="1.13"):
        write_table(tmp_path / "t.ecsv", Table({"x": [value]}))
    assert float(Table.read(tmp_path / "t.ecsv", format="ascii.ecsv")["x"][0]) == value
