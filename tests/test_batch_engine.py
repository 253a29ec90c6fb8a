"""The batch engine: the same summary whatever runs it (inline, 2 local workers, an
in-process Dask cluster) and whether pages are made or not; workers send back short
records only; the summary stream's lines survive a cut last line."""
from __future__ import annotations

import dataclasses
import json
import pickle

import pytest
from astropy.table import Table

from orbweigh.batch import (STREAM_NAME, BatchOptions, _fit_chunk, input_hash, run_batch,
                            system_key)
from orbweigh.files import LineLog
from orbweigh.manifest import read_manifest
from test_batch import LAST, SIGMA_THETA, TRUE, _old, _write_log


@pytest.fixture(scope="module")
def manifest(tmp_path_factory):
    """Five systems: a correct, a slightly and a badly wrong previous orbit, none, and one
    whose log has a quadrant flip (a warning, hence a page under --pages flagged)."""
    cat = tmp_path_factory.mktemp("engine")
    (cat / "logs").mkdir()
    for k, name in enumerate(("consistent", "drifting", "contradicted", "fresh", "flip")):
        _write_log(cat / "logs" / f"{name}.csv", TRUE, seed=40 + k, n=16)
    lines = (cat / "logs" / "flip.csv").read_text().splitlines()
    cells = lines[5].split(",")                       # file line 6: theta + 180
    lines[5] = ",".join(cells[:1] + [f"{(float(cells[1]) + 180.0) % 360.0:.4f}"] + cells[2:])
    (cat / "logs" / "flip.csv").write_text("\n".join(lines) + "\n")
    drift = dataclasses.replace(TRUE, node_deg=TRUE.node_deg + 2.0 * SIGMA_THETA)
    wrong_p = dataclasses.replace(TRUE, period_yr=TRUE.period_yr * 1.1)
    path = cat / "manifest.csv"
    path.write_text("id,log,P,T,e,a,i,Omega,omega,last_epoch\n"
                    f"consistent,logs/consistent.csv,{_old(TRUE)},{LAST}\n"
                    f"drifting,logs/drifting.csv,{_old(drift)},{LAST}\n"
                    f"contradicted,logs/contradicted.csv,{_old(wrong_p)},{LAST}\n"
                    "fresh,logs/fresh.csv,,,,,,,,\n"
                    "flip,logs/flip.csv,,,,,,,,\n")
    return path


def _summary_without_links(out):
    table = Table.read(out / "summary.ecsv", format="ascii.ecsv")
    table.remove_column("link")            # where the row points: a page when there is one
    return table


def test_same_summary_with_pages_on_and_off_and_any_executor(manifest, tmp_path):
    from dask.distributed import LocalCluster
    runs = {"inline, no pages": tmp_path / "a", "2 workers, pages": tmp_path / "b",
            "dask, pages": tmp_path / "c"}
    options = {"none": BatchOptions(seed=9, pages="none"),
               "flagged": BatchOptions(seed=9, pages="flagged")}
    run_batch(manifest, runs["inline, no pages"], options["none"], workers=1, progress=False)
    run_batch(manifest, runs["2 workers, pages"], options["flagged"], workers=2,
              progress=False)
    with LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                      dashboard_address=None) as cluster:
        run_batch(manifest, runs["dask, pages"], options["flagged"],
                  scheduler=cluster.scheduler_address, progress=False)
    tables = {name: _summary_without_links(out) for name, out in runs.items()}
    reference = tables["inline, no pages"]
    assert len(reference) == 5 and set(reference["status"]) == {"done"}
    for name, table in tables.items():
        for column in reference.colnames:
            assert list(table[column]) == pytest.approx(list(reference[column]), nan_ok=True) \
                if reference[column].dtype.kind == "f" else \
                list(table[column]) == list(reference[column]), (name, column)
    # The fits themselves are the same (the fit's own wall time aside).
    for system in ("contradicted", "flip"):
        docs = []
        for out in runs.values():
            doc = json.loads((out / "systems" / system_key(system) / "result.json").read_text())
            doc["statistics"].pop("fit_seconds")
            docs.append(doc)
        assert docs[0] == docs[1] == docs[2]
    # Pages where asked for: the flagged systems (contradicted, drifting, the warned flip)
    # get a review page in the page runs, none in the run without pages.
    rows = {row["id"]: row for row in reference}
    assert "flipped: 1 (line 6)" in rows["flip"]["warnings"]     # file line 6
    assert rows["contradicted"]["verdict"] == "contradicted"
    flagged = {i for i, row in rows.items()
               if row["verdict"] in ("contradicted", "drifting") or row["n_warnings"]}
    assert {"contradicted", "flip"} <= flagged and "consistent" not in flagged
    for name, out in runs.items():
        paged = {row["id"] for row in Table.read(out / "summary.ecsv")
                 if row["link"].endswith("review.html")}
        assert paged == (set() if name == "inline, no pages" else flagged), name
        assert not (out / STREAM_NAME).exists()          # the stream is gone once summed up
        assert not any(p.name.endswith(".tmp") for p in out.rglob("*"))


def test_workers_send_back_short_records_only(manifest, tmp_path):
    """What travels back from a worker is the summary row and file hashes, not the result
    document (~25 KiB a system) nor pages; what travels out is the manifest row."""
    options = BatchOptions(seed=9, pages="none")
    items = [(entry, input_hash(entry, options)) for entry in read_manifest(manifest)[:2]]
    records = _fit_chunk(items, options, tmp_path)
    for record in records:
        assert "document" not in record and "report" not in record
        assert set(record["files"]) == {"result.json"}
        saved = tmp_path / "systems" / record["key"] / "result.json"
        assert saved.stat().st_size > 8 * len(pickle.dumps(record))
    assert len(pickle.dumps((items, options, tmp_path))) < 2048 * len(items)


def test_line_log_keeps_whole_lines_only(tmp_path):
    path = tmp_path / "rows.jsonl"
    with LineLog(path) as log:
        log.add('{"a": 1}')
        log.add('{"a": 2}')
    with open(path, "a", encoding="utf-8") as fh:       # a crash cut the third line
        fh.write('{"a": 3')
    assert list(LineLog.read_lines(path)) == ['{"a": 1}', '{"a": 2}']


def test_record_json_is_the_standard_encoders_byte_for_byte(manifest, tmp_path):
    # The batch writes its indented JSON with the C encoder per container of plain values
    # (batch._json_text); the bytes must stay json.dumps(indent=1)'s: the records of a
    # real run, and values of every kind the records may hold.
    import numpy as np

    from orbweigh.batch import _json_default, _json_text
    run_batch(manifest, tmp_path, BatchOptions(seed=3, pages="none"), workers=1,
              progress=False)
    values = [json.loads(p.read_text()) for p in tmp_path.glob("systems/*/*.json")]
    values.append({"plain": [None, True, False, 0, -3, 2**70, 1.5, -0.0, 1e-300, "é\"\\\n☃"],
                   "special": [float("nan"), float("inf"), -float("inf")],
                   "numpy": [np.float64(0.1), np.float32(0.1), np.int64(7), np.bool_(True),
                             np.arange(3), np.array([[1.5, np.nan], [2.0, 3.0]])],
                   "empty": [[], {}, (), {"a": []}], "tuple": (1, ("x", {"y": None})),
                   1: "int key", 2.5: {True: 1, None: [1]}, "nested": [[[[{"z": [0]}]]]],
                   "scalar in a list of lists": [1, [2, {"k": np.int64(3)}], "s"]})
    assert len(values) > 5
    for value in values:
        assert _json_text(value) == json.dumps(value, indent=1, allow_nan=True,
                                               default=_json_default) + "\n"


def test_chunks_cover_every_system_once_and_shrink_at_the_end():
    from orbweigh.batch import _chunks
    for n, workers in [(1000, 2), (33, 2), (7, 3), (1, 1), (100, 1), (0, 2)]:
        chunks = _chunks(n, workers)
        assert [i for c in chunks for i in c] == list(range(n))
        if n >= 1000:
            sizes = [len(c) for c in chunks]
            assert max(sizes) == 16 and sizes[-2 * workers:] == [4] * (2 * workers)
