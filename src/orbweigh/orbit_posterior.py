"""The visual-orbit posterior: Campbell elements given relative positions (theta, rho).

Likelihood: ln L = -chi2 / 2 with the fit's normalised residuals: the position-angle
difference (wrapped into (-180, 180] deg) over sigma_theta, and (rho_obs - rho_pred) over
sigma_rho. Priors: ``priors.ElementPriors``. Two ways of sampling this one posterior:

``MarginalPosterior`` (default). The apparent orbit is linear in the Thiele-Innes
constants beta = (A, B, F, G) for given (P, e, T): x = A X + F Y, y = B X + G Y with
X = cos E - e, Y = sqrt(1 - e^2) sin E (Heintz, *Double Stars*, 1978, ch. 5). With the
residuals linearised about the observed position (radial (rho - u.p)/sigma_rho,
tangential -(v.p)/(rho sigma_theta), u and v the radial and tangential unit vectors at
the measurement), chi2_lin is quadratic in beta and, under a flat prior on beta, beta
integrates out in closed form: for each (P, e, T), chi2_lin = chi2_min + (beta - mu)^T H
(beta - mu), and the marginal is exp(-chi2_min/2) det(H)^(-1/2). The ensemble then runs
over the free ones of (ln P, T, e) only, and beta is drawn from N(mu, H^-1) for every
kept draw. Neither the flat prior on beta nor the linearisation is the posterior we
state, so each draw carries an importance weight that makes it exact:

    w = p(a, cos i, Omega, omega) / (a^3 sin^2 i)  /  w_chain(P, e, T)
        * exp(-(chi2 - chi2_lin) / 2),

where a^3 sin^2 i is the Jacobian d(A, B, F, G) / d(a, cos i, Omega, omega) (the matrix
(A F; B G) has singular values a and a|cos i|), p the stated prior of those four
elements, and w_chain the same prior ratio evaluated at mu with the radii |A+G, B-F|,
|A-G, B+F| softened by their spread (it shapes the chain's target close to the true
marginal and cancels exactly in the weights). The weighted draws are resampled
(systematic resampling) into equally weighted ones; the effective number of draws
(sum w)^2 / sum w^2 is reported, and a warning given when it is low.

``DirectPosterior`` (when a, i, Omega or omega is held by ``--fix``, or omega = 0 by the
circular orbit's convention, ``elements.held_elements``, which makes beta no longer
free): the ensemble runs over all free elements in (ln P, T, e, ln a, cos i, Omega,
omega) with the exact likelihood; no weights. T moves in a window of two periods
around the fit's T and the angles within +-2 pi of the fit's, where their priors are
uniform (a mode near a seam lies whole inside the window).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .elements import (campbell_from_thiele_innes, nearest_passage, normalise_node,
                       phase_in_periastron, thiele_innes_from_campbell)
from .errors import InputError

__all__ = ["Positions", "MarginalPosterior", "DirectPosterior", "ALL_NAMES",
           "cos_sin_eccentric_anomaly"]

#: Walker coordinates of the direct sampler, in order; the marginal one uses the first three.
ALL_NAMES = ("ln_P", "T", "e", "ln_a", "cos_i", "Omega", "omega")
_ELEMENT_OF = dict(zip(ALL_NAMES, ("P", "T", "e", "a", "i", "Omega", "omega")))
_BLOCK_ELEMENTS = 5000         # walkers x points per likelihood block (cache-sized)


# --------------------------------------------------------------- fast Kepler kernel
_STEP = np.pi / 4096                  # node spacing of the sin/cos tables [rad]
_OFFSET = 2048                        # nodes below 0: the tables cover [-pi/2, 3 pi/2]
_ANGLES = (np.arange(4 * 4096 // 2 + 1) - _OFFSET) * _STEP
_SIN_TABLE, _COS_TABLE = np.sin(_ANGLES), np.cos(_ANGLES)
_KEPLER_ROUNDS = 3


def _node(angle):
    """Index of the table node nearest ``angle`` (clipped to the table by ``take``)."""
    return (angle * (1.0 / _STEP) + (_OFFSET + 0.5)).astype(np.intp)


def cos_sin_eccentric_anomaly(mean_anom, e):
    """cos E and sin E from Kepler's equation, for 0 <= e <= ``E_MAX``; fast, no sin calls.

    Parameters
    ----------
    mean_anom : ndarray
        Mean anomaly M [rad], any real value.
    e : ndarray
        Eccentricity, broadcast against ``mean_anom``; 0 <= e <= 0.99.

    Returns
    -------
    cos_E, sin_E : ndarray

    Notes
    -----
    Transcendental calls dominate a numpy Kepler solver, so there are none. M is reduced
    to m in [0, pi] (sin E is odd in M). The start is E = m + e sin m / (1 - sin(m + e)
    + sin m) with the sines looked up in a table (step pi/4096). Each round snaps E to the
    nearest table node, where sin and cos are known exactly, and takes Danby's quartic
    step from there; sin and cos at the final E follow by rotating the node's values
    through the last step (|step| < 1e-3, so short Taylor series are exact to rounding).
    Three rounds give |dE| < 1e-11 rad for e <= 0.99 (checked against
    ``kepler.eccentric_anomaly`` in the tests).
    """
    signed = mean_anom - (2.0 * np.pi) * np.rint(mean_anom * (0.5 / np.pi))   # [-pi, pi]
    m = np.abs(signed)
    sin_m = _SIN_TABLE.take(_node(m), mode="clip")
    E = m + e * sin_m / (1.0 - _SIN_TABLE.take(_node(m + e), mode="clip") + sin_m)
    for _ in range(_KEPLER_ROUNDS):
        k = _node(E)
        s, c = _SIN_TABLE.take(k, mode="clip"), _COS_TABLE.take(k, mode="clip")
        node = _ANGLES.take(k, mode="clip")
        half_es, ec = 0.5 * e * s, e * c
        f = node - 2.0 * half_es - m
        d1 = 1.0 - ec
        step = f / d1                                   # steps are subtracted: E = node - step
        step = f / (d1 - step * half_es)
        step = f / (d1 - step * (half_es - step * ec * (1.0 / 6.0)))
        E = node - step
    h2 = step * step
    sin_step = step * (1.0 - h2 * (1.0 / 6.0) * (1.0 - h2 * (1.0 / 20.0)))
    cos_step = 1.0 - h2 * 0.5 * (1.0 - h2 * (1.0 / 12.0) * (1.0 - h2 * (1.0 / 30.0)))
    # sin(node - step) >= 0 on [0, pi] (up to rounding); it takes the sign of M
    return c * cos_step + s * sin_step, np.copysign(s * cos_step - c * sin_step, signed)


@dataclass(frozen=True)
class Positions:
    """The fitted measurements as arrays: epochs [Julian yr], observed direction, rho
    [arcsec], inverse sigmas [1/rad, 1/arcsec] (scaled by ``sigma_scale``)."""

    t: np.ndarray
    cos_theta: np.ndarray
    sin_theta: np.ndarray
    rho: np.ndarray
    inv_sigma_theta: np.ndarray
    inv_sigma_rho: np.ndarray

    @classmethod
    def from_document(cls, doc, sigma_scale):
        """Rows 'used' and 'flipped' (theta + 180 deg) of a result document."""
        rows = [r for r in doc["residuals"] if r["status"] in ("used", "flipped")]
        if len(rows) < 4:
            raise InputError(f"{len(rows)} fitted measurements; sampling needs at least 4")
        col = {k: np.array([r[k] for r in rows], float)
               for k in ("epoch_yr", "theta_deg", "rho_arcsec", "sigma_theta_deg",
                         "sigma_rho_arcsec")}
        theta = np.radians(col["theta_deg"] + np.array([180.0 * (r["status"] == "flipped")
                                                        for r in rows]))
        return cls(col["epoch_yr"], np.cos(theta), np.sin(theta), col["rho_arcsec"],
                   1.0 / (sigma_scale * np.radians(col["sigma_theta_deg"])),
                   1.0 / (sigma_scale * col["sigma_rho_arcsec"]))

    def basis(self, period, t_peri, e):
        """X = cos E - e and Y = sqrt(1 - e^2) sin E, shape (n, points), for (n, 1) inputs."""
        cos_E, sin_E = cos_sin_eccentric_anomaly((self.t - t_peri) * (2.0 * np.pi / period), e)
        return cos_E - e, np.sqrt(1.0 - e * e) * sin_E

    def chi2(self, X, Y, A, B, F, G):
        """The exact chi2 of the fit's residuals for orbits (A..G of shape (n, 1))."""
        x = A * X + F * Y
        y = B * X + G * Y
        # theta_obs - theta_pred from the cross and dot products: wrapped by construction.
        d_theta = np.arctan2(self.sin_theta * x - self.cos_theta * y,
                             self.cos_theta * x + self.sin_theta * y)
        r_theta = d_theta * self.inv_sigma_theta
        r_rho = (self.rho - np.sqrt(x * x + y * y)) * self.inv_sigma_rho
        return np.einsum("ij,ij->i", r_theta, r_theta) + np.einsum("ij,ij->i", r_rho, r_rho)

    def linear_system(self, X, Y):
        """H (n, 4, 4), b (n, 4) and the constant c of chi2_lin = c - 2 b.beta + beta H beta.

        Per point the weight matrix is alpha u u^T + gamma v v^T (alpha = 1/sigma_rho^2,
        gamma = 1/(rho sigma_theta)^2) and p = X (A, B) + Y (F, G); the sums over points
        are matrix products.
        """
        c, s = self.cos_theta, self.sin_theta
        alpha = self.inv_sigma_rho ** 2
        gamma = (self.inv_sigma_theta / self.rho) ** 2
        weights = np.column_stack([alpha * c * c + gamma * s * s, (alpha - gamma) * c * s,
                                   alpha * s * s + gamma * c * c])
        H = np.empty((X.shape[0], 4, 4))
        for (r, c0), sums in (((0, 0), (X * X) @ weights), ((0, 2), (X * Y) @ weights),
                              ((2, 2), (Y * Y) @ weights)):
            block = sums[:, [0, 1, 1, 2]].reshape(-1, 2, 2)
            H[:, r:r + 2, c0:c0 + 2] = block
            H[:, c0:c0 + 2, r:r + 2] = block          # the blocks are symmetric
        target = np.column_stack([alpha * self.rho * c, alpha * self.rho * s])
        b = np.concatenate([X @ target, Y @ target], axis=1)
        return H, b, float(np.sum(alpha * self.rho ** 2))


def _t_window(t_peri, period, t_ref):
    return np.abs(t_peri - t_ref) < period


def _reported(period, t_peri, e, a, i_rad, node, omega, t_ref, phase=False):
    """Element draws (P, T, e, a, i, Omega, omega) [yr, Julian yr, -, arcsec, deg x3]:
    Omega into [0, 180) deg with omega shifted alike, omega into [0, 360) deg, or with
    ``phase`` (a circular orbit's held omega, ``elements.phase_in_periastron``) T shifted
    by half periods instead; then T moved by whole periods into [t_ref - P/2, t_ref + P/2)."""
    if phase:
        shift = np.pi * np.floor(node / np.pi)
        node, t_peri = node - shift, t_peri + period * shift / (2.0 * np.pi)
    node, omega = normalise_node(node, omega)
    t_peri = nearest_passage(t_peri, period, t_ref)
    return np.column_stack([period, t_peri, e, a, np.degrees(i_rad), np.degrees(node),
                            np.degrees(omega)])


@dataclass(frozen=True)
class MarginalPosterior:
    """Chain target over the free ones of (ln P, T, e), Thiele-Innes constants integrated
    out (see the module notes).

    Attributes
    ----------
    positions : Positions
    priors : priors.ElementPriors
    fixed : dict
        Held elements among P, T, e in internal units (P yr, T Julian yr).
    t_ref : float
        Centre of the T window and of the period in which T is reported [Julian yr].
    """

    positions: Positions
    priors: object
    fixed: dict
    t_ref: float

    @property
    def names(self):
        return tuple(n for n in ALL_NAMES[:3] if _ELEMENT_OF[n] not in self.fixed)

    def _nonlinear(self, q):
        """(period, t_peri, e) columns, shape (n,), from walker positions (n, k)."""
        q = np.asarray(q, float)
        q = q.reshape(len(q), len(self.names))
        col = dict(zip(self.names, q.T))
        n = q.shape[0]
        period = np.exp(col["ln_P"]) if "ln_P" in col else np.full(n, self.fixed["P"])
        t_peri = col["T"] if "T" in col else np.full(n, self.fixed["T"])
        e = col["e"] if "e" in col else np.full(n, self.fixed["e"])
        return period, t_peri, e

    def _log_prior(self, period, t_peri, e):
        out = self.priors.log_nonlinear(period, t_peri, e)
        if "T" not in self.fixed:
            out = np.where(_t_window(t_peri, period, self.t_ref), out, -np.inf)
        return out

    def _solve(self, period, t_peri, e):
        """X, Y, Cholesky factor L of H, mu, chi2_min and the chain's prior factor."""
        X, Y = self.positions.basis(period[:, None], t_peri[:, None], e[:, None])
        H, b, const = self.positions.linear_system(X, Y)
        L = np.linalg.cholesky(H)
        mu = np.linalg.solve(H, b[:, :, None])[:, :, 0]
        chi2_min = const - np.einsum("ij,ij->i", b, mu)
        log_det = 2.0 * np.sum(np.log(np.diagonal(L, axis1=1, axis2=2)), axis=1)
        return X, Y, L, mu, chi2_min, log_det, self._chain_factor(mu, np.linalg.inv(H))

    def _chain_factor(self, mu, cov):
        """ln of the prior ratio at mu, radii softened by their spread (finite face-on)."""
        A, B, F, G = mu.T
        spread1 = cov[:, 0, 0] + cov[:, 3, 3] + 2 * cov[:, 0, 3] + cov[:, 1, 1] \
            + cov[:, 2, 2] - 2 * cov[:, 1, 2]
        spread2 = cov[:, 0, 0] + cov[:, 3, 3] - 2 * cov[:, 0, 3] + cov[:, 1, 1] \
            + cov[:, 2, 2] + 2 * cov[:, 1, 2]
        r1 = np.sqrt((A + G) ** 2 + (B - F) ** 2 + spread1)
        r2 = np.sqrt((A - G) ** 2 + (B + F) ** 2 + spread2)
        a, cos_i = 0.5 * (r1 + r2), (r1 - r2) / (r1 + r2)
        w_plus, w_minus = np.arctan2(B - F, A + G), np.arctan2(-B - F, A - G)
        return (self.priors.log_linear(a, cos_i, 0.5 * (w_plus - w_minus),
                                       0.5 * (w_plus + w_minus), bounded=False)
                - np.log(a * r1 * r2))

    def __call__(self, q):
        """Log of the chain's target (up to a constant), vectorised: (n, k) -> (n,)."""
        period, t_peri, e = self._nonlinear(q)
        out = self._log_prior(period, t_peri, e)
        ok = np.flatnonzero(np.isfinite(out))
        if ok.size:
            try:
                _, _, _, _, chi2_min, log_det, factor = self._solve(
                    period[ok], t_peri[ok], e[ok])
            except np.linalg.LinAlgError:     # degenerate orbit basis: no information
                return np.full(out.shape, -np.inf)
            out[ok] += -0.5 * chi2_min - 0.5 * log_det + factor
        return out

    def draw(self, q, rng):
        """Element draws for walker positions q, and the log importance weights."""
        period, t_peri, e = self._nonlinear(q)
        X, Y, L, mu, chi2_min, _, factor = self._solve(period, t_peri, e)
        z = rng.standard_normal(mu.shape)
        beta = mu + np.linalg.solve(np.swapaxes(L, 1, 2), z[:, :, None])[:, :, 0]
        A, B, F, G = (beta[:, k:k + 1] for k in range(4))
        chi2 = self.positions.chi2(X, Y, A, B, F, G)
        a, i_rad, node, omega = campbell_from_thiele_innes(*beta.T)
        sin2 = np.maximum(np.sin(i_rad) ** 2, 1e-300)
        log_w = (self.priors.log_linear(a, np.cos(i_rad), node, omega)
                 - np.log(a ** 3 * sin2) - factor
                 - 0.5 * (chi2 - chi2_min - np.einsum("ij,ij->i", z, z)))
        return _reported(period, t_peri, e, a, i_rad, node, omega, self.t_ref), log_w

    def coordinates(self, elements):
        """Walker coordinates of a ``CampbellElements`` (T moved to the window's middle)."""
        full = _full_coordinates(elements, self.t_ref, (0.0, 0.0))
        return np.array([full[ALL_NAMES.index(n)] for n in self.names])


def _full_coordinates(elements, t_ref, angle_ref):
    period = elements.period_yr
    t_peri = t_ref + math.remainder(elements.periastron_yr - t_ref, period)
    node, omega = (ref + math.remainder(math.radians(angle) - ref, 2.0 * math.pi)
                   for ref, angle in zip(angle_ref, (elements.node_deg, elements.omega_deg)))
    return np.array([math.log(period), t_peri, elements.e, math.log(elements.a_arcsec),
                     math.cos(math.radians(elements.i_deg)), node, omega])


@dataclass(frozen=True)
class DirectPosterior:
    """Chain target over all free elements with the exact likelihood (some of a, i,
    Omega, omega held). ``fixed`` in internal units: P yr, T Julian yr, a arcsec, angles
    rad; ``angle_ref`` centres the windows of Omega and omega [rad]."""

    positions: Positions
    priors: object
    fixed: dict
    t_ref: float
    angle_ref: tuple

    @property
    def names(self):
        return tuple(n for n in ALL_NAMES if _ELEMENT_OF[n] not in self.fixed)

    def _columns(self, q):
        q = np.asarray(q, float).reshape(-1, len(self.names))
        col = dict(zip(self.names, q.T))
        n = q.shape[0]
        value = {"P": np.exp(col["ln_P"]) if "ln_P" in col else None,
                 "a": np.exp(col["ln_a"]) if "ln_a" in col else None,
                 "i": np.arccos(np.clip(col["cos_i"], -1, 1)) if "cos_i" in col else None}
        out = {}
        for name in ALL_NAMES:
            el = _ELEMENT_OF[name]
            if el in self.fixed:
                out[el] = np.full(n, self.fixed[el])
            else:
                out[el] = value.get(el) if value.get(el) is not None else col[name]
        return out, col

    def __call__(self, q):
        el, col = self._columns(q)
        out = self.priors.log_nonlinear(el["P"], el["T"], el["e"])
        cos_i = np.cos(el["i"]) if "cos_i" not in col else col["cos_i"]
        inside = np.abs(cos_i) <= 1.0
        if "T" in col:
            inside &= _t_window(el["T"], el["P"], self.t_ref)
        for name, ref in zip(("Omega", "omega"), self.angle_ref):
            if name in col:
                inside &= np.abs(col[name] - ref) < 2.0 * np.pi
        out = np.where(inside, out, -np.inf)
        ok = np.flatnonzero(np.isfinite(out))
        if not ok.size:
            return out
        lin = self.priors.log_linear(el["a"][ok], cos_i[ok], el["Omega"][ok], el["omega"][ok])
        if "ln_a" in col:
            lin = lin + np.log(el["a"][ok])        # density in ln a
        out[ok] += lin
        ok = ok[np.isfinite(out[ok])]
        block = max(1, _BLOCK_ELEMENTS // self.positions.t.size)
        for start in range(0, ok.size, block):
            rows = ok[start:start + block]
            out[rows] -= 0.5 * self._chi2({k: v[rows] for k, v in el.items()})
        return out

    def _chi2(self, el):
        col = {k: v[:, None] for k, v in el.items()}
        X, Y = self.positions.basis(col["P"], col["T"], col["e"])
        ti = thiele_innes_from_campbell(col["a"], col["i"], col["Omega"], col["omega"])
        return self.positions.chi2(X, Y, *ti)

    def draw(self, q, rng):
        """Element draws for walker positions q; the weights are all one (log 0)."""
        el, _ = self._columns(q)
        draws = _reported(el["P"], el["T"], el["e"], el["a"], el["i"], el["Omega"],
                          el["omega"], self.t_ref, phase_in_periastron(self.fixed))
        return draws, np.zeros(len(draws))

    def coordinates(self, elements):
        full = _full_coordinates(elements, self.t_ref, self.angle_ref)
        return np.array([full[ALL_NAMES.index(n)] for n in self.names])
