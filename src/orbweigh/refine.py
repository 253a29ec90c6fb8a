"""Local refinement of orbit solutions.

Two stages: ``polish_cells`` polishes the search's cells in (P, e, T) together, with the
Thiele-Innes constants still solved linearly (variable projection, exact Kepler
solutions); ``refine_full`` then fits all seven parameters with Levenberg-Marquardt on the
proper tangential and radial residuals (``bounded_least_squares``). Both honour
``Constraints``: elements held at given values and a period bound. When a Campbell element (a, i, Omega, omega) is held,
the full refinement runs in Campbell elements instead (``refine_campbell``), since a
fixed a or angle is a non-linear constraint on A, B, F, G.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .bounded_least_squares import fit_bounded
from .elements import (campbell_from_thiele_innes, phase_in_periastron,
                       thiele_innes_from_campbell, wrap_degrees)
from .ephemeris import basis_derivatives, basis_of_anomaly, orbit_basis
from .kepler import sin_cos_anomaly
from .model import normalised_residuals, residual_jacobian

__all__ = ["Constraints", "Refined", "polish_cells", "refine_full", "refine_campbell",
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
    """A refined solution: parameters in FIT_KEYS order, chi2, covariance or None.

    ``campbell`` and ``campbell_covariance`` are set when the refinement ran in Campbell
    elements (P, T, e, a, i, Omega, omega; angles in deg, not normalised): held angles
    are then exact there, while turning (A, B, F, G) back would split Omega and omega
    anew, arbitrarily for a face-on orbit.
    """

    params: np.ndarray
    chi2: float
    covariance: np.ndarray | None = None
    success: bool = True
    campbell: np.ndarray | None = None
    campbell_covariance: np.ndarray | None = None


def polish_cells(trials, t, x, y, w, period_range, constraints=Constraints()):
    """Polish search cells in (ln P, e, T) together, solving A, B, F, G linearly each step.

    Variable projection: for each (P, e, T) the Thiele-Innes constants are the linear
    least-squares solution, so only three parameters are iterated. All cells advance in
    one numpy pass per step (``_box_levenberg_marquardt``): a polish of six cells costs
    about what one cell did through a general solver. Elements P, e, T held by
    ``constraints`` stay at their values. Returns one ``Refined`` per trial, in order.
    """
    from .search import linear_thiele_innes

    sw = np.sqrt(w)
    fixed = constraints.fixed
    free = np.array([k not in fixed for k in ("P", "e", "T")])
    base = np.array([[np.log(fixed.get("P", tr.period)), fixed.get("e", tr.e),
                      fixed.get("T", tr.t_peri)] for tr in trials], float)

    def at(q):
        v = np.repeat(base[:1], len(q), axis=0)
        v[:, free] = q
        return np.exp(v[:, :1]), v[:, 1:2], v[:, 2:3]

    # The derivatives' rows (P, T, e) in the polish's order (ln P, e, T), the free ones.
    free_rows = np.array([0, 2, 1])[free]

    def residuals(q, h):
        """Weighted residuals (m, 2n) at points q (m, free) and (m, free, 2n) at their
        difference points q + h_j e_j.

        Kepler's equation is solved at q only: X and Y at a difference point follow to
        first order in h from ``ephemeris.basis_derivatives`` (d/d ln P = P d/dP), the
        tangent where a second solve would give the secant; the linear solve for A, B,
        F, G is done at every difference point, so its change with q is differenced.
        """
        period, e, t_peri = at(q)
        sin_e, cos_e = sin_cos_anomaly(t, period, t_peri, e)
        X, Y = basis_of_anomaly(sin_e, cos_e, e)
        dX, dY = basis_derivatives(t, period, t_peri, e, sin_e, cos_e)
        dX[0] *= period
        dY[0] *= period
        steps = h.T[:, :, None]
        X = np.concatenate([X, (X + steps * dX[free_rows]).transpose(1, 0, 2)
                            .reshape(-1, t.size)])
        Y = np.concatenate([Y, (Y + steps * dY[free_rows]).transpose(1, 0, 2)
                            .reshape(-1, t.size)])
        A, B, F, G, _ = (c[:, None] for c in linear_thiele_innes(X, Y, x, y, w))
        both = np.hstack([sw * (x - A * X - F * Y), sw * (y - B * X - G * Y)])
        k = len(q)
        return both[:k], both[k:].reshape(k, len(free_rows), -1)

    if free.any():
        span = np.array([tr.period for tr in trials])
        lo = np.column_stack([np.full(len(trials), np.log(period_range[0])),
                              np.zeros(len(trials)), base[:, 2] - span])[:, free]
        hi = np.column_stack([np.full(len(trials), np.log(period_range[1])),
                              np.full(len(trials), _E_MAX), base[:, 2] + span])[:, free]
        q0 = np.clip(base[:, free], lo, hi)
        if free[1]:
            k = np.flatnonzero(free).tolist().index(1)
            q0[:, k] = np.minimum(base[:, 1], _E_MAX - 1e-3)
        base[:, free] = _box_levenberg_marquardt(residuals, q0, lo, hi)
    period, e, t_peri = np.exp(base[:, 0]), base[:, 1], base[:, 2]
    A, B, F, G, chi2 = linear_thiele_innes(
        *orbit_basis(t, period[:, None], t_peri[:, None], e[:, None]), x, y, w)
    return [Refined(np.array([period[k], t_peri[k], e[k], A[k], B[k], F[k], G[k]]),
                    float(chi2[k])) for k in range(len(trials))]


#: Polish steps at most, and the relative change in cost or parameters that ends one;
#: loose, since the full refinement follows.
_POLISH_STEPS = 12
_POLISH_TOLERANCE = 1e-4


def _box_levenberg_marquardt(residuals, q, lo, hi):
    """Levenberg-Marquardt for many small problems at once, steps clipped to a box.

    ``residuals(points, h)`` gives one residual vector per row of ``points`` and one per
    difference point (the row's parameter j moved by h[row, j]). Marquardt's scaling (the
    diagonal of J^T J) damps each step; the Jacobian is by forward differences (step
    sqrt(eps) max(1, |q|), turned inward at an upper limit). Numerical Recipes, 3rd ed.,
    section 15.5.2 (memory). Each step makes one call of ``residuals``: a trial point
    comes with its own difference points, so an accepted trial has its Jacobian ready and
    a rejected one leaves the last Jacobian in place (numpy's cost is per call, hardly
    per row).
    """
    n_cells, n_free = q.shape
    eye = np.eye(n_free)

    def evaluate(points, upper):
        """Residuals at the points and at their difference points, with the steps."""
        h = np.sqrt(np.finfo(float).eps) * np.maximum(1.0, np.abs(points))
        h = np.where(points + h > upper, -h, h)
        return (*residuals(points, h), h)

    q = q.copy()
    r, r_shift, h = evaluate(q, hi)
    cost = np.einsum("ij,ij->i", r, r)
    damping = np.full(n_cells, 1e-3)
    active = np.ones(n_cells, bool)
    for _ in range(_POLISH_STEPS):
        rows = np.flatnonzero(active)
        if rows.size == 0:
            break
        qa = q[rows]
        jac_t = (r_shift[rows] - r[rows][:, None, :]) / h[rows][:, :, None]   # (k, free, 2n)
        jtj = jac_t @ np.swapaxes(jac_t, 1, 2)
        grad = jac_t @ r[rows][:, :, None]
        scale = np.maximum(np.diagonal(jtj, axis1=1, axis2=2), 1e-300)
        lhs = jtj + damping[rows, None, None] * (eye[None] * scale[:, None, :])
        step = _damped_step(lhs, grad, damping[rows, None] * scale)
        # A parameter on a limit that the step pushes outward is held there and the step
        # solved again for the others: clipping alone would leave them off their optimum
        # (e at 0 for a circular orbit is the common case).
        blocked = (((qa <= lo[rows]) & (step < 0)) | ((qa >= hi[rows]) & (step > 0)))
        if blocked.any():
            keep = ~blocked
            lhs = np.where(keep[:, :, None] & keep[:, None, :], lhs, 0.0) \
                + eye[None] * blocked[:, None, :]
            step = _damped_step(lhs, np.where(keep[:, :, None], grad, 0.0),
                                damping[rows, None] * scale)
        trial = np.minimum(np.maximum(qa + step, lo[rows]), hi[rows])
        r_trial, shift_trial, h_trial = evaluate(trial, hi[rows])
        cost_trial = np.einsum("ij,ij->i", r_trial, r_trial)
        better = cost_trial < cost[rows]
        small = ((cost[rows] - cost_trial <= _POLISH_TOLERANCE * cost[rows])
                 | (np.abs(trial - qa) <= _POLISH_TOLERANCE * (1e-8 + np.abs(qa))).all(axis=1))
        took = rows[better]
        q[took], r[took], cost[took] = trial[better], r_trial[better], cost_trial[better]
        r_shift[took], h[took] = shift_trial[better], h_trial[better]
        damping[rows] = np.where(better, damping[rows] / 10.0, damping[rows] * 10.0)
        active[rows[(better & small) | (damping[rows] > 1e10)]] = False
    return q


def _damped_step(lhs, grad, diagonal):
    """Solve lhs step = -grad for each problem; a steepest-descent step where singular."""
    try:
        return -np.linalg.solve(lhs, grad)[:, :, 0]
    except np.linalg.LinAlgError:
        return -grad[:, :, 0] / diagonal


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
    """Campbell start (P, T, e, a, i, Omega, omega) from (P, T, e, A, B, F, G), held
    values imposed.

    A held node 180 deg away from the start's (the node ambiguity) turns omega too. With
    e held at 0 a held omega moves T instead (``elements.phase_in_periastron``): the
    phase omega + 2 pi (t - T) / P of the start is kept.
    """
    a, i, node, omega = campbell_from_thiele_innes(*params0[3:])
    start = {"P": float(params0[0]), "T": float(params0[1]), "e": float(params0[2]),
             "a": float(a), "i": float(np.degrees(i)), "Omega": float(np.degrees(node)),
             "omega": float(np.degrees(omega))}
    if "Omega" in fixed and np.cos(np.radians(fixed["Omega"] - start["Omega"])) < 0:
        start["omega"] += 180.0
    if phase_in_periastron(fixed):
        turn = float(wrap_degrees(fixed["omega"] - start["omega"]))
        start["T"] += turn / 360.0 * start["P"]
    start.update(fixed)
    return start


def refine_campbell(params0, t, theta, rho, sigma_theta, sigma_rho, loss="linear",
                    max_nfev=None, constraints=Constraints()):
    """``refine_full`` in Campbell elements, for held a, i, Omega or omega.

    Returns the solution in (P, T, e, A, B, F, G) with the covariance carried over
    exactly through the Thiele-Innes Jacobian (singular where held).
    """
    fixed = constraints.fixed
    campbell0 = _campbell_start(params0, fixed)
    start, lower, upper, vary = _orbit_limits([campbell0[k] for k in CAMPBELL_KEYS[:3]],
                                              constraints)
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
                   success, campbell=np.asarray(c, float), campbell_covariance=cov)
