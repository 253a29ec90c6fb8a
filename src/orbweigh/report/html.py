"""The self-contained HTML report of a result document.

One file, viewable offline: the style sheet is inline, figures are embedded as base64 PNG,
nothing is fetched. Every measured number is written by ``orbweigh.formatting``; headers are
words with units. The page is laid out for a laptop screen (1366 x 768): in the residual
table the epoch, the O-C and the status come first, so they are seen without scrolling.
"""
from __future__ import annotations

import base64
from collections import Counter
from html import escape
from pathlib import PurePath

from .. import formatting as fmt
from ..elements import ELEMENT_KEYS
from ..reductions import epoch_unit
from ..result import epoch_scale_of
from ..tables import is_number
from . import tables as tb

__all__ = ["render_html"]

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
 color:#22313f;max-width:64rem;margin:1.5rem auto;padding:0 1rem;line-height:1.45}
h1{font-size:1.5rem;margin-bottom:.2rem} h2{font-size:1.15rem;border-bottom:1px solid #c8d3de;
 padding-bottom:.2rem;margin-top:2rem} h3{font-size:1rem} .meta{color:#5a6b7b;font-size:.9rem}
nav{font-size:.88rem;margin:.3rem 0 1rem} nav a{margin-right:.8rem;color:#2a5d8a}
table{border-collapse:collapse;margin:.6rem 0;font-size:.88rem}
th,td{padding:.2rem .55rem;border-bottom:1px solid #e3e9ef;text-align:left}
th{background:#eef3f7;font-weight:600;vertical-align:bottom}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.warnings{background:#fff4e0;border:2px solid #e07b39;border-radius:6px;padding:.5rem 1rem}
.warnings h2{border:none;margin-top:.3rem;color:#a04a12}
figure{margin:1rem 0} figure img{max-width:100%;height:auto;border:1px solid #e3e9ef}
#fig-corner_elements img,#fig-corner_masses img{max-width:min(100%,46rem)}
figcaption{font-size:.85rem;color:#5a6b7b} .scroll{overflow-x:auto;max-width:100%}
.scroll td{white-space:nowrap} .scroll th{min-width:3.2rem}
.scroll td.reason{white-space:normal;min-width:11rem;max-width:18rem}
tr.status-flipped td{background:#f1f1f1} tr.status-outlier td{background:#fdecea}
tr.status-excluded td,tr.status-rejected td{color:#8a8a8a}
footer{margin-top:2rem;font-size:.8rem;color:#5a6b7b}
"""

_UNITS = {"solMass": "M\u2609", "deg": "deg", "arcsec": "arcsec", "mas": "mas", "yr": "yr",
          "km/s": "km/s", "": ""}
_SIGMA = "\u03c3"
_MINUS = "\u2212"


def _unit(unit):
    return _UNITS.get(unit, unit)


def _table(header, rows, row_classes=None, numeric=(), table_id=None, classes=None):
    """HTML table; numbers in the columns listed in ``numeric`` are aligned right;
    ``classes`` {column: class} marks the cells of a column (e.g. wrapped text)."""
    ident = f" id='{escape(table_id)}'" if table_id else ""
    out = [f"<table{ident}>", "<thead><tr>" + "".join(f"<th>{escape(h)}</th>" for h in header)
           + "</tr></thead>", "<tbody>"]
    for k, row in enumerate(rows):
        cls = f' class="{row_classes[k]}"' if row_classes else ""
        cells = "".join(f'<td class="num">{escape(str(c))}</td>'
                        if j in numeric and _numeric(str(c))
                        else f"<td{_cell_class(classes, j, c)}>{escape(str(c))}</td>"
                        for j, c in enumerate(row))
        out.append(f"<tr{cls}>{cells}</tr>")
    return "\n".join(out + ["</tbody></table>"])


def _cell_class(classes, column, content):
    """The column's class on a cell with content (an empty column stays narrow)."""
    name = (classes or {}).get(column)
    return f' class="{name}"' if name and str(content) else ""


def _numeric(text):
    """Whether a cell holds a number (aligned right): '1.5', '\u22121.2', '1.5 \u00b1 0.2'."""
    head = text.replace(_MINUS, "-").split(" ")[0]
    return is_number(head) or text == "unbounded"


def _signed(text):
    """A formatted number with a true minus sign ('-0.0' is written '0.0')."""
    if not text.startswith("-"):
        return text
    return text[1:] if text.strip("-0.") == "" else _MINUS + text[1:]


def _range(low, high):
    return "" if not (low or high) else f"{_signed(low)} to {_signed(high)}"


def _epoch_name(doc):
    return fmt.epoch_label(epoch_scale_of(doc))


# ------------------------------------------------------------------------------ elements
def _element_unit(key, entry, doc):
    if key == "T":
        return _epoch_name(doc) if "scale" not in entry else fmt.epoch_label(entry["scale"])
    return _unit(entry.get("unit", ""))


def _elements_section(doc):
    rows = []
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        value, error = tb.format_value_error(entry["value"], entry.get("error"))
        if entry.get("fixed"):
            error = "held fixed"
        name, symbol = tb.element_name(key, doc["elements"]), tb.ELEMENT_NAMES[key][2]
        rows.append((name, symbol, _signed(value), error, _element_unit(key, entry, doc)))
    what = "least-squares fit" if "combined" not in doc else "joint fit of positions and " \
        "radial velocities"
    parts = ["<h2 id='elements'>Orbital elements</h2>",
             f"<p>Best values of the {what} with their 1{_SIGMA} uncertainties (from the "
             "covariance).</p>",
             _table(("element", "symbol", "value", f"uncertainty (1{_SIGMA})", "unit"), rows,
                    numeric=(2, 3), table_id="elements-table")]
    ti = doc.get("thiele_innes") or {}
    if ti:
        ti_rows = [(key, *map(_signed, tb.format_value_error(ti[key]["value"],
                                                            ti[key].get("error"))),
                    _unit(ti[key].get("unit", "arcsec")))
                   for key in tb.THIELE_INNES_KEYS if key in ti]
        parts += ["<h3>Thiele\u2013Innes constants</h3>",
                  _table(("constant", "value", f"uncertainty (1{_SIGMA})", "unit"), ti_rows,
                         numeric=(1, 2))]
    return "\n".join(parts)


# ----------------------------------------------------------------- combined solution
_VELOCITY_NAMES = (("gamma", "Systemic velocity", "\u03b3"),
                   ("K1", "Velocity amplitude, primary", "K\u2081"),
                   ("K2", "Velocity amplitude, secondary", "K\u2082"))


def _node_sentence(node):
    """How the node was chosen and how the other choice fits (worse, or better when a held
    angle kept the choice the velocities reject)."""
    delta = node["delta_chi2"]
    chosen = ("A held angle (--fix) fixes the node" if node.get("held") else
              "The velocities fix the node")
    return (f"{chosen}: \u03a9 = {fmt.fixed(node['Omega_deg'], 2)} deg; the other node "
            f"(\u03a9 = {fmt.fixed(node['other']['Omega_deg'], 2)} deg) fits "
            f"{'worse' if delta >= 0 else 'better'} by \u0394\u03c7\u00b2 = "
            f"{fmt.fixed(abs(delta), 1)}"
            + (", which is NOT decisive." if not node.get("decisive") else
               ": the velocities prefer it." if delta < 0 else "."))


def _combined_section(doc, figures):
    if "combined" not in doc:
        return ""
    rows = []
    for key, name, symbol in _VELOCITY_NAMES:
        if isinstance(doc.get(key), dict):
            value, error = tb.format_value_error(doc[key]["value"], doc[key].get("error"))
            rows.append((name, symbol, _signed(value), error, _unit(doc[key].get("unit", ""))))
    s, v, node = doc.get("statistics") or {}, doc.get("velocities") or {}, doc.get("node") or {}
    text = []
    if v:
        text.append(f"Radial velocities of {escape(PurePath(str(v.get('source', ''))).name)}: "
                    f"{v.get('n_used', '?')} used, {v.get('n_excluded', 0)} excluded, "
                    f"{v.get('n_rejected', 0)} rejected.")
    if "chi2_rv" in s:
        text.append(f"\u03c7\u00b2 {fmt.fixed(s['chi2'], 2)} for {s['dof']} degrees of "
                    f"freedom: positions {fmt.fixed(s['chi2_astrometric'], 2)}, velocities "
                    f"{fmt.fixed(s['chi2_rv'], 2)} (rms of the velocity residuals "
                    f"{fmt.fixed(s['rms_rv_kms'], 3)} km/s).")
    if node:
        text.append(_node_sentence(node))
    parts = ["<h2 id='combined'>Combined solution with radial velocities</h2>",
             _table(("quantity", "symbol", "value", f"uncertainty (1{_SIGMA})", "unit"), rows,
                    numeric=(2, 3), table_id="velocity-table"),
             f"<p>{' '.join(text)}</p>" if text else "", *figures]
    return "\n".join(p for p in parts if p)


# ------------------------------------------------------------------------- posterior
def _posterior_entries(doc):
    """(kind, {key: summary entry}, sampling block) of the element posterior, or None.

    The joint posterior (with radial velocities) when there is one, else the visual one.
    Entries carry value (median), low/high (68 %) and, when recorded, low95/high95.
    """
    joint = (doc.get("combined") or {}).get("posterior")
    if joint:
        return "joint", joint["parameters"], joint
    block = doc.get("posterior") or {}
    if not block.get("summary"):
        return None
    entries = {k: {**s, "value": s["median"]} for k, s in block["summary"].items()}
    return "visual", entries, block


_PARAMETER_NAMES = {**{k: (v[0], v[2]) for k, v in tb.ELEMENT_NAMES.items()},
                    **{k: (n, s) for k, n, s in _VELOCITY_NAMES},
                    "parallax": ("Parallax", "\u03d6")}


def _interval_row(name, symbol, entry, unit):
    median, low, high, low95, high95 = tb.format_interval(entry)
    if entry.get("fixed"):                      # not sampled: no interval to show
        return (name, symbol, _signed(median), "held fixed", "", unit)
    return (name, symbol, _signed(median), _range(low, high), _range(low95, high95), unit)


def _parameter_name(key, doc):
    """(name, symbol) of a posterior row; T of a circular orbit is the node passage."""
    name, symbol = _PARAMETER_NAMES.get(key, (key, key))
    return (tb.element_name(key, doc["elements"]) if key in tb.ELEMENT_NAMES else name), symbol


def _posterior_unit(key, entry, kind):
    if key != "T":
        return _unit(entry.get("unit", ""))
    # A joint summary written before T was put in the log's scale is in Julian years.
    return fmt.epoch_label(entry.get("scale", "julian" if kind == "joint" else "besselian"))


def _convergence(block):
    """The sampling's convergence in one sentence."""
    acceptance = block.get("acceptance_fraction", block.get("acceptance"))
    words = [f"{block['walkers']} walkers \u00d7 {block['steps']} steps, burn-in "
             f"{block['burn']} and thinning {block['thin']}: {block['n_draws']} draws"]
    if acceptance is not None:
        words.append(f"acceptance fraction {fmt.fixed(acceptance, 2)}")
    tau = block.get("autocorr_time") or {}
    if tau:
        longest = max(tau.values())
        each = ", ".join(f"{k.replace('_', ' ')} {fmt.fixed(v, 0)}" for k, v in tau.items())
        words.append(f"autocorrelation times {each} steps, so the chains run "
                     f"{fmt.fixed(block['steps'] / longest, 0)} times the longest")
    state = "converged" if block.get("converged") else "NOT converged (see the warnings)"
    scaled = (f"; sigmas scaled by \u221a(reduced \u03c7\u00b2) = "
              f"{fmt.fixed(block['sigma_scale'], 2)}" if block.get("sigma_scale", 1.0) > 1.0
              else "")
    return f"{'; '.join(words)}; {state}{scaled}. Seed {block['seed']}."


def _posterior_section(doc, figures):
    found = _posterior_entries(doc)
    if found is None:
        return "\n".join(["<h2 id='posterior'>Posterior</h2>", *figures]) if figures else ""
    kind, entries, block = found
    rows = [_interval_row(*_parameter_name(k, doc), e, _posterior_unit(k, e, kind))
            for k, e in entries.items()]
    what = ("joint posterior of positions and radial velocities" if kind == "joint" else
            "posterior of the elements")
    parts = ["<h2 id='posterior'>Posterior</h2>",
             f"<p>Median and central 68 % and 95 % intervals of the {what} (emcee "
             "ensemble sampler).</p>",
             _table(("element", "symbol", "median", "68 % interval", "95 % interval", "unit"),
                    rows, numeric=(2, 3, 4), table_id="posterior-table"),
             f"<p class='convergence'>{escape(_convergence(block))}</p>"]
    priors = block.get("priors")
    if isinstance(priors, dict):
        rows = [(_PARAMETER_NAMES.get(k, (k, k))[1], v) for k, v in priors.items()]
        parts += ["<h3>Priors</h3>", _table(("parameter", "prior"), rows)]
    return "\n".join(parts + list(figures))


# --------------------------------------------------------------------- parallax, mass
def _parallax_table(doc):
    rows = []
    for kind, entry, used in tb.parallax_entries(doc):
        if "low" in entry and entry.get("low") is not None:
            median, low, high, low95, high95 = tb.format_interval(entry)
            value, r68, r95 = _signed(median), _range(low, high), _range(low95, high95)
        else:
            value = fmt.value_error(entry.get("value"), entry.get("error"))
            r68 = r95 = ""
        rows.append((f"{kind} \u03d6", value, r68, r95, _unit(entry.get("unit", "mas")),
                     "used for the masses" if used else ""))
    if not rows:
        return ""
    header = ("parallax", "value (\u00b1 1\u03c3) or median", "68 % interval",
              "95 % interval", "unit", "masses")
    if not any(r[2] for r in rows):   # measured parallaxes only: no interval columns
        header, rows = header[:2] + header[4:], [r[:2] + r[4:] for r in rows]
    parts = [_table(header, rows, numeric=(1, 2, 3), table_id="parallax-table")]
    plx = doc.get("parallax") or {}
    orbital = plx.get("orbital") or {}
    if "agreement_sigma" in orbital:
        parts.append(f"<p>The orbital parallax minus the trigonometric one is "
                     f"{_signed(fmt.fixed(orbital['agreement_sigma'], 1))}{_SIGMA} of their "
                     "combined uncertainty.</p>")
    if "rule" in (plx.get("combined") or {}):
        parts.append(f"<p>Combined parallax: {escape(plx['combined']['rule'])}.</p>")
    return "\n".join(parts)


def _dynamical_parallax(plx):
    if plx.get("kind") != "dynamical":
        return ""
    errors = plx.get("magnitude_errors") or [None] * len(plx.get("magnitudes") or [])
    mags = " and ".join(fmt.value_error(m, e) for m, e in zip(plx.get("magnitudes") or [], errors))
    words = [f"Dynamical parallax from the magnitudes {mags} ({plx.get('band')} band; "
             f"{plx.get('relation', '')})."]
    scatter = plx.get("relation_scatter") or {}
    if scatter:
        words.append(f"The relation's scatter, {fmt.number(scatter.get('sigma_dex'))} dex in "
                     f"{scatter.get('variable')} ({scatter.get('source')}), is carried by the "
                     "draws.")
    parts = [f"<p>{escape(' '.join(words))}</p>"]
    steps = plx.get("steps") or []
    if steps:
        rows = [(s["iteration"], fmt.fixed(s["parallax_mas"], 3), fmt.fixed(s["abs_mag1"], 3),
                 fmt.fixed(s["abs_mag2"], 3), fmt.fixed(s["mass1"], 3), fmt.fixed(s["mass2"], 3))
                for s in steps]
        state = "converged" if plx.get("converged", True) else "NOT converged"
        parts += [f"<details><summary>Iteration at the best (P, a): {len(steps)} steps, "
                  f"{state}</summary>",
                  _table(("iteration", "parallax (mas)", "absolute magnitude, primary",
                          "absolute magnitude, secondary", "mass, primary (M\u2609)",
                          "mass, secondary (M\u2609)"), rows, numeric=tuple(range(6))),
                  "</details>"]
    return "\n".join(parts)


_MASS_NAMES = {"total": "total", "primary": "primary", "secondary": "secondary"}


def _mass_table(mass):
    rows = []
    for key in tb.MASS_KEYS:
        entry = mass.get(key)
        if not isinstance(entry, dict):
            continue
        median, low, high, low95, high95 = tb.format_interval(entry)
        linear = entry.get("linear") or {}
        lin = fmt.value_error(linear["value"], linear.get("error")) if linear else ""
        rows.append((_MASS_NAMES[key], _signed(median), _range(low, high),
                     _range(low95, high95), lin, _unit(entry.get("unit", "solMass"))))
    header = ("mass", "median", "68 % interval", "95 % interval",
              "linear estimate (\u00b1 1\u03c3)", "unit")
    if not any(r[4] for r in rows):   # no linear propagation (e.g. an orbital parallax)
        header, rows = header[:4] + header[5:], [r[:4] + r[5:] for r in rows]
    return _table(header, rows, numeric=(1, 2, 3, 4), table_id="mass-table")


def _mass_sentence(mass):
    source = {"posterior draws": "the posterior draws", "posterior": "the posterior draws"}.get(
        str(mass.get("draws_source")), "draws of the covariance")
    words = [f"Masses from {mass['draws']} draws ({source}; seed {mass.get('seed')})"]
    if mass.get("parallax_used"):
        words.append(f"with the {mass['parallax_used']} parallax")
    if mass.get("draws_nonpositive_parallax"):
        words.append(f"{mass['draws_nonpositive_parallax']} draws with a non-positive "
                     "parallax had no mass and were left out")
    q = mass.get("mass_ratio")
    if isinstance(q, dict):
        words.append(f"components with the mass ratio q = M\u2082/M\u2081 = "
                     f"{fmt.value_error(q['value'], q.get('error'))} "
                     f"({'as given' if q.get('source') == 'given' else 'from K1/K2'})")
    text = "; ".join(words) + "."
    if any("linear" in (mass.get(k) or {}) for k in tb.MASS_KEYS):
        text += " The linear estimate propagates the covariance to first order."
    return text


def _mass_section(doc, figures):
    mass, plx = doc.get("mass") or {}, doc.get("parallax") or {}
    if not mass and not plx:
        return ""
    parts = ["<h2 id='masses'>Parallax and masses</h2>", _parallax_table(doc),
             _dynamical_parallax(plx)]
    if any(isinstance(mass.get(k), dict) for k in tb.MASS_KEYS):
        parts += [f"<p>{escape(_mass_sentence(mass))}</p>", _mass_table(mass)]
    if isinstance(doc.get("mass_function"), dict):
        f = doc["mass_function"]
        median, low, high = tb.format_interval(f, ("value", "low", "high"))
        parts.append(f"<p>Mass function of component {f.get('component')}: {median} "
                     f"M\u2609 (68 % interval {_range(low, high)}).</p>")
    if isinstance(mass.get("budget"), dict):
        from ..masses import budget_rows
        rows = [(("\u2003" if detail else "") + label, _signed(fmt.percent(share)))
                for label, share, detail in budget_rows(mass["budget"])]
        parts += ["<h3>Error budget</h3><p>Share of the linear mass variance: the orbit "
                  "(a and P together, 3 ln a \u2212 2 ln P) and the parallax; the indented "
                  "rows split the orbit's share (they may exceed 100 % and cancel).</p>",
                  _table(("source", "share of variance"), rows, numeric=(1,))]
    return "\n".join(p for p in parts + list(figures) if p)


# ------------------------------------------------------------------- warnings, notes
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


# ------------------------------------------------------------------------- residuals
def _row_decimals(row, sigma_key, fallback):
    """Decimals of a row's values: those of its sigma at two significant digits."""
    sigma = row.get(sigma_key)
    if isinstance(sigma, (int, float)) and sigma > 0:
        return min(fmt.decimals_for(sigma), 6)
    return fallback


def _written_technique(row):
    """The technique as the log wrote it; an unknown one says so (its default sigmas apply)."""
    cls = row.get("technique")
    written = str(row.get("technique_text") or cls or "")
    return f"{written} (not a known technique)" if cls == "unknown" and written != cls else written


def _normalised(row, key, sigma_key):
    value, sigma = row.get(key), row.get(sigma_key)
    if not isinstance(value, (int, float)) or not isinstance(sigma, (int, float)) or sigma <= 0:
        return ""
    return _signed(fmt.fixed(value / sigma, 1))


def _residual_columns(doc):
    """(header, cell(row), numeric) of the residual table, the O-C and status first.

    theta and rho values of a row (measured, computed, O-C and the sigma itself) are
    written to the decimal place of that row's sigma, by the rounding rule.
    """
    scale = epoch_scale_of(doc)
    epoch_decimals = 2 if epoch_unit(scale) == "d" else 3

    def theta(key):
        return lambda r: _signed(fmt.fixed(r.get(key), _row_decimals(r, "sigma_theta_deg", 2)))

    def rho(key):
        return lambda r: _signed(fmt.fixed(r.get(key), _row_decimals(r, "sigma_rho_arcsec", 4)))

    def text(key):
        return lambda r: "" if r.get(key) is None else str(r.get(key))
    return (
        (f"epoch ({fmt.epoch_label(scale)})",
         lambda r: fmt.fixed(r.get("epoch"), epoch_decimals), True),
        ("O\u2212C \u03b8 (deg)", theta("d_theta_deg"), True),
        ("O\u2212C \u03c1 (arcsec)", rho("d_rho_arcsec"), True),
        ("status", text("status"), False),
        ("(O\u2212C)/\u03c3 \u03b8", lambda r: _normalised(r, "d_theta_deg", "sigma_theta_deg"),
         True),
        ("(O\u2212C)/\u03c3 \u03c1",
         lambda r: _normalised(r, "d_rho_arcsec", "sigma_rho_arcsec"), True),
        ("reason", text("reason"), False),
        ("log line", text("line"), True),
        ("\u03b8 (deg)", theta("theta_deg"), True),
        ("\u03c1 (arcsec)", rho("rho_arcsec"), True),
        ("\u03c3 \u03b8 (deg)", theta("sigma_theta_deg"), True),
        ("\u03c3 \u03c1 (arcsec)", rho("sigma_rho_arcsec"), True),
        ("technique", _written_technique, False),
        ("computed \u03b8 (deg)", theta("theta_pred_deg"), True),
        ("computed \u03c1 (arcsec)", rho("rho_pred_arcsec"), True),
        ("note", text("note"), False))


def _residual_section(doc, figures):
    columns = _residual_columns(doc)
    rows = [[cell(r) for _, cell, _ in columns] for r in doc.get("residuals", [])]
    classes = [f"status-{escape(str(r.get('status', '')))}" for r in doc.get("residuals", [])]
    numeric = tuple(j for j, (_, _, is_num) in enumerate(columns) if is_num)
    wrapped = {j: "reason" for j, (h, _, _) in enumerate(columns) if h in ("reason", "note")}
    return "\n".join([
        "<h2 id='residuals'>Measurements and residuals (O\u2212C)</h2>", *figures,
        f"<p>Position angles as used ({escape(tb.theta_equinox(doc))}), before any "
        "180\u00b0 flip; the O\u2212C of flipped rows is after the correction. (O\u2212C)/"
        "\u03c3 uses the measurement's own \u03c3. The \u03b8 and \u03c1 numbers of a row are "
        "written to the decimal place of its \u03c3. Every line of the log is listed.</p>",
        "<div class='scroll'>" + _table([h for h, _, _ in columns], rows, classes, numeric,
                                        "residual-table", wrapped) + "</div>"])


# ------------------------------------------------------------------ data, method, alts
_COUNTS = (("n_input", "lines in the log"), ("n_used", "fitted"),
           ("n_flipped", "corrected for a 180\u00b0 flip"), ("n_outliers", "left out as outliers"),
           ("n_excluded", "excluded by the log"), ("n_rejected", "rejected (unreadable)"))


def _fit_sentences(stats, doc):
    words = []
    if "chi2" in stats:
        words.append(f"\u03c7\u00b2 {fmt.fixed(stats['chi2'], 2)} for {stats.get('dof')} degrees "
                     f"of freedom (reduced {fmt.fixed(stats.get('reduced_chi2'), 2)})"
                     + ("; errors scaled by \u221a(reduced \u03c7\u00b2)"
                        if stats.get("errors_scaled") else "") + ".")
    if "rms_theta_deg" in stats:
        words.append(f"rms of the O\u2212C: \u03b8 {fmt.fixed(stats['rms_theta_deg'], 3)} deg, "
                     f"\u03c1 {fmt.fixed(stats['rms_rho_arcsec'], 4)} arcsec.")
    if "phase_coverage" in stats:
        words.append(f"Phase coverage {fmt.percent(stats['phase_coverage'], 0)}.")
    if "period_range_yr" in stats:
        low, high = stats["period_range_yr"]
        words.append(f"Periods searched {fmt.number(low, 3)} to {fmt.number(high, 4)} yr"
                     + (f" ({stats['n_trials']} trials)" if "n_trials" in stats else "")
                     + (f" in {fmt.fixed(stats['fit_seconds'], 2)} s" if "fit_seconds" in stats
                        else "") + ".")
    return " ".join(words)


def _summary_section(doc):
    stats = doc.get("statistics") or {}
    scale = epoch_scale_of(doc)
    techniques = Counter(_written_technique(r) for r in doc.get("residuals", [])
                         if r.get("status") != "rejected")
    counts = [(label, stats[k]) for k, label in _COUNTS if k in stats]
    parts = ["<h2 id='data'>Data and fit</h2>",
             _table(("measurements", "number"), counts, numeric=(1,), table_id="count-table"),
             _table(("technique", "measurements"), sorted(techniques.items()), numeric=(1,))]
    if "epoch_first" in stats:
        parts.append(f"<p>Epochs {fmt.epoch(stats['epoch_first'], scale, label=False)} to "
                     f"{escape(fmt.epoch(stats['epoch_last'], scale))}.</p>")
    sentence = _fit_sentences(stats, doc)
    if sentence:
        parts.append(f"<p>{escape(sentence)}</p>")
    return "\n".join(parts)


def _option_rows(doc):
    options = doc.get("options") or {}
    rows = []
    if "period_range_yr" in options:
        low, high = options["period_range_yr"]
        rows.append(("period search range", f"{fmt.number(low, 4)} to {fmt.number(high, 4)} yr"))
    if "loss" in options:
        rows.append(("loss function", str(options["loss"])))
    if "flips" in options:
        rows.append(("180\u00b0 quadrant flips tried", "yes" if options["flips"] else "no"))
    if "outlier_sigma" in options:
        rows.append(("outliers beyond", f"{fmt.number(options['outlier_sigma'])} \u03c3"))
    if "alternative_delta_chi2" in options:
        rows.append(("alternatives kept within",
                     f"\u0394\u03c7\u00b2 = {fmt.number(options['alternative_delta_chi2'])}"))
    fit = doc.get("fit") or {}
    for key, value in (fit.get("fixed") or {}).items():
        rows.append((f"held element {key}", fmt.number(value, 6)))
    if fit.get("period_bounds"):
        low, high = fit["period_bounds"]
        rows.append(("period bound", f"{fmt.number(low, 6)} to {fmt.number(high, 6)} yr"))
    return rows


def _method_section(doc):
    rows = _option_rows(doc)
    if not rows:
        return ""
    return "\n".join(["<h2 id='method'>Fit options</h2>",
                      _table(("option", "value"), rows, table_id="options-table")])


def _alternatives_section(doc):
    alternatives = doc.get("alternatives") or []
    if not alternatives:
        return ""
    decimals = {"P": 3, "T": 3, "e": 3, "a": 4, "i": 1, "Omega": 1, "omega": 1}
    rows = []
    for alt in alternatives:
        el = alt.get("elements", {})
        vals = [el[k].get("value") if isinstance(el.get(k), dict) else el.get(k)
                for k in ELEMENT_KEYS]
        rows.append([fmt.fixed(v, decimals[k]) for k, v in zip(ELEMENT_KEYS, vals)]
                    + [fmt.fixed(alt.get("chi2"), 1), fmt.fixed(alt.get("delta_chi2"), 1)])
    header = [f"{tb.ELEMENT_NAMES[k][2]} ({_element_unit(k, {}, doc) if k == 'T' else u})"
              for k, u in zip(ELEMENT_KEYS, ("yr", "", "", "arcsec", "deg", "deg", "deg"))]
    header = [h.replace(" ()", "") for h in header]
    return ("<h2 id='alternatives'>Alternative solutions</h2><p>Other minima of \u03c7\u00b2 "
            "within the option's \u0394\u03c7\u00b2; best values only.</p>"
            + _table(header + ["\u03c7\u00b2", "\u0394\u03c7\u00b2"], rows,
                     numeric=tuple(range(9))))


# --------------------------------------------------------------------------- the page
def _figure(name, caption, png):
    data = base64.b64encode(png).decode("ascii")
    return (f"<figure id='fig-{escape(name)}'><img alt='{escape(caption)}' "
            f"src='data:image/png;base64,{data}'><figcaption>{escape(caption)}</figcaption>"
            "</figure>")


#: Section each figure is placed in; others go to the combined solution with radial
#: velocities when there is one, else to the posterior.
_FIGURE_SECTION = {"orbit": "top", "residuals": "residuals", "corner_elements": "posterior",
                   "corner_masses": "masses", "mass_histogram": "masses"}

_NAV = (("warnings", "Warnings"), ("elements", "Elements"), ("combined", "Velocities"),
        ("posterior", "Posterior"), ("masses", "Masses"), ("residuals", "Residuals"),
        ("data", "Data and fit"), ("method", "Options"))


def _placed(figs, doc):
    fallback = "combined" if "combined" in doc else "posterior"
    out = {}
    for name, html in figs.items():
        out.setdefault(_FIGURE_SECTION.get(name, fallback), []).append(html)
    return out


def render_html(doc, figures, seed, report_version, name=None):
    """The report as one HTML string.

    Parameters
    ----------
    doc : dict
        Result document.
    figures : dict
        {name: (caption, png bytes)}; 'orbit' heads the page, 'residuals' sits above the
        residual table, the corner plots and mass figures in their sections, any other in
        the combined solution (with radial velocities) or the posterior, in the given order.
    seed : int
        Seed used for the figures' random draws (reported).
    report_version : str
        orbweigh version writing the report.
    name : str, optional
        The object's name in the title (default ``tables.object_name``: the document's
        name, else the log's file stem).
    """
    placed = _placed({n: _figure(n, cap, png) for n, (cap, png) in figures.items()}, doc)
    title = f"Orbit of {tb.object_name(doc, name)}"
    log = PurePath(str(doc.get("source", ""))).name
    sections = [_warnings_section(doc), _notes_section(doc), *placed.get("top", []),
                _elements_section(doc), _combined_section(doc, placed.get("combined", [])),
                _posterior_section(doc, placed.get("posterior", [])),
                _mass_section(doc, placed.get("masses", [])), _alternatives_section(doc),
                _residual_section(doc, placed.get("residuals", [])), _summary_section(doc),
                _method_section(doc)]
    body = "\n".join(s for s in sections if s)
    nav = " ".join(f"<a href='#{k}'>{v}</a>" for k, v in _NAV if f"id='{k}'" in body)
    head = [f"<h1>{escape(title)}</h1>",
            f"<p class='meta'>Log {escape(log or 'not recorded')} \u00b7 schema "
            f"{escape(str(doc.get('schema', '?')))} \u00b7 fitted with orbweigh "
            f"{escape(str(doc.get('version', '?')))} \u00b7 fit seed "
            f"{escape(str(doc.get('seed', 'not recorded')))} \u00b7 figure seed {seed} \u00b7 "
            f"report by orbweigh {escape(report_version)}</p>", f"<nav>{nav}</nav>"]
    footer = f"<footer><p>Rounding: {escape(fmt.ROUNDING_RULE)}</p></footer>"
    return ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
            "<meta name='viewport' content='width=device-width, initial-scale=1'>"
            f"<title>{escape(title)}</title><style>{_CSS}</style></head><body>\n"
            + "\n".join(head) + "\n" + body + "\n" + footer + "\n</body></html>\n")
