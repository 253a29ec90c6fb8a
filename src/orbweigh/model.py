"""The relative-orbit model in the fitting parameters, and its residuals.

Refinement works in (P, T, e, A, B, F, G): the Thiele-Innes constants stay well
defined for face-on and circular orbits, where Campbell's (i, Omega, omega) are
degenerate; Campbell elements and their covariance follow by exact transformation.
"""
from __future__ import annotations

import numpy as np

from .ephemeris import orbit_xy, xy_to_theta_rho

__all__ = ["FIT_KEYS", "predict_theta_rho", "normalised_residuals", "wrap_degrees"]

#: Order of the refinement parameters.
FIT_KEYS = ("P", "T", "e", "A", "B", "F", "G")


def wrap_degrees(angle):
    """Wrap an angle difference [deg] into (-180, 180]."""
    return 180.0 - np.mod(180.0 - np.asarray(angle, float), 360.0)


def predict_theta_rho(params, t):
    """Predicted theta [deg] and rho [arcsec] at epochs t for a parameter vector."""
    P, T, e, A, B, F, G = params
    return xy_to_theta_rho(*orbit_xy(t, P, T, e, A, B, F, G))


def normalised_residuals(params, t, theta, rho, sigma_theta, sigma_rho):
    """Tangential and radial residuals divided by their sigmas.

    The tangential residual rho * d_theta over rho * sigma_theta reduces to
    d_theta / sigma_theta, with d_theta wrapped into (-180, 180] deg.
    Returns (r_theta, r_rho, d_theta_deg, d_rho_arcsec).
    """
    theta_pred, rho_pred = predict_theta_rho(params, t)
    d_theta = wrap_degrees(theta - theta_pred)
    d_rho = rho - rho_pred
    return d_theta / sigma_theta, d_rho / sigma_rho, d_theta, d_rho
