"""Reductions to a common system: epoch scales and precession of position angles to J2000.

Internal time axis: decimal Julian years (TT), J2000.0 = 2000.0, year = 365.25 d.
A log's epochs are written back in the scale the log used:

=========== ============================= ==================================
scale       how the log wrote it          value given back
=========== ============================= ==================================
besselian   ``1934.008`` or ``B1934.008`` Besselian year (the trade's custom)
julian      ``J1934.008``                 Julian year
jd          ``JD2427000.5`` / large value Julian date [d]
mjd         ``MJD51544.5``                modified Julian date [d]
iso         ``1934-01-03``                Julian year (an ISO date has no decimal form)
=========== ============================= ==================================

A plain number is a Besselian year, or a Julian date when above 100000; plain years outside
``PLAUSIBLE_YEARS`` are refused as typos or unprefixed day counts, and day counts (JD, MJD)
whose year falls outside the same window are refused too. Civil dates are read on
the TT scale (the minute or so to UT is far below what an orbit resolves).

Position angles measured for the equinox of date are referred to equinox J2000 by
``precess_theta_to_j2000`` (rigorous, astropy FK5 precession);
``approx_theta_correction_deg`` is the classic linear formula used as a check.
"""
from __future__ import annotations

import math
import re

import numpy as np

from .constants import JULIAN_YEAR_D as _JULIAN_YEAR_D
from .errors import InputError

__all__ = ["EPOCH_SCALES", "to_julian_year", "from_julian_year", "epoch_unit", "interval_in_scale",
           "PLAUSIBLE_YEARS", "split_epoch", "parse_epoch", "parse_epochs", "julian_years_of",
           "PA_PRECESSION_DEG_PER_YR", "parse_target_coordinates", "parse_right_ascension",
           "parse_declination", "precess_theta_to_j2000",
           "precess_theta_to_date",
           "approx_theta_correction_deg"]

EPOCH_SCALES = ("besselian", "julian", "jd", "mjd", "iso")

_J2000_JD = 2451545.0
_MJD_OFFSET = 2400000.5
#: Besselian epochs: JD = 2415020.31352 + 365.242198781 (B - 1900), in TT here (Lieske
#: 1979, A&A 73, 282; the IAU 1976 definition of SOFA's iauEpb2jd and iauEpb and of
#: astropy's 'byear'; memory). B1900.0 lies this many days before J2000.0:
_B1900_BEFORE_J2000_D = 2451545.0 - 2415020.31352
_TROPICAL_YEAR_D = 365.242198781


def _time_class():
    from astropy.time import Time  # imported on use: keeps the command quick to start
    return Time


def to_julian_year(values, scale):
    """Decimal Julian years (TT) from epoch numbers written in ``scale``."""
    v = np.asarray(values, float)
    if scale in ("julian", "iso"):
        return v
    if scale == "jd":
        return 2000.0 + (v - _J2000_JD) / _JULIAN_YEAR_D
    if scale == "mjd":
        return 2000.0 + (v + _MJD_OFFSET - _J2000_JD) / _JULIAN_YEAR_D
    if scale == "besselian":        # closed form: no astropy.time to import (0.2 s)
        return 2000.0 + ((v - 1900.0) * _TROPICAL_YEAR_D - _B1900_BEFORE_J2000_D) / _JULIAN_YEAR_D
    raise ValueError(f"unknown epoch scale {scale!r}; expected one of {EPOCH_SCALES}")


def from_julian_year(jyear, scale):
    """Epoch numbers in ``scale`` from decimal Julian years (inverse of to_julian_year)."""
    t = np.asarray(jyear, float)
    if scale in ("julian", "iso"):
        return t
    if scale == "jd":
        return _J2000_JD + (t - 2000.0) * _JULIAN_YEAR_D
    if scale == "mjd":
        return _J2000_JD + (t - 2000.0) * _JULIAN_YEAR_D - _MJD_OFFSET
    if scale == "besselian":
        return 1900.0 + ((t - 2000.0) * _JULIAN_YEAR_D + _B1900_BEFORE_J2000_D) / _TROPICAL_YEAR_D
    raise ValueError(f"unknown epoch scale {scale!r}; expected one of {EPOCH_SCALES}")


def epoch_unit(scale):
    """Unit of an epoch (and of its error) in ``scale``: 'yr' or 'd'."""
    return "d" if scale in ("jd", "mjd") else "yr"


def interval_in_scale(years, scale):
    """An interval of Julian years expressed in the unit of ``scale`` (days for jd/mjd)."""
    return np.asarray(years, float) * (_JULIAN_YEAR_D if epoch_unit(scale) == "d" else 1.0)


# --------------------------------------------------------------------------- epochs as written

#: Plain decimal years outside this window are taken for a typo or an unprefixed day count.
PLAUSIBLE_YEARS = (1500.0, 2500.0)

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}([ T]\d{1,2}(:\d{2}){0,2}(\.\d*)?)?$")
_PREFIXES = (("MJD", "mjd"), ("JD", "jd"), ("B", "besselian"), ("J", "julian"))
_HOW_TO_WRITE = ("write a decimal year (1934.372, read as Besselian), B1934.372, J1934.372, "
                 "JD2427574.5, MJD27574.0 or an ISO date 1934-05-17")


def split_epoch(text, day_unit=False):
    """The number in an epoch as written, and the scale it is written in.

    Parameters
    ----------
    text : str
        An epoch as written in a log (see the module table). A plain number is a Besselian
        year; a plain number above 100000 is a Julian date.
    day_unit : bool
        True when the column's unit says days: plain numbers are then JD (above 100000)
        or MJD.

    Returns
    -------
    value : float
        The number in the scale's own unit (year, JD or MJD); for 'iso' the Julian year.
    scale : str
        One of ``EPOCH_SCALES``.

    Raises
    ------
    ValueError
        With a message saying what was expected.
    """
    s = str(text).strip()
    if _ISO_DATE.match(s):
        try:
            t = _time_class()(s, format="isot" if "T" in s else "iso", scale="tt")
        except ValueError:
            raise ValueError(f"'{s}' looks like an ISO date but is not a valid one "
                             "(expected YYYY-MM-DD or YYYY-MM-DDThh:mm)") from None
        return float(t.jyear), "iso"
    scale, number = None, s
    for prefix, name in _PREFIXES:
        if s.upper().startswith(prefix):
            scale, number = name, s[len(prefix):].strip()
            break
    try:
        value = float(number)
    except ValueError:
        raise ValueError(f"cannot read '{s}' as an epoch; {_HOW_TO_WRITE}") from None
    if not math.isfinite(value):
        raise ValueError(f"epoch '{s}' is not a finite number; {_HOW_TO_WRITE}")
    if scale is None:
        if value > 100000.0:
            scale = "jd"
        elif day_unit:
            scale = "mjd"
        else:
            scale = "besselian"
    if scale in ("besselian", "julian") and not PLAUSIBLE_YEARS[0] <= value <= PLAUSIBLE_YEARS[1]:
        raise ValueError(f"epoch '{s}' read as a year is outside {PLAUSIBLE_YEARS[0]:.0f}-"
                         f"{PLAUSIBLE_YEARS[1]:.0f}; if it is a day count give it a prefix "
                         "(JD2427574.5 or MJD27574.0), otherwise correct the year")
    if scale in ("jd", "mjd"):
        # Day counts pass the same window as years (J2000.0 = JD 2451545.0 TT; MJD = JD -
        # 2400000.5; Seidelmann, Explanatory Supplement to the Astronomical Almanac, 1992).
        jd = value + (2400000.5 if scale == "mjd" else 0.0)
        year = 2000.0 + (jd - _J2000_JD) / _JULIAN_YEAR_D
        if not PLAUSIBLE_YEARS[0] <= year <= PLAUSIBLE_YEARS[1]:
            raise ValueError(f"epoch '{s}' read as {scale.upper()} {value:.10g} is the year "
                             f"{year:.6g}, outside {PLAUSIBLE_YEARS[0]:.0f}-"
                             f"{PLAUSIBLE_YEARS[1]:.0f}; correct the day count (JD2427574.5 "
                             "or MJD27574.0)")
    return value, scale


def parse_epoch(text, day_unit=False):
    """Decimal Julian year (TT) and scale of one epoch as written (see ``split_epoch``).

    Civil dates are read on the TT scale: the difference from UT (about a minute) is far
    below anything an orbit can resolve.
    """
    value, scale = split_epoch(text, day_unit)
    return float(to_julian_year(value, scale)), scale


def parse_epochs(texts, day_unit=False):
    """Vectorised ``parse_epoch``: (Julian years, scales) arrays; ValueError names the index."""
    values, scales = [], []
    for k, text in enumerate(texts):
        try:
            value, scale = split_epoch(text, day_unit)
        except ValueError as exc:
            raise ValueError(f"epoch {k}: {exc}") from None
        values.append(value)
        scales.append(scale)
    return julian_years_of(values, scales), np.array(scales, dtype=str)


def julian_years_of(values, scales):
    """Julian years from numbers and their per-element scales (one astropy call a scale)."""
    values, scales = np.asarray(values, float), np.asarray(scales, dtype=str)
    out = np.empty(values.shape)
    for scale in np.unique(scales):
        sel = scales == scale
        out[sel] = to_julian_year(values[sel], scale)
    return out


# ------------------------------------------------------------- position angles to equinox J2000

#: Precession of a position angle per year and unit sin(alpha) sec(delta) [deg / yr].
PA_PRECESSION_DEG_PER_YR = 0.00557


def parse_target_coordinates(ra, dec):
    """Right ascension and declination in degrees from numbers or sexagesimal text.

    The one reader of target coordinates (command line, log header, elements file, batch
    manifest): ``parse_right_ascension`` and ``parse_declination``.

    Parameters
    ----------
    ra : float or str
        Degrees (``101.287``) or hours as 'hh:mm:ss.s' / '06h45m08.9s'.
    dec : float or str
        Degrees (``-16.716``) or 'dd:mm:ss' / '-16d42m58s'.

    Returns
    -------
    ra_deg, dec_deg : float

    Raises
    ------
    InputError
        When a value cannot be read or is out of range.
    """
    return parse_right_ascension(ra), parse_declination(dec)


def parse_right_ascension(value):
    """Right ascension [deg, 0..360) from degrees or hours 'hh:mm:ss.s' / '06h45m08.9s'."""
    ra_deg = _angle(value, "RA", "hourangle", "hh:mm:ss.s")
    if not 0.0 <= ra_deg < 360.0:
        raise InputError(f"target RA {ra_deg} deg is outside [0, 360)")
    return ra_deg


def parse_declination(value):
    """Declination [deg, open interval (-90, 90)] from degrees or 'dd:mm:ss' / '-16d42m58s'."""
    dec_deg = _angle(value, "Dec", "deg", "+dd:mm:ss")
    if not -90.0 < dec_deg < 90.0:
        raise InputError(f"target Dec {dec_deg} deg is outside (-90, 90): position angles "
                         "are undefined at the pole")
    return dec_deg


def _angle(value, name, sexagesimal_unit, form):
    """Degrees from a plain number, else from sexagesimal text in ``sexagesimal_unit``."""
    text = str(value).strip()
    try:
        return float(text)
    except ValueError:
        pass
    degrees = _sexagesimal_degrees(text, sexagesimal_unit)
    if degrees is None:
        raise InputError(f"target {name} '{text}' is neither degrees nor sexagesimal "
                         f"({form})")
    return degrees


_SEXAGESIMAL = re.compile(r"([+-]?)\s*(\d+(?:\.\d*)?)(?:\s*[hd:\s]\s*(\d+(?:\.\d*)?))?"
                          r"(?:\s*[m:\s]\s*(\d+(?:\.\d*)?))?\s*[hdms]?")


def _sexagesimal_degrees(text, default_unit):
    """Degrees from 'hh:mm:ss.s', '06h45m08.9s', '-16d42m58s', '+38 41 06', '6h45.2m'.

    The first field is hours with an 'h', degrees with a 'd', else ``default_unit``
    ('hourangle' or 'deg'); minutes and seconds below 60, only the last field with a
    fraction. None when the text is not of that form.
    """
    letters = set(re.sub(r"[^a-z]", "", text.lower()))
    if not letters <= set("hdms") or {"h", "d"} <= letters:
        return None
    match = _SEXAGESIMAL.fullmatch(text.lower())
    if match is None:
        return None
    sign, *fields = match.groups()
    fields = [f for f in fields if f is not None]
    values = [float(f) for f in fields]
    if any("." in f for f in fields[:-1]) or any(v >= 60.0 for v in values[1:]):
        return None
    magnitude = sum(v / 60.0**k for k, v in enumerate(values))
    hours = "h" in letters or ("d" not in letters and default_unit == "hourangle")
    return (-1.0 if sign == "-" else 1.0) * magnitude * (15.0 if hours else 1.0)


def precess_theta_to_j2000(theta_deg, epoch_yr, ra_deg, dec_deg):
    """Position angles measured for the equinox of date, referred to equinox J2000.

    Rigorous: the pair is placed at (ra, dec) of J2000, carried to the FK5 equinox of each
    epoch, a point 1 arcsec away along theta is transformed back to J2000 and its position
    angle measured there. The 1 arcsec step keeps the error far below 1e-8 deg.

    Parameters
    ----------
    theta_deg : array_like
        Position angles for the equinox of date [deg].
    epoch_yr : array_like
        Epochs of observation = equinoxes of date [decimal Julian years].
    ra_deg, dec_deg : float
        J2000 coordinates of the pair [deg].

    Returns
    -------
    ndarray
        Position angles for equinox J2000 [deg, 0..360].
    """
    return _precess_theta(theta_deg, epoch_yr, ra_deg, dec_deg, to_j2000=True)


def precess_theta_to_date(theta_deg, epoch_yr, ra_deg, dec_deg):
    """Position angles for equinox J2000 referred to the equinox of each epoch.

    The reverse of ``precess_theta_to_j2000`` (same rigorous construction): what an
    observer measuring in the equinox of date would read.
    """
    return _precess_theta(theta_deg, epoch_yr, ra_deg, dec_deg, to_j2000=False)


def _precess_theta(theta_deg, epoch_yr, ra_deg, dec_deg, to_j2000):
    """Position angles turned between the J2000 equator and the mean equator of date.

    Both frames are rotations of each other, so at the star the position angles of every
    direction differ by one angle: the position angle, in J2000, of the pole of date.
    The precession matrix is IAU 2006 without frame bias (``erfa.bp06``; Capitaine et
    al. 2003), the one astropy's FK5 frame uses between equinoxes.
    """
    import erfa

    theta, t = np.broadcast_arrays(np.asarray(theta_deg, float), np.asarray(epoch_yr, float))
    shape = theta.shape
    theta, t = theta.ravel(), t.ravel()
    _, precession, _ = erfa.bp06(_J2000_JD, (t - 2000.0) * _JULIAN_YEAR_D)
    ra, dec = np.radians(ra_deg), np.radians(dec_deg)
    star = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    pole = precession[:, 2, :]               # the pole of date in J2000 coordinates
    north = pole[:, 2] - star[2] * (pole @ star)
    east = pole[:, 1] * star[0] - pole[:, 0] * star[1]
    turn = np.degrees(np.arctan2(east, north))
    return np.mod(theta + (turn if to_j2000 else -turn), 360.0).reshape(shape)


def approx_theta_correction_deg(epoch_yr, ra_deg, dec_deg):
    """Classic linear correction theta_2000 - theta_t = -0.00557 sin(a) sec(d) (t - 2000) [deg].

    Good to a few per cent of itself over a century away from the pole; near the pole the
    rigorous ``precess_theta_to_j2000`` is the reference.

    References
    ----------
    R. G. Aitken, *The Binary Stars*, 1935 (the linear reduction of position angles to a
    standard equinox; recalled from memory, sign checked against the rigorous rotation).
    """
    ra, dec = np.radians(ra_deg), np.radians(dec_deg)
    return -PA_PRECESSION_DEG_PER_YR * np.sin(ra) / np.cos(dec) * (np.asarray(epoch_yr, float)
                                                                    - 2000.0)
