"""The one way orbweigh writes a measured number and an epoch (terminal, HTML, LaTeX).

Rule (``ROUNDING_RULE``): an uncertainty is rounded to two significant digits, never
beyond the units place; the value is written to the same decimal place. A median with an
interval takes the place of the narrower half of the interval, and so do the interval's
ends. Shares are percentages. A p-value has two significant digits and is never written
as 0: below ``P_FLOOR`` (where a tail probability has underflowed, or lost its digits
among the subnormal numbers) it is written as that bound, '< 1e-300'. Epochs are written
in the log's own scale with its name.
"""
from __future__ import annotations

import math

__all__ = ["ROUNDING_RULE", "decimals_for", "value_error_parts", "value_error",
           "interval_parts", "interval", "fixed", "number", "percent", "P_FLOOR", "p_value",
           "EPOCH_LABELS", "epoch_label", "epoch_in_scale", "epoch", "counted", "line_list"]

ROUNDING_RULE = (
    "an uncertainty is rounded to two significant digits (never beyond the units place) "
    "and its value to the same decimal place; a median with an interval is written to the "
    "place of the interval's narrower half, and so are the interval's ends; shares are "
    "percentages; epochs are in the log's own scale. Rounding is the only change: every "
    "number shown is the result document's.")

_MINUS = "\N{MINUS SIGN}"
_PM = "\N{PLUS-MINUS SIGN}"


def _finite(x):
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def decimals_for(uncertainty, digits=2):
    """Decimal places that keep ``digits`` significant digits of ``uncertainty`` (>= 0)."""
    return max(0, digits - 1 - math.floor(math.log10(abs(uncertainty))))


def fixed(x, decimals):
    """``x`` to a fixed number of decimals ('' for None, 'unbounded' for an infinity)."""
    if x is None:
        return ""
    if not _finite(x):
        return "unbounded" if isinstance(x, float) and math.isinf(x) else str(x)
    return f"{x:.{decimals}f}"


def number(x, digits=4):
    """A number without an uncertainty to ``digits`` significant digits; ints as they are."""
    if x is None:
        return ""
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return str(x)
    if isinstance(x, int):
        return str(x)
    return f"{x:.{digits}g}" if math.isfinite(x) else str(x)


def value_error_parts(value, error):
    """(value, error) strings by the rule; error '' when missing or not positive."""
    if not _finite(error) or error <= 0:
        return number(value, 6), ""
    d = decimals_for(error)
    return fixed(value, d), fixed(error, d)


def value_error(value, error, unit="", latex=False):
    """'1.930 ± 0.028 arcsec' (or '$1.930 \\pm 0.028$' with ``latex``)."""
    v, e = value_error_parts(value, error)
    if latex:
        return f"${v} \\pm {e}$" if e else f"${v}$"
    text = f"{v} {_PM} {e}" if e else v
    return f"{text} {unit}".rstrip()


def interval_parts(median, low, high, *others):
    """Strings of a median, its interval ends and ``others`` at the narrower half's place.

    A None end is an unbounded side ('unbounded'); without any finite half the numbers get
    six significant digits.
    """
    halves = [h for h in ((median - low) if _finite(median) and _finite(low) else None,
                          (high - median) if _finite(median) and _finite(high) else None)
              if h is not None and h > 0]
    if not halves:
        return tuple("unbounded" if x is None else number(x, 6)
                     for x in (median, low, high, *others))
    d = decimals_for(min(halves))
    return tuple("unbounded" if x is None else fixed(x, d) for x in (median, low, high, *others))


def interval(median, low, high, unit="", latex=False):
    """Median with asymmetric errors: '2.05 +0.11 −0.09 unit' or '$2.05^{+0.11}_{-0.09}$'.

    The two errors come from the unrounded numbers and are rounded at the narrower one's
    place, as the median is; a None end is an unbounded side.
    """
    up = None if high is None else high - median
    down = None if low is None else median - low
    halves = [h for h in (up, down) if h is not None and h > 0]
    d = decimals_for(min(halves)) if halves else None

    def show(x):
        if x is None:
            return r"\infty" if latex else "unbounded"
        return fixed(x, d) if d is not None else number(x, 6)
    m = fixed(median, d) if d is not None else number(median, 6)
    if latex:
        return f"${m}^{{+{show(up)}}}_{{-{show(down)}}}$"
    return f"{m} +{show(up)} {_MINUS}{show(down)} {unit}".rstrip()


def percent(share, decimals=1):
    """A share (fraction) as a percentage: 0.9975 -> '99.8 %'."""
    return "" if share is None else f"{100.0 * share:.{decimals}f} %"


#: Smallest p-value written as a number; below it only the bound is shown. A tail
#: probability (``revision.chi2_tail``, the chi2 tail) reads 0 once the true value is
#: below the smallest double (about 1e-308, 5e-324 with subnormals), so a 0 always means
#: "< 1e-300"; tested against mpmath.
P_FLOOR = 1e-300


def p_value(p, name=""):
    """A p-value to two significant digits, an underflowed one as a bound: '0.028',
    '< 1e-300'; with ``name`` the statement: 'p = 0.028', 'p < 1e-300'."""
    p = float(p)
    if p < P_FLOOR:
        text = f"< {P_FLOOR:.0e}"
        return f"{name} {text}" if name else text
    text = number(p, 2)
    return f"{name} = {text}" if name else text


# ---------------------------------------------------------------------------- epochs
#: How each scale is named beside an epoch.
EPOCH_LABELS = {"besselian": "Besselian year", "julian": "Julian year",
                "iso": "Julian year", "jd": "JD", "mjd": "MJD"}


def epoch_label(scale):
    """Name of an epoch scale as shown to the user ('Besselian year', 'JD', ...)."""
    return EPOCH_LABELS[scale]


def epoch_in_scale(jyear, scale):
    """An epoch given in internal Julian years, as a number in ``scale``."""
    from .reductions import from_julian_year
    return float(from_julian_year(jyear, scale))


def epoch(value, scale, decimals=None, error=None, label=True, internal=False):
    """An epoch in the log's scale with its label: '2009.372 ± 0.015 (Besselian year)'.

    Parameters
    ----------
    value : float
        The epoch, already in ``scale`` (or in internal Julian years with ``internal``).
    scale : str
        The log's epoch scale (``result.epoch_scale_of``).
    decimals : int, optional
        Fixed decimals when there is no error (default 3 for years, 1 for days).
    error : float, optional
        Uncertainty in the unit of ``scale`` (yr or d); sets the decimals by the rule.
    label : bool
        Append the scale's name in parentheses.
    """
    if value is None:
        return ""
    if internal:
        value = epoch_in_scale(value, scale)
    if _finite(error) and error > 0:
        text = value_error(value, error)
    else:
        if decimals is None:
            decimals = 1 if scale in ("jd", "mjd") else 3
        text = fixed(value, decimals)
    prefix = {"jd": "JD ", "mjd": "MJD "}.get(scale, "")
    name = f" ({epoch_label(scale)})" if label and not prefix else ""
    return f"{prefix}{text}{name}"


def counted(n, singular, plural=None):
    """'1 measurement', '3 measurements' (``plural`` where adding an s is wrong)."""
    return f"{n} {singular if n == 1 else plural or singular + 's'}"


def line_list(lines, most=12):
    """'line 7' or 'lines 2, 3, 9' (the first ``most``, then '...'): log lines named in a
    message."""
    lines = [str(int(v)) for v in lines]
    shown = ", ".join(lines[:most]) + (" ..." if len(lines) > most else "")
    return f"line{'' if len(lines) == 1 else 's'} {shown}"
