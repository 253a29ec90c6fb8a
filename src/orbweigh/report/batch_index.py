"""The batch's ``index.html``: one row a system, most urgent first, sortable offline.

Written in three parts (``index_head``, ``index_rows`` of each chunk of the summary,
``index_foot``), so a long catalogue's index is made without holding its summary; above
``INDEX_ROWS`` systems it lists the flagged ones only and counts the others.

Self-contained: inline style (the review pages' verdict classes) and a small inline script
that sorts the table by any column without a server - numbers by their ``data-value``
(the full value; empty cells last whichever the direction), text alphabetically, the
verdict by urgency. The column headers are buttons, so they sort from the keyboard too
(Tab, then Enter or Space), and each says its order in ``aria-sort``.
"""
from __future__ import annotations

from html import escape
from pathlib import Path

import numpy as np

from .. import formatting as fm
from .review import CSS, TEST_NAMES, verdict_badge

__all__ = ["index_head", "index_rows", "index_foot", "INDEX_ROWS", "COLUMNS"]

#: Most systems an index lists: a longer one lists only those a curator looks at (up to
#: this many) and counts the rest; summary.csv has them all. A row is ~0.9 kB of HTML
#: (benchmarks/bench_summary.py): 2000 rows are ~2 MB, 100,000 would be ~90 MB, more than
#: a browser opens and sorts comfortably (a page to act on, not an archive; common
#: practice, no source).
INDEX_ROWS = 2000

#: (summary column, header, unit, format) of the numbers: 'fN' N decimals, 'gN' N significant
#: digits, 'err' at the place of the column's error ``<name>_err`` (the formatter's rule).
COLUMNS = (("n_new", "new points", "", "i"),
           ("reduced_chi2_new", "\u03c7\u00b2/dof new", "", "f2"),
           ("p_decisive", "p that decided (test)", "", "p"),
           ("P", "P", "yr", "err"), ("e", "e", "", "err"), ("a", "a", "\u2033", "err"),
           ("max_element_change_sigma", "largest element change", "\u03c3", "f1"),
           ("max_separation_arcsec", "largest separation in 10 yr", "\u2033", "g3"),
           ("max_separation_sigma", "largest separation", "\u03c3", "f1"),
           ("mass_msun", "total mass", "M\u2609", "g3"))

# Long ids, warnings and errors wrap, even inside a path or an id without spaces
# ('anywhere' lowers the columns' minimum width too), so the table fits a 1366 px screen.
_EXTRA_CSS = """
body{max-width:none;margin:1rem 1.2rem} table.index{font-size:.8rem;width:100%}
table.index th{position:sticky;top:0;z-index:1;vertical-align:bottom;white-space:normal;
 max-width:7.5rem}
table.index th button{font:inherit;font-weight:600;color:inherit;background:none;border:0;
 padding:0;cursor:pointer;text-align:inherit} table.index th button:focus-visible{
 outline:2px solid #004488;outline-offset:2px}
table.index th[aria-sort=ascending] button::after{content:" \\25B2"}
table.index th[aria-sort=descending] button::after{content:" \\25BC"}
table.index tbody tr:nth-child(even) td{background:#f7f9fb}
table.index tbody tr:hover td{background:#eef3f7}
td.warnings-cell small{color:#5a4a2a} .unit{font-weight:400;color:#5a6b7b}
td.num small{display:block;white-space:normal} td.error-cell{min-width:6rem;color:#7a2334}
table.index th,table.index td{padding:.22rem .4rem}
td.id-cell{min-width:6rem} td.warnings-cell{min-width:10rem} .tally .badge{margin-right:.3rem}
td.id-cell,td.warnings-cell,td.error-cell{overflow-wrap:anywhere}
"""

# Sorts the table's body by the clicked column; data-value cells numerically, the rest as
# text; empty values last in both directions; stable, so ties keep the urgency order.
_SCRIPT = """
(function () {
  var table = document.getElementById("systems");
  var heads = table.tHead.rows[0].cells;
  function key(row, col, numeric) {
    var cell = row.cells[col];
    if (!numeric) { return cell.textContent.trim().toLowerCase(); }
    var v = parseFloat(cell.getAttribute("data-value"));
    return isNaN(v) ? null : v;
  }
  function sortBy(col) {
    var th = heads[col], numeric = th.getAttribute("data-type") === "num";
    var dir = th.getAttribute("aria-sort") === "ascending" ? -1 : 1;
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows).map(function (r, k) {
      return {row: r, key: key(r, col, numeric), k: k};
    });
    rows.sort(function (a, b) {
      if (a.key === null || a.key === "") { return (b.key === null || b.key === "") ? a.k - b.k : 1; }
      if (b.key === null || b.key === "") { return -1; }
      if (a.key < b.key) { return -dir; }
      if (a.key > b.key) { return dir; }
      return a.k - b.k;
    });
    rows.forEach(function (r) { body.appendChild(r.row); });
    for (var j = 0; j < heads.length; j++) { heads[j].removeAttribute("aria-sort"); }
    th.setAttribute("aria-sort", dir === 1 ? "ascending" : "descending");
  }
  Array.prototype.forEach.call(heads, function (th, col) {
    var button = th.querySelector("button");
    if (button) { button.addEventListener("click", function () { sortBy(col); }); }
  });
})();
"""


def _header(label, unit, numeric):
    unit_text = f" <span class='unit'>[{escape(unit)}]</span>" if unit else ""
    kind = " data-type='num' class='num'" if numeric else ""
    return f"<th scope='col'{kind}><button type='button'>{escape(label)}{unit_text}</button></th>"


def _number_cell(row, name, spec):
    value = float(row[name])
    untested = spec == "i" and row["verdict"] in ("", "no previous orbit")
    if not np.isfinite(value) or untested:
        return "<td class='num' data-value=''></td>"
    if spec == "i":
        text = str(int(value))
    elif spec == "err":
        error = float(row[f"{name}_err"])
        text = fm.value_error_parts(value, error if np.isfinite(error) else None)[0]
    elif spec == "p":
        test = TEST_NAMES.get(row["decided_by"], "")
        text = fm.p_value(value) + (f" <small>({escape(test)})</small>" if test else "")
        return f"<td class='num' data-value='{value!r}'>{text}</td>"
    else:
        text = fm.fixed(value, int(spec[1:])) if spec[0] == "f" else fm.number(value,
                                                                              int(spec[1:]))
    return f"<td class='num' data-value='{value!r}'>{escape(text)}</td>"


def _warnings_cell(row):
    """The mark with the count, the full list beside it (visible, not only on hover)."""
    if not row["n_warnings"]:
        return "<td class='warnings-cell' data-value=''></td>"
    return (f"<td class='warnings-cell' data-value='{int(row['n_warnings'])}'>"
            f"<span class='warn' title='{escape(row['warnings'])}'>&#9888; "
            f"{row['n_warnings']}</span> <small>{escape(row['warnings'])}</small></td>")


def _row(row, order):
    cells = [f"<td class='num' data-value='{int(row['rank'])}'>{row['rank']}</td>",
             f'<td class="id-cell"><a href="{escape(row["link"])}">{escape(row["id"])}</a>'
             "</td>",
             f"<td data-value='{order}' "
             f"title='{escape(row['reason'])}'>{verdict_badge(row['verdict'], row['status'])}"
             "</td>"]
    cells += [_number_cell(row, name, spec) for name, _, _, spec in COLUMNS]
    cells += [_warnings_cell(row), f"<td class='error-cell'>{escape(row['error'])}</td>"]
    return "<tr>" + "".join(cells) + "</tr>"


def _tally(counts):
    return " ".join(
        f"{n} {verdict_badge('' if v == 'failed' else v, 'failed' if v == 'failed' else 'done')}"
        for v, n in counts.items() if n)


def _omitted_note(omitted, n_systems):
    """Which systems a long index leaves out, counted by class, and where they are."""
    n_listed = n_systems - sum(omitted.values())
    return (f"<p class='meta omitted'>This index lists {n_listed} of the {n_systems} "
            "systems: the first, in summary order, of those a curator looks at "
            "(contradicted, drifting, failed or with warnings). Not listed: "
            f"{_tally(omitted)}. Every system is in <a href='summary.csv'>summary.csv</a> "
            "(and summary.ecsv), in the same order; the # column is the rank there.</p>\n")


def index_head(manifest, seed, counts, n_warned, omitted=None):
    """The index up to its first row.

    Parameters
    ----------
    manifest : str or Path
        The manifest; only its file name is shown.
    seed : int
        The batch seed.
    counts : dict
        {class: number of systems}, every class of ``batch.URGENCY`` in its order (most
        urgent first), zeros included.
    n_warned : int
        Systems with warnings.
    omitted : dict, optional
        {class: number of systems not listed} when the index lists only some systems
        (``INDEX_ROWS``).
    """
    from ..revision import ALPHA, ERROR_INFLATION
    head = ("<tr>" + _header("#", "", True) + _header("system", "", False)
            + "<th scope='col' data-type='num'><button type='button'>verdict</button></th>"
            + "".join(_header(label, unit, True) for _, label, unit, _ in COLUMNS)
            + _header("warnings", "", True) + _header("error", "", False) + "</tr>")
    name = escape(Path(manifest).name)
    n_systems = sum(counts.values())
    count = f"{n_systems} {'system' if n_systems == 1 else 'systems'}"
    return ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
            "<meta name='viewport' content='width=device-width, initial-scale=1'>"
            f"<title>orbweigh batch: {name}</title><style>{CSS}{_EXTRA_CSS}</style></head>"
            f"<body>\n<h1>Batch of {name}</h1>\n"
            f"<p class='tally'>{count}, most urgent first: {_tally(counts) or 'none'}"
            + (f" \u00b7 <span class='warn'>&#9888; {n_warned} with warnings</span>"
               if n_warned else "") + "</p>\n"
            + (_omitted_note(omitted, n_systems) if omitted else "")
            + f"<p class='meta'>Batch seed {seed}. The verdict tests the new points against "
            f"the catalogued orbit at the {fm.number(ALPHA)} level: contradicted = rejected "
            f"even with every \u03c3 \u00d7 {ERROR_INFLATION:g}; drifting = rejected as "
            "stated or by an offset and trend; the p-value shown is the one that decided "
            "(for consistent: the test closest to rejecting). Click a column header (or "
            "Tab to it and press Enter) to sort; again to reverse.</p>\n"
            f"<table class='index' id='systems'>\n<thead>{head}</thead>\n<tbody>\n")


def index_rows(rows, orders):
    """The index rows of summary rows (``batch`` summary columns), one a line; ``orders``:
    each row's class as its place in ``batch.URGENCY`` (the verdict column's sort order)."""
    return "".join(_row(row, order) + "\n" for row, order in zip(rows, orders))


def index_foot():
    """The index after its last row."""
    return f"</tbody></table>\n<script>{_SCRIPT}</script>\n</body></html>\n"
