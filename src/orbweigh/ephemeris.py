"""Predicted relative positions (theta, rho) and (x, y) of the secondary."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .elements import thiele_innes_from_campbell, wrap_degrees
from .kepler import sin_cos_anomaly

__all__ = ["Ephemeris", "EphemerisBands", "orbit_basis", "basis_of_anomaly",
           "basis_derivatives", "orbit_xy", "ephemeris", "xy_to_theta_rho", "ephemeris_bands"]


@dataclass(frozen=True)
class Ephemeris:
    """Predicted positions at a set of epochs.

    Attributes
    ----------
    epoch_yr : ndarray
        Epochs as decimal Julian years.
    theta_deg, rho_arcsec : ndarray
        Position angle [deg, 0..360, North through East] and separation [arcsec].
    x_arcsec, y_arcsec : ndarray
        x = rho cos theta (North), y = rho sin theta (East) [arcsec].
    """

    epoch_yr: np.ndarray
    theta_deg: np.ndarray
    rho_arcsec: np.ndarray
    x_arcsec: np.ndarray
    y_arcsec: np.ndarray


def orbit_basis(t, period, t_peri, e):
    """X = cos E - e and Y = sqrt(1 - e^2) sin E at epochs t: x = A X + F Y and
    y = B X + G Y; broadcasts over all arguments."""
    return basis_of_anomaly(*sin_cos_anomaly(t, period, t_peri, e), e)


def basis_of_anomaly(sin_e, cos_e, e):
    """X and Y (``orbit_basis``) from sin E and cos E already solved."""
    return cos_e - e, np.sqrt(1.0 - e**2) * sin_e


def basis_derivatives(t, period, t_peri, e, sin_e, cos_e):
    """dX and dY with respect to (P, T, e), each of shape (3, *E's shape).

    With D = 1 - e cos E: dE/dM = 1/D, dE/de = sin E / D, dM/dP = -M/P with M the
    unreduced 2 pi (t - T)/P, dM/dT = -2 pi/P; X = cos E - e and Y = sqrt(1 - e^2) sin E
    then give dX = -sin E dE (- 1 for e) and dY = sqrt(1 - e^2) cos E dE (- e sin E /
    sqrt(1 - e^2) for e). Written into preallocated rows: at ~50 points numpy's cost is
    per call, not per element.
    """
    D = 1.0 - e * cos_e
    PD = period * D
    dE = np.empty((3,) + D.shape)                     # d E / d (P, T, e)
    np.divide(-2.0 * np.pi * (t - t_peri) / period, PD, out=dE[0])
    np.divide(-2.0 * np.pi, PD, out=dE[1])
    np.divide(sin_e, D, out=dE[2])
    s = np.sqrt(1.0 - e * e)
    dX, dY = -sin_e * dE, s * cos_e * dE
    dX[2] -= 1.0
    dY[2] -= (e / s) * sin_e
    return dX, dY


def orbit_xy(t, period, t_peri, e, A, B, F, G):
    """x, y [unit of A..G] at epochs t (Julian years); broadcasts over all arguments."""
    X, Y = orbit_basis(t, period, t_peri, e)
    return A * X + F * Y, B * X + G * Y


def xy_to_theta_rho(x, y):
    """Position angle [deg, in [0, 360)] and separation from rectangular coordinates."""
    theta = np.mod(np.degrees(np.arctan2(y, x)), 360.0)
    return theta, np.hypot(x, y)


def ephemeris(elements, epoch_yr):
    """Ephemeris of a ``CampbellElements`` orbit at decimal Julian years ``epoch_yr``."""
    t = np.atleast_1d(np.asarray(epoch_yr, float))
    A, B, F, G = elements.thiele_innes()
    x, y = orbit_xy(t, elements.period_yr, elements.periastron_yr, elements.e, A, B, F, G)
    theta, rho = xy_to_theta_rho(x, y)
    return Ephemeris(t, theta, rho, x, y)


@dataclass(frozen=True)
class EphemerisBands:
    """Central 68 % bands of the predicted position at a set of epochs.

    Attributes
    ----------
    theta_low_deg, theta_high_deg : ndarray
        Band of the position angle [deg, in [0, 360)]. The band is the arc from low to
        high in the sense of increasing theta; it passes through North (0 deg) when
        low > high.
    rho_low_arcsec, rho_high_arcsec : ndarray
        Band of the separation [arcsec].
    """

    theta_low_deg: np.ndarray
    theta_high_deg: np.ndarray
    rho_low_arcsec: np.ndarray
    rho_high_arcsec: np.ndarray


_BAND_PERCENTILES = (15.865525393145708, 84.13447460685429)  # central 68.27 %, 1 sigma
_CHUNK = 2_000_000  # draws x epochs evaluated at once: bounds the memory used


def ephemeris_bands(elements, draws, epoch_yr):
    """68 % bands of theta and rho from draws of the elements.

    Parameters
    ----------
    elements : CampbellElements
        The best elements; theta spreads are taken relative to their prediction.
    draws : ndarray, shape (n, 7)
        Element draws in the order P [yr], T [Julian yr], e, a [arcsec], i, Omega,
        omega [deg].
    epoch_yr : array_like
        Epochs as decimal Julian years.

    Returns
    -------
    EphemerisBands

    Notes
    -----
    Each draw's theta is compared with the best prediction and the difference wrapped
    into (-180, 180] deg before taking percentiles, so a band crossing North is neither
    split nor blown up to the whole circle.
    """
    t = np.atleast_1d(np.asarray(epoch_yr, float))
    best = ephemeris(elements, t)
    d = np.asarray(draws, float)
    A, B, F, G = thiele_innes_from_campbell(d[:, 3], *np.radians(d[:, 4:7].T))
    step = max(1, _CHUNK // len(d))
    parts = []
    for start in range(0, t.size, step):
        sl = slice(start, start + step)
        x, y = orbit_xy(t[None, sl], d[:, 0, None], d[:, 1, None], d[:, 2, None],
                        A[:, None], B[:, None], F[:, None], G[:, None])
        theta, rho = xy_to_theta_rho(x, y)
        dtheta = wrap_degrees(theta - best.theta_deg[sl])
        parts.append((np.percentile(dtheta, _BAND_PERCENTILES, axis=0),
                      np.percentile(rho, _BAND_PERCENTILES, axis=0)))
    dq = np.concatenate([p[0] for p in parts], axis=1)
    rq = np.concatenate([p[1] for p in parts], axis=1)
    low, high = np.mod(best.theta_deg + dq, 360.0)
    return EphemerisBands(low, high, rq[0], rq[1])
