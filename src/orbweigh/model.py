"""The relative-orbit model in the fitting parameters, and its residuals.

Refinement works in (P, T, e, A, B, F, G): the Thiele-Innes constants stay well
defined for face-on and circular orbits, where Campbell's (i, Omega, omega) are
degenerate; Campbell elements and their covariance follow by exact transformation.
"""
from __future__ import annotations

import threading

import numpy as np

from .elements import wrap_degrees
from .ephemeris import basis_derivatives, basis_of_anomaly, orbit_xy, xy_to_theta_rho
from .kepler import anomaly_near

__all__ = ["FIT_KEYS", "predict_theta_rho", "normalised_residuals", "residual_jacobian",
           "wrap_degrees"]

#: Order of the refinement parameters.
FIT_KEYS = ("P", "T", "e", "A", "B", "F", "G")


class _LastAnomaly(threading.local):
    """sin E and cos E of the last (t, P, T, e) solved in this thread.

    Levenberg-Marquardt evaluates the Jacobian at the point whose residuals it has just
    evaluated: the same Kepler solution, a third of the refinement's Kepler solves. Its
    next point is near the last, whose E then starts the solve. The epoch array is held
    (not only its id), so another cannot take its address; P, T, e must match exactly.
    One per thread (a Dask worker may fit in several threads).
    """

    def __init__(self):
        self.t, self.key, self.state = None, None, None

    def solve(self, t, P, T, e):
        key = (float(P), float(T), float(e))
        if self.t is not t or self.key != key:     # the last point's E starts the solve
            self.state = anomaly_near(t, P, T, e, self.state if self.t is t else None)
            self.t, self.key = t, key
        return self.state[:2]


_LAST_ANOMALY = _LastAnomaly()


def _orbit_basis(t, P, T, e):
    """sin E, cos E, X and Y (``ephemeris.orbit_basis``) at epochs t, E from the cache."""
    sin_e, cos_e = _LAST_ANOMALY.solve(t, P, T, e)
    return (sin_e, cos_e, *basis_of_anomaly(sin_e, cos_e, e))


def _predict_xy(params, t):
    """Predicted x, y [arcsec] at epochs t for a parameter vector."""
    P, T, e, A, B, F, G = params
    if isinstance(P, np.ndarray) or isinstance(T, np.ndarray) or isinstance(e, np.ndarray):
        return orbit_xy(t, P, T, e, A, B, F, G)          # arrays of parameters: no memory
    _, _, X, Y = _orbit_basis(t, P, T, e)
    return A * X + F * Y, B * X + G * Y


def predict_theta_rho(params, t):
    """Predicted theta [deg] and rho [arcsec] at epochs t for a parameter vector."""
    return xy_to_theta_rho(*_predict_xy(params, t))


def normalised_residuals(params, t, theta, rho, sigma_theta, sigma_rho):
    """Tangential and radial residuals divided by their sigmas.

    The tangential residual rho * d_theta over rho * sigma_theta reduces to
    d_theta / sigma_theta, with d_theta wrapped into (-180, 180] deg (the predicted angle
    is not reduced to [0, 360) first: the wrap does that). Returns (r_theta, r_rho,
    d_theta_deg, d_rho_arcsec).
    """
    x, y = _predict_xy(params, t)
    d_theta = wrap_degrees(theta - np.degrees(np.arctan2(y, x)))
    d_rho = rho - np.hypot(x, y)
    return d_theta / sigma_theta, d_rho / sigma_rho, d_theta, d_rho


def residual_jacobian(params, t, sigma_theta, sigma_rho):
    """Analytic Jacobian of (r_theta, r_rho) with respect to (P, T, e, A, B, F, G).

    Rows as in ``normalised_residuals`` concatenated (all r_theta, then all r_rho).
    X and Y by (P, T, e) from ``ephemeris.basis_derivatives``; d rho = (x dx + y dy)/rho
    and d theta = (x dy - y dx)/rho^2. Written into preallocated rows: at ~50 points
    numpy's cost is per call, not per element.
    """
    P, T, e, A, B, F, G = params
    n = t.size
    sin_e, cos_e, X, Y = _orbit_basis(t, P, T, e)
    dX, dY = basis_derivatives(t, P, T, e, sin_e, cos_e)
    dx, dy = np.empty((7, n)), np.empty((7, n))      # d x, d y / d (P, T, e, A, B, F, G)
    np.add(A * dX, F * dY, out=dx[:3])
    np.add(B * dX, G * dY, out=dy[:3])
    dx[3], dx[4], dx[5], dx[6] = X, 0.0, Y, 0.0
    dy[3], dy[4], dy[5], dy[6] = 0.0, X, 0.0, Y
    x, y = A * X + F * Y, B * X + G * Y
    rho2 = x**2 + y**2
    jac = np.empty((7, 2 * n))       # the factors per point first: fewer passes over 7 rows
    np.multiply(x * dy - y * dx, (-180.0 / np.pi) / (rho2 * sigma_theta), out=jac[:, :n])
    np.multiply(x * dx + y * dy, -1.0 / (np.sqrt(rho2) * sigma_rho), out=jac[:, n:])
    return jac.T
