"""The self-contained HTML report of a result document.

One file, viewable offline: the style sheet is inline, figures are embedded as base64 PNG,
nothing is fetched. Numbers follow the rounding rule of ``tables``.
"""
from __future__ import annotations

import base64
from collections import Counter
from html import escape

from .. import formatting as fmt
from ..elements import ELEMENT_KEYS
from ..reductions import epoch_unit
from ..result import epoch_scale_of
from ..tables import is_number
from . import tables as tb

__all__ = ["render_html"]

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
 color:#22313f;max-width:60rem;margin:1.5rem auto;padding:0 1rem;line-height:1.45}
h1{font-size:1.5rem;margin-bottom:.2rem} h2{font-size:1.15rem;border-bottom:1px solid #c8d3de;
 padding-bottom:.2rem;margin-top:2rem} .meta{color:#5a6b7b;font-size:.9rem}
table{border-collapse:collapse;margin:.6rem 0;font-size:.88rem}
th,td{padding:.2rem .6rem;border-bottom:1px solid #e3e9ef;text-align:left}
th{background:#eef3f7} td.num{text-align:right;font-variant-numeric:tabular-nums}
.warnings{background:#fff4e0;border:2px solid #e07b39;border-radius:6px;padding:.5rem 1rem}
.warnings h2{border:none;margin-top:.3rem;color:#a04a12}
figure{margin:1rem 0} figure img{max-width:100%;height:auto;border:1px solid #e3e9ef}
figcaption{font-size:.85rem;color:#5a6b7b} .scroll{overflow-x:auto} .scroll td{white-space:nowrap}
tr.status-flipped td{background:#f1f1f1} tr.status-outlier td{background:#fdecea}
tr.status-excluded td,tr.status-rejected td{color:#8a8a8a}
footer{margin-top:2rem;font-size:.8rem;color:#5a6b7b}
"""


def _table(header, rows, row_classes=None, numeric=()):
    """HTML table; numbers in the columns listed in ``numeric`` are aligned right."""
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{escape(h)}</th>" for h in header)
           + "</tr></thead>", "<tbody>"]
    for k, row in enumerate(rows):
        cls = f' class="{row_classes[k]}"' if row_classes else ""
        cells = "".join(f'<td class="num">{escape(str(c))}</td>'
                        if j in numeric and is_number(str(c))
                        else f"<td>{escape(str(c))}</td>" for j, c in enumerate(row))
        out.append(f"<tr{cls}>{cells}</tr>")
    return "\n".join(out + ["</tbody></table>"])


def _flatten(mapping, prefix=""):
    """(dotted key, value) pairs of a nested mapping, leaves only."""
    for key, value in mapping.items():
        if isinstance(value, dict):
            yield from _flatten(value, f"{prefix}{key}.")
        else:
            yield f"{prefix}{key}", value


def _plain(value):
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (list, tuple)):
        return ", ".join(_plain(v) for v in value)
    return fmt.number(value)


def _kv_table(mapping, header=("quantity", "value")):
    return _table(header, [(k, _plain(v)) for k, v in _flatten(mapping)], numeric=(1,))


def _element_unit(key, entry, doc):
    if key == "T":
        return f"{entry.get('unit', 'yr')} ({epoch_scale_of(doc)})"
    return entry.get("unit", "")


def _elements_section(doc):
    rows = []
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        value, error = tb.format_value_error(entry["value"], entry.get("error"))
        name, _, symbol = tb.ELEMENT_NAMES[key]
        rows.append((name, symbol, value, error, _element_unit(key, entry, doc)))
    parts = ["<h2 id='elements'>Orbital elements</h2>",
             _table(("element", "symbol", "value", "uncertainty (1\u03c3)", "unit"), rows,
                    numeric=(2, 3))]
    ti = doc.get("thiele_innes") or {}
    if ti:
        ti_rows = [(key, *tb.format_value_error(ti[key]["value"], ti[key].get("error")),
                    ti[key].get("unit", "arcsec")) for key in tb.THIELE_INNES_KEYS if key in ti]
        parts += ["<h3>Thiele\u2013Innes constants</h3>",
                  _table(("constant", "value", "uncertainty (1\u03c3)", "unit"), ti_rows,
                         numeric=(1, 2))]
    return "\n".join(parts)


def _parallax_table(plx):
    value, error = tb.format_value_error(plx.get("value"), plx.get("error"))
    parts = [_table(("parallax", "value", "uncertainty (1\u03c3)", "unit", "kind"),
                    [("\u03d6", value, error, plx.get("unit", "mas"), plx.get("kind", ""))],
                    numeric=(1, 2))]
    extra = {k: v for k, v in plx.items()
             if k not in ("value", "error", "unit", "kind", "steps")}
    if extra:
        parts.append(_kv_table(extra, ("parallax detail", "value")))
    steps = plx.get("steps") or []
    if steps:
        keys = list(steps[0])
        parts += ["<h3>Dynamical-parallax iteration</h3>",
                  _table(keys, [[_plain(s.get(k)) for k in keys] for s in steps],
                         numeric=tuple(range(len(keys))))]
    return "\n".join(parts)


def _mass_table(mass):
    rows = []
    for key in tb.MASS_KEYS:
        entry = mass.get(key)
        if not isinstance(entry, dict):
            continue
        linear = entry.get("linear") or {}
        lin = tb.format_value_error(linear["value"], linear.get("error")) if linear else ("", "")
        rows.append((key, *tb.format_interval(entry), *lin, entry.get("unit", "solMass")))
    return _table(("mass", "median", "16th pct", "84th pct", "2.5th pct", "97.5th pct",
                   "linear value", "linear error", "unit"), rows, numeric=tuple(range(1, 8)))


def _mass_section(doc):
    mass, plx = doc.get("mass") or {}, doc.get("parallax") or {}
    if not mass and not plx:
        return ""
    parts = ["<h2 id='masses'>Parallax and masses</h2>"]
    if plx:
        parts.append(_parallax_table(plx))
    if any(isinstance(mass.get(k), dict) for k in tb.MASS_KEYS):
        parts += ["<p>Medians and percentiles of the mass draws; the linear estimate "
                  "propagates the covariance to first order.</p>", _mass_table(mass)]
    if isinstance(mass.get("budget"), dict):
        from ..masses import budget_rows
        rows = [(("\u2003" if detail else "") + label, fmt.percent(share))
                for label, share, detail in budget_rows(mass["budget"])]
        parts += ["<h3>Error budget</h3><p>Share of the linear mass variance: the orbit "
                  "(a and P together, 3 ln a \u2212 2 ln P) and the parallax; the indented "
                  "rows split the orbit's share (they may exceed 100 % and cancel).</p>",
                  _table(("source", "share of variance"), rows, numeric=(1,))]
    extra = {k: v for k, v in mass.items()
             if k not in (*tb.MASS_KEYS, "budget", "warnings")}
    if extra:
        parts += ["<h3>Other mass quantities</h3>", _kv_table(extra)]
    return "\n".join(parts)


def _warnings_section(doc):
    mass_warnings = (doc.get("mass") or {}).get("warnings") or []
    warnings = list(doc.get("warnings") or [])
    warnings += [w for w in mass_warnings if w not in warnings]
    if not warnings:
        return ""
    items = "".join(f"<li>{escape(str(w))}</li>" for w in warnings)
    return (f"<section class='warnings' id='warnings'><h2>Warnings ({len(warnings)})</h2>"
            f"<ul>{items}</ul></section>")


def _notes_section(doc):
    notes = doc.get("notes") or []
    if not notes:
        return ""
    items = "".join(f"<li>{escape(str(n))}</li>" for n in notes)
    return f"<section id='notes'><h2>Notes</h2><ul>{items}</ul></section>"


def _residual_rows(doc):
    scale = epoch_scale_of(doc)
    rows, classes = [], []
    for r in doc.get("residuals", []):
        cells = []
        for key, _ in tb.RESIDUAL_COLUMNS:
            value = r.get(key)
            if key in ("epoch", "epoch_yr"):
                cells.append(fmt.fixed(value, 1 if epoch_unit(scale) == "d" and key == "epoch"
                                       else 3))
            elif isinstance(value, float):
                cells.append(fmt.fixed(value, tb.RESIDUAL_DECIMALS.get(key, 4)))
            else:
                cells.append("" if value is None else value)
        rows.append(cells)
        classes.append(f"status-{escape(str(r.get('status', '')))}")
    return rows, classes


def _residual_section(doc):
    unit = {"epoch": "epoch [" + epoch_scale_of(doc) + "]"}
    header = [unit.get(k, k) for k, _ in tb.RESIDUAL_COLUMNS]
    rows, classes = _residual_rows(doc)
    numeric = tuple(j for j, (k, _) in enumerate(tb.RESIDUAL_COLUMNS)
                    if k not in ("technique", "status", "reason", "note"))
    return ("<h2 id='residuals'>Measurements and residuals (O\u2212C)</h2>"
            f"<p>Position angles as used ({escape(tb.theta_equinox(doc))}), before any "
            "180\u00b0 flip; the O\u2212C of "
            "flipped rows is after the correction. Units: degrees and arcsec.</p>"
            f"<div class='scroll'>{_table(header, rows, classes, numeric)}</div>")


def _summary_section(doc):
    stats = dict(doc.get("statistics") or {})
    techniques = Counter(str(r.get("technique")) for r in doc.get("residuals", [])
                         if r.get("status") != "rejected")
    counts = [(k, stats.pop(k)) for k in ("n_input", "n_used", "n_flipped", "n_outliers",
                                           "n_excluded", "n_rejected") if k in stats]
    span = [(k, fmt.fixed(stats.pop(k), 3)) for k in ("epoch_first", "epoch_last") if k in stats]
    parts = ["<h2 id='data'>Data summary</h2>",
             _table(("count", "number"), counts, numeric=(1,)),
             _table(("epoch span (" + epoch_scale_of(doc) + ")", "epoch"), span, numeric=(1,)),
             _table(("technique", "measurements"), sorted(techniques.items()), numeric=(1,))]
    if stats:
        parts += ["<h3>Fit statistics</h3>", _kv_table(stats)]
    return "\n".join(parts)


def _method_section(doc):
    parts = ["<h2 id='method'>Method and priors</h2>"]
    if doc.get("options"):
        parts += ["<h3>Fit options</h3>", _kv_table(doc["options"], ("option", "value"))]
    posterior = dict(doc.get("posterior") or {})
    priors = posterior.pop("priors", None)
    if posterior:
        parts += ["<h3>Posterior sampling</h3>", _kv_table(posterior, ("setting", "value"))]
    if isinstance(priors, dict):
        parts += ["<h3>Priors</h3>", _kv_table(priors, ("parameter", "prior"))]
    elif priors:
        parts += ["<h3>Priors</h3>", f"<p>{escape(_plain(priors))}</p>"]
    if len(parts) == 1:
        parts.append("<p>The document records no fit options or priors.</p>")
    return "\n".join(parts)


def _alternatives_section(doc):
    alternatives = doc.get("alternatives") or []
    if not alternatives:
        return ""
    rows = []
    for alt in alternatives:
        el = alt.get("elements", {})
        vals = [el[k].get("value") if isinstance(el.get(k), dict) else el.get(k)
                for k in ELEMENT_KEYS]
        rows.append([fmt.number(v) for v in vals]
                    + [fmt.number(alt.get("chi2")), fmt.number(alt.get("delta_chi2"))])
    return ("<h2 id='alternatives'>Alternative solutions</h2>"
            + _table(list(ELEMENT_KEYS) + ["\u03c7\u00b2", "\u0394\u03c7\u00b2"], rows,
                     numeric=tuple(range(9))))


def _figure(name, caption, png):
    data = base64.b64encode(png).decode("ascii")
    return (f"<figure id='fig-{escape(name)}'><img alt='{escape(caption)}' "
            f"src='data:image/png;base64,{data}'><figcaption>{escape(caption)}</figcaption>"
            "</figure>")


def render_html(doc, figures, seed, report_version):
    """The report as one HTML string.

    Parameters
    ----------
    doc : dict
        Result document.
    figures : dict
        {name: (caption, png bytes)}; names 'orbit' and 'residuals' are placed beside their
        tables, any others in the posterior section, in the given order.
    seed : int
        Seed used for the figures' random draws (reported).
    report_version : str
        orbweigh version writing the report.
    """
    figs = {name: _figure(name, cap, png) for name, (cap, png) in figures.items()}
    title = f"Orbit of {doc.get('source', 'a visual binary')}"
    posterior_figs = [f for n, f in figs.items() if n not in ("orbit", "residuals")]
    body = [f"<h1>{escape(title)}</h1>",
            f"<p class='meta'>Schema {escape(str(doc.get('schema', '?')))} \u00b7 fitted with "
            f"orbweigh {escape(str(doc.get('version', '?')))} \u00b7 fit seed "
            f"{escape(str(doc.get('seed', 'not recorded')))} \u00b7 figure seed {seed} \u00b7 "
            f"report by orbweigh {escape(report_version)}</p>",
            _warnings_section(doc), _notes_section(doc), figs.get("orbit", ""),
            _elements_section(doc),
            _mass_section(doc), _alternatives_section(doc), figs.get("residuals", ""),
            _residual_section(doc), _summary_section(doc), _method_section(doc)]
    if posterior_figs:
        body += ["<h2 id='posterior'>Posterior</h2>", *posterior_figs]
    body.append(f"<footer><p>Rounding: {escape(fmt.ROUNDING_RULE)}</p></footer>")
    return ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
            "<meta name='viewport' content='width=device-width, initial-scale=1'>"
            f"<title>{escape(title)}</title><style>{_CSS}</style></head><body>\n"
            + "\n".join(b for b in body if b) + "\n</body></html>\n")
