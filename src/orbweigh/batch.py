"""Many systems at once: revision verdicts, refits, and parallel execution.

``process_system(entry, options)`` checks, fits and compares one system of the manifest
and returns a plain, picklable record; it never raises. ``run_batch`` runs it over the
manifest on a local process pool (default), in this process (``workers=1``), or on a
Dask distributed cluster (``scheduler=ADDRESS``) - the same functions in every case - in
two phases:

1. fits: the systems go to the workers in chunks (a worker imports once and serves many
   systems; only manifest rows travel out); the worker writes each system's files and
   sends back a short record (status, summary row, file hashes), never the documents;
2. pages: the systems ``pages`` asks for get their review page and report, made by the
   workers from the saved files, in parallel, after every fit is done.

The main process alone appends each short record's summary row to
``summary.running.jsonl`` as it arrives and holds nothing else per system, so its memory
does not grow with the catalogue; at the end ``batch_summary`` makes the summary files
from that stream in chunks (each file put in place whole), and the stream is removed.

Determinism: each system gets its own seed, derived from the batch seed and the system
id by SHA-256 (never Python's salted ``hash``), so the results do not depend on the
worker count or on the order in which systems finish.

Outputs in the output folder (each written to a temporary file, then renamed, so an
interrupted batch leaves no half-written file)::

    systems/<key>/result.json   the fit (schema orbweigh.result/1), when fitted
    systems/<key>/review.html   the curator's page (verdict and its numbers, catalogued
                                against new orbit), for the systems ``pages`` asks for
    systems/<key>/report.html   the fit's full report, for those of them fitted
    systems/<key>/batch.json    the record: verdict, numbers, comparison, errors, hash
    summary.ecsv, summary.csv   one row per system, most urgent first
    summary.tex                 the refitted orbits and masses, one LaTeX table
    index.html                  the same, linking each system's page (report.batch_index)

``resume`` skips a system whose ``batch.json`` says done with the same input hash
(SHA-256 of the manifest row, the bytes of its log (and RV log), the batch options and
the orbweigh version), whose files still have the SHA-256 it recorded, and whose
result.json passes ``result.load_result``; a finished system that fails these checks is
fitted again, with a note on stderr. Workers read the logs and write the outputs by path:
on a remote Dask cluster the manifest folder and the output folder must be visible to the
workers at the same paths.
"""
from __future__ import annotations

import contextlib
import functools
import hashlib
import io
import itertools
import json
import math
import os
import re
import sys
import tempfile
import time
import traceback
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from .errors import InputError, OrbweighError, OutputError
from .files import LineLog, discard_temporaries, write_atomic
from .manifest import read_manifest

__all__ = ["BatchOptions", "system_seed", "system_key", "input_hash", "process_system",
           "run_batch", "URGENCY", "urgency_class"]

#: Order of the summary: most urgent first ('failed' = no verdict because of an error).
URGENCY = ("contradicted", "drifting", "failed", "no previous orbit", "no new data",
           "consistent")


@dataclass(frozen=True)
class BatchOptions:
    """Choices of a batch run (part of every system's input hash).

    Attributes
    ----------
    seed : int
        Batch seed; each system's seed is ``system_seed(seed, id)``.
    only_contradicted : bool
        Fit only systems whose old orbit the new data contradict.
    pages : str
        Which fitted systems get an HTML page: 'flagged' (contradicted, drifting, failed
        or warned ones: where a curator looks), 'all' or 'none'.
    strict : bool
        A log with any rejected line fails its system instead of being fitted without it.
    """

    seed: int = 0
    only_contradicted: bool = False
    pages: str = "flagged"
    strict: bool = False


def system_seed(batch_seed, system_id):
    """Seed of one system: the first 4 bytes of SHA-256("<batch seed>/<id>")."""
    digest = hashlib.sha256(f"{int(batch_seed)}/{system_id}".encode()).digest()
    return int.from_bytes(digest[:4], "big")


def system_key(system_id):
    """Folder name of a system: a readable slug of the id plus 8 hex digits of its hash."""
    slug = re.sub(r"[^A-Za-z0-9._-]+", "_", system_id).strip("._")[:40] or "system"
    return f"{slug}-{hashlib.sha256(system_id.encode()).hexdigest()[:8]}"


def input_hash(entry, options):
    """SHA-256 of everything that decides a system's result (see the module notes)."""
    from . import __version__
    h = hashlib.sha256()
    h.update(json.dumps({"row": entry.fields, "options": asdict(options),
                         "version": __version__}, sort_keys=True).encode())
    for path in (entry.log, entry.rv_log):
        if path:
            h.update(b"\0" + Path(path).read_bytes())
    return h.hexdigest()


def _stage(record, name, func, *args, **kwargs):
    """Run one step; on failure record '<step>: <reason>' and return None. Its CPU time
    (this thread's: a worker writes the previous system's files meanwhile) adds to
    ``record['cpu_seconds'][name]``."""
    started = time.thread_time()
    try:
        return func(*args, **kwargs)
    except OrbweighError as exc:
        record["error"] = f"{name}: {exc}"
    except Exception as exc:  # a bug must not stop the batch; keep the evidence
        where = traceback.extract_tb(exc.__traceback__)[-1]
        record["error"] = (f"{name}: internal error {type(exc).__name__}: {exc} (at "
                           f"{Path(where.filename).name}, line {where.lineno})")
    finally:
        cpu = record["cpu_seconds"]
        cpu[name] = cpu.get(name, 0.0) + time.thread_time() - started
    return None


def process_system(entry, options):
    """Check, fit and compare one system (no pages: see ``_add_pages``); never raises.

    Parameters
    ----------
    entry : SystemEntry
        A manifest row.
    options : BatchOptions

    Returns
    -------
    dict
        The record: ``id``, ``key``, ``line`` and ``manifest_row`` (the row as
        written), ``seed``, ``status`` ('done' or 'failed'),
        ``error``, ``verdict`` (one of ``revision.VERDICTS``, 'no previous orbit' or
        None), ``revision`` (numbers behind the verdict), ``fitted``, ``fit_note``,
        ``document`` (result document or None), ``comparison``, ``wants_page`` (whether
        ``pages`` asks for its pages, made later from the saved files: ``run_batch``),
        ``report`` (None here), ``seconds``, ``cpu_seconds`` ({step: CPU s}), ``previous`` ({"elements", "errors"}
        of the catalogued orbit, internal units, or None), ``epoch_scale`` (the log's).
    """
    started = time.perf_counter()
    record = _failed_record(entry, options)
    if entry.problem is None:
        _process(entry, options, record["seed"], record)
        record["wants_page"] = _wants_page(options.pages, record)
    record["status"] = "failed" if record["error"] else "done"
    record["seconds"] = time.perf_counter() - started
    return record


def _process(entry, options, seed, record):
    from .measurements import read_measurements
    if _stage(record, "log", _check_paths, entry) is None:
        return
    data = _stage(record, "log", read_measurements, entry.log,
                  shown_as=_as_written(entry, entry.log), target_ra_deg=entry.ra_deg,
                  target_dec_deg=entry.dec_deg)
    if data is None:
        return
    record["warnings"], record["epoch_scale"] = _log_warnings(data), data.epoch_scale
    if options.strict and data.rejected:
        record["error"] = (f"log: {_count(len(data.rejected), 'line')} rejected (--strict): "
                           + _line_list(p.line for p in data.rejected))
        return
    check = None
    if entry.previous is None:
        record["verdict"] = "no previous orbit"
    else:
        from .revision import check_revision
        check = _stage(record, "revision check", check_revision, entry.previous, data,
                       entry.last_epoch_yr)
        if check is None:
            return
        record["verdict"], record["revision"] = check.verdict, check.to_dict()
    if options.only_contradicted and record["verdict"] != "contradicted":
        record["fit_note"] = "not fitted: only contradicted systems were asked for"
        return
    solution = _stage(record, "fit", _fit, data, seed)
    if solution is None:
        return
    doc = solution.to_document()
    record["fitted"], record["document"] = True, doc
    if entry.rv_log is not None:
        _stage(record, "radial velocities", _add_combined, doc, solution, entry, seed)
    elif entry.parallax_mas is not None:
        _stage(record, "masses", _add_masses, doc, entry, seed)
    record["warnings"] += _fit_warnings(doc)
    if check is not None:
        record["comparison"] = _stage(record, "comparison", _compare, entry, doc, data, check)


def _wants_page(pages, record):
    """Whether a system gets its pages under ``--pages`` (see ``BatchOptions``)."""
    if pages == "none":
        return False
    return pages == "all" or bool(record["error"] or record["warnings"]) \
        or record["verdict"] in ("contradicted", "drifting")


def _pages(record):
    """{file name: bytes}: the curator's review page, and the fit's report when fitted."""
    files = {}
    if record["document"] is not None:
        files = _stage(record, "report", _report_files, record["document"], record["id"]) or {}
    links = [("report.html", "full fit report")] if "report.html" in files else []
    if record["document"] is not None:
        links.append(("result.json", "result document"))
    links.append(("batch.json", "batch record"))
    from .report.review import review_page
    page = _stage(record, "review page", review_page, record, links)
    if page is not None:
        files["review.html"] = page.encode()
    return files


def _count(n, noun):
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _line_list(lines, most=12):
    lines = [str(int(v)) for v in lines]
    word = "line" if len(lines) == 1 else "lines"
    return f"{word} " + ", ".join(lines[:most]) + (" ..." if len(lines) > most else "")


def _log_warnings(data):
    """What reading the log set aside: rejected and excluded lines, default sigmas."""
    out = []
    for what, lines in (("rejected", [p.line for p in data.rejected]),
                        ("excluded by flag", data.line[data.excluded]),
                        ("default sigma", data.line[data.sigma_defaulted])):
        if len(lines):
            out.append(f"{what}: {len(lines)} ({_line_list(lines)})")
    return out


def _fit_warnings(doc):
    """What the fit set aside or could not determine: flips, outliers, short arc, P or a
    undetermined ('do not use'), a total mass no known binary has."""
    out = []
    rows = doc.get("residuals", [])
    for status, what in (("flipped", "flipped"), ("outlier", "outliers")):
        lines = [r["line"] for r in rows if r["status"] == status]
        if lines:
            out.append(f"{what}: {len(lines)} ({_line_list(lines)})")
    el = doc["elements"]
    undetermined = [k for k in ("P", "a") if el[k].get("error") is not None
                    and el[k]["error"] > 0.5 * abs(el[k]["value"])]
    if undetermined:
        out.append(f"do not use: {' and '.join(undetermined)} undetermined")
    used = [r["epoch_yr"] for r in rows if r["status"] in ("used", "flipped")]
    if used and max(used) - min(used) < el["P"]["value"]:       # P is in years
        out.append(f"short arc: {100 * (max(used) - min(used)) / el['P']['value']:.0f}% "
                   "of the period")
    total = ((doc.get("mass") or {}).get("total") or {}).get("value")
    if total is not None:
        from .masses import implausible_total
        if implausible_total(total) is not None:
            from .formatting import number
            out.append(f"mass implausible: {number(total, 3)} M_sun")
    return out


def _as_written(entry, path):
    """A log's path as the manifest wrote it (relative to the manifest), for every message
    and page: the absolute path the worker opens is the machine's, not the curator's."""
    written = {entry.log: entry.fields.get("log"), entry.rv_log: entry.fields.get("rv_log")}
    return written.get(path) or str(path)


def _check_paths(entry):
    """The logs again, as the worker opens them: still inside the manifest's folder (a
    link made after the manifest was read must not lead out of it)."""
    folder = Path(entry.manifest).resolve().parent
    for path in (entry.log, entry.rv_log):
        if path is not None and not Path(path).resolve().is_relative_to(folder):
            raise InputError(f"{_as_written(entry, path)} now leads outside the manifest's "
                             f"folder (to {Path(path).resolve()}); logs must stay inside it")
    return True


def _fit(data, seed):
    from .fitting import FitOptions, fit_orbit
    return fit_orbit(data, FitOptions(seed=seed))


def _add_masses(doc, entry, seed):
    """Mass blocks from the fit's covariance draws and the manifest parallax (as ``fit``)."""
    from .masses import masses_for_document
    blocks = masses_for_document(doc, parallax=entry.parallax_mas, mass_ratio=entry.mass_ratio,
                                 seed=seed)
    doc["mass"], doc["parallax"] = blocks["mass"], blocks["parallax"]
    doc["warnings"].extend(blocks["warnings"])


def _add_combined(doc, solution, entry, seed):
    """Combined visual-spectroscopic solution with the RV log (as ``fit --rv``)."""
    from .combined import add_to_document, combined_blocks, fit_combined
    from .spectroscopic import read_velocities
    combined = fit_combined(solution, read_velocities(entry.rv_log,
                                                      shown_as=_as_written(entry, entry.rv_log)))
    add_to_document(doc, combined, combined_blocks(combined, parallax=entry.parallax_mas,
                                                   seed=seed))


def _compare(entry, doc, data, check):
    """Old against new: the new elements are the document's (combined ones with an RV log)."""
    from .result import covariance_from_document, element_errors, elements_from_document
    from .revision import compare_orbits, typical_sigma_arcsec
    usable = data.usable
    new = np.array([r["new"] for r in check.residuals]) & usable
    cov = covariance_from_document(doc)
    return compare_orbits(entry.previous, elements_from_document(doc),
                          start_yr=float(data.epoch_yr[usable].max()),
                          sigma_arcsec=typical_sigma_arcsec(data, new if new.any() else usable),
                          old_errors=entry.previous_errors, new_errors=element_errors(doc),
                          new_pt_covariance=0.0 if cov is None else float(cov[0, 1]))


def _report_files(doc, system_id):
    """The system's report as {file name: bytes}, made in a scratch folder of the worker;
    titled with the system's id (the log's path stays out of the page).

    Only the HTML (figures embedded) and its tables: separate figure files for 1000
    systems would cost more than the fits.
    """
    from .report import write_report
    with tempfile.TemporaryDirectory(prefix="orbweigh-report-") as scratch:
        written = write_report(doc, scratch, formats=(), name=system_id)
        return {name: Path(path).read_bytes() for name, path in written.items()}


# ----------------------------------------------------------------------------- output files



def _json_text(obj):
    """``json.dumps(obj, indent=1, allow_nan=True, default=_json_default)`` and a newline,
    byte for byte, in 40 % less time: the standard library writes indented JSON in pure
    Python, so here each container of plain values (a residual row, an element entry, a
    covariance row: most of a document) goes to the C encoder, with the line break and
    indent of its depth as item separator; only the containers around them are walked."""
    pieces = []
    _json_pieces(obj, "\n", pieces)
    return "".join(pieces) + "\n"


_PLAIN = (str, int, float, type(None))        # bool is an int


@functools.lru_cache(maxsize=None)
def _flat_encoder(indent):
    """``encode`` of values at the depth of ``indent`` ("\\n" and a space per level)."""
    return json.JSONEncoder(separators=("," + indent, ": "), allow_nan=True,
                            default=_json_default).encode


def _json_key(key):
    """'"key": ' as the standard encoder writes it (a number, a boolean or None as text)."""
    if isinstance(key, str):
        return json.encoder.encode_basestring_ascii(key) + ": "
    return _flat_encoder("")({key: None})[1:-len("null}")]


def _json_pieces(value, indent, pieces):
    """Append ``value`` as indented JSON (see ``_json_text``) to ``pieces``."""
    if isinstance(value, dict):
        items = value.values()
    elif isinstance(value, (list, tuple)):
        items = value
    elif isinstance(value, _PLAIN):
        pieces.append(_flat_encoder(indent)(value))
        return
    else:                                     # numpy: as the standard encoder, via default
        _json_pieces(_json_default(value), indent, pieces)
        return
    if not value:
        pieces.append("{}" if isinstance(value, dict) else "[]")
        return
    inner = indent + " "
    if all(map(isinstance, items, itertools.repeat(_PLAIN))):
        text = _flat_encoder(inner)(value)
        pieces.append(text[0] + inner + text[1:-1] + indent + text[-1])
        return
    separator = inner
    if isinstance(value, dict):
        pieces.append("{")
        for key, item in value.items():
            pieces.append(separator + _json_key(key))
            _json_pieces(item, inner, pieces)
            separator = "," + inner
        pieces.append(indent + "}")
    else:
        pieces.append("[")
        for item in value:
            pieces.append(separator)
            _json_pieces(item, inner, pieces)
            separator = "," + inner
        pieces.append(indent + "]")


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def _save_record(out, record, written=None):
    """Write a system's files; the record goes last, so it vouches for the others.

    ``written``: {file name: SHA-256} of the system's files already written (the pages
    phase adds its pages to the fit's files)."""
    folder = out / "systems" / record["key"]
    files = dict(written or {})
    contents = dict(record["report"] or {})
    if record["document"] is not None and "result.json" not in files:
        contents["result.json"] = _json_text(record["document"]).encode()
    for name, content in sorted(contents.items()):
        write_atomic(folder / name, content)
        files[name] = hashlib.sha256(content).hexdigest()
    kept = {k: v for k, v in record.items() if k not in ("document", "report")}
    kept["files"] = dict(sorted(files.items()))
    kept["summary"] = _summary_row(record)
    write_atomic(folder / "batch.json", _json_text(kept))
    return kept


def _load_record(out, key):
    """A saved record with its result document, and the files it lists."""
    folder = out / "systems" / key
    record = json.loads((folder / "batch.json").read_text(encoding="utf-8"))
    written = record.pop("files")
    record.pop("summary", None)
    record["document"] = (json.loads((folder / "result.json").read_text(encoding="utf-8"))
                          if "result.json" in written else None)
    record["report"] = None
    record.setdefault("cpu_seconds", {})          # a record from before the step times
    return record, written


def _load_done(out, key, digest):
    """(record, note) of a system on resume.

    The record when the system was done with the same inputs (``input_hash``), its files
    are the ones it wrote (SHA-256 of each) and its result document passes
    ``result.load_result``; else None, with a note saying why a finished system is fitted
    again (no note when it never finished or its inputs changed).
    """
    from .result import load_result

    folder = out / "systems" / key
    path = folder / "batch.json"
    if not path.exists():
        return None, None
    try:
        saved = json.loads(path.read_text(encoding="utf-8"))   # the batch's own record
        done = saved.get("status") == "done" and saved.get("input_hash") == digest
        files = saved["files"] if done else {}
        if not isinstance(files, dict):
            raise TypeError("'files' is not an object")
    except (OSError, ValueError, KeyError, TypeError, AttributeError) as exc:
        return None, f"{path} cannot be read ({exc})"
    if not done:
        return None, None
    for name, sha in files.items():
        try:
            intact = hashlib.sha256((folder / name).read_bytes()).hexdigest() == sha
        except OSError:
            intact = False
        if not intact:
            return None, f"{folder / name} is missing or not the file the batch wrote"
    if "result.json" in files:
        try:
            load_result(folder / "result.json")
        except InputError as exc:
            return None, str(exc)
    return saved, None


# ----------------------------------------------------------------------------- summary

_SUMMARY_COLUMNS = (
    ("rank", int, ""), ("id", str, ""), ("verdict", str, ""), ("status", str, ""),
    ("n_new", int, ""), ("chi2_new", float, ""), ("dof_new", int, ""),
    ("reduced_chi2_new", float, ""), ("p_value", float, ""), ("p_value_inflated", float, ""),
    ("p_systematic", float, ""), ("decided_by", str, ""), ("p_decisive", float, ""), ("mean_z_theta", float, ""), ("mean_z_rho", float, ""),
    ("fitted", bool, ""), ("P", float, "yr"), ("P_err", float, "yr"), ("e", float, ""),
    ("e_err", float, ""), ("a", float, "arcsec"), ("a_err", float, "arcsec"),
    ("reduced_chi2_fit", float, ""), ("max_element_change_sigma", float, ""),
    ("max_separation_arcsec", float, "arcsec"), ("max_separation_sigma", float, ""),
    ("mass_msun", float, "solMass"), ("mass_low_msun", float, "solMass"),
    ("mass_high_msun", float, "solMass"),
    ("n_warnings", int, ""), ("warnings", str, ""),
    ("seed", int, ""), ("link", str, ""), ("reason", str, ""), ("error", str, ""))


def _summary_row(record):
    """Flat summary values of a record (NaN / '' where not applicable)."""
    nan = float("nan")
    row = {"id": record["id"], "verdict": record["verdict"] or "", "status": record["status"],
           "fitted": record["fitted"], "seed": record["seed"], "error": record["error"] or ""}
    rev = record["revision"] or {}
    for key in ("n_new", "dof_new"):
        row[key] = int(rev.get(key, 0))
    row["decided_by"] = rev.get("decided_by", "")
    for key in ("chi2_new", "reduced_chi2_new", "p_value", "p_value_inflated", "p_systematic",
                "p_decisive", "mean_z_theta", "mean_z_rho"):
        row[key] = float(rev.get(key, nan))
    doc = record.get("document") or {}
    elements = doc.get("elements", {})
    for key in ("P", "e", "a"):
        entry = elements.get(key) or {}
        row[key] = float(entry.get("value", nan))
        row[f"{key}_err"] = nan if entry.get("error") is None else float(entry["error"])
    row["reduced_chi2_fit"] = float(doc.get("statistics", {}).get("reduced_chi2", nan))
    comp = record["comparison"] or {}
    changes = [abs(v["n_sigma"]) for v in comp.get("elements", {}).values()
               if v["n_sigma"] is not None]
    row["max_element_change_sigma"] = max(changes) if changes else nan
    row["max_separation_arcsec"] = float(comp.get("max_separation_arcsec", nan))
    row["max_separation_sigma"] = float(comp.get("max_separation_sigma", nan))
    total = (doc.get("mass") or {}).get("total") or {}
    for key, name in (("value", "mass_msun"), ("low", "mass_low_msun"),
                      ("high", "mass_high_msun")):
        row[name] = nan if total.get(key) is None else float(total[key])
    row["n_warnings"] = len(record.get("warnings") or [])
    row["warnings"] = "; ".join(record.get("warnings") or [])
    row["link"] = ""
    row["reason"] = rev.get("reason", "")
    return row


def urgency_class(summary):
    """A system's class in ``URGENCY``: its verdict, but 'failed' for a failure unless the
    verdict is contradicted or drifting (reached before the failure)."""
    verdict = summary["verdict"] if summary["verdict"] else "failed"
    if summary["status"] == "failed" and verdict not in ("contradicted", "drifting"):
        verdict = "failed"
    return verdict


def _urgency(summary):
    """Sort key: verdict class (``URGENCY``), then reduced chi2 of the new data, worst first."""
    red = summary["reduced_chi2_new"]
    return (URGENCY.index(urgency_class(summary)), -(red if np.isfinite(red) else 0.0),
            summary["id"])


# ----------------------------------------------------------------------------- execution

def _failed_record(entry, options, error=None):
    """Record of a system that cannot even start (its problem is the reason)."""
    return {"id": entry.id, "key": system_key(entry.id), "line": entry.line,
            "manifest_row": dict(entry.fields), "seed": system_seed(options.seed, entry.id),
            "status": "failed", "error": error or entry.problem, "verdict": None, "revision": None,
            "fitted": False, "fit_note": None, "document": None, "comparison": None,
            "report": None, "warnings": [], "seconds": 0.0, "epoch_scale": None,
            "wants_page": False, "cpu_seconds": {},
            "previous": None if entry.previous is None else {
                "elements": entry.previous.to_keys(), "errors": dict(entry.previous_errors)}}


#: What a worker sends back of a saved record: enough for the progress line, the summary
#: row and the pages phase; the rest stays in the system's batch.json.
_SHORT_KEYS = ("id", "key", "status", "verdict", "fitted", "fit_note", "error", "seconds",
               "wants_page", "cpu_seconds", "files", "summary")


def _short(saved, document=None):
    """The short record; with the result ``document``, also what summary.tex takes of it
    (``batch_summary.latex_part``), so the summary need not read result.json back."""
    from .batch_summary import latex_part
    short = {k: saved.get(k) for k in _SHORT_KEYS}
    if document is not None:
        short["latex"] = latex_part(document)
    return short


def _chunks(n, workers, most=16):
    """Index chunks: a few per worker and at most ``most`` systems each, so a worker's
    start-up and each transfer serve many systems while an interrupt loses little work.
    The last 2 x workers chunks' systems go in chunks a quarter the size: the workers then
    finish together instead of one idling while the other ends a whole chunk."""
    size = max(1, min(most, n // (4 * workers)))
    tail = min(n, 2 * workers * size)
    small = max(1, size // 4)
    return ([list(range(k, min(n - tail, k + size))) for k in range(0, n - tail, size)]
            + [list(range(k, min(n, k + small))) for k in range(n - tail, n, small)])


def _fit_chunk(items, options, out):
    """Worker: each (entry, input hash) processed and its files written; short records.

    A second thread writes each system's files while the next one is fitted: a synced
    write mostly waits for the disk. The chunk ends when its last files are written; a
    failed write stops it before the next system is handed to the writer."""
    from concurrent.futures import ThreadPoolExecutor
    saved = []
    with ThreadPoolExecutor(1, thread_name_prefix="orbweigh-writer") as writer:
        for entry, digest in items:
            record = process_system(entry, options)
            _raise_failed_write(saved)
            saved.append(writer.submit(_store, out, record, digest))
        return [future.result() for future in saved]


def _raise_failed_write(saved):
    """Raise the error of the first save that failed (the writer saves in order)."""
    for future in saved:
        if future.done() and future.exception() is not None:
            raise future.exception()


def _store(out, record, digest):
    record["input_hash"] = digest
    started = time.thread_time()
    short = _short(_save_record(out, record), record["document"])
    short["cpu_seconds"] = dict(short["cpu_seconds"], save=time.thread_time() - started)
    return short


def _page_chunk(keys, out):
    """Worker: the pages of each system, made from its saved files (see _add_pages)."""
    return [_add_pages(out, key) for key in keys]


def _add_pages(out, key):
    """The review page (and the fit's report) of a saved system; its record is written
    again, last, listing the pages. A page that fails fails its system, with the reason."""
    record, written = _load_record(out, key)
    record["report"] = _pages(record)
    record["status"] = "failed" if record["error"] else "done"
    return _short(_save_record(out, record, written), record["document"])


def _collect_chunk(future, entries, options):
    """Records of a finished chunk; a lost worker fails only its systems.

    A failed write (full disk, refused target) is fatal: it stops the batch."""
    try:
        return future.result()
    except OutputError:
        raise
    except Exception as exc:  # worker killed, out of memory, cluster gone: record why
        return [_failed_record(e, options, f"worker: {type(exc).__name__}: {exc}")
                for e in entries]


def _worker_start(parent_pid):
    """Worker set-up: Ctrl-C is the parent's to handle (it stops the pool), and a worker
    whose parent died (SIGKILL) exits instead of waiting for tasks that never come."""
    import signal
    import threading
    signal.signal(signal.SIGINT, signal.SIG_IGN)

    def watch():
        while os.getppid() == parent_pid:
            time.sleep(0.5)
        os._exit(1)
    threading.Thread(target=watch, daemon=True, name="orbweigh-parent-watch").start()


def _stop_pool(pool):
    """Stop a pool at once: drop the queue and end the workers (the pool offers no public
    way to end running tasks, hence its process table, read before shutdown clears it)."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        process.terminate()
    for process in processes:
        process.join(5.0)


@contextlib.contextmanager
def _executor(workers, scheduler):
    """Where the work runs: None (this process), a local process pool or a Dask client;
    a pool is stopped at once on any error or Ctrl-C in the body."""
    if scheduler:
        with _dask_client(scheduler) as client:
            yield client
        return
    if workers == 1:
        yield None
        return
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    # 'spawn': a forked child would inherit the progress bar's thread and any lock it holds
    pool = ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("spawn"),
                               initializer=_worker_start, initargs=(os.getpid(),))
    try:
        yield pool
    except BaseException:  # Ctrl-C, a fatal write error, the consumer gone: stop now
        _stop_pool(pool)
        raise
    pool.shutdown()


def _dask_client(address):
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError("--scheduler needs dask.distributed, which is not installed: "
                         "pip install 'orbweigh[dask]' (or drop --scheduler to use local "
                         "worker processes)") from None
    try:
        return Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address!r} ({exc}); start one "
                         "with 'dask scheduler' and workers with 'dask worker ADDRESS'") from None


def _n_workers(executor, workers):
    if executor is None or not hasattr(executor, "scheduler_info"):
        return workers
    return max(1, len(executor.scheduler_info().get("workers", {})))


def _completed(executor, n_workers, func, chunks, *args):
    """Yield (chunk, future) as ``func(chunk, *args)`` finishes for each chunk.

    A few chunks per worker are in flight at a time (``_IN_FLIGHT``): the queue of a pool
    or a Dask scheduler then holds a bounded number of tasks, however long the catalogue.
    """
    if executor is None:
        from concurrent.futures import Future
        for chunk in chunks:
            future = Future()
            try:
                future.set_result(func(chunk, *args))
            except Exception as exc:
                future.set_exception(exc)
            yield chunk, future
        return
    if hasattr(executor, "scheduler_info"):            # Dask
        from dask.distributed import wait

        def submit(chunk):
            return executor.submit(func, chunk, *args, pure=False)
    else:
        from concurrent.futures import wait

        def submit(chunk):
            return executor.submit(func, chunk, *args)
    waiting, running = iter(chunks), {}
    try:
        while True:
            for chunk in waiting:
                running[submit(chunk)] = chunk
                if len(running) >= _IN_FLIGHT * n_workers:
                    break
            if not running:
                return
            for future in wait(list(running), return_when="FIRST_COMPLETED").done:
                yield running.pop(future), future
    finally:
        if hasattr(executor, "cancel"):
            executor.cancel(list(running))


_IN_FLIGHT = 4    # chunks per worker submitted ahead


def run_batch(manifest, out, options=None, workers=None, scheduler=None, resume=False,
              progress=True):
    """Check, fit and compare every system of a manifest; write the outputs.

    Parameters
    ----------
    manifest : str or Path
        The manifest (see ``orbweigh.manifest``).
    out : str or Path
        Output folder (created when missing).
    options : BatchOptions, optional
    workers : int, optional
        Local worker processes (default: CPU count); 1 runs in this process.
    scheduler : str, optional
        Address of a Dask distributed scheduler; when given the systems run there.
    resume : bool
        Skip systems already done with the same inputs.
    progress : bool
        One line per system on stdout and a progress bar on stderr.

    Returns
    -------
    batch_summary.SummaryCounts
        Systems, failures, warnings and verdicts, counted; the summary itself, most urgent
        first, is in ``out``/summary.ecsv (a catalogue's rows are not held in memory).
    """
    options = options or BatchOptions()
    if options.pages not in ("flagged", "all", "none"):
        raise InputError(f"pages must be 'flagged', 'all' or 'none', got {options.pages!r}")
    out = Path(out)
    entries = read_manifest(manifest)
    workers = workers or os.cpu_count() or 1
    if workers < 1:
        raise InputError(f"--workers must be at least 1, got {workers}")
    with _folder_lock(out):
        return _run_locked(manifest, out, entries, options, workers, scheduler, resume,
                           progress)


def _run_locked(manifest, out, entries, options, workers, scheduler, resume, progress):
    from tqdm import tqdm

    from .batch_summary import write_summary
    bar = tqdm(total=len(entries), disable=not progress, file=_bar_stream(), unit="system")
    stream = out / STREAM_NAME
    pending = {}          # key -> input hash: handed to a worker, not heard back from yet
    try:
        with LineLog(stream) as rows, _executor(workers, scheduler) as executor:
            todo, paged = _prepare(out, entries, options, resume, rows, bar)
            _import_for_summary()
            paged += _fit_phase(out, todo, options, executor, workers, rows, bar, pending)
            bar.close()
            _page_phase(out, paged, executor, workers, rows, pending, progress)
    except KeyboardInterrupt:
        bar.close()
        with LineLog(stream, append=True) as rows:
            for saved in _rows_on_disk(out, pending):
                rows.add(_stream_row(saved))
        write_summary(out, stream, manifest, options, interrupted=True)
        stream.unlink(missing_ok=True)
        raise
    except BaseException:         # a failed write: the previous summary stays as it was
        stream.unlink(missing_ok=True)
        raise
    counts = write_summary(out, stream, manifest, options)
    stream.unlink()
    return counts


def _import_for_summary():
    """Import what the summary needs (astropy's tables, the report package: 0.25 s) in a
    thread while the workers start and fit: after a Ctrl-C the summary then need not wait
    for imports on a busy machine. An import still running when the summary starts is
    waited for by the import system itself."""
    import threading

    def load():
        import astropy.table  # noqa: F401

        from .report import batch_index, tables  # noqa: F401
    threading.Thread(target=load, daemon=True, name="orbweigh-summary-imports").start()


#: Summary rows as systems finish (JSON lines), while the batch runs; read back for the
#: summary (``batch_summary``), then removed. Only the main process writes it.
STREAM_NAME = "summary.running.jsonl"


def _stream_row(record):
    return json.dumps({k: record[k] for k in ("key", "files", "summary", "latex")
                       if k in record}, allow_nan=True, default=_json_default)


def _rows_on_disk(out, pending):
    """Rows of the systems whose worker wrote their record but was stopped before it
    reported back (after Ctrl-C); the temporary files of a cut write are removed."""
    rows = []
    for key, digest in pending.items():
        folder = out / "systems" / key
        discard_temporaries(folder)
        try:
            saved = json.loads((folder / "batch.json").read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if saved.get("input_hash") == digest and "summary" in saved:
            rows.append(saved)
    return rows


def _prepare(out, entries, options, resume, rows, bar):
    """Systems to fit as [(entry, input hash)] and those owed pages as [(key, input hash)];
    the systems done before (``resume``) and those that cannot start are accounted now."""
    todo, paged = [], []
    for entry in entries:
        digest = None
        if entry.problem is None:
            try:
                digest = input_hash(entry, options)
            except OSError as exc:
                entry.problem = (f"log: cannot read {_as_written(entry, exc.filename)} "
                                 f"({exc.strerror})")
        saved, note = (_load_done(out, system_key(entry.id), digest)
                       if resume and digest else (None, None))
        if note is not None:
            bar.write(f"orbweigh batch: note: {entry.id}: {note}; fitting it again",
                      file=sys.stderr)
        if saved is not None:
            _announce(bar, saved, resumed=True)
            rows.add(_stream_row(saved))
            if saved.get("wants_page") and "review.html" not in saved["files"]:
                paged.append((saved["key"], digest))
        elif entry.problem is not None:
            record = _store(out, _failed_record(entry, options), None)
            _announce(bar, record)
            rows.add(_stream_row(record))
        else:
            todo.append((entry, digest))
    return todo, paged


def _fit_phase(out, todo, options, executor, workers, rows, bar, pending):
    """Check, fit and save every system in chunks; returns the keys that want pages."""
    n_workers = _n_workers(executor, workers)
    chunks = [[todo[k] for k in c] for c in _chunks(len(todo), n_workers)]
    pending.update((system_key(entry.id), digest) for entry, digest in todo)
    paged = []
    for chunk, future in _completed(executor, n_workers, _fit_chunk, chunks, options, out):
        records = _collect_chunk(future, [entry for entry, _ in chunk], options)
        for (_, digest), record in zip(chunk, records):
            if "summary" not in record:          # its worker was lost: saved here
                record = _store(out, record, digest)
            rows.add(_stream_row(record))
            pending.pop(record["key"], None)
            _announce(bar, record)
            if record["wants_page"]:
                paged.append((record["key"], digest))
    return paged


def _page_phase(out, paged, executor, workers, rows, pending, progress):
    """The pages of the systems that want them ([(key, input hash)]), after the fits, in
    parallel."""
    if not paged:
        return
    from tqdm import tqdm
    pending.update(paged)
    keys = [key for key, _ in paged]
    n_workers = _n_workers(executor, workers)
    chunks = [[keys[k] for k in c] for c in _chunks(len(keys), n_workers, most=4)]
    with tqdm(total=len(keys), disable=not progress, file=_bar_stream(), unit="page",
              desc="pages") as bar:
        for chunk, future in _completed(executor, n_workers, _page_chunk, chunks, out):
            for record in _collect_pages(future, chunk, out):
                rows.add(_stream_row(record))
                pending.pop(record["key"], None)
                bar.update(1)


def _collect_pages(future, keys, out):
    """Records of a finished chunk of pages; a lost worker fails only its systems."""
    try:
        return future.result()
    except OutputError:
        raise
    except Exception as exc:
        records = []
        for key in keys:
            record, written = _load_record(out, key)
            record["error"] = f"pages: worker: {type(exc).__name__}: {exc}"
            record["status"] = "failed"
            records.append(_short(_save_record(out, record, written)))
        return records


class _folder_lock:
    """One batch at a time per output folder: ``.orbweigh-batch.lock`` holds the pid.

    A lock whose process is gone (killed batch) is taken over, with a note on stderr.
    """

    def __init__(self, out):
        self.path = Path(out) / ".orbweigh-batch.lock"

    def __enter__(self):
        self.path.parent.mkdir(parents=True, exist_ok=True)
        for _ in range(2):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                holder = self._holder()
                if holder is not None and _alive(holder):
                    raise InputError(
                        f"{self.path.parent}: another batch (process {holder}) is writing "
                        f"this folder; wait for it, or choose another --out (the lock is "
                        f"{self.path})") from None
                print(f"orbweigh batch: note: taking over the lock {self.path} left by "
                      f"process {holder if holder is not None else '?'}, which no longer "
                      "runs", file=sys.stderr)
                self.path.unlink(missing_ok=True)
                continue
            with os.fdopen(fd, "w") as fh:
                fh.write(f"{os.getpid()}\n")
            return self
        raise InputError(f"{self.path.parent}: cannot take the lock {self.path}; another "
                         "batch keeps taking it")

    def _holder(self):
        try:
            return int(self.path.read_text().split()[0])
        except (OSError, ValueError, IndexError):
            return None

    def __exit__(self, *exc):
        if self._holder() == os.getpid():
            self.path.unlink(missing_ok=True)


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:   # someone else's process: alive
        return True
    return True


def _value_error(value, error):
    from .formatting import value_error
    return value_error(value, None if math.isnan(error) else error)


def _bar_stream():
    """Where the progress bar is drawn: the terminal, or nowhere when stderr is a file or a
    pipe (a log would fill with carriage-return redraws); the per-system lines still go
    to stdout either way."""
    return sys.stderr if sys.stderr.isatty() else _Discard()


class _Discard(io.TextIOBase):
    """A text stream that keeps nothing (no file left open at exit, unlike os.devnull)."""

    def write(self, text):
        return len(text)


def _announce(bar, record, resumed=False):
    """One line for a finished system, written above the progress bar."""
    if not bar.disable:
        s = record["summary"]
        what = record["verdict"] or ""
        if record["fitted"]:
            what += "; refit " + ", ".join(
                f"{k} = {_value_error(s[k], s[f'{k}_err'])}{unit}"
                for k, unit in (("P", " yr"), ("e", ""), ("a", "\"")))
        elif record.get("fit_note"):
            what += f"; {record['fit_note']}"
        if record["error"]:
            what += f"; FAILED: {record['error']}"
        from .formatting import number
        tail = (" (done before, inputs unchanged)" if resumed
                else f" ({number(record['seconds'], 2)} s)")     # 0.021 s, not 0.0 s
        bar.write(f"[{bar.n + 1}/{bar.total}] {record['id']}: {what.lstrip('; ')}{tail}",
                  file=sys.stdout)
    bar.update(1)
