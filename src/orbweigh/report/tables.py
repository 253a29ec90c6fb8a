"""Tables of a result document: LaTeX and ECSV (numbers written by ``formatting``)."""
from __future__ import annotations

import math

import numpy as np

from .. import formatting as fmt
from ..elements import ELEMENT_KEYS
from ..formatting import ROUNDING_RULE, decimals_for
from ..reductions import epoch_unit
from ..result import epoch_scale_of, t_is_node_passage

__all__ = ["ROUNDING_RULE", "ELEMENT_NAMES", "element_name", "THIELE_INNES_KEYS", "MASS_KEYS",
           "RESIDUAL_COLUMNS", "RESIDUAL_DECIMALS", "decimals_for",
           "format_value_error", "format_interval",
           "theta_equinox", "object_name", "parallax_entries", "elements_rows", "elements_latex", "elements_table_latex",
           "residuals_table"]

#: Name, LaTeX symbol and HTML symbol of each element.
ELEMENT_NAMES = {"P": ("Period", r"$P$", "P"), "T": ("Epoch of periastron", r"$T$", "T"),
                 "e": ("Eccentricity", r"$e$", "e"), "a": ("Semi-major axis", r"$a$", "a"),
                 "i": ("Inclination", r"$i$", "i"),
                 "Omega": ("Position angle of the node", r"$\Omega$",
                           "\N{GREEK CAPITAL LETTER OMEGA}"),
                 "omega": ("Argument of periastron", r"$\omega$", "\N{GREEK SMALL LETTER OMEGA}")}
THIELE_INNES_KEYS = ("A", "B", "F", "G")
MASS_KEYS = ("total", "primary", "secondary")

#: Residual columns: (key, unit or None; 'epoch' takes the document's epoch unit).
RESIDUAL_COLUMNS = (("line", None), ("epoch", "epoch"), ("epoch_yr", "yr"),
                    ("theta_deg", "deg"), ("rho_arcsec", "arcsec"),
                    ("sigma_theta_deg", "deg"), ("sigma_rho_arcsec", "arcsec"),
                    ("technique", None), ("theta_pred_deg", "deg"),
                    ("rho_pred_arcsec", "arcsec"), ("d_theta_deg", "deg"),
                    ("d_rho_arcsec", "arcsec"), ("status", None), ("reason", None),
                    ("note", None))

#: Fixed decimals of each numeric residual column (epochs: 3 in years, 1 in days).
RESIDUAL_DECIMALS = {"theta_deg": 2, "rho_arcsec": 4, "sigma_theta_deg": 2,
                     "sigma_rho_arcsec": 4, "theta_pred_deg": 2, "rho_pred_arcsec": 4,
                     "d_theta_deg": 2, "d_rho_arcsec": 4}


def _finite(x):
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def format_value_error(value, error):
    """(value, error) strings by the rounding rule (``formatting.value_error_parts``)."""
    return fmt.value_error_parts(value, error)


def format_interval(entry, keys=("value", "low", "high", "low95", "high95")):
    """Strings of a median and its percentiles (a mass block entry), by the rounding rule.

    Parameters
    ----------
    entry : dict
        {"value": median, "low"/"high": 16th/84th, "low95"/"high95": 2.5th/97.5th
        percentiles}; a None percentile (unbounded) gives 'unbounded', a missing one ''.
    keys : sequence of str
        The entries wanted, in order.
    """
    others = [k for k in keys if k not in ("value", "low", "high")]
    parts = dict(zip(("value", "low", "high", *others),
                     fmt.interval_parts(entry.get("value"), entry.get("low"), entry.get("high"),
                                        *(entry.get(k) for k in others))))
    return tuple(parts[k] if k in entry else "" for k in keys)


def _latex_escape(text):
    table = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
             "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
             "^": r"\textasciicircum{}"}
    return "".join(table.get(c, c) for c in str(text))


def theta_equinox(doc):
    """How the position angles are referred: 'J2000, precessed from ...' or 'equinox of
    date, not precessed' (from the document's "precession" record)."""
    p = doc.get("precession")
    if not isinstance(p, dict):
        return "equinox not recorded"
    if not p.get("applied"):
        return "equinox of date, not precessed (no coordinates of the pair)"
    where = f"RA {p['target_ra_deg']:.4f} deg, Dec {p['target_dec_deg']:+.4f} deg"
    return f"J2000, precessed from the coordinates {where} ({p.get('source', 'given')})"


def object_name(doc, name=None):
    """The object's name: ``name`` when given, else the log's file stem."""
    from pathlib import PurePath
    return name or doc.get("name") or PurePath(str(doc.get("source") or "pair")).stem


def _latex_unit(key, entry, doc):
    if key == "T":
        return fmt.epoch_label(epoch_scale_of(doc))
    unit = entry.get("unit", "")
    return {"solMass": r"$\mathcal{M}_\odot$", "km/s": r"km\,s$^{-1}$"}.get(unit, unit)


def _latex_cell(entry):
    """'$v \\pm e$', or '$m^{+a}_{-b}$' when the entry carries an interval (low, high)."""
    if _finite(entry.get("low")) and _finite(entry.get("high")) and _finite(entry.get("value")):
        return fmt.interval(entry["value"], entry["low"], entry["high"], latex=True)
    return fmt.value_error(entry.get("value"), entry.get("error"), latex=True)


_COMBINED = (("gamma", r"$\gamma$", "Systemic velocity"), ("K1", r"$K_1$", "Amplitude, primary"),
             ("K2", r"$K_2$", "Amplitude, secondary"))
_PLX_NAME = {"trigonometric": "trigonometric", "orbital": "orbital", "combined": "combined",
             "dynamical": "dynamical"}


def parallax_entries(doc):
    """(kind, entry, used) of every parallax of the document, the one the masses used first.

    ``entry`` has value and error, or a median with low/high (and low95/high95) percentiles;
    ``used`` tells whether the masses were computed with it.
    """
    plx, mass = doc.get("parallax") or {}, doc.get("mass") or {}
    used = mass.get("parallax_used") or plx.get("kind")
    entries = {plx.get("kind"): plx} if _finite(plx.get("value")) else {}
    if "orbital" in plx:
        entries["orbital"] = plx["orbital"]
    elif _finite((doc.get("orbital_parallax") or {}).get("value")):
        entries["orbital"] = doc["orbital_parallax"]
    if "combined" in plx:
        entries["combined"] = plx["combined"]
    return [(kind, entries[kind], bool(mass) and kind == used)
            for kind in sorted(entries, key=lambda k: k != used)]


def element_name(key, elements):
    """The name of an element of an elements block: T of a circular orbit is the epoch of
    passage through the node (``result.t_is_node_passage``)."""
    if key == "T" and t_is_node_passage(elements):
        return "Epoch of node passage"
    return ELEMENT_NAMES[key][0]


def _parallax_rows(doc):
    """The parallax the masses used first, then the others with the agreement."""
    plx = doc.get("parallax") or {}
    rows = [(r"$\varpi$", f"Parallax, {_PLX_NAME.get(kind, kind)}"
             + (" (used for the masses)" if used else ""), _latex_cell(entry), "mas")
            for kind, entry, used in parallax_entries(doc)]
    if "agreement_sigma" in plx.get("orbital", {}):
        rows.append(("", r"Orbital $-$ trigonometric parallax",
                     f"${plx['orbital']['agreement_sigma']:+.1f}$", r"$\sigma$"))
    return rows


def elements_rows(doc):
    """(symbol, quantity, value, unit) LaTeX cells of the elements, Thiele-Innes constants,
    velocities of a combined solution, parallaxes and masses."""
    el = doc["elements"]
    rows = [(ELEMENT_NAMES[k][1], element_name(k, el), _latex_cell(el[k]),
             _latex_unit(k, el[k], doc)) for k in ELEMENT_KEYS]
    ti = doc.get("thiele_innes") or {}
    rows += [(f"${k}$", "Thiele--Innes constant", _latex_cell(ti[k]), ti[k].get("unit", "arcsec"))
             for k in THIELE_INNES_KEYS if k in ti]
    rows += [(sym, name, _latex_cell(doc[k]), r"km\,s$^{-1}$") for k, sym, name in _COMBINED
             if isinstance(doc.get(k), dict)]
    rows += _parallax_rows(doc)
    mass = doc.get("mass") or {}
    symbols = {"total": (r"$\mathcal{M}_1+\mathcal{M}_2$", "Total mass"),
               "primary": (r"$\mathcal{M}_1$", "Mass of the primary"),
               "secondary": (r"$\mathcal{M}_2$", "Mass of the secondary")}
    rows += [(*symbols[k], _latex_cell(mass[k]), r"$\mathcal{M}_\odot$") for k in MASS_KEYS
             if isinstance(mass.get(k), dict) and _finite(mass[k].get("value"))]
    return rows


_LATEX_HEADER = ("% Written by orbweigh {version}. Plain LaTeX: needs no package (\\hline "
                 "rules), so it\n% compiles in a plain article or a journal class; "
                 "\\input{{{file}}} where the table goes.\n")


def _write_latex(table, caption, label, align, file, version):
    import io
    out = io.StringIO()
    table.write(out, format="ascii.latex", col_align=align,
                latexdict={"tabletype": "table", "caption": caption,
                           "preamble": [r"\centering"], "tablefoot": f"\\label{{{label}}}",
                           "header_start": r"\hline", "header_end": r"\hline",
                           "data_end": r"\hline"})
    return _LATEX_HEADER.format(version=version or "", file=file) + out.getvalue()


def elements_latex(doc, name=None):
    """The LaTeX table of one orbit (``elements.tex``): astropy's LaTeX writer, no package.

    Values by ``formatting`` (``\\pm`` for 1 sigma errors, ``^{+a}_{-b}`` for the 16th-84th
    percentile interval of posterior elements and masses); T in the log's epoch scale; the
    parallax the masses used comes first and says so.
    """
    from astropy.table import Table
    rows = elements_rows(doc)
    table = Table(rows=rows, names=("Symbol", "Quantity", "Value", "Unit"), dtype=[str] * 4)
    what = ("median and 16th--84th percentile interval of the posterior" if
            _finite(doc["elements"]["P"].get("low")) else r"1$\sigma$ uncertainties")
    caption = (f"Orbital elements of {_latex_escape(object_name(doc, name))} ({what}; "
               f"masses: median and 68\\% interval; $T$ as a "
               f"{fmt.epoch_label(epoch_scale_of(doc))}).")
    return _write_latex(table, caption, "tab:orbit", "llrl", "elements", doc.get("version"))


def elements_table_latex(docs, names=None, version=None):
    """One LaTeX table of many systems (``summary.tex``): a row per system with P, T, e, a,
    i, Omega, omega and the total mass, written as ``elements_latex`` writes them.

    Parameters
    ----------
    docs : sequence of dict
        Result documents (each with its own epoch scale: T says it per row).
    names : sequence of str, optional
        System names (default: each log's stem).
    version : str, optional
        The orbweigh version named in the header (default: the first document's), so a
        table written in parts (``files.TableChunks``) has one header.
    """
    from astropy.table import Table
    names = list(names) if names is not None else [None] * len(docs)
    rows = []
    for doc, name in zip(docs, names):
        el, mass = doc["elements"], doc.get("mass") or {}
        scale = {"besselian": "B", "julian": "J", "iso": "J", "jd": "JD ", "mjd": "MJD "}[
            epoch_scale_of(doc)]
        total = mass.get("total")
        rows.append([_latex_escape(object_name(doc, name))]
                    + [_latex_cell(el[k]) if k != "T" else f"{scale}{_latex_cell(el[k])}"
                       for k in ELEMENT_KEYS]
                    + [_latex_cell(total) if isinstance(total, dict) else "--"])
    header = ["System"] + [ELEMENT_NAMES[k][1] for k in ELEMENT_KEYS] + [r"$\mathcal{M}$"]
    units = ["", "yr", "", "", "arcsec", "deg", "deg", "deg", r"$\mathcal{M}_\odot$"]
    table = Table(rows=rows, names=header, dtype=[str] * len(header)) if rows else \
        Table(names=header, dtype=[str] * len(header))
    table.insert_row(0, units)
    caption = ("Orbital elements and total masses (1$\\sigma$ uncertainties or 16th--84th "
               "percentile intervals; $T$ in each log's epoch scale: B Besselian, J Julian "
               "year).")
    if version is None:
        version = docs[0].get("version") if docs else ""
    return _write_latex(table, caption, "tab:systems", "l" + "r" * 8, "summary", version)


def residuals_table(doc):
    """The residual rows as an astropy Table with units (rejected rows masked).

    Columns follow ``RESIDUAL_COLUMNS`` (the document's keys; plus ``epoch_text`` and
    ``technique_text``, the epoch and the technique as written in the log, when the rows
    carry them; ``technique`` is the class whose default sigmas apply); ``epoch`` is in the
    document's epoch scale (unit yr or d), ``epoch_yr`` in Julian years. Values are the
    JSON's, unrounded.
    """
    from astropy.table import MaskedColumn, Table
    rows = doc.get("residuals", [])
    scale = epoch_scale_of(doc)
    table = Table(meta={"source": doc.get("source", ""), "schema": doc.get("schema", ""),
                        "epoch_scale": scale, "seed": doc.get("seed"),
                        "version": doc.get("version", "")})
    columns = list(RESIDUAL_COLUMNS)
    if any("epoch_text" in r for r in rows):  # the epoch exactly as the log wrote it
        columns.insert(2, ("epoch_text", None))
    if any("technique_text" in r for r in rows):  # the technique as the log wrote it
        columns.insert(columns.index(("technique", None)) + 1, ("technique_text", None))
    for key, unit in columns:
        values = [r.get(key) for r in rows]
        missing = np.array([v is None for v in values], bool)
        if key in ("epoch_text", "technique", "technique_text", "status", "reason", "note"):
            data = np.array(["" if v is None else str(v) for v in values], dtype=str)
        elif key == "line":
            data = np.array([0 if v is None else int(v) for v in values], dtype=int)
        else:
            data = np.array([np.nan if v is None else float(v) for v in values], float)
        unit = epoch_unit(scale) if unit == "epoch" else unit
        table[key] = MaskedColumn(data, mask=missing, unit=unit)
    table["epoch"].description = f"epoch as in the log ({scale} scale)"
    table["theta_deg"].description = (f"position angle as used ({theta_equinox(doc)}), "
                                      "before any 180 deg flip")
    table["d_theta_deg"].description = "O-C in theta, after the flip correction of flipped rows"
    return table
