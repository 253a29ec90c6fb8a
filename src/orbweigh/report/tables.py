"""Tables of a result document: LaTeX and ECSV (numbers written by ``formatting``)."""
from __future__ import annotations

import math

import numpy as np

from .. import formatting as fmt
from ..elements import ELEMENT_KEYS
from ..formatting import ROUNDING_RULE, decimals_for
from ..reductions import epoch_unit
from ..result import epoch_scale_of

__all__ = ["ROUNDING_RULE", "ELEMENT_NAMES", "THIELE_INNES_KEYS", "MASS_KEYS",
           "RESIDUAL_COLUMNS", "RESIDUAL_DECIMALS", "decimals_for",
           "format_value_error", "format_interval",
           "elements_latex", "residuals_table"]

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
