"""The batch summary written from the stream in chunks: the same bytes as the whole table
written at once (the way it was written before), whatever the chunk size; a long
catalogue's index lists the flagged systems and counts the rest."""
from __future__ import annotations

import json
import re
import sys
from pathlib import Path

import pytest
from astropy.table import Table

from orbweigh.batch import _SUMMARY_COLUMNS, STREAM_NAME, BatchOptions, _urgency, system_key
from orbweigh.batch_summary import write_summary
from orbweigh.files import LineLog, TableChunks, table_text
from orbweigh.report import batch_index
from orbweigh.report.tables import elements_table_latex

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from bench_summary import make_stream  # noqa: E402

N = 60
OPTIONS = BatchOptions(seed=3)


@pytest.fixture(scope="module")
def stream(tmp_path_factory):
    """60 synthetic systems; one of them reported twice (its pages made it fail later: the
    later line counts) and a last line cut by a crash (skipped)."""
    out = make_stream(tmp_path_factory.mktemp("summary") / "out", N, seed=5)
    path = out / STREAM_NAME
    lines = path.read_text().splitlines()
    later = json.loads(lines[7])
    later["summary"].update(status="failed", error="pages: worker: MemoryError: ")
    later["files"]["review.html"] = "0" * 64
    with open(path, "a") as fh:
        fh.write(json.dumps(later) + "\n" + lines[3][:40])
    return out


def _whole(out):
    """summary.ecsv, .csv and .tex made as before: one table of every system, sorted and
    written at once (kept here as the reference)."""
    rows = {}
    for line in LineLog.read_lines(out / STREAM_NAME):
        row = json.loads(line)
        rows[row["key"]] = row
    records = sorted(rows.values(), key=lambda r: _urgency(r["summary"]))
    table = Table(rows=[[dict(r["summary"], rank=k, link=_link(r))[name]
                         for name, _, _ in _SUMMARY_COLUMNS] for k, r in enumerate(records, 1)],
                  names=[n for n, _, _ in _SUMMARY_COLUMNS],
                  dtype=[t for _, t, _ in _SUMMARY_COLUMNS])
    for name, _, unit in _SUMMARY_COLUMNS:
        if unit:
            table[name].unit = unit
    table.meta.update({"description": "orbweigh batch summary, most urgent first",
                       "manifest": str(out / "manifest.csv"), "seed": 3,
                       "only_contradicted": False, "pages": "flagged", "strict": False})
    fitted = [str(i) for i in table["id"][table["fitted"]]]
    docs = [json.loads((out / "systems" / system_key(i) / "result.json").read_text())
            for i in fitted]
    return {"summary.ecsv": table_text(table, "ascii.ecsv"),
            "summary.csv": table_text(table, "ascii.csv"),
            "summary.tex": elements_table_latex(docs, fitted)}, table


def _link(row):
    name = next((f for f in ("review.html", "report.html", "result.json")
                 if f in row["files"]), "batch.json")
    return f"systems/{row['key']}/{name}"


def _written(out):
    return {name: (out / name).read_text() for name in
            ("summary.ecsv", "summary.csv", "summary.tex", "index.html")}


def test_chunks_give_the_bytes_of_the_whole_table(stream):
    reference, table = _whole(stream)
    assert len(table) == N
    runs = {}
    for chunk in (1, 7, 1000):           # one row a chunk, chunks of several, a single one
        counts = write_summary(stream, stream / STREAM_NAME, stream / "manifest.csv",
                               OPTIONS, chunk=chunk)
        runs[chunk] = _written(stream)
        for name, text in reference.items():
            assert runs[chunk][name] == text, (chunk, name)
    assert runs[1]["index.html"] == runs[7]["index.html"] == runs[1000]["index.html"]
    # The counts run_batch returns, against the reference table.
    assert counts.n_systems == N and counts.n_failed == int((table["status"] == "failed").sum())
    assert counts.n_warned == int((table["n_warnings"] > 0).sum())
    assert counts.verdicts == {v: int((table["verdict"] == v).sum())
                               for v in set(table["verdict"]) if v}
    # The repeated system's later line counts: failed, and linked to its review page.
    row = table[table["id"] == "bench 000007"][0]
    assert row["status"] == "failed" and row["link"].endswith("/review.html")
    # A short catalogue's index lists every system, in summary order.
    ranks = [int(r) for r in re.findall(r"<tr><td class='num' data-value='(\d+)'>",
                                        runs[7]["index.html"])]
    assert ranks == list(range(1, N + 1))
    assert "not listed" not in runs[7]["index.html"].lower()


def test_a_long_index_lists_flagged_systems_and_counts_the_rest(stream, monkeypatch):
    _, table = _whole(stream)
    monkeypatch.setattr(batch_index, "INDEX_ROWS", 12)
    write_summary(stream, stream / STREAM_NAME, stream / "manifest.csv", OPTIONS, chunk=5)
    index = (stream / "index.html").read_text()
    flagged = [int(r["rank"]) for r in table if r["n_warnings"] > 0 or r["status"] == "failed"
               or r["verdict"] in ("contradicted", "drifting")]
    assert len(flagged) > 12                      # the cap, not the flags, decides here
    ranks = [int(r) for r in re.findall(r"<tr><td class='num' data-value='(\d+)'>", index)]
    assert ranks == flagged[:12]
    note = re.search(r"<p class='meta omitted'>(.*?)</p>", index).group(1)
    assert f"lists 12 of the {N} systems" in note and "href='summary.csv'" in note
    # Not listed, by class: every system less the 12 listed (classes as the summary's).
    left = [r for r in table if int(r["rank"]) not in ranks[:12]]
    consistent = sum(1 for r in left if r["verdict"] == "consistent"
                     and r["status"] == "done")
    assert f"{consistent} <span class=\"badge v-consistent\">" in note
    # The tally above still counts every system.
    assert f"{N} systems, most urgent first" in index


def test_an_empty_stream_gives_an_empty_summary_with_its_columns(tmp_path):
    (tmp_path / STREAM_NAME).write_text("")
    counts = write_summary(tmp_path, tmp_path / STREAM_NAME, "m.csv", OPTIONS)
    assert (counts.n_systems, counts.n_failed, counts.verdicts) == (0, 0, {})
    table = Table.read(tmp_path / "summary.ecsv", format="ascii.ecsv")
    assert len(table) == 0 and table.colnames == [n for n, _, _ in _SUMMARY_COLUMNS]
    assert "0 systems, most urgent first: none" in (tmp_path / "index.html").read_text()
    assert r"\begin{tabular}" in (tmp_path / "summary.tex").read_text()


def test_a_format_that_aligns_its_rows_is_refused(tmp_path):
    from orbweigh.files import AtomicFile
    table = Table({"x": [1.5, 22.25, 333.0]})
    with pytest.raises(ValueError, match="aligns its rows"):
        with AtomicFile(tmp_path / "t.txt") as fh:
            chunks = TableChunks(fh, lambda t: table_text(t, "ascii.fixed_width"),
                                 "| x |\n")     # its header alone (it writes no empty table)
            chunks.add(table[:1])
            chunks.add(table[1:])
    assert not (tmp_path / "t.txt").exists()      # nothing half-written is left
