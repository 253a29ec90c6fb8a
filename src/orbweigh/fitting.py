"""Orbit solution from a measurement log: global search, refinement, flips, outliers.

Steps (each documented where it is done):

1. grid search over (P, e, T) with the Thiele-Innes constants solved linearly
   (``search.grid_search``), over a period range from the sampling or the user;
2. the deepest local minima over period are polished in (P, e, T) and then refined in
   all seven parameters with Levenberg-Marquardt (``refine``);
3. quadrant flips: before the search, the rows ``check`` suspects (and, in a small log,
   each single row) are tried flipped, each hypothesis with its own global search (in a
   log of more than 15 points only when the null orbit leaves a suspect unexplained);
   after it, a point whose theta + 180 deg fits decisively better is corrected;
4. outliers: points beyond ``outlier_sigma`` (in units of sigma scaled by sqrt of the
   reduced chi2 of the inliers when that exceeds 1) are set aside and refitted without;
5. every other distinct minimum within ``alternative_delta_chi2`` of the best is kept as
   an alternative, so an ambiguous arc is shown as ambiguous;
6. with ``technique_scales``, one sigma factor per technique, re-estimated and refitted
   (outliers re-judged each round) until every factor changes by less than 1 %
   (``technique_weights``);
7. uncertainties from the covariance at the optimum, scaled by the reduced chi2 when it
   exceeds 1.
"""
from __future__ import annotations

import functools
import time
from dataclasses import dataclass, field

import numpy as np

from . import formatting as fmt
from .elements import ELEMENT_KEYS, held_elements
from .errors import FitError, InputError
from .model import normalised_residuals
from .refine import Constraints, polish_cells, refine_full
from .search import default_period_range, grid_search, isotropic_weights
from .solution import OrbitSolution, build_solution
from .tables import rows_left_out
from .technique_weights import MIN_POINTS, scale_factors, technique_statistics

__all__ = ["FitOptions", "fit_orbit", "held_constraints"]

#: A flip must lower the point's chi2 by at least this much (decisive: 5 sigma-equivalent).
FLIP_MIN_GAIN = 25.0
_N_CANDIDATES = 6       # local minima of the period profile polished in (P, e, T)
_N_FULL = 3             # of those, refined in all seven parameters
_CANDIDATE_BUDGET = 60  # model evaluations for each rival minimum (see refine_candidates)
_MAX_OUTLIER_FRACTION = 0.25
_MIN_POINTS = 4         # 8 numbers for 7 parameters
_MAX_FLIP_FRACTION = 0.25   # quadrant errors are occasional; more would redefine the orbit
_SMALL_LOG = 15             # up to this many points every single flip is searched
_MAX_SUSPECT_COMBINATION = 3    # flips of suspected rows searched together, at most
_MAX_HYPOTHESES = 24        # flip hypotheses searched at most (each a global search)
_SCALE_TOLERANCE = 0.01     # technique factors converged when none changes by more
_MAX_SCALE_ROUNDS = 20      # refits of the technique factors at most


@dataclass(frozen=True)
class FitOptions:
    """Choices of the orbit fit.

    Attributes
    ----------
    period_range : (float, float) or None
        Shortest and longest trial period [yr]; None derives it from the sampling.
    loss : {'linear', 'soft_l1', 'huber'}
        Loss of the final refinement; robust losses down-weight large residuals.
    flips : bool
        Detect and correct 180 deg quadrant errors.
    outlier_sigma : float
        Threshold of the normalised residual sqrt(r_theta^2 + r_rho^2) for outliers.
    alternative_delta_chi2 : float
        Distinct minima within this chi2 of the best are reported as alternatives.
    n_alternatives : int
        At most this many alternatives.
    seed : int
        Seed recorded with the result and used by later random steps (sampling).
    fixed : dict
        Elements held at given values, keyed P, T, e, a, i, Omega, omega, in the result
        document's units: P [yr], T in the log's epoch scale, a [arcsec], angles [deg].
        Held in the search (P, e, T), the refinement and the degrees of freedom; recorded
        as given. ``held`` adds omega = 0 for a circular orbit (e held at 0).
    period_bounds : (float, float) or None
        The period must lie in [lo, hi] yr: the search stays inside and the refinement
        is bounded (a solution on the bound is warned of). The search range defaults to it.
    technique_scales : bool
        Estimate one sigma factor per observing technique (its reduced chi2 about one)
        iteratively with the fit, and fit with the scaled sigmas; a technique with fewer
        than ``technique_weights.MIN_POINTS`` points keeps the factor 1.
    """

    period_range: tuple | None = None
    loss: str = "linear"
    flips: bool = True
    outlier_sigma: float = 4.0
    alternative_delta_chi2: float = 25.0
    n_alternatives: int = 3
    seed: int = 0
    fixed: dict = field(default_factory=dict)
    period_bounds: tuple | None = None
    technique_scales: bool = False

    def __post_init__(self):
        if self.loss not in ("linear", "soft_l1", "huber"):
            raise InputError(f"loss must be one of linear, soft_l1, huber; got {self.loss!r}")
        if self.period_range is not None:
            lo, hi = self.period_range
            if not 0 < lo < hi:
                raise InputError(f"period range must satisfy 0 < PMIN < PMAX; got {lo}, {hi}")
        if not self.outlier_sigma > 0:
            raise InputError("the outlier threshold must be positive")
        if self.period_bounds is not None:
            lo, hi = self.period_bounds
            if not 0 < lo < hi:
                raise InputError(f"period bounds must satisfy 0 < PMIN < PMAX; got {lo}, {hi}")
        _check_fixed(self.fixed, self.period_bounds)

    @property
    def held(self):
        """Every held element: ``fixed`` and, with e held at 0 (and omega and T free),
        omega = 0 by convention (``elements.held_elements``)."""
        return held_elements(self.fixed)

    @property
    def n_free(self):
        """Elements fitted: seven less the held ones (the degrees of freedom of a fit of
        n points are 2 n - n_free)."""
        return 7 - len(self.held)


#: Ranges of held values: (low, high, high included, in words); P and a exclude 0.
#: Omega may be given on either node branch, [0, 360): the orbit is reported with Omega in
#: [0, 180) and a warning names the shift (``solution``); the ranges are those of --prior.
_FIXED_LIMITS = {"P": (0.0, np.inf, False, "a positive period in years"),
                 "e": (0.0, 0.995, True, "an eccentricity in [0, 0.995]"),
                 "a": (0.0, np.inf, False, "a positive semi-major axis in arcsec"),
                 "i": (0.0, 180.0, True, "an inclination in [0, 180] deg"),
                 "Omega": (0.0, 360.0, False, "a node in [0, 360) deg"),
                 "omega": (0.0, 360.0, False, "an angle in [0, 360) deg")}


def _check_fixed(fixed, period_bounds):
    """Refuse unknown names and impossible values of held elements."""
    for name, value in fixed.items():
        if name not in ELEMENT_KEYS:
            raise InputError(f"cannot fix {name!r}: the elements are {', '.join(ELEMENT_KEYS)}")
        if not np.isfinite(value):
            raise InputError(f"the fixed value of {name} must be a finite number, got {value}")
        lo, hi, hi_in, what = _FIXED_LIMITS.get(name, (-np.inf, np.inf, True, ""))
        if value < lo or value > hi or (value == hi and not hi_in) or (
                value == lo and name in ("P", "a")):
            hint = (f" (the same angle: {value % 360.0:g})"
                    if name in ("Omega", "omega") else "")
            raise InputError(f"the fixed value of {name} must be {what}; got {value:g}{hint}")
    if "P" in fixed and period_bounds is not None and not (
            period_bounds[0] <= fixed["P"] <= period_bounds[1]):
        raise InputError(f"the fixed period {fixed['P']:g} yr lies outside the period range "
                         f"{period_bounds[0]:g}-{period_bounds[1]:g} yr; drop one of them")


@dataclass
class _Points:
    """The usable measurements as plain arrays (flips applied to theta)."""

    t: np.ndarray
    theta: np.ndarray
    rho: np.ndarray
    sigma_theta: np.ndarray
    sigma_rho: np.ndarray
    constraints: Constraints

    def subset(self, keep, flipped):
        theta = np.mod(self.theta + np.where(flipped, 180.0, 0.0), 360.0)
        return _Points(self.t[keep], theta[keep], self.rho[keep],
                       self.sigma_theta[keep], self.sigma_rho[keep], self.constraints)

    def scaled(self, factor):
        """The same points with both sigmas of each multiplied by ``factor``."""
        return _Points(self.t, self.theta, self.rho, self.sigma_theta * factor,
                       self.sigma_rho * factor, self.constraints)

    def residuals(self, params, flipped=None):
        theta = self.theta if flipped is None else np.mod(self.theta + 180.0 * flipped, 360.0)
        return normalised_residuals(params, self.t, theta, self.rho,
                                    self.sigma_theta, self.sigma_rho)

    def refine(self, params0, loss, max_nfev=None):
        return refine_full(params0, self.t, self.theta, self.rho,
                           self.sigma_theta, self.sigma_rho, loss, max_nfev, self.constraints)

    def refine_candidates(self, starts, loss):
        """Refine every start on a small budget, then finish the best without one.

        Near a true minimum Levenberg-Marquardt converges in a few evaluations; a start
        still crawling after the budget is a poor minimum and is not pursued (nor
        reported as an alternative)."""
        runs = sorted((self.refine(s, loss, _CANDIDATE_BUDGET) for s in starts),
                      key=lambda r: r.chi2)
        if not runs[0].success:
            runs[0] = self.refine(runs[0].params, loss)
        return sorted(runs, key=lambda r: r.chi2)


def fit_orbit(data, options=None) -> OrbitSolution:
    """Fit an apparent orbit to a ``MeasurementSet``.

    Parameters
    ----------
    data : MeasurementSet
        The validated log; rows excluded by the user's flag are not fitted.
    options : FitOptions, optional

    Returns
    -------
    OrbitSolution

    Raises
    ------
    FitError
        Fewer than four usable measurements.
    """
    # The linear algebra here is small: a threaded BLAS only spins its threads, and in a
    # process pool it oversubscribes the cores (measured: 1.6x the CPU time per fit).
    with _thread_pools().limit(limits=1):
        return _fit(data, options or FitOptions())


@functools.cache
def _thread_pools():
    """The process's BLAS/OpenMP pools, found once: the scan of the loaded libraries
    costs milliseconds, as much as a tenth of a small fit (bench_fit_cpu.py)."""
    from threadpoolctl import ThreadpoolController
    return ThreadpoolController()


def _fit(data, options):
    started = time.perf_counter()
    usable = np.flatnonzero(data.usable)
    if usable.size < _MIN_POINTS:
        left_out = rows_left_out(data.rejected, data.line[data.excluded])
        raise FitError(f"{data.source}: {fmt.counted(usable.size, 'usable measurement')}; an "
                       f"orbit needs at least {_MIN_POINTS} (7 elements from 2 coordinates "
                       f"per point)" + (f". Left out: {left_out}" if left_out else ""))
    epochs = np.unique(np.round(data.epoch_yr[usable], 3))
    if epochs.size < _MIN_POINTS:
        raise FitError(f"{data.source}: the usable measurements fall on {epochs.size} distinct "
                       f"epoch(s); an orbit needs at least {_MIN_POINTS} epochs spread in time "
                       "(measurements of one night constrain no orbit)")
    weight = np.sqrt(data.weight[usable])
    constraints = held_constraints(options, data)
    points = _Points(data.epoch_yr[usable], data.theta_deg[usable], data.rho_arcsec[usable],
                     data.sigma_theta_deg[usable] / weight,
                     data.sigma_rho_arcsec[usable] / weight, constraints)
    period_range = _search_range(options, points.t)

    first, flipped, n_trials = _searched(points, data, usable, period_range, options)
    best = first[0]
    if options.flips:
        best, flipped = _correct_flips(points, best, options.loss, flipped)
    best, outlier = _set_aside_outliers(points, best, flipped, options)
    factor, scales = np.ones(usable.size), None
    if options.technique_scales:
        best, outlier, factor, scales = _scale_by_technique(
            points, data.technique[usable], best, flipped, options)
        points = points.scaled(factor)
    clean = points.subset(~outlier, flipped)
    final = first
    if flipped.any() or outlier.any() or scales:  # minima refound on clean, scaled data
        final = clean.refine_candidates(
            [_near_mean_epoch(best.params, clean.t, clean.constraints)]
            + [r.params for r in first[1:]],
            options.loss)
    return build_solution(
        data=data, rows=usable, points=points, best=final[0],
        alternatives=_distinct_alternatives(
            final, options, n_dof=2 * clean.t.size - options.n_free),
        flipped=flipped, outlier=outlier, options=options, period_range=period_range,
        n_trials=n_trials, fit_seconds=time.perf_counter() - started,
        sigma_factor=factor, technique_scales=scales)


def _suspected_flips(data, usable):
    """Indices (into ``usable``) of the rows ``check`` suspects of a quadrant error."""
    from .measurements import suspicious_rows

    index = {int(line): k for k, line in enumerate(data.line[usable])}
    return sorted({index[s.line] for s in suspicious_rows(data)
                   if s.rule == "quadrant_flip" and s.line in index})


def _flip_hypotheses(n, suspects):
    """Sets of the n usable rows to search with theta + 180, the first one none.

    A single quadrant error on a short arc drags the global search to a wrong orbit, after
    which no flip looks decisive; so the search itself is run under each hypothesis:
    every combination (at most a quarter of the points) of the rows ``check`` suspects,
    and for a small log every single row.
    """
    from itertools import combinations

    room = int(_MAX_FLIP_FRACTION * n)
    sets = {()}
    for size in range(1, min(room, _MAX_SUSPECT_COMBINATION) + 1):
        sets.update(combinations(suspects, size))
    if n <= _SMALL_LOG and room >= 1:
        sets.update((k,) for k in range(n))
    masks = []
    for rows in sorted(sets, key=lambda r: (len(r), r))[:_MAX_HYPOTHESES]:
        mask = np.zeros(n, bool)
        mask[list(rows)] = True
        masks.append(mask)
    return masks


def _search_under(points, flipped, period_range, loss):
    """Global search and refinement with the rows of ``flipped`` turned by 180 deg."""
    trial = points.subset(np.ones(points.t.size, bool), flipped)
    starts, n_trials = _global_candidates(trial, period_range)
    runs = trial.refine_candidates(
        [_near_mean_epoch(s, trial.t, trial.constraints) for s in starts], loss)
    return runs, n_trials


def _searched(points, data, usable, period_range, options):
    """Global search under the flip hypotheses; the best one wins.

    Each flipped point must pay for itself: the score is chi2 + FLIP_MIN_GAIN per flip.
    The null hypothesis is searched first, and the others (each a whole global search)
    only when it does not suffice (``_null_suffices``): when its chi2 is at most
    FLIP_MIN_GAIN no flip can score lower; in a log of more than ``_SMALL_LOG`` points one
    quadrant error cannot drag the search far, so the null orbit after the usual
    correction must leave a suspected row unexplained (``_suspects_explained``). Measured
    in benchmarks/bench_flips.py.
    Returns (refined minima of the winner, its flips, trials per search).
    """
    null = np.zeros(usable.size, bool)
    runs, n_trials = _search_under(points, null, period_range, options.loss)
    if not options.flips:
        return runs, null, n_trials
    suspects = _suspected_flips(data, usable)
    hypotheses = _flip_hypotheses(usable.size, suspects)[1:]
    if not hypotheses or _null_suffices(points, runs[0], suspects, options):
        return runs, null, n_trials
    best = (runs[0].chi2, runs, null)
    for flipped in hypotheses:
        runs, _ = _search_under(points, flipped, period_range, options.loss)
        score = runs[0].chi2 + FLIP_MIN_GAIN * int(flipped.sum())
        if score < best[0]:
            best = (score, runs, flipped)
    return best[1], best[2], n_trials


def _null_suffices(points, found, suspects, options):
    """Whether the null hypothesis's search ``found`` makes the others needless: its chi2
    is at most FLIP_MIN_GAIN (no flip can score lower), or the log is larger than
    ``_SMALL_LOG`` and the null orbit explains every suspect."""
    if found.chi2 <= FLIP_MIN_GAIN:
        return True
    return points.t.size > _SMALL_LOG and _suspects_explained(points, found, suspects, options)


def _suspects_explained(points, found, suspects, options):
    """Whether the null orbit accounts for every suspected row once flips are corrected:
    each is corrected, or lies within the outlier threshold as it is."""
    best, flipped = _correct_flips(points, found, options.loss,
                                   np.zeros(points.t.size, bool))
    chi2_pt = _point_chi2(points, best.params, flipped)
    red = max(best.chi2 / max(2 * points.t.size - options.n_free, 1), 1.0)
    return all(flipped[k] or chi2_pt[k] / red <= options.outlier_sigma ** 2 for k in suspects)


def held_constraints(options, data):
    """The held elements (``FitOptions.held``) in internal units (T as a Julian year) and
    the period bound.

    Also the combined fit's held elements (``combined.fit_combined``): one conversion of a
    held T from the log's epoch scale.
    """
    from .reductions import to_julian_year

    fixed = {k: float(v) for k, v in options.held.items()}
    if "T" in fixed:
        fixed["T"] = float(to_julian_year(np.array([fixed["T"]]), data.epoch_scale)[0])
    return Constraints(fixed, tuple(options.period_bounds) if options.period_bounds else None)


def _search_range(options, t):
    """Trial periods: the user's range, inside the bound, or a held period alone."""
    if "P" in options.fixed:
        return (float(options.fixed["P"]),) * 2
    lo, hi = options.period_range or options.period_bounds or default_period_range(t)
    if options.period_bounds is not None:
        lo, hi = max(lo, options.period_bounds[0]), min(hi, options.period_bounds[1])
        if not lo < hi:
            raise InputError(f"the search range {options.period_range} lies outside the "
                             f"period bounds {options.period_bounds}")
    return float(lo), float(hi)


def _global_candidates(points, period_range):
    """Starting parameter vectors from the grid search, polished in (P, e, T)."""
    x = points.rho * np.cos(np.radians(points.theta))
    y = points.rho * np.sin(np.radians(points.theta))
    w = isotropic_weights(points.rho, points.sigma_rho, np.radians(points.sigma_theta))
    fixed = points.constraints.fixed
    trials, grid = grid_search(points.t, x, y, w, period_range, n_best=_N_CANDIDATES,
                               e=fixed.get("e"), t_peri=fixed.get("T"))
    polished = sorted(polish_cells(trials, points.t, x, y, w, period_range,
                                   points.constraints), key=lambda r: r.chi2)
    starts = []
    for r in polished:
        if all(not _same_orbit(r.params, s) for s in starts):
            starts.append(r.params)
        if len(starts) == _N_FULL:
            break
    return starts, grid.n_trials


def _same_orbit(p, q, tol=0.01):
    """Whether two parameter vectors describe practically the same orbit."""
    scale = max(np.max(np.abs(p[3:])), 1e-12)
    return (abs(np.log(p[0] / q[0])) < tol and abs(p[2] - q[2]) < 5 * tol
            and np.max(np.abs(np.asarray(p[3:]) - q[3:])) < 5 * tol * scale)


def _near_mean_epoch(params, t, constraints):
    """Same orbit with T moved by whole periods to the passage nearest the mean epoch.

    T near the middle of the data has the least correlation with P.
    """
    p = np.array(params, float)
    if "T" not in constraints.fixed:
        p[1] += p[0] * np.round((np.mean(t) - p[1]) / p[0])
    return p


def _point_chi2(points, params, flipped):
    r_theta, r_rho, _, _ = points.residuals(params, flipped)
    return r_theta**2 + r_rho**2


def _correct_flips(points, best, loss, flipped, max_rounds=3):
    """Correct quadrant errors: theta + 180 must lower a point's chi2 decisively.

    ``flipped`` are the flips already applied by the search (see _searched)."""
    for _ in range(max_rounds):
        as_is = _point_chi2(points, best.params, flipped)
        other = _point_chi2(points, best.params, ~flipped)
        gain = np.where(flipped, 0.0, as_is - other)
        room = int(_MAX_FLIP_FRACTION * gain.size) - int(flipped.sum())
        candidates = gain > FLIP_MIN_GAIN
        if room <= 0 or not candidates.any():
            break
        if candidates.sum() > room:                  # keep only the most decisive ones
            candidates = np.zeros(gain.size, bool)
            candidates[np.argsort(gain)[::-1][:room]] = True
        trial_flips = flipped | candidates
        refit = points.subset(np.ones(points.t.size, bool), trial_flips).refine(best.params, loss)
        if refit.chi2 >= best.chi2:
            break
        best, flipped = refit, trial_flips
    return best, flipped


def _set_aside_outliers(points, best, flipped, options, max_rounds=10):
    """Iteratively set aside points beyond the threshold; re-admit those back within it."""
    n = points.t.size
    outlier = np.zeros(n, bool)
    max_out = int(_MAX_OUTLIER_FRACTION * n)
    for _ in range(max_rounds):
        chi2_pt = _point_chi2(points, best.params, flipped)
        n_in = int((~outlier).sum())
        red = chi2_pt[~outlier].sum() / max(2 * n_in - options.n_free, 1)
        dist = np.sqrt(chi2_pt / max(red, 1.0))
        new = dist > options.outlier_sigma
        if new.sum() > max_out:                      # keep only the worst ones
            new = np.zeros(n, bool)
            new[np.argsort(dist)[::-1][:max_out]] = True
        if np.array_equal(new, outlier) or 2 * int((~new).sum()) <= options.n_free:
            break
        outlier = new
        best = points.subset(~outlier, flipped).refine(best.params, options.loss)
    return best, outlier


def _scale_by_technique(points, technique, best, flipped, options):
    """Sigma factor per technique, iterated with the fit until it settles.

    Each round takes the factors that bring every technique's reduced chi2 to one at the
    current orbit (``technique_weights.scale_factors``), refits with them and judges the
    outliers again (a point beyond the threshold under the stated sigmas may be within it
    under the scaled ones, and the reverse). Converged when no factor changes by more than
    ``_SCALE_TOLERANCE``; at most ``_MAX_SCALE_ROUNDS`` rounds.

    Returns (best, outlier mask, factor of each point, the document block).
    """
    n_free = options.n_free
    factors, outlier = {}, np.zeros(points.t.size, bool)
    factor = np.ones(points.t.size)
    converged, change = False, np.inf
    for rounds in range(1, _MAX_SCALE_ROUNDS + 1):
        best, outlier = _set_aside_outliers(points.scaled(factor), best, flipped, options)
        fitted = ~outlier
        r_theta, r_rho, d_theta, d_rho = points.scaled(factor).residuals(best.params, flipped)
        stats = technique_statistics(technique[fitted], r_theta[fitted], r_rho[fitted],
                                     d_theta[fitted], d_rho[fitted], n_free)
        new = scale_factors(stats, factors)
        change = max(abs(new[k] / factors.get(k, 1.0) - 1.0) for k in new)
        factors = new
        factor = np.array([factors.get(k, 1.0) for k in technique])
        best = points.scaled(factor).subset(fitted, flipped).refine(best.params, options.loss)
        if change < _SCALE_TOLERANCE:
            converged = True
            break
    best, outlier = _set_aside_outliers(points.scaled(factor), best, flipped, options)
    block = {"applied": True, "rounds": rounds, "converged": converged,
             "last_change": float(change), "tolerance": _SCALE_TOLERANCE,
             "min_points": MIN_POINTS,
             "factors": {k: _factor_entry(factors[k], stats[k]) for k in factors}}
    return best, outlier, factor, block


def _factor_entry(factor, stats):
    """A technique's factor, its first-order error 1/sqrt(2 dof_k), and its points."""
    estimated = stats["n_points"] >= MIN_POINTS
    return {"factor": float(factor),
            "error": float(factor / np.sqrt(2.0 * stats["dof"])) if estimated else None,
            "n_points": int(stats["n_points"]), "estimated": bool(estimated)}


def _distinct_alternatives(final, options, n_dof):
    """Other minima within the chi2 window, each distinct from the best and each other."""
    best = final[0]
    scale = max(best.chi2 / max(n_dof, 1), 1.0)
    kept = [best]
    for r in final[1:]:
        if (r.chi2 - best.chi2) / scale > options.alternative_delta_chi2:
            break
        if not r.success:         # stopped on its budget: not a converged minimum
            continue
        if all(not _same_orbit(r.params, k.params, tol=0.02) for k in kept):
            kept.append(r)
        if len(kept) > options.n_alternatives:
            break
    return kept[1:]
