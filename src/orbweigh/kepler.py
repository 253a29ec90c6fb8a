"""Kepler's equation E - e sin E = M, vectorised over arrays of M and e.

Angles in radians. The solver is a bracketed iteration: for M reduced to [0, pi] the
root lies in [M, min(M + e, pi)], where Kepler's function is increasing and convex. Each
step is Danby and Burkardt's quartic correction (Celestial Mechanics 31, 95, 1983;
memory), built from the sine and cosine a Newton step needs anyway, so it needs two or
three steps where Newton's needs four to six; every step is clipped to the bracket. This
converges for every 0 <= e < 1 and every M, including the hard corner e -> 1, M -> 0
where plain fixed-point iteration fails.
"""
from __future__ import annotations

import numpy as np

__all__ = ["eccentric_anomaly", "sin_cos_anomaly", "anomaly_near", "true_anomaly", "mean_anomaly"]

_TOLERANCE = 1e-14        # on the Newton step f / f' at the returned E [rad]
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
    m_in = np.asarray(mean_anom, float)
    turns = np.floor((m_in + np.pi) / (2.0 * np.pi))
    m_red = m_in - 2.0 * np.pi * turns          # in [-pi, pi)
    E, _, _ = _solve_folded(np.abs(m_red), _checked(e))
    return np.copysign(E, m_red) + 2.0 * np.pi * turns


def sin_cos_anomaly(t, period, t_peri, e):
    """sin E and cos E at epochs t of the orbit (P, T, e): what the orbit model needs.

    t, period and t_peri in one unit of time; e as in ``eccentric_anomaly``. The phase
    (t - T) / P is reduced to the nearest whole turn before M is formed (in [-pi, pi]),
    and sin E and cos E are the solver's own (its test of convergence needs them): fewer
    numpy calls than ``eccentric_anomaly`` of ``mean_anomaly`` and then sin and cos.
    """
    return anomaly_near(t, period, t_peri, e)[:2]


def anomaly_near(t, period, t_peri, e, near=None):
    """``sin_cos_anomaly`` started from a nearby solution: (sin E, cos E, M, e).

    ``near``: what this function returned for a nearby orbit at the same epochs (the last
    point of a least-squares fit). Its E moved to first order, E + (dM + de sin E) /
    (1 - e cos E), starts the iteration instead of Danby's starter: one step fewer for
    most points of a fit. Any start converges, clipped to the bracket (``_solve_folded``);
    a poor one only costs steps. M is the reduced mean anomaly, in [-pi, pi].
    """
    phase = (np.asarray(t, float) - t_peri) / period
    m_red = (2.0 * np.pi) * (phase - np.rint(phase))
    ecc = _checked(e)
    start = None
    if near is not None:
        sin_near, cos_near, m_near, e_near = near
        dm = m_red - m_near
        dm -= (2.0 * np.pi) * np.rint(dm / (2.0 * np.pi))      # across the turn's end
        start = np.abs(np.arctan2(sin_near, cos_near)
                       + (dm + (ecc - e_near) * sin_near) / (1.0 - e_near * cos_near))
    _, sin_e, cos_e = _solve_folded(np.abs(m_red), ecc, start)
    return np.copysign(sin_e, m_red), cos_e, m_red, ecc


def _checked(e):
    """e as a float or an array (broadcast by the solver's arithmetic), in [0, 1)."""
    if np.ndim(e):
        ecc = np.asarray(e, float)
        bad = ((ecc < 0) | (ecc >= 1)).any()
    else:                               # one e for all M (the fit's case): no array of e
        ecc = float(e)
        bad = not 0.0 <= ecc < 1.0
    if bad:
        raise ValueError("eccentricity must satisfy 0 <= e < 1")
    return ecc


def _solve_folded(m, ecc, start=None):
    """(E, sin E, cos E) for m in [0, pi], from ``start`` (default ``_starter``).

    Converged when the Newton step f / f' at E is below _TOLERANCE everywhere; the test
    needs sin E and cos E, those the next step would use, so it costs no extra step. It
    is skipped after the starter, which is never that close unless exact (e = 0, m = 0):
    then the first step is zero.
    """
    lo, hi = m, np.minimum(m + ecc, np.pi)       # f(lo) <= 0 <= f(hi)
    E = np.minimum(np.maximum(_starter(m, ecc) if start is None else start, lo), hi)
    for k in range(_MAX_ITERATIONS):
        sin_e, cos_e = np.sin(E), np.cos(E)
        e_sin, e_cos = ecc * sin_e, ecc * cos_e             # f'' and f'''
        f = E - e_sin - m
        f1 = 1.0 - e_cos
        # The array's own any(), not np.any: that wrapper costs as much as the test.
        if k and not (np.abs(f) > _TOLERANCE * f1).any():   # (a NaN stops too)
            # A last Newton step, exact to rounding from within the tolerance (also for
            # a tiny E, where the tolerance is not relative); sin and cos follow it to
            # first order, the second being below 1e-28.
            step = f / f1
            E = np.minimum(np.maximum(E - step, lo), hi)
            return E, sin_e - step * cos_e, cos_e + step * sin_e
        half = 0.5 * e_sin
        step = f / f1                                       # Newton,
        step = f / (f1 - step * half)                       # Halley,
        step = f / (f1 - step * (half - step * e_cos / 6.0))    # quartic
        E = np.minimum(np.maximum(E - step, lo), hi)
    return E, np.sin(E), np.cos(E)


def _starter(m, ecc):
    """Danby's (1987) M + 0.85 e, or for e -> 1 near periastron the root of the cubic
    M = e E^3 / 6, whichever is smaller.

    On [0, pi] f(E) = E - e sin E - M is increasing and convex, so steps kept inside the
    bracket converge from any start.
    """
    if np.ndim(ecc) == 0 and ecc == 0.0:
        return m
    if np.ndim(ecc) == 0 and ecc > 1e-200:     # 6 M / e is finite: no error state to set
        return np.minimum(m + 0.85 * ecc, np.cbrt(6.0 * m / ecc))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        cubic = np.where(ecc > 0.0, np.cbrt(6.0 * m / ecc), np.inf)
    return np.minimum(m + 0.85 * ecc, cubic)


def true_anomaly(ecc_anom, e):
    """True anomaly nu [rad] from the eccentric anomaly, in the same turn as E."""
    ecc_anom = np.asarray(ecc_anom, float)
    half = np.arctan2(np.sqrt(1.0 + e) * np.sin(ecc_anom / 2.0),
                      np.sqrt(1.0 - e) * np.cos(ecc_anom / 2.0))
    return 2.0 * half + 2.0 * np.pi * np.round((ecc_anom - 2.0 * half) / (2.0 * np.pi))
