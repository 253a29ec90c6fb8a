"""Many systems at once: revision verdicts, refits, and parallel execution.

``process_system(entry, options)`` does everything for one system of the manifest and
returns a plain, picklable record; it never raises. ``run_batch`` runs it over the
manifest on a local process pool (default), in this process (``workers=1``), or on a
Dask distributed cluster (``scheduler=ADDRESS``) - the same function in every case - and
writes the outputs as records arrive.

Determinism: each system gets its own seed, derived from the batch seed and the system
id by SHA-256 (never Python's salted ``hash``), so the results do not depend on the
worker count or on the order in which systems finish.

Outputs in the output folder (each written to a temporary file, then renamed, so an
interrupted batch leaves no half-written file)::

    systems/<key>/result.json   the fit (schema orbweigh.result/1), when fitted
    systems/<key>/report.html   its report, when fitted
    systems/<key>/batch.json    the record: verdict, numbers, comparison, errors, hash
    summary.ecsv, summary.csv   one row per system, most urgent first
    index.html                  the same, linking each system's report

``resume`` skips a system whose ``batch.json`` says done with the same input hash:
SHA-256 of the manifest row, the bytes of its log (and RV log), the batch options and
the orbweigh version. Workers read the logs by path: on a remote Dask cluster the
manifest folder must be visible to the workers at the same path.
"""
from __future__ import annotations

import hashlib
import json
import os
import re
import sys
import tempfile
import time
import traceback
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from .errors import InputError, OrbweighError
from .files import write_atomic
from .manifest import read_manifest

__all__ = ["BatchOptions", "system_seed", "system_key", "input_hash", "process_system",
           "run_batch", "URGENCY"]

#: Order of the summary: most urgent first ('failed' = no verdict because of an error).
URGENCY = ("contradicted", "drifting", "failed", "no previous orbit", "no new data",
           "consistent")
_JULIAN_YEAR_D = 365.25


@dataclass(frozen=True)
class BatchOptions:
    """Choices of a batch run (part of every system's input hash).

    Attributes
    ----------
    seed : int
        Batch seed; each system's seed is ``system_seed(seed, id)``.
    only_contradicted : bool
        Fit only systems whose old orbit the new data contradict.
    report : bool
        Write an HTML report for every fitted system.
    """

    seed: int = 0
    only_contradicted: bool = False
    report: bool = True


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
    """Run one step; on failure record '<step>: <reason>' and return None."""
    try:
        return func(*args, **kwargs)
    except OrbweighError as exc:
        record["error"] = f"{name}: {exc}"
    except Exception as exc:  # a bug must not stop the batch; keep the evidence
        where = traceback.extract_tb(exc.__traceback__)[-1]
        record["error"] = (f"{name}: internal error {type(exc).__name__}: {exc} (at "
                           f"{Path(where.filename).name}, line {where.lineno})")
    return None


def process_system(entry, options):
    """Check, fit and compare one system; never raises.

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
        ``document`` (result document or None), ``comparison``, ``report``
        ({file name: bytes} or None), ``seconds``.
    """
    started = time.perf_counter()
    record = _failed_record(entry, options)
    if entry.problem is None:
        _process(entry, options, record["seed"], record)
    record["status"] = "failed" if record["error"] else "done"
    record["seconds"] = time.perf_counter() - started
    return record


def _process(entry, options, seed, record):
    from .measurements import read_measurements
    data = _stage(record, "log", read_measurements, entry.log,
                  target_ra_deg=entry.ra_deg, target_dec_deg=entry.dec_deg)
    if data is None:
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
    if check is not None:
        record["comparison"] = _stage(record, "comparison", _compare, entry, doc, data, check)
    if options.report and not record["error"]:
        record["report"] = _stage(record, "report", _report_files, doc)


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
    combined = fit_combined(solution, read_velocities(entry.rv_log))
    add_to_document(doc, combined, combined_blocks(combined, parallax=entry.parallax_mas,
                                                   seed=seed))


def _compare(entry, doc, data, check):
    """Old against new: the new elements are the document's (combined ones with an RV log)."""
    from .reductions import epoch_unit
    from .result import elements_from_document
    from .revision import compare_orbits, typical_sigma_arcsec
    usable = data.usable
    new = np.array([r["new"] for r in check.residuals]) & usable
    errors = {k: v["error"] for k, v in doc["elements"].items() if v.get("error") is not None}
    if "T" in errors and epoch_unit(doc["elements"]["T"].get("scale", "besselian")) == "d":
        errors["T"] /= _JULIAN_YEAR_D
    return compare_orbits(entry.previous, elements_from_document(doc),
                          start_yr=float(data.epoch_yr[usable].max()),
                          sigma_arcsec=typical_sigma_arcsec(data, new if new.any() else usable),
                          old_errors=entry.previous_errors, new_errors=errors)


def _report_files(doc):
    """The system's report as {file name: bytes}, made in a scratch folder of the worker.

    Only the HTML (figures embedded) and its tables: separate figure files for 1000
    systems would cost more than the fits.
    """
    from .report import write_report
    with tempfile.TemporaryDirectory(prefix="orbweigh-report-") as scratch:
        written = write_report(doc, scratch, formats=())
        return {name: Path(path).read_bytes() for name, path in written.items()}


# ----------------------------------------------------------------------------- output files



def _json_text(obj):
    return json.dumps(obj, indent=1, allow_nan=True, default=_json_default) + "\n"


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def _save_record(out, record):
    """Write a system's files; the record goes last, so it vouches for the others."""
    folder = out / "systems" / record["key"]
    files = []
    if record["document"] is not None:
        write_atomic(folder / "result.json", _json_text(record["document"]))
        files.append("result.json")
    for name, content in sorted((record["report"] or {}).items()):
        write_atomic(folder / name, content)
        files.append(name)
    kept = {k: v for k, v in record.items() if k not in ("document", "report")}
    kept["files"] = files
    kept["summary"] = _summary_row(record)
    write_atomic(folder / "batch.json", _json_text(kept))
    return kept


def _load_done(out, key, digest):
    """The saved record of a system when done with the same inputs, else None."""
    path = out / "systems" / key / "batch.json"
    try:
        saved = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    files_there = all((path.parent / f).is_file() for f in saved.get("files", []))
    if saved.get("status") == "done" and saved.get("input_hash") == digest and files_there:
        return saved
    return None


# ----------------------------------------------------------------------------- summary

_SUMMARY_COLUMNS = (
    ("rank", int, ""), ("id", str, ""), ("verdict", str, ""), ("status", str, ""),
    ("n_new", int, ""), ("chi2_new", float, ""), ("dof_new", int, ""),
    ("reduced_chi2_new", float, ""), ("p_value", float, ""), ("p_value_inflated", float, ""),
    ("p_systematic", float, ""), ("mean_z_theta", float, ""), ("mean_z_rho", float, ""),
    ("fitted", bool, ""), ("P", float, "yr"), ("P_err", float, "yr"), ("e", float, ""),
    ("e_err", float, ""), ("a", float, "arcsec"), ("a_err", float, "arcsec"),
    ("reduced_chi2_fit", float, ""), ("max_element_change_sigma", float, ""),
    ("max_separation_arcsec", float, "arcsec"), ("max_separation_sigma", float, ""),
    ("mass_msun", float, "solMass"), ("mass_low_msun", float, "solMass"),
    ("mass_high_msun", float, "solMass"),
    ("seed", int, ""), ("link", str, ""), ("reason", str, ""), ("error", str, ""))


def _summary_row(record):
    """Flat summary values of a record (NaN / '' where not applicable)."""
    nan = float("nan")
    row = {"id": record["id"], "verdict": record["verdict"] or "", "status": record["status"],
           "fitted": record["fitted"], "seed": record["seed"], "error": record["error"] or ""}
    rev = record["revision"] or {}
    for key in ("n_new", "dof_new"):
        row[key] = int(rev.get(key, 0))
    for key in ("chi2_new", "reduced_chi2_new", "p_value", "p_value_inflated", "p_systematic",
                "mean_z_theta", "mean_z_rho"):
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
    row["link"] = ""
    row["reason"] = rev.get("reason", "")
    return row


def _urgency(summary):
    """Sort key: verdict class (``URGENCY``), then reduced chi2 of the new data, worst first."""
    verdict = summary["verdict"] if summary["verdict"] else "failed"
    if summary["status"] == "failed" and verdict not in ("contradicted", "drifting"):
        verdict = "failed"
    red = summary["reduced_chi2_new"]
    return URGENCY.index(verdict), -(red if np.isfinite(red) else 0.0), summary["id"]


def _summary_table(records):
    from astropy.table import Table
    rows = []
    for rank, rec in enumerate(sorted(records, key=lambda r: _urgency(r["summary"])), 1):
        row = dict(rec["summary"], rank=rank)
        rows.append(row)
        link = next((f for f in ("report.html", "result.json") if f in rec["files"]),
                    "batch.json")
        row["link"] = f"systems/{rec['key']}/{link}"
    table = Table(rows=[[row[name] for name, _, _ in _SUMMARY_COLUMNS] for row in rows],
                  names=[n for n, _, _ in _SUMMARY_COLUMNS],
                  dtype=[t for _, t, _ in _SUMMARY_COLUMNS]) if rows else Table()
    for name, _, unit in _SUMMARY_COLUMNS:
        if unit and name in table.colnames:
            table[name].unit = unit
    table.meta["description"] = "orbweigh batch summary, most urgent first"
    return table


def _write_summary(out, records, manifest, options):
    import io
    table = _summary_table(records)
    table.meta.update({"manifest": str(manifest), "seed": options.seed,
                       "only_contradicted": options.only_contradicted})
    for fmt, name in (("ascii.ecsv", "summary.ecsv"), ("ascii.csv", "summary.csv")):
        buffer = io.StringIO()
        table.write(buffer, format=fmt)
        write_atomic(out / name, buffer.getvalue())
    write_atomic(out / "index.html", _index_html(table, manifest, options))
    return table


def _index_html(table, manifest, options):
    from html import escape

    def cell(row, name, fmt):
        value = row[name]
        return "" if isinstance(value, float) and not np.isfinite(value) else fmt.format(value)

    head = ("<tr><th>#</th><th>system</th><th>verdict</th><th>new points</th>"
            "<th>&chi;&sup2;/dof new</th><th>p (&sigma;&times;3)</th><th>P [yr]</th>"
            "<th>e</th><th>a [&Prime;]</th><th>max &Delta; element [&sigma;]</th>"
            "<th>max separation, next 10 yr [&Prime;]</th><th>[&sigma;]</th>"
            "<th>mass [M&#8857;]</th><th>error</th></tr>")
    lines = []
    for row in table:
        name = escape(row["id"])
        name = f'<a href="{escape(row["link"])}">{name}</a>'
        verdict = (f'<span title="{escape(row["reason"])}">'
                   f'{escape(row["verdict"] or row["status"])}</span>')
        lines.append("<tr>" + "".join(f"<td>{c}</td>" for c in (
            row["rank"], name, verdict, row["n_new"] or "",
            cell(row, "reduced_chi2_new", "{:.2f}"), cell(row, "p_value_inflated", "{:.2g}"),
            cell(row, "P", "{:.4g}"), cell(row, "e", "{:.3f}"), cell(row, "a", "{:.4g}"),
            cell(row, "max_element_change_sigma", "{:.1f}"),
            cell(row, "max_separation_arcsec", "{:.3g}"),
            cell(row, "max_separation_sigma", "{:.1f}"), cell(row, "mass_msun", "{:.3g}"),
            escape(row["error"]))) + "</tr>")
    counts = {v: int(np.sum(table["verdict"] == v)) for v in URGENCY if len(table)}
    tally = ", ".join(f"{n} {v}" for v, n in counts.items() if n)
    return (f"<!DOCTYPE html>\n<html><head><meta charset='utf-8'><title>orbweigh batch: "
            f"{escape(Path(manifest).name)}</title>\n<style>body{{font-family:sans-serif}}"
            "table{border-collapse:collapse}td,th{border:1px solid #999;padding:2px 6px;"
            "font-size:90%}</style></head><body>\n"
            f"<h1>Batch of {escape(str(manifest))}</h1>\n<p>{len(table)} systems, most urgent "
            f"first: {escape(tally)}. Batch seed {options.seed}. Verdict rule: see "
            "orbweigh.revision (chi&sup2; tests at the 1 % level; contradicted = rejected even "
            f"with sigmas tripled).</p>\n<table>\n{head}\n" + "\n".join(lines)
            + "\n</table></body></html>\n")


# ----------------------------------------------------------------------------- execution

def _failed_record(entry, options):
    """Record of a system that cannot even start (its problem is the reason)."""
    return {"id": entry.id, "key": system_key(entry.id), "line": entry.line,
            "manifest_row": dict(entry.fields), "seed": system_seed(options.seed, entry.id),
            "status": "failed", "error": entry.problem, "verdict": None, "revision": None,
            "fitted": False, "fit_note": None, "document": None, "comparison": None,
            "report": None, "seconds": 0.0}


def _collect(future, entry, options):
    """A finished future's record; a lost worker fails only its system."""
    try:
        return future.result()
    except Exception as exc:  # worker killed, out of memory, cluster gone: record why
        record = _failed_record(entry, options)
        record["error"] = f"worker: {type(exc).__name__}: {exc}"
        return record


def _run_local(entries, options, workers):
    """Yield (index, record) as systems finish on a local process pool (or inline)."""
    if workers == 1:
        for k, entry in enumerate(entries):
            yield k, process_system(entry, options)
        return
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    # 'spawn': a forked child would inherit the progress bar's thread and any lock it holds
    with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("spawn")) as pool:
        futures = {pool.submit(process_system, e, options): k for k, e in enumerate(entries)}
        for future in as_completed(futures):
            k = futures[future]
            yield k, _collect(future, entries[k], options)


def _run_dask(entries, options, address):
    """Yield (index, record) as systems finish on a Dask distributed cluster."""
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("--scheduler needs dask.distributed, which is not installed: "
                         "pip install 'orbweigh[dask]' (or drop --scheduler to use local "
                         "worker processes)") from None
    try:
        client = Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address!r} ({exc}); start one "
                         "with 'dask scheduler' and workers with 'dask worker ADDRESS'") from None
    with client:
        futures = {client.submit(process_system, e, options, pure=False): k
                   for k, e in enumerate(entries)}
        for future in as_completed(futures):
            k = futures[future]
            yield k, _collect(future, entries[k], options)


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
    astropy.table.Table
        The summary, most urgent first.
    """
    from tqdm import tqdm
    options = options or BatchOptions()
    out = Path(out)
    entries = read_manifest(manifest)
    workers = workers or os.cpu_count() or 1
    if workers < 1:
        raise InputError(f"--workers must be at least 1, got {workers}")
    records, todo, hashes = [None] * len(entries), [], {}
    bar = tqdm(total=len(entries), disable=not progress, file=sys.stderr, unit="system")
    for k, entry in enumerate(entries):
        if entry.problem is None:
            try:
                hashes[k] = input_hash(entry, options)
            except OSError as exc:
                entry.problem = f"log: cannot read {exc.filename} ({exc.strerror})"
        saved = _load_done(out, system_key(entry.id), hashes[k]) if resume and k in hashes \
            else None
        if saved is not None:
            records[k] = saved
            _announce(bar, saved, resumed=True)
        elif entry.problem is not None:
            records[k] = _finish(out, _failed_record(entry, options), None, bar)
        else:
            todo.append(k)
    pending = [entries[k] for k in todo]
    run = (_run_dask(pending, options, scheduler) if scheduler
           else _run_local(pending, options, workers))
    for j, record in run:
        records[todo[j]] = _finish(out, record, hashes[todo[j]], bar)
    bar.close()
    return _write_summary(out, records, manifest, options)


def _finish(out, record, digest, bar):
    record["input_hash"] = digest
    saved = _save_record(out, record)
    _announce(bar, saved)
    return saved


def _announce(bar, record, resumed=False):
    """One line for a finished system, written above the progress bar."""
    if not bar.disable:
        s = record["summary"]
        what = record["verdict"] or ""
        if record["fitted"]:
            what += f"; refit P = {s['P']:.4g} yr, e = {s['e']:.3f}, a = {s['a']:.4g}\""
        elif record.get("fit_note"):
            what += f"; {record['fit_note']}"
        if record["error"]:
            what += f"; FAILED: {record['error']}"
        tail = " (done before, inputs unchanged)" if resumed else f" ({record['seconds']:.1f} s)"
        bar.write(f"[{bar.n + 1}/{bar.total}] {record['id']}: {what.lstrip('; ')}{tail}",
                  file=sys.stdout)
    bar.update(1)
