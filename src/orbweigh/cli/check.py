"""``orbweigh check LOG``: what was read from a measurement log, line by line.

Prints the accounting of every data line (used, excluded by a flag, rejected with the
reason), the epoch span and scale, the techniques, the rows that took default sigmas,
whether position angles were precessed to J2000, and suspicious points (rules in
``measurements.suspicious_rows``). ``--json PATH|-`` writes the same as JSON. Exit status
0 when at least one row is usable, 2 otherwise or on a problem of the whole file.
"""
from __future__ import annotations

import json
import sys

import numpy as np

from ..files import write_atomic
from .common import add_log_arguments, load_log

__all__ = ["add_arguments", "run", "check_report", "format_report"]


def add_arguments(parser):
    add_log_arguments(parser)
    parser.add_argument("--json", metavar="PATH|-", help="write the report as JSON ('-' for "
                        "standard output, which then replaces the printed report)")


def _epochs(ms):
    """First and last used epoch as written, span [Julian yr], scale and any note."""
    use = np.flatnonzero(ms.usable)
    out = {"scale": ms.epoch_scale, "note": ms.meta.get("epoch_scale_note")}
    if use.size:
        first, last = use[np.argmin(ms.epoch_yr[use])], use[np.argmax(ms.epoch_yr[use])]
        out.update(first=str(ms.epoch_text[first]), last=str(ms.epoch_text[last]),
                   first_line=int(ms.line[first]), last_line=int(ms.line[last]),
                   span_yr=float(ms.epoch_yr[last] - ms.epoch_yr[first]))
    return out


def _rows(ms):
    keys = ("epoch_yr", "theta_deg", "theta_input_deg", "rho_arcsec", "sigma_theta_deg",
            "sigma_rho_arcsec", "weight")
    return [{"line": int(ms.line[k]), "epoch": str(ms.epoch_text[k]),
             **{key: float(getattr(ms, key)[k]) for key in keys},
             "technique": str(ms.technique[k]), "sigma_defaulted": bool(ms.sigma_defaulted[k]),
             "excluded": bool(ms.excluded[k]), "flag": str(ms.flag[k]), "note": str(ms.note[k])}
            for k in range(len(ms))]


def check_report(ms):
    """Everything ``check`` reports, as a JSON-ready dict."""
    from ..measurements import suspicious_rows

    n_used, n_excl = int(ms.usable.sum()), int(ms.excluded.sum())
    data = int(ms.n_lines)
    total = int(ms.meta.get("file_lines", data))
    unrecognised = sorted({str(w) for w, c in zip(ms.technique_input, ms.technique)
                           if c == "unknown" and w.strip().lower() not in ("", "unknown")})
    return {
        "file": ms.source, "format": ms.meta.get("format"),
        "header_line": ms.meta.get("header_line"), "columns": ms.meta.get("columns", {}),
        "units": ms.meta.get("units", {}), "ignored_columns": ms.meta.get("ignored_columns", []),
        "file_lines": {"total": total, "data": data, "header_comment_blank": total - data},
        "accounting": {"data_lines": data, "used": n_used, "excluded": n_excl,
                       "rejected": len(ms.rejected),
                       "adds_up": data == n_used + n_excl + len(ms.rejected)},
        "epochs": _epochs(ms),
        "techniques": {t: int(c) for t, c in zip(*np.unique(ms.technique, return_counts=True))},
        "unrecognised_techniques": unrecognised,
        "default_sigma_lines": [int(v) for v in ms.line[ms.sigma_defaulted]],
        "precession": ms.meta.get("precession", {"applied": False}),
        "excluded": [{"line": int(v), "flag": str(f)}
                     for v, f in zip(ms.line[ms.excluded], ms.flag[ms.excluded])],
        "rejected": [{"line": p.line, "column": p.column, "reason": p.reason}
                     for p in ms.rejected],
        "suspicious": [{"line": s.line, "rule": s.rule, "message": s.message}
                       for s in suspicious_rows(ms)],
        "rows": _rows(ms),
    }


def _lines_text(lines):
    return ", ".join(str(v) for v in lines) if lines else "none"


def _precession_text(p):
    if not p.get("applied"):
        return f"not applied: {p.get('reason', 'no target coordinates')}"
    text = (f"applied, theta referred to equinox J2000 (target RA {p['target_ra_deg']:.5f} deg, "
            f"Dec {p['target_dec_deg']:+.5f} deg from {p['source']}; {p['rows_precessed']} rows, "
            f"largest change {p['max_abs_change_deg']:.3f} deg)")
    if p.get("rows_space_not_precessed"):
        text += f"; {p['rows_space_not_precessed']} space rows kept as given (ICRS)"
    return text


def format_report(r):
    """The report of ``check_report`` as text."""
    acc, ep, fl = r["accounting"], r["epochs"], r["file_lines"]
    out = [f"Log             {r['file']} ({r['format']}, header on line {r['header_line']})",
           f"File lines      {fl['total']} = {fl['header_comment_blank']} header/comment/blank "
           f"+ {fl['data']} data lines",
           f"Data lines      {acc['data_lines']} = {acc['used']} used + {acc['excluded']} "
           f"excluded by flag + {acc['rejected']} rejected  "
           + ("(every data line is accounted for)" if acc["adds_up"] else "(DOES NOT ADD UP)")]
    if "first" in ep:
        out.append(f"Epochs          {ep['first']} (line {ep['first_line']}) to {ep['last']} "
                   f"(line {ep['last_line']}), span {ep['span_yr']:.2f} yr; scale {ep['scale']}"
                   + (" (plain decimal years are Besselian)" if ep["scale"] == "besselian" else ""))
    else:
        out.append("Epochs          no usable rows")
    if ep.get("note"):
        out.append(f"                note: {ep['note']}")
    techniques = ", ".join(f"{t} {n}" for t, n in r["techniques"].items()) or "none"
    out.append(f"Techniques      {techniques} (used and excluded rows)")
    if r["unrecognised_techniques"]:
        out.append(f"                not in the vocabulary, treated as 'unknown': "
                   f"{', '.join(r['unrecognised_techniques'])}")
    out.append(f"Default sigmas  {len(r['default_sigma_lines'])} rows took the technique's "
               f"default sigma: lines {_lines_text(r['default_sigma_lines'])}")
    out.append(f"Precession      {_precession_text(r['precession'])}")
    units = ", ".join(f"{c} in {u}" for c, u in r["units"].items())
    if units:
        out.append(f"Units           {units} (converted to deg / arcsec)")
    if r["ignored_columns"]:
        out.append(f"Ignored columns {', '.join(r['ignored_columns'])}")
    out.append(f"\nExcluded by flag ({len(r['excluded'])}):")
    out += [f"  line {e['line']}: flag '{e['flag']}'" for e in r["excluded"]] or ["  none"]
    out.append(f"\nRejected ({len(r['rejected'])}):")
    out += [f"  line {p['line']}" + (f", column '{p['column']}'" if p["column"] else "")
            + f": {p['reason']}" for p in r["rejected"]] or ["  none"]
    out.append(f"\nSuspicious ({len(r['suspicious'])}; advice only, the rows stay in use):")
    out += [f"  line {s['line']} [{s['rule']}]: {s['message']}" for s in r["suspicious"]] \
        or ["  none"]
    return "\n".join(out)


def run(args):
    ms = load_log(args)
    report = check_report(ms)
    if args.json == "-":
        json.dump(report, sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(format_report(report))
        if args.json:
            write_atomic(args.json, json.dumps(report, indent=2) + "\n", [args.log])
    if report["accounting"]["used"] == 0:
        print(f"orbweigh check: error: {ms.source}: no usable rows ({len(ms.rejected)} "
              f"rejected, {int(ms.excluded.sum())} excluded by flag); fix the rows listed "
              "above", file=sys.stderr)
        return 2
    return 0
