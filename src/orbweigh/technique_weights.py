"""Residual statistics by observing technique, and one sigma factor per technique.

Stated errors of old micrometer measures are often too small, those of modern speckle
sometimes too large or too small; the trade rescales the sigmas of each technique until its
reduced chi2 is about one. The degrees of freedom are shared among the techniques in
proportion to their coordinates: technique k with n_k points gets
dof_k = 2 n_k (1 - p / (2 n)), p free parameters, n points in all (common practice, no
source), so that the dof_k add up to the fit's.

With sigma scaled by f, chi2_k becomes chi2_k / f^2; the factor that makes the reduced
chi2 one at the current orbit is f_k = sqrt(chi2_k / dof_k) (chi2_k with the stated sigmas).
As chi2_k / dof_k has the variance 2 / dof_k for Gaussian errors, f_k has the relative error
1 / sqrt(2 dof_k) (first order).
"""
from __future__ import annotations

import numpy as np

__all__ = ["MIN_POINTS", "technique_statistics", "scale_factors"]

#: A technique with fewer points keeps the factor 1: with 4 points (8 coordinates, fewer
#: degrees of freedom still) the factor's own relative error 1 / sqrt(2 dof_k) exceeds a
#: quarter, and a handful of points is partly absorbed by the orbit, so their chi2
#: understates their scatter (common practice, no source).
MIN_POINTS = 5


def _dof_share(n_points, n_total, n_free):
    return 2.0 * n_points * max(1.0 - n_free / (2.0 * n_total), 1.0 / (2.0 * n_total))


def technique_statistics(technique, r_theta, r_rho, d_theta_deg, d_rho_arcsec, n_free):
    """Per technique: points, rms of theta and rho, chi2, its dof share and reduced chi2.

    Parameters
    ----------
    technique : array of str
        Technique of each fitted point.
    r_theta, r_rho : ndarray
        Normalised residuals (O-C over the sigmas as fitted).
    d_theta_deg, d_rho_arcsec : ndarray
        O-C in theta [deg] and rho [arcsec].
    n_free : int
        Free parameters of the fit (7 less the held elements).

    Returns
    -------
    dict
        {technique: {"n_points", "rms_theta_deg", "rms_rho_arcsec", "chi2", "dof",
        "reduced_chi2"}}, techniques in order of first appearance.
    """
    technique = np.asarray(technique, str)
    out = {}
    for name in dict.fromkeys(technique.tolist()):
        k = technique == name
        chi2 = float(np.sum(r_theta[k] ** 2 + r_rho[k] ** 2))
        dof = _dof_share(int(k.sum()), technique.size, n_free)
        out[name] = {"n_points": int(k.sum()),
                     "rms_theta_deg": float(np.sqrt(np.mean(d_theta_deg[k] ** 2))),
                     "rms_rho_arcsec": float(np.sqrt(np.mean(d_rho_arcsec[k] ** 2))),
                     "chi2": chi2, "dof": float(dof), "reduced_chi2": chi2 / dof}
    return out


def scale_factors(stats_as_fitted, current):
    """New sigma factor per technique from its statistics at the current sigmas.

    Parameters
    ----------
    stats_as_fitted : dict
        ``technique_statistics`` of the residuals normalised by the currently scaled sigmas.
    current : dict
        {technique: factor} now applied (missing: 1).

    Returns
    -------
    dict
        {technique: factor}: current factor x sqrt(reduced chi2 as fitted) for a technique
        with at least ``MIN_POINTS`` points, else 1.
    """
    factors = {}
    for name, s in stats_as_fitted.items():
        if s["n_points"] < MIN_POINTS:
            factors[name] = 1.0
        else:
            # floor: residuals of exactly zero (noise-free data) must not zero a sigma
            factors[name] = max(current.get(name, 1.0) * float(np.sqrt(s["reduced_chi2"])),
                                1e-3)
    return factors
