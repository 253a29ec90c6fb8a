"""Reductions to a common system: epoch scales and (later) position-angle precession.

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
"""
from __future__ import annotations

import numpy as np

__all__ = ["EPOCH_SCALES", "to_julian_year", "from_julian_year", "epoch_unit", "interval_in_scale"]

EPOCH_SCALES = ("besselian", "julian", "jd", "mjd", "iso")

_J2000_JD = 2451545.0
_JULIAN_YEAR_D = 365.25
_MJD_OFFSET = 2400000.5


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
    if scale == "besselian":
        return np.asarray(_time_class()(v, format="byear", scale="tt").jyear, float)
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
        return np.asarray(_time_class()(t, format="jyear", scale="tt").byear, float)
    raise ValueError(f"unknown epoch scale {scale!r}; expected one of {EPOCH_SCALES}")


def epoch_unit(scale):
    """Unit of an epoch (and of its error) in ``scale``: 'yr' or 'd'."""
    return "d" if scale in ("jd", "mjd") else "yr"


def interval_in_scale(years, scale):
    """An interval of Julian years expressed in the unit of ``scale`` (days for jd/mjd)."""
    return np.asarray(years, float) * (_JULIAN_YEAR_D if epoch_unit(scale) == "d" else 1.0)
