"""Local refinement of orbit solutions.

Two stages: ``refine_nonlinear`` polishes a grid cell in (P, e, T) with the Thiele-Innes
constants still solved linearly (variable projection, exact Kepler solutions);
``refine_full`` then fits all seven parameters with lmfit's Levenberg-Marquardt on the
proper tangential and radial residuals.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .kepler import eccentric_anomaly, mean_anomaly
from .model import FIT_KEYS, normalised_residuals, residual_jacobian
from .search import linear_thiele_innes

__all__ = ["Refined", "refine_nonlinear", "refine_full"]

_E_MAX = 0.995


@dataclass(frozen=True)
class Refined:
    """A refined solution: parameters in FIT_KEYS order, chi2, covariance or None."""

    params: np.ndarray
    chi2: float
    covariance: np.ndarray | None = None
    success: bool = True


def _basis(t, period, t_peri, e):
    E = eccentric_anomaly(mean_anomaly(t, period, t_peri), e)
    return np.cos(E) - e, np.sqrt(1.0 - e**2) * np.sin(E)


def refine_nonlinear(trial, t, x, y, w, period_range):
    """Polish a search cell in (ln P, e, T), solving A, B, F, G linearly each step."""
    from scipy.optimize import least_squares

    sw = np.sqrt(w)

    def resid(q):
        period, e, t_peri = np.exp(q[0]), q[1], q[2]
        X, Y = _basis(t, period, t_peri, e)
        A, B, F, G, _ = linear_thiele_innes(X, Y, x, y, w)
        return np.concatenate([sw * (x - A * X - F * Y), sw * (y - B * X - G * Y)])

    lo = [np.log(period_range[0]), 0.0, trial.t_peri - trial.period]
    hi = [np.log(period_range[1]), _E_MAX, trial.t_peri + trial.period]
    q0 = np.clip([np.log(trial.period), trial.e, trial.t_peri], lo, hi)
    q0[1] = min(q0[1], _E_MAX - 1e-3)
    # A polish only (the full refinement follows), so loose tolerances suffice.
    sol = least_squares(resid, q0, bounds=(lo, hi), x_scale="jac", max_nfev=40,
                        ftol=1e-4, xtol=1e-4)
    period, e, t_peri = np.exp(sol.x[0]), sol.x[1], sol.x[2]
    A, B, F, G, chi2 = linear_thiele_innes(*_basis(t, period, t_peri, e), x, y, w)
    return Refined(np.array([period, t_peri, e, A, B, F, G]), float(chi2))


def refine_full(params0, t, theta, rho, sigma_theta, sigma_rho, loss="linear", max_nfev=None):
    """Least-squares fit of all seven parameters with lmfit.

    Parameters
    ----------
    params0 : sequence
        Start (P, T, e, A, B, F, G) [yr, Julian yr, -, arcsec x4].
    t, theta, rho, sigma_theta, sigma_rho : ndarray
        Epochs [Julian yr], position angles [deg], separations [arcsec] and sigmas.
    loss : {'linear', 'soft_l1', 'huber'}
        'linear' uses Levenberg-Marquardt; robust losses use scipy's trust-region
        least squares through lmfit.
    max_nfev : int, optional
        Budget of model evaluations; ``success`` is False when it ran out.

    Returns
    -------
    Refined
        With the unscaled covariance (inverse curvature of chi2) when it exists.
    """
    import lmfit

    P0, T0, e0 = params0[:3]
    pars = lmfit.Parameters()
    pars.add("P", value=P0, min=1e-3 * P0, max=1e3 * P0)
    pars.add("T", value=T0)
    pars.add("e", value=min(max(e0, 1e-4), _E_MAX - 1e-3), min=0.0, max=_E_MAX)
    for key, value in zip("ABFG", params0[3:]):
        pars.add(key, value=value)

    def resid(p):
        v = np.array([p[k].value for k in FIT_KEYS])
        r_theta, r_rho, _, _ = normalised_residuals(v, t, theta, rho, sigma_theta, sigma_rho)
        return np.concatenate([r_theta, r_rho])

    def jacobian(p):
        return residual_jacobian(np.array([p[k].value for k in FIT_KEYS]), t,
                                 sigma_theta, sigma_rho)

    if loss == "linear":
        out = lmfit.minimize(resid, pars, method="leastsq", scale_covar=False, Dfun=jacobian,
                             col_deriv=0, max_nfev=max_nfev)
    else:
        out = lmfit.minimize(resid, pars, method="least_squares", loss=loss,
                             scale_covar=False, Dfun=jacobian, max_nfev=max_nfev)
    best = np.array([out.params[k].value for k in FIT_KEYS])
    chi2 = float(np.sum(resid(out.params) ** 2))
    covar = out.covar if getattr(out, "covar", None) is not None else None
    if covar is not None and list(out.var_names) != list(FIT_KEYS):
        order = [list(out.var_names).index(k) for k in FIT_KEYS]
        covar = covar[np.ix_(order, order)]
    return Refined(best, chi2, covar, bool(out.success))

