"""Radial velocities of a visual binary: the model and the classical spectroscopic quantities.

Convention (stated once, used everywhere in orbweigh):

* The astrometric omega is the argument of periastron of the SECONDARY relative to the
  primary; the node Omega is the ASCENDING node, the one where the secondary passes the
  plane of the sky moving AWAY from the observer (radial velocity of 2 relative to 1
  positive). Positive radial velocity means recession.
* The primary's spectroscopic argument of periastron is omega1 = omega + 180 deg, and

      V1 = gamma + K1 [cos(nu + omega1) + e cos omega1]
      V2 = gamma - K2 [cos(nu + omega1) + e cos omega1]

  so V2 - V1 = (K1 + K2) [cos(nu + omega) + e cos omega], the line-of-sight velocity of
  the relative orbit, whose distance behind the primary is z = r sin(nu + omega) sin i.
* With velocities, Omega runs over [0, 360): the common 180 deg shift of (Omega, omega)
  that leaves the apparent orbit unchanged flips the sign of every velocity.

Units are in the names: K in km/s, periods in days (spectroscopic formulas, the trade's
custom) or Julian years (orbit formulas). Constants come from astropy, not typed in.
"""
from __future__ import annotations

import numpy as np

from .kepler import eccentric_anomaly, mean_anomaly, true_anomaly

__all__ = [
    "radial_velocities",
    "a1_sin_i_km",
    "mass_function_msun",
    "m_sin3i_msun",
    "rv_semi_amplitude_kms",
    "semi_major_axis_au_from_rv",
    "orbital_parallax_mas",
    "component_masses_from_orbit",
]


def _au_per_yr_kms():
    """1 au per Julian year in km/s (about 4.74047)."""
    import astropy.units as u
    return (1.0 * u.au / u.yr).to_value(u.km / u.s)


def _day_s():
    import astropy.units as u
    return (1.0 * u.day).to_value(u.s)


def _gm_sun_km3_s2():
    """Nominal solar mass parameter GM_sun (IAU 2015 B3) in km^3 s^-2."""
    import astropy.constants as const
    import astropy.units as u
    return const.GM_sun.to_value(u.km**3 / u.s**2)


def radial_velocities(t_yr, period_yr, t_peri_yr, e, omega_deg, K1_kms, K2_kms, gamma_kms):
    """Radial velocities of both components.

    Parameters
    ----------
    t_yr : array_like
        Epochs as decimal Julian years.
    period_yr, t_peri_yr : float
        Period P [Julian years] and epoch of periastron T [decimal Julian year].
    e : float
        Eccentricity.
    omega_deg : float
        Astrometric argument of periastron omega [deg] (secondary relative to primary);
        the primary's omega1 = omega + 180 deg.
    K1_kms, K2_kms : float
        Semi-amplitudes of the primary and the secondary [km/s].
    gamma_kms : float
        Systemic velocity [km/s].

    Returns
    -------
    V1, V2 : ndarray
        Radial velocities [km/s], positive away from the observer.
    """
    nu = true_anomaly(eccentric_anomaly(mean_anomaly(t_yr, period_yr, t_peri_yr), e), e)
    omega1 = np.radians(omega_deg) + np.pi
    shape = np.cos(nu + omega1) + e * np.cos(omega1)
    return gamma_kms + K1_kms * shape, gamma_kms - K2_kms * shape


def a1_sin_i_km(K1_kms, P_days, e):
    """Projected semi-major axis of a component's orbit about the centre of mass.

    a1 sin i = K1 P sqrt(1 - e^2) / (2 pi)  [km], K1 [km/s], P [d].
    """
    return K1_kms * P_days * _day_s() * np.sqrt(1.0 - np.square(e)) / (2.0 * np.pi)


def mass_function_msun(K1_kms, P_days, e):
    """Spectroscopic mass function f(M) = M2^3 sin^3 i / (M1 + M2)^2 [M_sun].

    f(M) = P K1^3 (1 - e^2)^(3/2) / (2 pi G M_sun), K1 [km/s], P [d].
    """
    return (P_days * _day_s() * np.power(K1_kms, 3) * np.power(1.0 - np.square(e), 1.5)
            / (2.0 * np.pi * _gm_sun_km3_s2()))


def m_sin3i_msun(K1_kms, K2_kms, P_days, e):
    """Minimum masses (M1 sin^3 i, M2 sin^3 i) [M_sun] of a double-lined binary.

    M1 sin^3 i = P (1 - e^2)^(3/2) (K1 + K2)^2 K2 / (2 pi G M_sun), and the same with K1
    for M2; K [km/s], P [d].
    """
    common = (P_days * _day_s() * np.power(1.0 - np.square(e), 1.5)
              * np.square(K1_kms + K2_kms) / (2.0 * np.pi * _gm_sun_km3_s2()))
    return common * K2_kms, common * K1_kms


def rv_semi_amplitude_kms(a_au, period_yr, e, i_deg):
    """Semi-amplitude K1 + K2 [km/s] of the relative orbit.

    K = 2 pi a sin i / (P sqrt(1 - e^2)), a [au], P [Julian years].
    """
    k_au_yr = (2.0 * np.pi * a_au * np.sin(np.radians(i_deg))
               / (period_yr * np.sqrt(1.0 - np.square(e))))
    return k_au_yr * _au_per_yr_kms()


def semi_major_axis_au_from_rv(K1_kms, K2_kms, period_yr, e, i_deg):
    """Relative semi-major axis a = (K1 + K2) P sqrt(1 - e^2) / (2 pi sin i) [au]."""
    k_au_yr = (np.asarray(K1_kms, float) + K2_kms) / _au_per_yr_kms()
    return (k_au_yr * period_yr * np.sqrt(1.0 - np.square(e))
            / (2.0 * np.pi * np.sin(np.radians(i_deg))))


def orbital_parallax_mas(a_arcsec, K1_kms, K2_kms, period_yr, e, i_deg):
    """Orbital parallax [mas]: the angular semi-major axis over the one in au from the RVs.

    Parameters
    ----------
    a_arcsec : float
        Angular semi-major axis of the relative orbit [arcsec].
    K1_kms, K2_kms : float
        Velocity semi-amplitudes [km/s].
    period_yr : float
        Period [Julian years].
    e, i_deg : float
        Eccentricity and inclination [deg].
    """
    return 1e3 * np.asarray(a_arcsec, float) / semi_major_axis_au_from_rv(
        K1_kms, K2_kms, period_yr, e, i_deg)


def component_masses_from_orbit(a_au, P_yr, K1_kms, K2_kms):
    """Component masses (M1, M2) [M_sun] from the third law and q = M2/M1 = K1/K2.

    M1 + M2 = 4 pi^2 a^3 / (G M_sun P^2) with a [au], P [Julian years], using the IAU
    nominal GM_sun (so the total is 1.0000378 a^3/P^2, not exactly a^3/P^2).
    """
    import astropy.units as u
    a_km = np.asarray(a_au, float) * (1.0 * u.au).to_value(u.km)
    p_s = np.asarray(P_yr, float) * (1.0 * u.yr).to_value(u.s)
    total = 4.0 * np.pi**2 * a_km**3 / (_gm_sun_km3_s2() * p_s**2)
    q = np.asarray(K1_kms, float) / K2_kms
    return total / (1.0 + q), total * q / (1.0 + q)
