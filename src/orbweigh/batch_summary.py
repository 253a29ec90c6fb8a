"""The batch's summary files, made from the stream of summary rows in bounded memory.

``write_summary`` reads the stream (``batch.STREAM_NAME``: one JSON line per system as it
finished; a later line of a system replaces its earlier one) twice:

1. an index: per system only its sort key (urgency class, reduced chi2 of the new data,
   id), two flags and the byte offset of its latest line - about 0.4 kB a system, where
   the whole summary held as one table took about 9 kB;
2. in summary order, ``CHUNK`` systems at a time, their lines read back by offset: each
   chunk becomes a small astropy Table whose rows go to summary.ecsv and summary.csv
   (``files.TableChunks``: the same bytes as the whole table written at once), to
   index.html (the systems it lists: ``report.batch_index.INDEX_ROWS``) and, for the
   fitted ones, with their result.json read now, to summary.tex.

The four files are written side by side (``files.AtomicFile``), each put in place whole
when all are done; a failure leaves the previous ones as they were.
"""
from __future__ import annotations

import contextlib
import json
from dataclasses import dataclass

from .batch import _SUMMARY_COLUMNS, URGENCY, _urgency, system_key, urgency_class
from .files import AtomicFile, LineLog, TableChunks, table_text

__all__ = ["write_summary", "SummaryCounts", "CHUNK", "latex_part"]

#: Systems a chunk of the summary holds (its Table, its result documents): ~10 MB.
CHUNK = 1000
_FLAGGED = ("contradicted", "drifting", "failed")
_TABLES = (("summary.ecsv", "ascii.ecsv"), ("summary.csv", "ascii.csv"))


@dataclass(frozen=True)
class SummaryCounts:
    """What the summary holds, counted (``run_batch`` returns it; the rows are in
    summary.ecsv).

    Attributes
    ----------
    n_systems, n_failed, n_warned : int
        Systems, those failed (status), those with warnings.
    verdicts : dict
        {verdict: number of systems} of the systems that have a verdict.
    """

    n_systems: int
    n_failed: int
    n_warned: int
    verdicts: dict


def write_summary(out, stream, manifest, options, interrupted=False, chunk=CHUNK):
    """Write summary.ecsv, summary.csv, index.html and summary.tex into ``out`` from the
    stream at ``stream``, most urgent first; returns their ``SummaryCounts``."""
    from .report.batch_index import INDEX_ROWS, index_foot, index_head
    entries = _sorted_entries(stream)
    listed = _listed(entries, INDEX_ROWS)
    meta = _meta(manifest, options, interrupted)
    counts = {"n_failed": 0, "verdicts": {}}
    with contextlib.ExitStack() as files, open(stream, "rb") as lines:
        index = files.enter_context(AtomicFile(out / "index.html"))
        index.write(index_head(manifest, options.seed, _class_counts(entries),
                               sum(e[2] for e in entries), _omitted(entries, listed)))
        tables = [TableChunks(files.enter_context(AtomicFile(out / name)),
                              lambda t, f=fmt: table_text(t, f),
                              table_text(_chunk_table([], meta), fmt))
                  for name, fmt in _TABLES]
        latex = _LatexRows(files.enter_context(AtomicFile(out / "summary.tex")), out,
                           entries)
        for start in range(0, len(entries), chunk):
            part = entries[start:start + chunk]
            rows, parts = _rows(lines, part, start)
            table = _chunk_table(rows, meta)
            for writer in tables:
                writer.add(table)
            latex.add(table, parts)
            index.write(_index_rows(table, listed[start:start + chunk]))
            _count(counts, table)
        for writer in tables + [latex]:
            writer.close()
        index.write(index_foot())
    return SummaryCounts(len(entries), counts["n_failed"],
                         sum(e[2] for e in entries), counts["verdicts"])


def _sorted_entries(stream):
    """[(sort key, byte offset, warned, flagged, fitted)] of each system's latest line, in
    summary order (``batch._urgency``)."""
    latest = {}
    for offset, line in LineLog.read_offsets(stream):
        row = json.loads(line)
        summary = row["summary"]
        key = _urgency(summary)
        warned = summary.get("n_warnings", 0) > 0
        latest[row["key"]] = (key, offset, warned, warned or URGENCY[key[0]] in _FLAGGED,
                              bool(summary["fitted"]))
    return sorted(latest.values())


def _listed(entries, most):
    """Whether the index lists each system: all of them in a short catalogue, else the
    first ``most`` flagged ones."""
    if len(entries) <= most:
        return [True] * len(entries)
    listed, n = [], 0
    for entry in entries:
        listed.append(entry[3] and n < most)
        n += listed[-1]
    return listed


def _class_counts(entries, keep=None):
    counts = dict.fromkeys(URGENCY, 0)
    for k, entry in enumerate(entries):
        if keep is None or keep[k]:
            counts[URGENCY[entry[0][0]]] += 1
    return counts


def _omitted(entries, listed):
    """{class: systems the index leaves out}, or None when it lists them all."""
    if all(listed):
        return None
    return _class_counts(entries, [not v for v in listed])


def _meta(manifest, options, interrupted):
    meta = {"description": "orbweigh batch summary, most urgent first"}
    if interrupted:
        meta["interrupted"] = ("the batch was interrupted; this summary holds the systems "
                               "finished so far (--resume continues)")
    meta.update({"manifest": str(manifest), "seed": options.seed,
                 "only_contradicted": options.only_contradicted, "pages": options.pages,
                 "strict": options.strict})
    return meta


def _rows(lines, part, start):
    """Summary rows of a chunk of entries, read back from the stream, ranked and linked,
    and {id: LaTeX part} of the rows whose worker sent it (``batch._short``)."""
    rows, parts = [], {}
    for rank, entry in enumerate(part, start + 1):
        record = json.loads(LineLog.line_at(lines, entry[1]))
        link = next((f for f in ("review.html", "report.html", "result.json")
                     if f in record["files"]), "batch.json")
        rows.append(dict(record["summary"], rank=rank,
                         link=f"systems/{record['key']}/{link}"))
        if "latex" in record:
            parts[record["summary"]["id"]] = record["latex"]
    return rows, parts


def _chunk_table(rows, meta):
    from astropy.table import Table
    blank = {float: float("nan"), int: 0, str: "", bool: False}  # a column a record predates
    names = [n for n, _, _ in _SUMMARY_COLUMNS]
    dtypes = [t for _, t, _ in _SUMMARY_COLUMNS]
    table = Table(rows=[[row.get(name, blank[t]) for name, t, _ in _SUMMARY_COLUMNS]
                        for row in rows], names=names, dtype=dtypes) if rows else \
        Table(names=names, dtype=dtypes)
    for name, _, unit in _SUMMARY_COLUMNS:
        if unit:
            table[name].unit = unit
    table.meta.update(meta)
    return table


def _index_rows(table, listed):
    from .report.batch_index import index_rows
    rows = [row for row, keep in zip(table, listed) if keep]
    return index_rows(rows, [URGENCY.index(urgency_class(row)) for row in rows])


def _count(counts, table):
    counts["n_failed"] += int((table["status"] == "failed").sum())
    for verdict in table["verdict"]:
        if verdict:
            counts["verdicts"][str(verdict)] = counts["verdicts"].get(str(verdict), 0) + 1


class _LatexRows:
    """summary.tex: the refitted orbits and masses, a row per fitted system in summary
    order, each read back from its result.json chunk by chunk. The header names the
    version of the first fitted system's result, as the whole table written at once does.
    """

    def __init__(self, file, out, entries):
        from .report.tables import elements_table_latex
        self._out = out
        first = next((e for e in entries if e[4]), None)
        version = "" if first is None else _read_part(out, first[0][2]).get("version") or ""
        self._writer = TableChunks(
            file, lambda docs: elements_table_latex(*zip(*docs), version=version),
            elements_table_latex([], [], version=version))

    def add(self, table, parts):
        """The fitted systems of a chunk; a part the stream lacks (a system saved before
        this run, or after Ctrl-C) is read from its result.json."""
        fitted = [str(i) for i in table["id"][table["fitted"]]]
        self._writer.add([(parts.get(i) or _read_part(self._out, i), i) for i in fitted])

    def close(self):
        self._writer.close()


def latex_part(document):
    """What the LaTeX table takes of a result document (``report.tables.
    elements_table_latex``): a catalogue's documents whole would not fit in memory
    (residuals, covariance draws), and a worker sends this with its short record."""
    def entry(e):
        return {k: e[k] for k in ("value", "error", "low", "high", "scale") if k in e}
    part = {"elements": {k: entry(e) for k, e in document["elements"].items()}}
    total = (document.get("mass") or {}).get("total")
    if isinstance(total, dict):
        part["mass"] = {"total": entry(total)}
    if "version" in document:
        part["version"] = document["version"]
    return part


def _read_part(out, system_id):
    return latex_part(json.loads((out / "systems" / system_key(system_id) / "result.json")
                                 .read_text("utf-8")))
