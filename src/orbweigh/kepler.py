"""Kepler's equation E - e sin E = M, vectorised over arrays of M and e.

Angles in radians. The solver is a bracketed Newton iteration: for M reduced to
[0, pi] the root lies in [M, min(M + e, pi)], where Kepler's function is increasing and
convex; Newton steps clipped to that bracket converge for every 0 <= e < 1 and every M,
including the hard corner e -> 1, M -> 0 where plain fixed-point iteration fails.
"""
from __future__ import annotations

import numpy as np

__all__ = ["eccentric_anomaly", "true_anomaly", "mean_anomaly"]

_TOLERANCE = 1e-14        # on the last Newton step [rad]; the error is then ~step^2
_MAX_ITERATIONS = 100


def mean_anomaly(t, period, t_peri):
    """Mean anomaly 2 pi (t - T) / P in radians, reduced to [0, 2 pi)."""
    return np.mod(2.0 * np.pi * (np.asarray(t, float) - t_peri) / period, 2.0 * np.pi)


def eccentric_anomaly(mean_anom, e):
    """Solve Kepler's equation for the eccentric anomaly.

    Parameters
    ----------
    mean_anom : array_like
        Mean anomaly M [rad], any real value.
    e : array_like
        Eccentricity, 0 <= e < 1; broadcast against ``mean_anom``.

    Returns
    -------
    ndarray
        Eccentric anomaly E [rad], in the same 2 pi turn as M (E = M at M = k pi).

    Notes
    -----
    |E - e sin E - M| < 1e-12 rad for M taken modulo 2 pi (the reduction of a huge M to
    one turn is itself only as exact as the floating-point M).
    """
    m_in, ecc = np.broadcast_arrays(np.asarray(mean_anom, float), np.asarray(e, float))
    if np.any((ecc < 0) | (ecc >= 1)):
        raise ValueError("eccentricity must satisfy 0 <= e < 1")
    turns = np.floor((m_in + np.pi) / (2.0 * np.pi))
    m_red = m_in - 2.0 * np.pi * turns          # in [-pi, pi)
    sign = np.where(m_red < 0, -1.0, 1.0)
    m = np.abs(m_red)                            # solve on [0, pi], odd symmetry
    lo, hi = m, np.minimum(m + ecc, np.pi)       # f(lo) <= 0 <= f(hi)
    # Starter: Danby's (1987) M + 0.85 e, or for e -> 1 near periastron the root of the
    # cubic M = e E^3 / 6, whichever is smaller. On [0, pi] f(E) = E - e sin E - M is
    # increasing and convex, so Newton steps kept inside the bracket converge
    # monotonically once on the right of the root, from any start.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        cubic = np.where(ecc > 0.0, np.cbrt(6.0 * m / ecc), np.inf)
    E = np.clip(np.minimum(m + 0.85 * ecc, cubic), lo, hi)
    for _ in range(_MAX_ITERATIONS):
        step = (E - ecc * np.sin(E) - m) / (1.0 - ecc * np.cos(E))
        E = np.clip(E - step, lo, hi)
        if np.max(np.abs(step), initial=0.0) <= _TOLERANCE:
            break
    return sign * E + 2.0 * np.pi * turns


def true_anomaly(ecc_anom, e):
    """True anomaly nu [rad] from the eccentric anomaly, in the same turn as E."""
    ecc_anom = np.asarray(ecc_anom, float)
    half = np.arctan2(np.sqrt(1.0 + e) * np.sin(ecc_anom / 2.0),
                      np.sqrt(1.0 - e) * np.cos(ecc_anom / 2.0))
    return 2.0 * half + 2.0 * np.pi * np.round((ecc_anom - 2.0 * half) / (2.0 * np.pi))
