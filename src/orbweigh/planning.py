"""Where to observe next: epochs at which one new measurement best improves P, a and the mass.

The rule, in full
-----------------
Let C be the covariance of the seven elements (P [yr], T [Julian yr], e, a [arcsec],
i, Omega, omega [deg]) and J(t) the 2x7 Jacobian of the predicted (x, y) at epoch t.
A new measurement with precision sigma in each of x and y updates the covariance to

    C' = (C^-1 + J^T J / sigma^2)^-1 = C - K S^-1 K^T,   K = C J^T,  S = sigma^2 I + J C J^T

(the right-hand form, the Woodbury identity, needs no inverse of an ill-conditioned C).
For a quantity q with gradient g the *gain* is the fractional reduction of its variance,

    gain_q(t) = 1 - g^T C' g / g^T C g = (g^T K) S^-1 (K^T g) / (g^T C g),  in [0, 1).

Three quantities are scored: P, a and the orbit's part of the mass, ln M = 3 ln a - 2 ln P
(the parallax is not improved by a position measurement). The combined score is the mean
of the three gains. The recommended epochs are the separated local maxima of the score
(at least ``min_separation_yr`` apart), best first. The update is linear: it ranks
epochs well when the predicted positions scatter by less than about the orbit's size;
for very poorly known orbits it is a guide, not a promise.

A pair is taken as resolvable by an aperture D [mm] when rho >= 116"/D (Dawes' rule, a rule
of thumb of the trade). Epochs below that limit are not recommended for that aperture.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .elements import ELEMENT_KEYS, CampbellElements
from .ephemeris import ephemeris, ephemeris_bands
from .errors import InputError
from .reductions import to_julian_year
from .result import (covariance_from_document, element_draws, element_errors,
                     elements_from_document, epoch_scale_of, independent_draws)

__all__ = ["EpochAdvice", "Plan", "dawes_limit_arcsec", "centred_draws", "element_covariance",
           "position_jacobian", "variance_gains", "pick_epochs",
           "plan_observations"]

#: Dawes' resolution limit, 116 arcsec mm (rule of thumb of the trade).
DAWES_ARCSEC_MM = 116.0
_ANGLES = slice(4, 7)


@dataclass(frozen=True)
class EpochAdvice:
    """One candidate epoch for a new measurement.

    Attributes
    ----------
    epoch : float
        Epoch in the document's scale (Besselian year unless the document says otherwise).
    epoch_yr : float
        The same epoch as a decimal Julian year.
    theta_deg, rho_arcsec : float
        Predicted position angle [deg] and separation [arcsec] from the best elements.
    theta_low_deg, theta_high_deg, rho_low_arcsec, rho_high_arcsec : float
        68 % bands from the element draws (theta band runs from low to high in the sense
        of increasing theta).
    gain_P, gain_a, gain_mass : float
        Fractional reduction of the variance of P, a and ln M = 3 ln a - 2 ln P.
    score : float
        Mean of the three gains.
    resolvable : bool
        rho >= the Dawes limit of the aperture (True when no aperture was given).
    """

    epoch: float
    epoch_yr: float
    theta_deg: float
    rho_arcsec: float
    theta_low_deg: float
    theta_high_deg: float
    rho_low_arcsec: float
    rho_high_arcsec: float
    gain_P: float
    gain_a: float
    gain_mass: float
    score: float
    resolvable: bool


@dataclass
class Plan:
    """Advice on the next measurement, and the scores on the whole grid.

    Attributes
    ----------
    epochs, epoch_yr : ndarray
        Candidate epochs (document's scale, and Julian years).
    rho_arcsec : ndarray
        Predicted separation at each candidate epoch [arcsec].
    gain_P, gain_a, gain_mass, score : ndarray
        Gains and combined score at each candidate epoch (see the module notes).
    recommended : list of EpochAdvice
        Best resolvable epochs, best first.
    unresolvable : list of EpochAdvice
        Epochs that would score better than the first recommendation but where rho is
        below the Dawes limit: not recommended for this aperture.
    sigma_now : dict
        Current 1-sigma of P [yr], a [arcsec] and the mass (relative).
    sigma_arcsec : float
        Assumed precision of the new measurement in x and in y [arcsec].
    aperture_mm, dawes_limit_arcsec : float or None
        Aperture and its resolution limit, when given.
    covariance_source : str
        'posterior draws' or 'covariance'.
    n_draws, seed : int
        Draws behind the bands (and the covariance, for a posterior) and their seed.
    warnings : list of str
    """

    epochs: np.ndarray
    epoch_yr: np.ndarray
    rho_arcsec: np.ndarray
    gain_P: np.ndarray
    gain_a: np.ndarray
    gain_mass: np.ndarray
    score: np.ndarray
    recommended: list
    unresolvable: list
    sigma_now: dict
    sigma_arcsec: float
    aperture_mm: float | None
    dawes_limit_arcsec: float | None
    covariance_source: str
    n_draws: int
    seed: int
    warnings: list = field(default_factory=list)


def dawes_limit_arcsec(aperture_mm):
    """Dawes' resolution limit 116"/D [arcsec] for an aperture D [mm]."""
    if not aperture_mm > 0:
        raise InputError(f"--aperture-mm must be positive, got {aperture_mm}")
    return DAWES_ARCSEC_MM / aperture_mm


def centred_draws(draws, best):
    """Draws re-expressed next to the best elements, for a covariance.

    The same orbit has many names: (Omega, omega) and (Omega + 180, omega + 180) deg,
    angles modulo 360 deg, T modulo P. Each draw takes the name closest to ``best``, so a
    posterior straddling Omega = 0/180 or omega = 0/360 gives a small, honest spread.

    Parameters
    ----------
    draws : ndarray, shape (n, 7)
    best : array_like, shape (7,)
        Elements in the same order and units (P, T, e, a, i, Omega, omega).
    """
    d = np.array(draws, float)
    best = np.asarray(best, float)
    half_turns = np.round((d[:, 5] - best[5]) / 180.0)
    d[:, 5] -= 180.0 * half_turns
    d[:, 6] -= 180.0 * half_turns
    d[:, _ANGLES] = best[_ANGLES] + _wrap(d[:, _ANGLES] - best[_ANGLES], 360.0)
    d[:, 1] = best[1] + _wrap(d[:, 1] - best[1], d[:, 0])
    return d


def _wrap(delta, period):
    """delta reduced into (-period/2, period/2]."""
    half = 0.5 * np.asarray(period, float)
    return half - np.mod(half - delta, 2.0 * half)


def element_covariance(doc, draws):
    """Covariance (7x7, internal units) of the elements, and where it came from.

    Posterior draws, when the document has them, give the sample covariance (after
    ``centred_draws``); otherwise the document's own covariance matrix is used as is.
    """
    if (doc.get("posterior") or {}).get("draws_file"):
        best = np.array(elements_from_document(doc).as_tuple())
        matrix = np.cov(centred_draws(draws, best), rowvar=False)
        if not np.isfinite(matrix).all():
            raise InputError(f"{doc.get('_path', 'result document')}: the posterior draws "
                             "contain non-finite values")
        return matrix, "posterior draws"
    return covariance_from_document(doc), "covariance"


def position_jacobian(elements, epoch_yr):
    """d(x, y)/d(elements) at each epoch, by central differences.

    Returns
    -------
    ndarray, shape (m, 2, 7)
        Derivatives of x, y [arcsec] with respect to P [yr], T [yr], e, a [arcsec],
        i, Omega, omega [deg].
    """
    t = np.atleast_1d(np.asarray(epoch_yr, float))
    p = np.array(elements.as_tuple())
    # Steps: relative for P, T (scaled by P) and a; absolute for e and the angles.
    steps = np.array([1e-6 * p[0], 1e-6 * p[0], 1e-6, 1e-6 * p[3], 1e-5, 1e-5, 1e-5])
    jac = np.empty((t.size, 2, 7))
    for k, h in enumerate(steps):
        lo, hi = p.copy(), p.copy()
        lo[k] -= h
        hi[k] += h
        if k == 2:  # keep e inside [0, 1)
            lo[k], hi[k] = max(lo[k], 0.0), min(hi[k], 1.0 - 1e-9)
        e_lo, e_hi = ephemeris(CampbellElements(*lo), t), ephemeris(CampbellElements(*hi), t)
        jac[:, 0, k] = (e_hi.x_arcsec - e_lo.x_arcsec) / (hi[k] - lo[k])
        jac[:, 1, k] = (e_hi.y_arcsec - e_lo.y_arcsec) / (hi[k] - lo[k])
    return jac


def variance_gains(cov, jac, sigma, gradients):
    """Fractional variance reduction of linear combinations after one measurement.

    Parameters
    ----------
    cov : ndarray, shape (7, 7)
        Element covariance C.
    jac : ndarray, shape (m, 2, 7)
        Jacobian of (x, y) at m candidate epochs.
    sigma : float
        Precision of the new measurement in x and in y [arcsec].
    gradients : ndarray, shape (q, 7)
        Gradients g of the quantities scored.

    Returns
    -------
    ndarray, shape (m, q)
        1 - g^T C' g / g^T C g with C' = (C^-1 + J^T J / sigma^2)^-1 (Woodbury form).
    """
    g = np.atleast_2d(gradients)
    K = np.einsum("ij,mkj->mik", cov, jac)                       # C J^T, (m, 7, 2)
    S = sigma**2 * np.eye(2) + np.einsum("mki,mil->mkl", jac, K)  # (m, 2, 2)
    u = np.einsum("qi,mik->mqk", g, K)                            # g^T C J^T, (m, q, 2)
    w = np.linalg.solve(S[:, None], u[..., None])[..., 0]
    prior = np.einsum("qi,ij,qj->q", g, cov, g)
    if np.any(prior <= 0):
        raise InputError("the element covariance gives no uncertainty to P, a or the mass; "
                         "planning needs a covariance or posterior draws from a fit")
    return np.einsum("mqk,mqk->mq", u, w) / prior


def pick_epochs(epoch_yr, score, top, min_separation_yr):
    """Indices of the best separated local maxima of ``score``, best first.

    Entries with negative score are never picked (used to mask epochs out). The ends of
    the grid count as maxima when they beat their one neighbour.
    """
    s = np.concatenate([[-np.inf], score, [-np.inf]])
    peak = (s[1:-1] >= s[:-2]) & (s[1:-1] > s[2:]) & (score >= 0)
    chosen = []
    for i in np.flatnonzero(peak)[np.argsort(-score[peak], kind="stable")]:
        if all(abs(epoch_yr[i] - epoch_yr[j]) >= min_separation_yr for j in chosen):
            chosen.append(i)
        if len(chosen) == top:
            break
    return chosen


def plan_observations(doc, epochs, sigma_arcsec=0.005, aperture_mm=None, top=3,
                      n_draws=1000, seed=1, min_separation_yr=0.5, epoch_scale=None):
    """Advise when one new measurement best improves P, a and the mass.

    Parameters
    ----------
    doc : dict
        Result document with a covariance or posterior draws.
    epochs : array_like
        Candidate epochs in ``epoch_scale`` (sorted).
    sigma_arcsec : float
        Expected precision of the new measurement in x and in y [arcsec].
    aperture_mm : float, optional
        Telescope aperture [mm]; epochs with rho below Dawes' limit are not recommended.
    top : int
        Number of epochs to recommend.
    n_draws, seed : int
        Element draws for the bands (and for the covariance of a posterior).
    min_separation_yr : float
        Smallest gap between two recommended epochs [Julian yr].
    epoch_scale : str, optional
        Scale of ``epochs`` (default: that of the document's T).

    Returns
    -------
    Plan
    """
    if not sigma_arcsec > 0:
        raise InputError(f"--sigma-mas must be positive, got {sigma_arcsec * 1e3}")
    if top < 1:
        raise InputError(f"--top must be at least 1, got {top}")
    if n_draws < 2:
        raise InputError(f"--draws must be at least 2, got {n_draws}")
    if not min_separation_yr >= 0:
        raise InputError(f"--min-separation must not be negative, got {min_separation_yr}")
    draws = element_draws(doc, n_draws, seed)
    independent = draws is None
    if independent:
        draws = independent_draws(doc, n_draws, seed)
    if draws is None:
        raise InputError(f"{doc.get('_path', 'result document')}: no posterior draws and no "
                         "covariance; planning needs the uncertainty of the elements, so use "
                         "a result written by 'orbweigh fit --json' or elements with errors")
    epochs = np.asarray(epochs, float)
    t = to_julian_year(epochs, epoch_scale if epoch_scale else epoch_scale_of(doc))
    elements = elements_from_document(doc)
    if independent:
        errors = element_errors(doc)
        cov = np.diag([errors.get(k, 0.0) ** 2 for k in ELEMENT_KEYS])
        source = "element errors taken as independent (correlations unknown)"
    else:
        cov, source = element_covariance(doc, draws)
    P, a = elements.period_yr, elements.a_arcsec
    grads = np.zeros((3, 7))
    grads[0, 0], grads[1, 3] = 1.0, 1.0
    grads[2, 0], grads[2, 3] = -2.0 / P, 3.0 / a
    gains = variance_gains(cov, position_jacobian(elements, t), sigma_arcsec, grads)
    score = gains.mean(axis=1)
    rho = ephemeris(elements, t).rho_arcsec
    limit = None if aperture_mm is None else dawes_limit_arcsec(aperture_mm)
    resolvable = np.ones(t.size, bool) if limit is None else rho >= limit

    def advice(indices):
        if not indices:
            return []
        eph = ephemeris(elements, t[indices])
        bands = ephemeris_bands(elements, draws, t[indices])
        return [EpochAdvice(float(epochs[i]), float(t[i]), float(eph.theta_deg[k]),
                            float(eph.rho_arcsec[k]), float(bands.theta_low_deg[k]),
                            float(bands.theta_high_deg[k]), float(bands.rho_low_arcsec[k]),
                            float(bands.rho_high_arcsec[k]), *map(float, gains[i]),
                            float(score[i]), bool(resolvable[i]))
                for k, i in enumerate(indices)]

    chosen = pick_epochs(t, np.where(resolvable, score, -1.0), top, min_separation_yr)
    best_overall = pick_epochs(t, score, top, min_separation_yr)
    threshold = score[chosen[0]] if chosen else -np.inf
    blocked = [i for i in best_overall if not resolvable[i] and score[i] > threshold]
    sigma_now = dict(zip(("P_yr", "a_arcsec", "mass_relative"),
                         np.sqrt(np.einsum("qi,ij,qj->q", grads, cov, grads)).tolist()))
    plan = Plan(epochs, t, rho, *gains.T, score, advice(chosen), advice(blocked), sigma_now,
                sigma_arcsec, aperture_mm, limit, source, len(draws), seed)
    plan.warnings.extend(_resolution_warnings(plan, resolvable))
    return plan


def _resolution_warnings(plan, resolvable):
    if plan.dawes_limit_arcsec is None:
        return []
    limit, aperture = plan.dawes_limit_arcsec, plan.aperture_mm
    if not resolvable.any():
        rho_max = float(plan.rho_arcsec.max())
        return [f"rho stays below the Dawes limit {limit:.3f}\" of a {aperture:g} mm aperture "
                f"over the whole window (largest rho {rho_max:.3f}\"): no epoch is "
                f"recommended for this aperture; resolving the pair needs D >= "
                f"{DAWES_ARCSEC_MM / rho_max:.0f} mm (or a technique beating Dawes' rule)"]
    if plan.unresolvable:
        return [f"{len(plan.unresolvable)} better epoch(s) have rho below the Dawes limit "
                f"{limit:.3f}\" of a {aperture:g} mm aperture and are not recommended for it; "
                "the recommendations are the best resolvable epochs"]
    return []
