"""Least squares over a parameter vector with bounds, held values and a budget.

Levenberg-Marquardt (our own, below: scipy.optimize costs 0.4 s to import, a fifth of a
sampled fit from the command line) knows no bounds, so a bounded parameter is fitted
through a smooth internal variable (the transformation of
the MINUIT manual, James 1994, section "parameter limits"; memory):
x = lo + (sin u + 1)(hi - lo)/2 with both limits, x = lo - 1 + sqrt(u^2 + 1) with a lower
one only, x = hi + 1 - sqrt(u^2 + 1) with an upper one only. The Jacobian and the
covariance follow by the chain rule. Robust losses use scipy's trust-region solver,
which takes the bounds directly.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["BoundedFit", "fit_bounded"]

_TINY = 1e-15


@dataclass(frozen=True)
class BoundedFit:
    """The solution (every parameter, held ones at their values), the unscaled covariance
    of the varied ones (None when it could not be estimated or the budget ran out), and
    whether the solver converged within its budget."""

    x: np.ndarray
    covariance: np.ndarray | None
    success: bool


class _BudgetSpent(Exception):
    pass


class _Transform:
    """External values of the varied parameters from internal, unbounded ones.

    The three kinds of limit are held as index arrays, and an empty kind is skipped: the
    transform runs at every evaluation, where numpy's cost is per call."""

    def __init__(self, lower, upper):
        self.lower, self.upper = lower, upper
        finite_lo, finite_hi = np.isfinite(lower), np.isfinite(upper)
        self.both = np.flatnonzero(finite_lo & finite_hi)
        self.low_only = np.flatnonzero(finite_lo & ~finite_hi)
        self.high_only = np.flatnonzero(~finite_lo & finite_hi)
        self.span = upper[self.both] - lower[self.both]

    def to_internal(self, x):
        lo, hi, u = self.lower, self.upper, np.array(x, float)
        b, low, high = self.both, self.low_only, self.high_only
        with np.errstate(invalid="ignore", divide="ignore"):
            u[b] = np.arcsin(2.0 * (x[b] - lo[b]) / self.span - 1.0)
            u[low] = np.sqrt((x[low] - lo[low] + 1.0) ** 2 - 1.0)
            u[high] = np.sqrt((hi[high] - x[high] + 1.0) ** 2 - 1.0)
        return np.where(np.abs(u) < _TINY, 0.0, u)

    def to_external(self, u):
        lo, hi, x = self.lower, self.upper, np.array(u, float)
        b, low, high = self.both, self.low_only, self.high_only
        if b.size:
            x[b] = lo[b] + (np.sin(u[b]) + 1.0) * self.span / 2.0
        if low.size:
            x[low] = lo[low] - 1.0 + np.sqrt(u[low] * u[low] + 1.0)
        if high.size:
            x[high] = hi[high] + 1.0 - np.sqrt(u[high] * u[high] + 1.0)
        return np.minimum(np.maximum(x, lo), hi)          # rounding at a limit

    def gradient(self, u):
        """dx/du of each varied parameter."""
        g = np.ones(u.shape)
        b, low, high = self.both, self.low_only, self.high_only
        if b.size:
            g[b] = np.cos(u[b]) * self.span / 2.0
        if low.size:
            g[low] = u[low] / np.sqrt(u[low] * u[low] + 1.0)
        if high.size:
            g[high] = -u[high] / np.sqrt(u[high] * u[high] + 1.0)
        return g


def fit_bounded(residuals, x0, lower, upper, vary, jacobian=None, loss="linear",
                max_nfev=None):
    """Minimise the sum of squared ``residuals`` (or a robust ``loss`` of them).

    Parameters
    ----------
    residuals : callable
        ``residuals(x)`` of the full parameter vector, a 1-D array.
    x0, lower, upper : array_like
        Start and limits of every parameter (``-inf``/``inf`` for none); the start is
        moved inside its limits.
    vary : array_like of bool
        Which parameters are fitted; the others stay at ``x0``.
    jacobian : callable, optional
        ``jacobian(x)``: d residuals / d x of every parameter (rows: residuals). Finite
        differences when omitted.
    loss : {'linear', 'soft_l1', 'huber', ...}
        'linear' is Levenberg-Marquardt; any other is scipy's trust-region solver.
    max_nfev : int, optional
        Budget of residual evaluations (default 2000 per varied parameter and one); when
        it runs out the last evaluated point is returned with ``success`` False.
    """
    vary = np.asarray(vary, bool)
    lower, upper = np.asarray(lower, float), np.asarray(upper, float)
    start = np.clip(np.asarray(x0, float), lower, upper)
    budget = max_nfev or 2000 * (int(vary.sum()) + 1)
    run = _linear if loss == "linear" else _robust
    return run(residuals, jacobian, start, lower, upper, vary, loss, budget)


class _Counted:
    """The residuals of the varied parameters, counted against the budget; remembers the
    last point evaluated (what a spent budget returns)."""

    def __init__(self, residuals, jacobian, start, vary, budget, external):
        self.residuals, self.jac = residuals, jacobian
        self.start, self.index, self.budget, self.external = (start, np.flatnonzero(vary),
                                                              budget, external)
        self.calls, self.last, self.last_internal = 0, start, None

    def full(self, v):
        x = self.start.copy()
        x[self.index] = self.external(v)
        return x

    def __call__(self, v):
        self.calls += 1
        if self.calls > self.budget:
            raise _BudgetSpent
        self.last, self.last_internal = self.full(v), v
        return np.asarray(self.residuals(self.last), float)


def _linear(residuals, jacobian, start, lower, upper, vary, loss, budget):
    transform = _Transform(lower[vary], upper[vary])
    f = _Counted(residuals, jacobian, start, vary, budget, transform.to_external)

    all_vary = bool(vary.all())

    def jac(u, r):
        if jacobian is None:
            return _forward_differences(f, u, r)
        # Levenberg-Marquardt takes the Jacobian where it last evaluated: that point's
        # parameters are not transformed again.
        x = f.last if u is f.last_internal else f.full(u)
        J = np.asarray(jacobian(x), float)
        return (J if all_vary else J[:, vary]) * transform.gradient(u)

    try:
        u, r, converged = _levenberg_marquardt(f, jac, transform.to_internal(start[vary]))
    except _BudgetSpent:
        return BoundedFit(f.last, None, False)
    f.budget = np.inf                 # the covariance's Jacobian is not part of the search
    cov = _inverse_curvature(jac(u, r))
    if cov is not None:
        g = transform.gradient(u)
        cov = cov * np.outer(g, g)
    return BoundedFit(f.full(u), cov, converged)


#: Levenberg-Marquardt convergence: relative decrease of the cost, actual and predicted,
#: or scaled step relative to the scaled parameters below these (the tests of MINPACK's
#: lmder, More 1978; the tolerances its scipy interface defaults to).
_FTOL = _XTOL = 1.5e-8
#: Relative forward-difference step (square root of the 1e-10 relative error assumed for
#: the residuals).
_DIFF_STEP = 1e-5
#: Damping of the first step relative to Marquardt's scaling: small, since the starts
#: (polished search cells) are near a minimum (1e-3 took a third more evaluations).
_START_DAMPING = 1e-5
_MAX_DAMPING = 1e30


def _levenberg_marquardt(f, jac, u):
    """Minimise sum f(u)^2 from u; returns (u, f(u), converged).

    Marquardt's scaling D by the largest column norms of the Jacobian seen so far (as
    MINPACK's lmder), each damped step from the normal equations
    (J^T J + lam D^2) step = -J^T r; the damping follows the ratio of actual to predicted
    decrease (H. B. Nielsen 1999, IMM-REP-1999-05; memory). J. J. More, "The
    Levenberg-Marquardt algorithm: implementation and theory", in Numerical Analysis,
    ed. G. A. Watson (Springer, 1978), pp. 105-116.
    """
    r = f(u)
    cost = float(r @ r)
    damping, growth, scale = _START_DAMPING, 2.0, None
    while True:
        if cost == 0.0:
            return u, r, True
        J = jac(u, r)
        norms = np.sqrt(np.add.reduce(J * J, axis=0))       # column norms
        scale = norms if scale is None else np.maximum(scale, norms)
        scale = np.where(scale > 0.0, scale, 1.0)
        curvature, gradient = J.T @ J, J.T @ r
        while True:
            step = _damped_step(curvature, gradient, damping * scale**2)
            predicted = float(-2.0 * gradient @ step - step @ curvature @ step)
            tiny_step = _norm(scale * step) <= _XTOL * (_norm(scale * u) + _XTOL)
            trial = u + step
            r_trial = f(trial)
            cost_trial = float(r_trial @ r_trial)
            if not math.isfinite(cost_trial):     # a residual not finite (or overflowing)
                cost_trial = np.inf
            actual = cost - cost_trial
            if predicted > 0.0 and actual > 0.0:
                ratio = actual / predicted
                damping *= max(1.0 / 3.0, 1.0 - (2.0 * ratio - 1.0) ** 3)
                growth = 2.0
                small_cost = actual <= _FTOL * cost and predicted <= _FTOL * cost
                u, r, cost = trial, r_trial, cost_trial
                if small_cost or tiny_step:
                    return u, r, True
                break
            if tiny_step:                 # no decrease left even for a negligible step
                return u, r, True
            damping *= growth
            growth *= 2.0
            if damping > _MAX_DAMPING:
                return u, r, False


def _norm(v):
    return math.sqrt(v @ v)


def _damped_step(curvature, gradient, diagonal):
    """Solve (curvature + diag(diagonal)) step = -gradient; least squares if singular."""
    lhs = curvature + np.diag(diagonal)
    try:
        return np.linalg.solve(lhs, -gradient)
    except np.linalg.LinAlgError:
        return np.linalg.lstsq(lhs, -gradient, rcond=None)[0]


def _forward_differences(f, u, r):
    """d f / d u by forward differences (step _DIFF_STEP |u|, or _DIFF_STEP at 0)."""
    h = _DIFF_STEP * np.abs(u)
    h = np.where(h == 0.0, _DIFF_STEP, h)
    columns = []
    for j in range(u.size):
        shifted = u.copy()
        shifted[j] += h[j]
        columns.append((f(shifted) - r) / h[j])
    return np.column_stack(columns)


def _inverse_curvature(J):
    """(J^T J)^-1, None when singular, not finite or with a variance not above zero: an
    inverse of a numerically singular J^T J can come out with negative variances, which
    are no uncertainty at all."""
    try:
        cov = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        return None
    return cov if np.all(np.isfinite(cov)) and np.all(np.diag(cov) > 0.0) else None


def _robust(residuals, jacobian, start, lower, upper, vary, loss, budget):
    from scipy.optimize import least_squares

    f = _Counted(residuals, jacobian, start, vary, budget, lambda v: v)
    jac = "2-point" if jacobian is None else (
        lambda v: np.asarray(jacobian(f.full(v)), float)[:, vary])
    try:
        out = least_squares(f, start[vary], jac=jac, bounds=(lower[vary], upper[vary]),
                            method="trf", ftol=1e-8, xtol=1e-8, gtol=1e-8, loss=loss,
                            max_nfev=2 * budget)
    except _BudgetSpent:
        return BoundedFit(f.last, None, False)
    return BoundedFit(f.full(out.x), _inverse_curvature(out.jac), bool(out.success))
