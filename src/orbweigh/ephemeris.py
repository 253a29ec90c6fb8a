"""Predicted relative positions (theta, rho) and (x, y) of the secondary."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .kepler import eccentric_anomaly, mean_anomaly

__all__ = ["Ephemeris", "orbit_xy", "ephemeris", "xy_to_theta_rho"]


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


def orbit_xy(t, period, t_peri, e, A, B, F, G):
    """x, y [unit of A..G] at epochs t (Julian years); broadcasts over all arguments."""
    E = eccentric_anomaly(mean_anomaly(t, period, t_peri), e)
    X = np.cos(E) - e
    Y = np.sqrt(1.0 - e**2) * np.sin(E)
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
