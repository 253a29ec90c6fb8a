"""Synthetic measurement logs from known Campbell elements, for the fitting tests.

Written independently of orbweigh's orbit model so that a fit test cannot share a
mistake with the code it checks: Kepler's equation is solved per point with
``scipy.optimize.brentq``, and the sky position comes from explicit 3-D rotation
matrices, not from the Thiele-Innes constants. Only the output container
(``MeasurementSet.from_arrays``) is orbweigh's.

Frame: right-handed (North, East, z) with z = North x East pointing toward the observer.
The orbit-plane position (r cos nu, r sin nu, 0), x toward periastron, is turned by
R_z(Omega) R_x(i) R_z(omega): omega within the orbit plane from the node, i about the
line of nodes, and Omega about the line of sight from North toward East. Then
x = North, y = East, theta = atan2(y, x), rho = hypot(x, y).

Radial velocities (``radial_velocities_3d``) use the spectroscopists' frame instead: the
same rotation read in (North, East, z) with z pointing AWAY from the observer, so the
secondary crosses the sky plane at Omega moving away (the ascending node; Heintz, Double
Stars, 1978, ch. 4, memory). The relative velocity along z comes from a central
difference of z(t), never from a velocity formula; radial velocities are positive for a
receding star.
"""
import math

import numpy as np
from scipy.optimize import brentq

from orbweigh.measurements import MeasurementSet

__all__ = ["KEYS", "solve_kepler", "rotation", "sky_positions", "make_log",
           "radial_velocities_3d"]

#: Element keys (units: P yr, T decimal Julian yr, a arcsec, angles deg).
KEYS = ("P", "T", "e", "a", "i", "Omega", "omega")


def solve_kepler(M, e):
    """Eccentric anomaly [rad] for one mean anomaly M [rad], by bracketed root finding.

    E - M = e sin E lies in [-e, e], which brackets the root.
    """
    if e == 0.0:
        return M
    return brentq(lambda E: E - e * math.sin(E) - M, M - e, M + e,
                  xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=200)


def _rz(angle):
    c, s = math.cos(angle), math.sin(angle)
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def _rx(angle):
    c, s = math.cos(angle), math.sin(angle)
    return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])


def rotation(elements):
    """R_z(Omega) R_x(i) R_z(omega) for an elements dict (angles in degrees)."""
    i, node, omega = (math.radians(elements[k]) for k in ("i", "Omega", "omega"))
    return _rz(node) @ _rx(i) @ _rz(omega)


def _positions_3d(elements, epochs):
    """Noise-free (x North, y East, z) [arcsec] of the secondary relative to the primary."""
    P, T, e, a = (float(elements[k]) for k in ("P", "T", "e", "a"))
    t = np.atleast_1d(np.asarray(epochs, float))
    # one turn of M centred on 0 keeps brentq's bracket small and E in the same turn
    M = [math.remainder(2.0 * math.pi * (tk - T) / P, 2.0 * math.pi) for tk in t]
    E = np.array([solve_kepler(m, e) for m in M])
    r = a * (1.0 - e * np.cos(E))
    nu = 2.0 * np.arctan2(math.sqrt(1.0 + e) * np.sin(E / 2), math.sqrt(1.0 - e) * np.cos(E / 2))
    plane = np.vstack([r * np.cos(nu), r * np.sin(nu), np.zeros_like(r)])
    return rotation(elements) @ plane


def sky_positions(elements, epochs):
    """Noise-free theta [deg, 0..360), rho [arcsec], x (North), y (East) [arcsec].

    Parameters
    ----------
    elements : dict
        Keys P [yr], T [Julian yr], e, a [arcsec], i, Omega, omega [deg].
    epochs : array_like
        Decimal Julian years.
    """
    x, y, _ = _positions_3d(elements, epochs)
    return np.mod(np.degrees(np.arctan2(y, x)), 360.0), np.hypot(x, y), x, y


#: 1 au per Julian year in km/s (149597870.7 km / 31557600 s; IAU 2012 Resolution B2 au).
_KMS_PER_AU_YR = 149597870.7 / 31557600.0


def radial_velocities_3d(elements, epochs, parallax_mas, mass_ratio, gamma_kms):
    """V1, V2 [km/s], positive receding, from the numerical derivative of z (away).

    The secondary's motion relative to the primary along z, dz/dt [arcsec/yr] by a
    central difference (step 1e-5 yr), becomes km/s at the distance 1 / parallax; the
    primary moves by -q/(1+q) of it, the secondary by 1/(1+q), q = M2/M1 = ``mass_ratio``.
    """
    t = np.atleast_1d(np.asarray(epochs, float))
    h = 1e-5
    dz = (_positions_3d(elements, t + h)[2] - _positions_3d(elements, t - h)[2]) / (2 * h)
    v_rel = dz / (parallax_mas * 1e-3) * _KMS_PER_AU_YR
    q = float(mass_ratio)
    return gamma_kms - q / (1 + q) * v_rel, gamma_kms + v_rel / (1 + q)


def make_log(elements, epochs, sigma_theta_deg, sigma_rho_arcsec, seed, flips=(),
             outliers=()):
    """A synthetic log: true positions plus Gaussian noise, planted flips and outliers.

    Parameters
    ----------
    elements : dict
        True elements, keys as in ``KEYS``.
    epochs : array_like
        Decimal Julian years.
    sigma_theta_deg, sigma_rho_arcsec : float or array_like
        1-sigma noise in theta [deg] (tangential) and rho [arcsec] (radial); also the
        sigmas written in the log.
    seed : int
        Seed of ``numpy.random.default_rng``.
    flips : iterable of int
        Row indices whose theta gets + 180 deg (a quadrant error), after the noise.
    outliers : iterable of (int, float)
        (row index, n_sigma): the row is displaced by exactly n_sigma in the normalised
        (d_rho / sigma_rho, d_theta / sigma_theta) plane, in a random direction, on top of
        its noise.

    Returns
    -------
    MeasurementSet
        Epochs on the Julian-year scale; source names the seed.

    Notes
    -----
    All random numbers are drawn for every row whatever ``flips`` and ``outliers`` say,
    so the same seed gives the same noise with or without planted points.
    """
    t = np.atleast_1d(np.asarray(epochs, float))
    n = t.size
    sig_t = np.broadcast_to(np.asarray(sigma_theta_deg, float), (n,)).copy()
    sig_r = np.broadcast_to(np.asarray(sigma_rho_arcsec, float), (n,)).copy()
    theta, rho, _, _ = sky_positions(elements, t)
    rng = np.random.default_rng(seed)
    noise_t, noise_r = rng.standard_normal((2, n))
    direction = rng.uniform(0.0, 2.0 * math.pi, n)
    for k, n_sigma in outliers:
        noise_t[k] += n_sigma * math.sin(direction[k])
        noise_r[k] += n_sigma * math.cos(direction[k])
    theta = theta + sig_t * noise_t
    rho = rho + sig_r * noise_r
    if np.any(rho <= 0):
        raise ValueError("noise made a separation non-positive: use a smaller sigma_rho")
    theta[list(flips)] += 180.0
    return MeasurementSet.from_arrays(t, np.mod(theta, 360.0), rho, sig_t, sig_r,
                                      technique="synthetic", source=f"<synthetic seed={seed}>")


def write_log_csv(path, log):
    """Write a ``make_log`` log as a CSV measurement log (Julian-year epochs); returns path."""
    lines = ["epoch,theta,rho,sigma_theta,sigma_rho"]
    lines += [f"J{t:.6f},{th:.4f},{r:.5f},{st},{sr}" for t, th, r, st, sr in zip(
        log.epoch_yr, log.theta_deg, log.rho_arcsec, log.sigma_theta_deg,
        log.sigma_rho_arcsec)]
    path.write_text("\n".join(lines) + "\n")
    return path
