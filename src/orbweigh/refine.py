"""Local refinement of orbit solutions.

Two stages: ``refine_nonlinear`` polishes a grid cell in (P, e, T) with the Thiele-Innes
constants still solved linearly (variable projection, exact Kepler solutions);
``refine_full`` then fits all seven parameters with Levenberg-Marquardt on the proper
tangential and radial residuals (``bounded_least_squares``). Both honour ``Constraints``: elements held at
given values and a period bound. When a Campbell element (a, i, Omega, omega) is held,
the full refinement runs in Campbell elements instead (``refine_campbell``), since a
fixed a or angle is a non-linear constraint on A, B, F, G.
"""
from __future__ import annotations

import functools
import inspect
from dataclasses import dataclass, field

import numpy as np

from .bounded_least_squares import fit_bounded
from .elements import campbell_from_thiele_innes, thiele_innes_from_campbell
from .kepler import eccentric_anomaly, mean_anomaly
from .model import FIT_KEYS, normalised_residuals, residual_jacobian

__all__ = ["Constraints", "Refined", "refine_nonlinear", "refine_full", "refine_campbell",
           "thiele_innes_jacobian"]

_E_MAX = 0.995
CAMPBELL_KEYS = ("P", "T", "e", "a", "i", "Omega", "omega")


@dataclass(frozen=True)
class Constraints:
    """Elements held fixed and the period bound, in internal units.

    fixed : dict
        Keys from P, T, e, a, i, Omega, omega; P [yr], T [Julian yr], a [arcsec],
        angles [deg].
    period_bounds : (float, float) or None
        The refined period stays within [lo, hi] yr.
    """

    fixed: dict = field(default_factory=dict)
    period_bounds: tuple | None = None

    @property
    def campbell(self):
        """Whether a Campbell element is held (refinement then in Campbell elements)."""
        return any(k in self.fixed for k in ("a", "i", "Omega", "omega"))


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


def refine_nonlinear(trial, t, x, y, w, period_range, constraints=Constraints()):
    """Polish a search cell in (ln P, e, T), solving A, B, F, G linearly each step.

    Elements P, e, T held by ``constraints`` stay at their values.
    """
    from scipy.optimize import least_squares

    from .search import linear_thiele_innes

    sw = np.sqrt(w)
    fixed = constraints.fixed
    q_all = np.array([np.log(fixed.get("P", trial.period)), fixed.get("e", trial.e),
                      fixed.get("T", trial.t_peri)], float)
    free = np.array([k not in fixed for k in ("P", "e", "T")])

    def full(q):
        v = q_all.copy()
        v[free] = q
        return np.exp(v[0]), v[1], v[2]

    def resid(q):
        period, e, t_peri = full(q)
        X, Y = _basis(t, period, t_peri, e)
        A, B, F, G, _ = linear_thiele_innes(X, Y, x, y, w)
        return np.concatenate([sw * (x - A * X - F * Y), sw * (y - B * X - G * Y)])

    def resid_at_points(_, points):
        """The finite-difference points of one Jacobian in one vectorised pass.

        scipy hands a map-like ``workers`` the residual and the points it would evaluate
        one by one; the points suffice. The residuals are resid's, to rounding."""
        points = np.array(list(points))
        v = np.tile(q_all, (len(points), 1))
        v[:, free] = points
        period, e, t_peri = np.exp(v[:, :1]), v[:, 1:2], v[:, 2:3]
        X, Y = _basis(t, period, t_peri, e)
        A, B, F, G, _ = (c[:, None] for c in linear_thiele_innes(X, Y, x, y, w))
        return list(np.hstack([sw * (x - A * X - F * Y), sw * (y - B * X - G * Y)]))

    if free.any():
        lo = np.array([np.log(period_range[0]), 0.0, trial.t_peri - trial.period])[free]
        hi = np.array([np.log(period_range[1]), _E_MAX, trial.t_peri + trial.period])[free]
        q0 = np.clip(q_all[free], lo, hi)
        if free[1]:
            q0[np.flatnonzero(free).tolist().index(1)] = min(q_all[1], _E_MAX - 1e-3)
        # A polish only (the full refinement follows), so loose tolerances suffice.
        q = least_squares(resid, q0, bounds=(lo, hi), x_scale="jac", max_nfev=40,
                          ftol=1e-4, xtol=1e-4, **_batched_differences(resid_at_points)).x
    else:
        q = q_all[free]
    period, e, t_peri = full(q)
    A, B, F, G, chi2 = linear_thiele_innes(*_basis(t, period, t_peri, e), x, y, w)
    return Refined(np.array([period, t_peri, e, A, B, F, G]), float(chi2))


@functools.cache
def _least_squares_takes_workers():
    from scipy.optimize import least_squares
    return "workers" in inspect.signature(least_squares).parameters


def _batched_differences(evaluate):
    """``workers=evaluate`` where scipy has it (1.16 on); older ones evaluate one by one."""
    return {"workers": evaluate} if _least_squares_takes_workers() else {}


def _period_limits(p0, constraints):
    if constraints.period_bounds is not None:
        return constraints.period_bounds
    return 1e-3 * p0, 1e3 * p0


def _orbit_limits(values, constraints):
    """Start, limits and varied flags of P, T, e: the period within its bound, e in
    [0, 0.995) kept off its edges at the start; held elements do not vary."""
    lo, hi = _period_limits(values[0], constraints)
    fixed = constraints.fixed
    e = fixed.get("e", min(max(values[2], 1e-4), _E_MAX - 1e-3))
    start = [fixed.get("P", values[0]), fixed.get("T", values[1]), e]
    return start, [lo, -np.inf, 0.0], [hi, np.inf, max(_E_MAX, e)], \
        [k not in fixed for k in ("P", "T", "e")]


def _solve(resid, jacobian, start, lower, upper, vary, loss, max_nfev):
    """``fit_bounded`` with the covariance embedded in a full square (zeros when held)."""
    out = fit_bounded(resid, start, lower, upper, vary, jacobian, loss, max_nfev)
    full = None
    if out.covariance is not None:
        index = np.flatnonzero(vary)
        full = np.zeros((len(start), len(start)))
        full[np.ix_(index, index)] = out.covariance
    return out.x, full, out.success


def refine_full(params0, t, theta, rho, sigma_theta, sigma_rho, loss="linear", max_nfev=None,
                constraints=Constraints()):
    """Least-squares fit of the seven parameters.

    Parameters
    ----------
    params0 : sequence
        Start (P, T, e, A, B, F, G) [yr, Julian yr, -, arcsec x4].
    t, theta, rho, sigma_theta, sigma_rho : ndarray
        Epochs [Julian yr], position angles [deg], separations [arcsec] and sigmas.
    loss : {'linear', 'soft_l1', 'huber'}
        'linear' uses Levenberg-Marquardt; robust losses use scipy's trust-region
        least squares (``bounded_least_squares``).
    max_nfev : int, optional
        Budget of model evaluations; ``success`` is False when it ran out.
    constraints : Constraints
        Held elements and the period bound; with a Campbell element held the fit runs
        in Campbell elements (``refine_campbell``).

    Returns
    -------
    Refined
        With the unscaled covariance (inverse curvature of chi2) when it exists; rows and
        columns of held elements are zero.
    """
    if constraints.campbell:
        return refine_campbell(params0, t, theta, rho, sigma_theta, sigma_rho, loss,
                               max_nfev, constraints)
    start, lower, upper, vary = _orbit_limits(params0, constraints)
    start, lower, upper = start + list(params0[3:]), lower + [-np.inf] * 4, upper + [np.inf] * 4
    vary = vary + [True] * 4

    def resid(p):
        r_theta, r_rho, _, _ = normalised_residuals(p, t, theta, rho, sigma_theta, sigma_rho)
        return np.concatenate([r_theta, r_rho])

    def jacobian(p):
        return residual_jacobian(p, t, sigma_theta, sigma_rho)

    x, cov, success = _solve(resid, jacobian, start, lower, upper, vary, loss, max_nfev)
    return Refined(x, float(np.sum(resid(x) ** 2)), cov, success)


def thiele_innes_jacobian(a, i_deg, node_deg, omega_deg):
    """d(A, B, F, G) / d(a, i, Omega, omega), angles in degrees (4 x 4).

    Differentiating A = a(cos w cos W - sin w sin W cos i) and its three siblings:
    d/dW maps (A, B, F, G) to (-B, A, -G, F) and d/dw to (F, G, -A, -B).
    """
    i, node, omega = np.radians([i_deg, node_deg, omega_deg])
    A, B, F, G = thiele_innes_from_campbell(a, i, node, omega)
    si = np.sin(i)
    sw, cw, sn, cn = np.sin(omega), np.cos(omega), np.sin(node), np.cos(node)
    d_a = np.array(thiele_innes_from_campbell(1.0, i, node, omega))
    d_i = a * si * np.array([sw * sn, -sw * cn, cw * sn, -cw * cn])
    d_node = np.array([-B, A, -G, F])
    d_omega = np.array([F, G, -A, -B])
    return np.column_stack([d_a, np.radians(1.0) * d_i, np.radians(1.0) * d_node,
                            np.radians(1.0) * d_omega])


def _campbell_start(params0, fixed):
    """Campbell start from (P, T, e, A, B, F, G), held values imposed.

    A held node 180 deg away from the start's (the node ambiguity) turns omega too.
    """
    a, i, node, omega = campbell_from_thiele_innes(*params0[3:])
    start = {"a": float(a), "i": float(np.degrees(i)), "Omega": float(np.degrees(node)),
             "omega": float(np.degrees(omega))}
    if "Omega" in fixed and np.cos(np.radians(fixed["Omega"] - start["Omega"])) < 0:
        start["omega"] += 180.0
    start.update({k: v for k, v in fixed.items() if k in start})
    return start


def refine_campbell(params0, t, theta, rho, sigma_theta, sigma_rho, loss="linear",
                    max_nfev=None, constraints=Constraints()):
    """``refine_full`` in Campbell elements, for held a, i, Omega or omega.

    Returns the solution in (P, T, e, A, B, F, G) with the covariance carried over
    exactly through the Thiele-Innes Jacobian (singular where held).
    """
    fixed = constraints.fixed
    start, lower, upper, vary = _orbit_limits(params0, constraints)
    campbell0 = _campbell_start(params0, fixed)
    start += [campbell0[k] for k in CAMPBELL_KEYS[3:]]
    lower, upper = lower + [0.0, 0.0, -np.inf, -np.inf], upper + [np.inf, 180.0, np.inf, np.inf]
    vary = vary + [k not in fixed for k in CAMPBELL_KEYS[3:]]

    def to_fit(c):
        return np.concatenate([c[:3], thiele_innes_from_campbell(c[3], *np.radians(c[4:]))])

    def resid(c):
        r_theta, r_rho, _, _ = normalised_residuals(to_fit(c), t, theta, rho,
                                                    sigma_theta, sigma_rho)
        return np.concatenate([r_theta, r_rho])

    def chain(c):
        jac = np.eye(7)
        jac[3:, 3:] = thiele_innes_jacobian(*c[3:])
        return jac

    def jacobian(c):
        return residual_jacobian(to_fit(c), t, sigma_theta, sigma_rho) @ chain(c)

    c, cov, success = _solve(resid, jacobian, start, lower, upper, vary, loss, max_nfev)
    chi2 = float(np.sum(resid(c) ** 2))
    return Refined(to_fit(c), chi2, None if cov is None else chain(c) @ cov @ chain(c).T,
                   success)
