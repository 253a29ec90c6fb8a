"""Numbers and tables of a result document: the rounding rule, LaTeX and ECSV tables.

The same rounding rule (``ROUNDING_RULE``) serves the HTML report and the LaTeX table.
"""
from __future__ import annotations

import math

import numpy as np

from ..elements import ELEMENT_KEYS
from ..reductions import epoch_unit
from ..result import epoch_scale_of

__all__ = ["ROUNDING_RULE", "ELEMENT_NAMES", "THIELE_INNES_KEYS", "MASS_KEYS",
           "RESIDUAL_COLUMNS", "decimals_for",
           "format_value_error", "format_interval", "format_number", "format_epoch",
           "elements_latex", "residuals_table"]

ROUNDING_RULE = (
    "a value with an uncertainty is rounded at the uncertainty's second significant digit, "
    "and the uncertainty at the same decimal place; a mass with its 68 % interval at the "
    "second significant digit of the narrower half of the interval; epochs to 4 decimals; "
    "residual-table entries to 4 significant digits; any other number to 6 significant "
    "digits. Rounding is the only change: every number shown is the result document's.")

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


def _finite(x):
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def decimals_for(uncertainty, digits=2):
    """Decimal places that keep ``digits`` significant digits of ``uncertainty`` (>= 0)."""
    return max(0, digits - 1 - math.floor(math.log10(abs(uncertainty))))


def format_number(x, digits=6):
    """A number without an uncertainty, to ``digits`` significant digits ('' for None)."""
    if x is None:
        return ""
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return str(x)
    if isinstance(x, int):
        return str(x)
    return f"{x:.{digits}g}"


def format_epoch(x):
    """An epoch (any scale) to 4 decimals."""
    return "" if x is None else f"{float(x):.4f}"


def format_value_error(value, error):
    """(value, error) strings by the rounding rule; error '' when it is missing or zero."""
    if not _finite(error) or error <= 0:
        return format_number(value), ""
    d = decimals_for(error)
    return f"{value:.{d}f}", f"{error:.{d}f}"


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
    value, low, high = (entry.get(k) for k in ("value", "low", "high"))
    halves = [h for h in ((value - low) if _finite(value) and _finite(low) else None,
                          (high - value) if _finite(value) and _finite(high) else None)
              if h is not None and h > 0]
    d = decimals_for(min(halves)) if halves else None

    def one(key):
        if key not in entry:
            return ""
        x = entry[key]
        if x is None:
            return "unbounded"
        return f"{x:.{d}f}" if d is not None else format_number(x)
    return tuple(one(k) for k in keys)


def _latex_escape(text):
    table = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
             "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
             "^": r"\textasciicircum{}"}
    return "".join(table.get(c, c) for c in str(text))


def _latex_unit(key, entry, doc):
    unit = entry.get("unit", "")
    if key == "T":
        scale = epoch_scale_of(doc)
        return {"besselian": "Besselian yr", "julian": "Julian yr", "iso": "Julian yr",
                "jd": "JD", "mjd": "MJD"}[scale]
    return {"arcsec": "arcsec", "deg": "deg", "yr": "yr", "mas": "mas"}.get(unit, unit)


def _latex_row(symbol, value, error, unit):
    cell = f"${value} \\pm {error}$" if error else f"${value}$"
    return f"{symbol} & {cell} & {unit} \\\\"


def elements_latex(doc):
    """A booktabs LaTeX table of the elements, Thiele-Innes constants and masses.

    Parameters
    ----------
    doc : dict
        Result document.

    Returns
    -------
    str
        A ``table`` environment (needs ``\\usepackage{booktabs}``); values by the module's
        rounding rule, uncertainties 1 sigma, masses as median and 68 % interval.
    """
    lines = [r"\begin{table}", r"\centering",
             r"\caption{Orbital elements of " + _latex_escape(doc.get("source", "the pair"))
             + r" (1$\sigma$ uncertainties).}", r"\label{tab:orbit}",
             r"\begin{tabular}{lrl}", r"\toprule", r"Element & Value & Unit \\", r"\midrule"]
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        value, error = format_value_error(entry["value"], entry.get("error"))
        lines.append(_latex_row(ELEMENT_NAMES[key][1], value, error, _latex_unit(key, entry, doc)))
    ti = doc.get("thiele_innes") or {}
    if ti:
        lines.append(r"\midrule")
        for key in THIELE_INNES_KEYS:
            value, error = format_value_error(ti[key]["value"], ti[key].get("error"))
            lines.append(_latex_row(f"${key}$", value, error, ti[key].get("unit", "arcsec")))
    lines += _latex_masses(doc)
    lines += [r"\bottomrule", r"\end{tabular}", r"\end{table}", ""]
    return "\n".join(lines)


def _latex_masses(doc):
    plx = doc.get("parallax") or {}
    mass = doc.get("mass") or {}
    rows = []
    if _finite(plx.get("value")):
        value, error = format_value_error(plx["value"], plx.get("error"))
        rows.append(_latex_row(r"$\varpi$", value, error, plx.get("unit", "mas")))
    for key in MASS_KEYS:
        entry = mass.get(key)
        if isinstance(entry, dict) and _finite(entry.get("value")):
            value, low, high = (v.replace("unbounded", r"\infty")
                                for v in format_interval(entry, ("value", "low", "high")))
            symbol = {"total": r"$\mathcal{M}_1+\mathcal{M}_2$", "primary": r"$\mathcal{M}_1$",
                      "secondary": r"$\mathcal{M}_2$"}[key]
            rows.append(f"{symbol} & ${value}$ $[{low}, {high}]$ & "
                        r"$\mathcal{M}_\odot$ \\")
    return ([r"\midrule"] + rows) if rows else []


def residuals_table(doc):
    """The residual rows as an astropy Table with units (rejected rows masked).

    Columns follow ``RESIDUAL_COLUMNS`` (the document's keys; plus ``epoch_text``, the
    epoch as written in the log, when the rows carry it); ``epoch`` is in the
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
    for key, unit in columns:
        values = [r.get(key) for r in rows]
        missing = np.array([v is None for v in values], bool)
        if key in ("epoch_text", "technique", "status", "reason", "note"):
            data = np.array(["" if v is None else str(v) for v in values], dtype=str)
        elif key == "line":
            data = np.array([0 if v is None else int(v) for v in values], dtype=int)
        else:
            data = np.array([np.nan if v is None else float(v) for v in values], float)
        unit = epoch_unit(scale) if unit == "epoch" else unit
        table[key] = MaskedColumn(data, mask=missing, unit=unit)
    table["epoch"].description = f"epoch as in the log ({scale} scale)"
    table["theta_deg"].description = "position angle as used (J2000), before any 180 deg flip"
    table["d_theta_deg"].description = "O-C in theta, after the flip correction of flipped rows"
    return table
