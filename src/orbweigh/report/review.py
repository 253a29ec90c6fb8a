"""The curator's page of one batch system: what the verdict is, why, and old against new.

One self-contained HTML file (inline style, figures embedded as PNG) made from a batch
record (``batch.process_system``): the system id as its title; the verdict with the tests
that decided it (statistic, degrees of freedom, p-value, threshold) and the new
measurements they used; warnings and errors; the catalogued orbit beside the new one on
the sky and in the residuals (``curation``); the old-against-new element table in sigma
from the record's comparison (``revision.compare_orbits``, as ``orbweigh compare``).
Every number that decides something carries its full value in a ``data-value`` attribute.
"""
from __future__ import annotations

import base64
from html import escape

from .. import formatting as fm
from ..elements import ELEMENT_KEYS, ELEMENT_UNITS
from ..reductions import interval_in_scale
from ..revision import ALPHA, ERROR_INFLATION
from . import curation, style
from .tables import ELEMENT_NAMES

__all__ = ["CSS", "TEST_NAMES", "review_page", "verdict_badge"]

#: Style sheet shared with the batch index (verdict classes ``v-<class>``).
CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
 color:#22313f;margin:1.2rem auto;padding:0 1rem;line-height:1.4;max-width:72rem}
h1{font-size:1.45rem;margin:.2rem 0} h2{font-size:1.1rem;margin:1.4rem 0 .4rem;
 border-bottom:1px solid #c8d3de;padding-bottom:.15rem} .meta{color:#5a6b7b;font-size:.88rem}
table{border-collapse:collapse;margin:.5rem 0;font-size:.86rem}
th,td{padding:.22rem .55rem;border-bottom:1px solid #e3e9ef;text-align:left;vertical-align:top}
th{background:#eef3f7;font-weight:600} .num{text-align:right;font-variant-numeric:tabular-nums;
 white-space:nowrap} th.num{text-align:right}
.badge{display:inline-block;padding:.05rem .45rem;border-radius:.7rem;font-weight:600;
 white-space:nowrap;border:2px solid}
.verdict{border-left:8px solid;padding:.4rem 1rem;margin:.8rem 0;border-radius:4px}
.verdict h2{border:none;margin:.2rem 0;font-size:1.25rem}
tr.decisive td{font-weight:700} .warn{color:#8a4b00;font-weight:700}
.warnings,.error{border:2px solid;border-radius:6px;padding:.3rem 1rem}
figure{margin:.8rem 0} figure img{max-width:100%;height:auto;border:1px solid #e3e9ef}
figcaption{font-size:.84rem;color:#5a6b7b;max-width:60rem}
"""



def _tint(colour, share):
    """``colour`` mixed with white, ``share`` of the colour kept (a light background)."""
    rgb = [int(colour[k:k + 2], 16) for k in (1, 3, 5)]
    return "#" + "".join(f"{round(255 - share * (255 - c)):02x}" for c in rgb)


# Verdict classes from the one palette: border in the colour, background a tint of it.
CSS += "".join(f".v-{name}{{border-color:{colour};background:{_tint(colour, 0.18)}}}\n"
               for name, colour in style.VERDICT_PALETTE.items())
CSS += (f".warnings{{border-color:{style.VERDICT_PALETTE['drifting']};"
        f"background:{_tint(style.VERDICT_PALETTE['drifting'], 0.18)}}}\n"
        f".error{{border-color:{style.VERDICT_PALETTE['contradicted']};"
        f"background:{_tint(style.VERDICT_PALETTE['contradicted'], 0.18)}}}\n")

#: How each test of ``revision`` is named on the pages.
TEST_NAMES = {"p_value": "\u03c7\u00b2 of the new points",
              "p_value_inflated": f"\u03c7\u00b2 with \u03c3 \u00d7 {ERROR_INFLATION:g}",
              "p_systematic": "offset and trend"}


def verdict_badge(verdict, status):
    """The verdict as a coloured badge with its shape and its word (text, not colour only)."""
    cls = curation.verdict_class(verdict, status)
    word = verdict or status
    return (f'<span class="badge v-{cls}">{curation.VERDICT_MARKS[cls]} '
            f'{escape(word)}</span>')


def _num(value, text):
    """A right-aligned cell whose ``data-value`` keeps the full number."""
    return f'<td class="num" data-value="{float(value)!r}">{escape(text)}</td>'


def _scale(record):
    return record.get("epoch_scale") or "julian"


def _tests_table(rev):
    decided = rev.get("decided_by")
    rows = []
    for name, statistic, dof in (("p_value", rev["chi2_new"], rev["dof_new"]),
                                 ("p_value_inflated", rev["chi2_new"] / ERROR_INFLATION**2,
                                  rev["dof_new"]),
                                 ("p_systematic", rev["chi2_systematic"],
                                  rev["dof_systematic"])):
        p = rev[name]
        outcome = "rejects" if p < ALPHA else "does not reject"
        mark = " \u2190 decided the verdict" if name == decided else ""
        rows.append(f'<tr class="{"decisive" if name == decided else ""}" data-test="{name}">'
                    f"<td>{escape(TEST_NAMES[name])}</td>"
                    + _num(statistic, fm.fixed(statistic, 1)) + _num(dof, str(dof))
                    + _num(p, fm.p_value(p)) + _num(ALPHA, fm.number(ALPHA))
                    + f"<td>{outcome}{mark}</td></tr>")
    head = ("<tr><th>test</th><th class='num'>\u03c7\u00b2</th><th class='num'>dof</th>"
            "<th class='num'>p</th><th class='num'>threshold \u03b1</th><th>outcome</th></tr>")
    return f"<table class='tests'>{head}{''.join(rows)}</table>"


def _new_points(record):
    rev, scale = record["revision"], _scale(record)
    new = [r["epoch_yr"] for r in rev["residuals"] if r["new"] and r["status"] == "used"]
    last = rev.get("last_epoch_yr")
    after = ("all measurements decide (the manifest gives no last epoch of the catalogued "
             "orbit)" if last is None else
             f"newer than the catalogue orbit's last data at "
             f"{fm.epoch(last, scale, internal=True, label=False)}")
    span = (f"epochs {fm.epoch(min(new), scale, internal=True, label=False)} to "
            f"{fm.epoch(max(new), scale, internal=True)}" if new else "none")
    return (f"<p><b data-value='{rev['n_new']}' id='n-new'>{rev['n_new']}</b> new "
            f"{'point' if rev['n_new'] == 1 else 'points'} ({escape(after)}): "
            f"<span id='new-epochs'>{escape(span)}</span>; a {fm.number(ALPHA)} "
            f"false-alarm level per test; contradicted: rejected even with every \u03c3 "
            f"\u00d7 {ERROR_INFLATION:g}.</p>")


def _verdict_section(record):
    cls = curation.verdict_class(record.get("verdict"), record.get("status"))
    rev = record.get("revision")
    parts = [f"<section class='verdict v-{cls}' id='verdict'>"
             f"<h2>{curation.VERDICT_MARKS[cls]} "
             f"{escape(record.get('verdict') or record['status'])}</h2>"]
    if rev:
        parts.append(f"<p>{escape(rev['reason'])}</p>")
        if rev["n_new"]:
            parts += [_new_points(record), _tests_table(rev)]
    elif record["status"] == "failed" and not record.get("verdict"):
        parts.append("<p>No verdict: the system failed before its measurements could be "
                     "tested (below).</p>")
    elif record.get("verdict") == "no previous orbit":
        parts.append("<p>The manifest gives no catalogued orbit: the system is only fitted.</p>")
    if record.get("fit_note"):
        parts.append(f"<p>{escape(record['fit_note'])}</p>")
    return "\n".join(parts + ["</section>"])


def _problems_section(record):
    parts = []
    if record.get("error"):
        parts.append(f"<section class='error' id='error'><h2>Failed</h2>"
                     f"<p>{escape(record['error'])}</p></section>")
    warnings = record.get("warnings") or []
    if warnings:
        items = "".join(f"<li>{escape(w)}</li>" for w in warnings)
        parts.append(f"<section class='warnings' id='warnings'><h2 class='warn'>\u26a0 "
                     f"{len(warnings)} {'warning' if len(warnings) == 1 else 'warnings'}"
                     f"</h2><ul>{items}</ul></section>")
    return "\n".join(parts)


def _element_cells(key, value, error, scale):
    """(value text, error text) of an element in the page's units (T in the log's scale)."""
    if key == "T":
        err = None if error is None else float(interval_in_scale(error, scale))
        return fm.epoch(value, scale, internal=True, label=False, error=err), ""
    return fm.value_error(value, error), ""


def _elements_table(record):
    comp, doc = record["comparison"], record["document"]
    from ..result import element_errors
    old_err = (record.get("previous") or {}).get("errors") or {}
    new_err = element_errors(doc)
    scale = _scale(record)
    rows = []
    for key in ELEMENT_KEYS:
        e = comp["elements"][key]
        unit = fm.epoch_label(scale) if key == "T" else ELEMENT_UNITS[key]
        to_unit = (lambda x: float(interval_in_scale(x, scale))) if key == "T" else float
        diff_unit = ("d" if to_unit(1.0) != 1.0 else "yr") if key == "T" else unit
        sigma = e["sigma"] if e["sigma"] > 0 else None
        n_sigma = e["n_sigma"]
        rows.append(
            f"<tr data-element='{key}'><td>{escape(ELEMENT_NAMES[key][0])} "
            f"{escape(ELEMENT_NAMES[key][2])}</td>"
            + _num(e["old"], _element_cells(key, e["old"], old_err.get(key), scale)[0])
            + _num(e["new"], _element_cells(key, e["new"], e.get("new_error", new_err.get(key)),
                                            scale)[0])
            + f"<td>{escape(unit)}</td>"
            + _num(to_unit(e["difference"]), fm.value_error(to_unit(e["difference"]),
                                                            None if sigma is None
                                                            else to_unit(sigma), diff_unit))
            + (_num(n_sigma, fm.fixed(n_sigma, 1)) if n_sigma is not None
               else "<td class='num' data-value='nan'>no error known</td>") + "</tr>")
    head = ("<tr><th>element</th><th class='num'>catalogued</th><th class='num'>new fit</th>"
            "<th>unit</th><th class='num'>new \u2212 old \u00b1 \u03c3</th>"
            "<th class='num'>difference [\u03c3]</th></tr>")
    w = comp["window_yr"]
    sep = (f"<p>Largest distance between the two predictions over "
           f"{fm.epoch(w[0], scale, internal=True, label=False)}\u2013"
           f"{fm.epoch(w[1], scale, internal=True)}: "
           f"<span data-value='{comp['max_separation_arcsec']!r}'>"
           f"{fm.number(comp['max_separation_arcsec'], 3)}\u2033</span> at "
           f"{fm.epoch(comp['epoch_of_max_yr'], scale, internal=True, label=False)}, "
           f"<span data-value='{comp['max_separation_sigma']!r}'>"
           f"{fm.fixed(comp['max_separation_sigma'], 1)}</span> times a new measurement's "
           f"typical \u03c3 ({fm.number(comp['typical_sigma_arcsec'], 2)}\u2033).</p>")
    return ("<h2 id='elements'>Catalogued against new elements</h2><p>\u03c3 combines the "
            "catalogued and the new errors in quadrature (catalogued errors as the manifest "
            "gives them); \u03a9 and \u03c9 after the common 180\u00b0 shift that brings the "
            "nodes together, the new T moved by whole periods to the passage nearest the "
            "catalogued one.</p>"
            f"<table class='elements'>{head}{''.join(rows)}</table>{sep}")


def _png(fig):
    # tight: the legends below the axes stay whole however many entries they have
    png = style.figure_bytes(fig, "png", bbox_inches="tight", pad_inches=0.04)
    return base64.b64encode(png).decode("ascii")


def _figure(name, fig, caption):
    # Shown at the figure's own size (96 CSS px an inch), so its fonts read as designed.
    width = round(96 * fig.get_size_inches()[0])
    return (f"<figure id='fig-{name}'><img width='{width}' alt='{escape(caption)}' "
            f"src='data:image/png;base64,{_png(fig)}'><figcaption>{escape(caption)}"
            "</figcaption></figure>")


def _figures_section(record):
    parts = []
    has_old = curation.previous_elements(record) is not None
    if record.get("document") is not None:
        ax = curation.plot_sky_old_and_new(record)
        parts.append(_figure("sky", ax.figure, (
            "Apparent orbit on the sky, North up, East left, primary at the origin. Solid: the "
            "new fit with its measurements and their O\u2212C lines"
            + ("; dashed, in the verdict's colour: the catalogued orbit, its predicted "
               "positions at the new epochs (\u00d7) joined to the new measurements "
               "(squares) by dotted lines." if has_old else "; squares: new measurements."))))
    if record.get("revision"):
        parts.append(_figure("residuals", curation.plot_residuals_old_and_new(record), (
            "Residuals (observed \u2212 computed) in position angle and separation against "
            "the catalogued orbit (left: new points filled, older hollow) and against the "
            "new fit (right); shaded: after the catalogue orbit's last data.")))
    return "\n".join(parts)


def review_page(record, links=()):
    """The page as one HTML string.

    Parameters
    ----------
    record : dict
        A batch record (``batch.process_system``), with ``previous`` and ``epoch_scale``.
    links : iterable of (file name, description)
        The system's other files, linked from the header.
    """
    title = escape(record["id"])
    link_list = " \u00b7 ".join(f"<a href='{escape(name)}'>{escape(what)}</a>"
                                for name, what in links)
    body = [f"<p class='meta'><a href='../../index.html'>\u2190 batch index</a>"
            + (f" \u00b7 {link_list}" if link_list else "") + "</p>",
            f"<h1>{title}</h1>",
            f"<p class='meta'>{verdict_badge(record.get('verdict'), record['status'])} "
            f"\u00b7 system seed {record['seed']}"
            + (f" \u00b7 epochs as in the log ({escape(fm.epoch_label(_scale(record)))})"
               if record.get("epoch_scale") else "") + "</p>",
            _verdict_section(record), _problems_section(record), _figures_section(record)]
    if record.get("comparison") and record.get("document") is not None:
        body.append(_elements_table(record))
    return ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
            "<meta name='viewport' content='width=device-width, initial-scale=1'>"
            f"<title>{title}</title><style>{CSS}</style></head><body>\n"
            + "\n".join(b for b in body if b) + "\n</body></html>\n")
