"""Tests of the batch run: verdicts on a synthetic catalogue, per-system errors,
determinism across executors (inline, process pool, Dask), resume and atomic outputs."""
from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import shutil
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table

from orbweigh.batch import BatchOptions, input_hash, run_batch, system_key, system_seed
from orbweigh.cli.main import main
from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.manifest import read_manifest

TRUE = CampbellElements(12.0, 2005.3, 0.4, 0.5, 50.0, 120.0, 60.0)
SIGMA_THETA, SIGMA_RHO = 1.0, 0.01
SAMPLE = Path(__file__).resolve().parents[1] / "sample_measurements"
LAST = "J2015.0"   # the old orbits "used" data up to here; 8 of 25 epochs are newer


def _write_log(path, elements, seed, n=25):
    """A log of ``elements`` with seeded Gaussian noise, epochs as Julian years."""
    rng = np.random.default_rng(seed)
    t = np.linspace(1995.0, 2024.0, n)
    eph = ephemeris(elements, t)
    theta = np.mod(eph.theta_deg + rng.normal(0.0, SIGMA_THETA, n), 360.0)
    rho = eph.rho_arcsec + rng.normal(0.0, SIGMA_RHO, n)
    rows = "".join(f"J{a:.4f},{b:.4f},{c:.5f},{SIGMA_THETA},{SIGMA_RHO},speckle\n"
                   for a, b, c in zip(t, theta, rho))
    path.write_text("epoch,theta,rho,sigma_theta,sigma_rho,technique\n" + rows)


def _old(elements):
    el = elements
    return (f"{el.period_yr},J{el.periastron_yr},{el.e},{el.a_arcsec},{el.i_deg},"
            f"{el.node_deg},{el.omega_deg}")


@pytest.fixture(scope="module")
def catalogue(tmp_path_factory):
    """Manifest of good systems (known answers) and of broken ones (known errors)."""
    root = tmp_path_factory.mktemp("catalogue")
    cat = root / "cat"
    (cat / "logs").mkdir(parents=True)
    for k, name in enumerate(("consistent", "drifting", "contradicted", "fresh")):
        _write_log(cat / "logs" / f"{name}.csv", TRUE, seed=k)
    (root / "secret.csv").write_text("epoch,theta,rho\n2000,1,1\n")
    (cat / "link.csv").symlink_to(root / "secret.csv")
    (cat / "logs" / "garbled.csv").write_text("when,where\n2000,1\n")
    for name in ("measurements.csv", "velocities.csv"):
        shutil.copy(SAMPLE / name, cat / "logs" / f"sample-{name}")
    drift = dataclasses.replace(TRUE, node_deg=TRUE.node_deg + 2.0)    # ~2 sigma in theta
    wrong_p = dataclasses.replace(TRUE, period_yr=TRUE.period_yr * 1.1)  # P 10 % off
    manifest = cat / "manifest.csv"
    manifest.write_text(
        "id,log,P,T,e,a,i,Omega,omega,last_epoch,parallax_mas,parallax_err_mas,rv_log,ra_deg,"
        "dec_deg\n"
        f"consistent,logs/consistent.csv,{_old(TRUE)},{LAST},20,0.5,,,\n"
        f"drifting,logs/drifting.csv,{_old(drift)},{LAST},,,,,\n"
        f"contradicted,logs/contradicted.csv,{_old(wrong_p)},{LAST},,,,,\n"
        "fresh,logs/fresh.csv,,,,,,,,,,,,,\n"
        "up,../secret.csv,,,,,,,,,,,,,\n"
        f"absolute,{root / 'secret.csv'},,,,,,,,,,,,,\n"
        "symlink,link.csv,,,,,,,,,,,,,\n"
        "missing,logs/none.csv,,,,,,,,,,,,,\n"
        f"broken,logs/fresh.csv,{_old(TRUE).replace(',0.4,', ',1.4,')},{LAST},,,,,\n"
        "garbled,logs/garbled.csv,,,,,,,,,,,,,\n"
        # The shipped sample pair, with its velocities, parallax and coordinates (README).
        "sample,logs/sample-measurements.csv,,,,,,,,,40.68,0.40,logs/sample-velocities.csv,"
        "216.805833,38.685\n")
    return manifest


@pytest.fixture(scope="module")
def full_run(catalogue, tmp_path_factory):
    out = tmp_path_factory.mktemp("full")
    counts = run_batch(catalogue, out, BatchOptions(seed=7, pages="none"), workers=1,
                       progress=False)
    rows = summary_rows(out)
    assert (counts.n_systems, counts.n_failed) == (11, 6)    # 6 broken (see catalogue)
    assert counts.verdicts == {"consistent": 1, "drifting": 1, "contradicted": 1,
                               "no previous orbit": 2}
    return out, rows


def summary_rows(out):
    """{id: row} of a batch's summary.ecsv (run_batch returns counts only); an empty text
    cell reads back masked: it is '' again here, as written."""
    table = Table.read(out / "summary.ecsv", format="ascii.ecsv")
    return {row["id"]: row for row in (table.filled("") if table.has_masked_values
                                       else table)}


def test_verdicts_on_the_synthetic_catalogue(full_run):
    out, rows = full_run
    assert rows["consistent"]["verdict"] == "consistent"
    assert rows["drifting"]["verdict"] == "drifting"
    assert rows["contradicted"]["verdict"] == "contradicted"
    assert rows["fresh"]["verdict"] == "no previous orbit"
    for name in ("consistent", "drifting", "contradicted"):
        assert rows[name]["n_new"] == 8 and rows[name]["dof_new"] == 16
    # The rule, re-applied to the numbers in the table (revision module notes).
    assert rows["contradicted"]["p_value_inflated"] < 0.01
    assert rows["drifting"]["p_value_inflated"] >= 0.01
    assert min(rows["drifting"]["p_value"], rows["drifting"]["p_systematic"]) < 0.01
    assert min(rows["consistent"]["p_value"], rows["consistent"]["p_systematic"]) >= 0.01
    # The p-value shown is the one that decided: for drifting the rejecting test's.
    drift = rows["drifting"]
    assert drift["p_decisive"] == drift[drift["decided_by"]] < 0.01
    assert drift["decided_by"] in ("p_value", "p_systematic")
    assert rows["contradicted"]["decided_by"] == "p_value_inflated"
    index = (out / "index.html").read_text()
    p = float(drift["p_decisive"])
    assert f"<td class='num' data-value='{p!r}'>{p:.2g} <small>(" in index
    # summary.tex: one row per refitted system, in summary order, the id as its name.
    tex = (out / "summary.tex").read_text()
    assert tex.index("contradicted &") < tex.index("drifting &") < tex.index("fresh &")
    assert "garbled" not in tex and r"\begin{tabular}" in tex
    # Every good system was refitted, recovering the true period within 4 sigma.
    for name in ("consistent", "drifting", "contradicted", "fresh"):
        assert rows[name]["status"] == "done" and rows[name]["fitted"]
        assert abs(rows[name]["P"] - TRUE.period_yr) < 4 * rows[name]["P_err"]
    # Old P 10 % off: the element moved by many sigma and the decade's ephemeris by
    # far more than a measurement's sigma; a correct old orbit moves by little.
    assert rows["contradicted"]["max_element_change_sigma"] > 20
    assert rows["contradicted"]["max_separation_sigma"] > 10
    assert rows["consistent"]["max_separation_sigma"] < 3


def test_summary_order_files_and_mass(full_run):
    out, rows = full_run
    table = Table.read(out / "summary.ecsv", format="ascii.ecsv")
    assert list(table["id"][:2]) == ["contradicted", "drifting"]      # most urgent first
    assert list(table["rank"]) == list(range(1, len(table) + 1))
    assert len(Table.read(out / "summary.csv", format="ascii.csv")) == 11
    folder = out / "systems" / system_key("contradicted")
    record = json.loads((folder / "batch.json").read_text())
    assert record["revision"]["verdict"] == "contradicted"
    assert record["seed"] == system_seed(7, "contradicted")
    assert len(record["revision"]["residuals"]) == 25
    doc = json.loads((folder / "result.json").read_text())
    assert doc["schema"] == "orbweigh.result/1" and doc["seed"] == record["seed"]
    index = (out / "index.html").read_text()
    assert f'href="systems/{system_key("contradicted")}/result.json"' in index
    assert index.index(">contradicted<") < index.index(">consistent<")
    assert f'href="systems/{system_key("up")}/batch.json"' in index  # failed: its record
    # Third law, a = 0.5", parallax 20 mas -> 25 au; (25)^3 / 12^2 = 108.5 Msun
    # (Kepler's third law in solar units; Aitken, The Binary Stars, 1935, memory); the
    # fitted a and P scatter by a few per mille.
    assert rows["consistent"]["mass_msun"] == pytest.approx(25.0**3 / 12.0**2, rel=0.05)
    assert not any(p.name.endswith(".tmp") for p in out.rglob("*"))


def test_velocities_give_the_combined_solution(full_run):
    out, rows = full_run
    doc = json.loads((out / "systems" / system_key("sample") / "result.json").read_text())
    # True values of the invented sample pair (sample_measurements/README.md): the
    # velocities pick the ascending node 236.40 deg; K1 = 3.930, K2 = 5.038 km/s;
    # total mass 1.930 Msun with the published parallax 40.68 +/- 0.40 mas.
    assert rows["sample"]["status"] == "done", rows["sample"]["error"]
    omega = doc["elements"]["Omega"]
    assert abs(omega["value"] - 236.40) < 4 * omega["error"]
    for key, truth in (("K1", 3.930), ("K2", 5.038)):
        assert abs(doc[key]["value"] - truth) < 4 * doc[key]["error"]
    total = doc["mass"]["total"]
    assert total["low95"] < 1.930 < total["high95"]


def test_each_broken_system_fails_alone_with_its_reason(full_run, catalogue):
    out, rows = full_run
    expected = {
        "up": "line 6, column 'log': '../secret.csv' leads outside the manifest's folder",
        "absolute": "line 7, column 'log'",
        "symlink": "line 8, column 'log': 'link.csv' leads outside",
        "missing": "line 9, column 'log': the file 'logs/none.csv' does not exist",
        "broken": "line 10, column 'e': expected an eccentricity 0 <= e < 1, got '1.4'",
        "garbled": "log: ",
    }
    for name, text in expected.items():
        assert rows[name]["status"] == "failed" and text in rows[name]["error"], name
        assert not rows[name]["fitted"]
    assert str(catalogue) in rows["up"]["error"]
    assert "theta" in rows["garbled"]["error"]      # the log reader names what is missing


def test_same_results_inline_pool_and_dask(catalogue, tmp_path):
    from dask.distributed import LocalCluster
    options = BatchOptions(seed=7, only_contradicted=True, pages="none")
    outs = {name: tmp_path / name for name in ("one", "two", "dask")}
    run_batch(catalogue, outs["one"], options, workers=1, progress=False)
    run_batch(catalogue, outs["two"], options, workers=2, progress=False)
    with LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                      dashboard_address=None) as cluster:
        run_batch(catalogue, outs["dask"], options, scheduler=cluster.scheduler_address,
                  progress=False)
    summaries = {k: (v / "summary.csv").read_text() for k, v in outs.items()}
    assert summaries["one"] == summaries["two"] == summaries["dask"]
    table = Table.read(outs["one"] / "summary.ecsv", format="ascii.ecsv")
    fitted = {row["id"] for row in table if row["fitted"]}
    assert fitted == {"contradicted"}            # --only-contradicted
    docs = []
    for out in outs.values():
        doc = json.loads((out / "systems" / system_key("contradicted") / "result.json")
                         .read_text())
        doc["statistics"].pop("fit_seconds")
        docs.append(doc)
    assert docs[0] == docs[1] == docs[2]


def test_resume_skips_unchanged_systems_only(catalogue, tmp_path):
    options = BatchOptions(seed=3, only_contradicted=True, pages="none")
    out = tmp_path / "out"
    run_batch(catalogue, out, options, workers=1, progress=False)
    record = out / "systems" / system_key("contradicted") / "batch.json"
    before = record.read_text()
    os.utime(record, (1.0, 1.0))
    run_batch(catalogue, out, options, workers=1, resume=True, progress=False)
    assert os.stat(record).st_mtime == 1.0 and record.read_text() == before
    # A changed log changes the hash: that system, and only it, is redone.
    entries = {e.id: e for e in read_manifest(catalogue)}
    old_hash = input_hash(entries["drifting"], options)
    drifting = out / "systems" / system_key("drifting") / "batch.json"
    os.utime(drifting, (1.0, 1.0))
    log = catalogue.parent / "logs" / "drifting.csv"
    text = log.read_text()
    try:
        log.write_text(text + "# one more comment line\n")
        assert input_hash(entries["drifting"], options) != old_hash
        run_batch(catalogue, out, options, workers=1, resume=True, progress=False)
        assert os.stat(drifting).st_mtime > 1.0 and os.stat(record).st_mtime == 1.0
    finally:
        log.write_text(text)


def test_resume_trusts_a_result_only_through_its_validation(catalogue, tmp_path, capfd):
    options = BatchOptions(seed=3, only_contradicted=True, pages="none")
    out = tmp_path / "out"
    run_batch(catalogue, out, options, workers=1, progress=False)
    folder = out / "systems" / system_key("contradicted")
    record_path, result_path = folder / "batch.json", folder / "result.json"
    # A curator "fixes" e to 1.5 and the recorded hash with it: the hash alone would
    # trust the file; the validation refuses e >= 1, so the system is fitted again.
    doc = json.loads(result_path.read_text())
    doc["elements"]["e"]["value"] = 1.5
    result_path.write_text(json.dumps(doc))
    record = json.loads(record_path.read_text())
    record["files"]["result.json"] = hashlib.sha256(result_path.read_bytes()).hexdigest()
    record_path.write_text(json.dumps(record))
    capfd.readouterr()
    run_batch(catalogue, out, options, workers=1, resume=True, progress=False)
    err = capfd.readouterr().err
    assert "orbweigh batch: note: contradicted: " in err and "fitting it again" in err
    assert "'elements.e.value' is 1.5, outside its range" in err
    refit = json.loads(result_path.read_text())
    assert 0 <= refit["elements"]["e"]["value"] < 1
    assert summary_rows(out)["contradicted"]["fitted"]
    # A result that is not JSON at all (and a hash that matches it): refitted, noted.
    result_path.write_text("{ not json")
    record = json.loads(record_path.read_text())
    record["files"]["result.json"] = hashlib.sha256(b"{ not json").hexdigest()
    record_path.write_text(json.dumps(record))
    run_batch(catalogue, out, options, workers=1, resume=True, progress=False)
    assert "not valid JSON" in capfd.readouterr().err
    assert json.loads(result_path.read_text())["elements"]["e"]["value"] < 1


def test_system_seed_is_stable_and_distinct():
    # `printf '7/contradicted' | sha256sum` (GNU coreutils) starts b61ca843 = 3055331395.
    assert system_seed(7, "contradicted") == 3055331395
    assert system_seed(7, "a") != system_seed(8, "a") != system_seed(7, "b")


def test_command_line(catalogue, tmp_path, capsys):
    out = tmp_path / "cli"
    status = main(["batch", str(catalogue), "--out", str(out), "--workers", "1",
                   "--only-contradicted", "--seed", "7", "--quiet"])
    assert status == 1                   # six broken systems: the batch reports failure
    assert "6 systems failed" in capsys.readouterr().err
    # The command writes each flagged system's review page and the fit's full report, and
    # links the review page from the index (it links the report in turn).
    key = system_key("contradicted")
    report = (out / "systems" / key / "report.html").read_text()
    assert "Apparent orbit" in report
    # Titled with the system's id; the log's absolute path appears nowhere on the page.
    assert "<title>Orbit of contradicted</title>" in report
    assert str(catalogue.parent) not in report and "Log contradicted.csv" in report
    assert "href='report.html'" in (out / "systems" / key / "review.html").read_text()
    assert f'href="systems/{key}/review.html"' in (out / "index.html").read_text()
    assert Table.read(out / "summary.ecsv")["link"][0] == f"systems/{key}/review.html"
    assert main(["batch", str(tmp_path / "none.csv"), "--out", str(out)]) == 2
    assert "cannot read the file" in capsys.readouterr().err
    assert main(["batch", str(catalogue), "--out", str(out), "--workers", "2",
                 "--scheduler", "tcp://127.0.0.1:1"]) == 2
    assert "either --workers" in capsys.readouterr().err


def test_a_lost_worker_fails_only_its_system(catalogue):
    from concurrent.futures import Future

    from orbweigh.batch import _collect_chunk
    future = Future()
    future.set_exception(MemoryError("worker ran out of memory"))
    entry = read_manifest(catalogue)[0]
    [record] = _collect_chunk(future, [entry], BatchOptions(seed=7))
    assert record["status"] == "failed" and record["id"] == "consistent"
    assert record["error"] == "worker: MemoryError: worker ran out of memory"
    assert record["seed"] == system_seed(7, "consistent")


def test_warnings_column_strict_and_pages(tmp_path):
    """Planted problems in one log each reach the summary with their line numbers."""
    cat = tmp_path / "cat"
    (cat / "logs").mkdir(parents=True)
    _write_log(cat / "logs" / "clean.csv", TRUE, seed=11)
    _write_log(cat / "logs" / "bad.csv", TRUE, seed=12)
    lines = (cat / "logs" / "bad.csv").read_text().splitlines()
    lines[0] += ",flag"
    lines[1:] = [line + "," for line in lines[1:]]
    cells = lines[3].split(",")                      # file line 4: a letter O for a zero
    lines[3] = ",".join(cells[:2] + ["O" + cells[2][1:]] + cells[3:])
    cells = lines[6].split(",")                      # file line 7: a quadrant flip
    lines[6] = ",".join(cells[:1] + [f"{(float(cells[1]) + 180.0) % 360.0:.4f}"] + cells[2:])
    cells = lines[9].split(",")                      # file line 10: rho 30 sigma off
    lines[9] = ",".join(cells[:2] + [f"{float(cells[2]) + 30 * SIGMA_RHO:.5f}"] + cells[3:])
    lines[12] += "x"                                 # file line 13: excluded by the flag
    (cat / "logs" / "bad.csv").write_text("\n".join(lines) + "\n")
    manifest = cat / "manifest.csv"
    manifest.write_text("id,log\nclean,logs/clean.csv\nbad,logs/bad.csv\n")
    run_batch(manifest, tmp_path / "out", BatchOptions(seed=5), workers=1, progress=False)
    rows = summary_rows(tmp_path / "out")
    assert rows["clean"]["n_warnings"] == 0 and rows["clean"]["warnings"] == ""
    warned = rows["bad"]["warnings"]
    for text in ("rejected: 1 (line 4)", "excluded by flag: 1 (line 13)",
                 "flipped: 1 (line 7)", "outliers: 1 (line 10)"):
        assert text in warned, warned
    assert rows["bad"]["n_warnings"] == 4 and rows["bad"]["status"] == "done"
    # --pages flagged (default): only the warned system has a page; the index marks it.
    out = tmp_path / "out" / "systems"
    assert (out / system_key("bad") / "report.html").is_file()
    assert not (out / system_key("clean") / "report.html").exists()
    assert "&#9888; 4" in (tmp_path / "out" / "index.html").read_text()
    csv = Table.read(tmp_path / "out" / "summary.csv", format="ascii.csv")
    assert "rejected: 1 (line 4)" in csv[csv["id"] == "bad"]["warnings"][0]
    # --strict fails the system with the rejected line, and only it.
    run_batch(manifest, tmp_path / "strict", BatchOptions(seed=5, strict=True, pages="all"),
              workers=1, progress=False)
    rows = summary_rows(tmp_path / "strict")
    assert rows["bad"]["status"] == "failed" and "line 4" in rows["bad"]["error"]
    assert rows["clean"]["status"] == "done"
    assert (tmp_path / "strict" / "systems" / system_key("clean") / "report.html").is_file()


def test_a_mass_no_known_binary_has_is_a_warning_of_the_summary(tmp_path):
    # a = 0.5", P = 12 yr: a parallax of 0.5 mas makes a = 1000 au and the total mass
    # 1000^3 / 12^2 = 6.9e6 M_sun (Kepler's third law in solar units), one of 40 mas
    # a = 12.5 au and 12.5^3 / 144 = 13.6 M_sun.
    cat = tmp_path / "cat"
    (cat / "logs").mkdir(parents=True)
    _write_log(cat / "logs" / "pair.csv", TRUE, seed=11)
    (cat / "manifest.csv").write_text("id,log,parallax_mas,parallax_err_mas\n"
                                      "far,logs/pair.csv,0.5,0.01\n"
                                      "near,logs/pair.csv,40.0,0.4\n")
    run_batch(cat / "manifest.csv", tmp_path / "out", BatchOptions(seed=5, pages="none"),
              workers=1, progress=False)
    rows = summary_rows(tmp_path / "out")
    assert rows["far"]["mass_msun"] == pytest.approx(1000.0**3 / 144.0, rel=0.02)
    assert "mass implausible: 6.86e+06 M_sun" in rows["far"]["warnings"]
    assert rows["near"]["mass_msun"] == pytest.approx(12.5**3 / 144.0, rel=0.02)
    assert "mass implausible" not in rows["near"]["warnings"]


def test_a_log_turned_into_an_outward_link_after_reading_is_refused_by_the_worker(tmp_path):
    # The manifest is read (paths inside its folder), then the log is swapped for a link
    # leading out of the folder before the worker opens it: the worker checks again.
    from orbweigh.batch import process_system
    cat = tmp_path / "cat"
    cat.mkdir()
    _write_log(cat / "a.csv", TRUE, seed=1)
    _write_log(tmp_path / "outside.csv", TRUE, seed=2)
    (cat / "manifest.csv").write_text("id,log\na,a.csv\n")
    [entry] = read_manifest(cat / "manifest.csv")
    assert entry.problem is None
    (cat / "a.csv").unlink()
    (cat / "a.csv").symlink_to(tmp_path / "outside.csv")
    record = process_system(entry, BatchOptions(seed=7, pages="none"))
    assert record["status"] == "failed" and record["document"] is None
    assert record["error"].startswith("log: ") and "now leads outside" in record["error"]


def test_progress_bar_only_on_a_terminal(tmp_path):
    # With stderr a pipe or a file (a log), the per-system lines go to stdout and no
    # carriage-return progress redraws fill the log.
    import subprocess
    import sys
    cat = tmp_path / "cat"
    cat.mkdir()
    _write_log(cat / "a.csv", TRUE, seed=1)
    (cat / "manifest.csv").write_text("id,log\na,a.csv\n")
    done = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", "batch",
                           str(cat / "manifest.csv"), "--out", str(tmp_path / "out"),
                           "--pages", "none"], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "[1/1] a: no previous orbit" in done.stdout
    assert "\r" not in done.stderr and "system/s" not in done.stderr
