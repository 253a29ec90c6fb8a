"""Posterior sampling of orbital elements with an affine-invariant ensemble (emcee).

Two layers:

* ``sample_posterior`` is generic: any vectorised log-posterior, walkers started in small
  balls around one or more start points, autocorrelation-based convergence (optionally
  stopping as soon as the chain is long enough), burn-in and thinning. The joint
  astrometric + radial-velocity posterior reuses it.
* ``sample_document`` samples the visual-orbit posterior of a result document
  (``orbit_posterior``; priors in ``priors``), ``write_draws`` saves the draws (ECSV),
  ``posterior_block`` summarises them for the document's "posterior" key and
  ``format_posterior`` prints them.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .elements import ELEMENT_KEYS
from .errors import FitError, InputError
from .orbit_posterior import DirectPosterior, MarginalPosterior, Positions
from .priors import E_MAX, ElementPriors, check_gaussian_priors

__all__ = ["PosteriorSample", "VisualPosterior", "sample_posterior", "sample_document",
           "write_draws", "posterior_block", "attach_posterior",
           "format_posterior", "MIN_TAU_MULTIPLE", "BURN_TAU_MULTIPLE", "DEFAULT_WALKERS",
           "DEFAULT_STEPS"]

#: Default ensemble of the generic sampler (the joint position + velocity posterior);
#: the visual-orbit posterior uses ``VISUAL_WALKERS``. Steps: at most this many.
DEFAULT_WALKERS = 32
DEFAULT_STEPS = 5000
#: The chain should be at least this many autocorrelation times long (emcee's advice).
MIN_TAU_MULTIPLE = 50
#: Burn-in discarded, in autocorrelation times (common practice, no source: "a few").
BURN_TAU_MULTIPLE = 3
_BALL = 0.1                    # start ball radius, in units of the given scales
_MAX_REDRAWS = 100             # attempts to put a start walker inside the prior
_LOW_ACCEPTANCE = 0.1
_A_PRIOR_FACTOR = 100.0
# Median, central 68.27 % (1 sigma of a normal distribution) and central 95 % (as the masses).
_PERCENTILES = (2.5, 15.865525393145708, 50.0, 84.13447460685429, 97.5)
_CHECK_EVERY = 100             # steps between convergence checks (stopping rule)
_TAU_SETTLED = 0.10            # relative change of tau between checks deemed settled


# ------------------------------------------------------------------- generic sampler
@dataclass
class PosteriorSample:
    """An ensemble chain with its diagnostics.

    Attributes
    ----------
    names : tuple of str
        Names of the sampled coordinates.
    chain : ndarray, shape (steps, walkers, ndim)
        Every position of every walker (burn-in included), in sampled coordinates.
    log_prob : ndarray, shape (steps, walkers)
        Log-posterior at those positions.
    acceptance : float
        Mean acceptance fraction of the walkers.
    autocorr_time : ndarray, shape (ndim,)
        Integrated autocorrelation time [steps] per coordinate (emcee's estimate; nan
        when it cannot be estimated).
    burn : int
        Steps discarded at the start.
    thin : int
        Every ``thin``-th step is kept after the burn-in.
    converged : bool
        The chain is at least ``MIN_TAU_MULTIPLE`` autocorrelation times long.
    seed : int
        Seed of the start ball and of the ensemble moves.
    warnings : list of str
        Plain-language caveats (short chain, low acceptance, several modes).
    """

    names: tuple
    chain: np.ndarray
    log_prob: np.ndarray
    acceptance: float
    autocorr_time: np.ndarray
    burn: int
    thin: int
    converged: bool
    seed: int
    warnings: list = field(default_factory=list)

    def __repr__(self):
        steps, walkers, _ = self.chain.shape
        return (f"<PosteriorSample {walkers} walkers x {steps} steps, burn {self.burn}, "
                f"thin {self.thin}, {len(self.draws())} draws, acceptance "
                f"{self.acceptance:.2f}, converged={self.converged}>")

    def draws(self):
        """Draws after burn-in and thinning, shape (n, ndim), sampled coordinates."""
        return self.chain[self.burn::self.thin].reshape(-1, self.chain.shape[2])


def _start_ball(log_prob, start_points, scales, walkers, rng):
    """Walkers in balls around the start points: half at the first, the rest shared.

    A walker drawn outside the prior's support is drawn again.
    """
    starts = np.atleast_2d(np.asarray(start_points, float))
    scales = np.asarray(scales, float)
    owner = np.zeros(walkers, int)
    if len(starts) > 1:
        rest = np.arange(walkers - (walkers + 1) // 2)
        owner[(walkers + 1) // 2:] = 1 + rest % (len(starts) - 1)
    p0 = starts[owner] + _BALL * scales * rng.standard_normal((walkers, starts.shape[1]))
    for _ in range(_MAX_REDRAWS):
        bad = ~np.isfinite(log_prob(p0))
        if not bad.any():
            return p0
        p0[bad] = (starts[owner[bad]]
                   + _BALL * scales * rng.standard_normal((int(bad.sum()), starts.shape[1])))
    raise FitError("could not start the walkers: the start points lie outside the prior "
                     "(log-posterior not finite around them)")


def _burn_and_thin(tau, steps):
    """Burn-in of ``BURN_TAU_MULTIPLE`` tau (at most half the chain), thinning by tau/2."""
    if not np.all(np.isfinite(tau)):
        return steps // 2, 1
    burn = min(int(math.ceil(BURN_TAU_MULTIPLE * np.max(tau))), steps // 2)
    return burn, max(1, int(0.5 * np.min(tau)))


def sample_posterior(log_prob, start_points, scales, names, walkers=DEFAULT_WALKERS,
                     steps=DEFAULT_STEPS, seed=0, progress=False, stop_when_converged=False,
                     differential=False):
    """Sample a posterior with emcee's ensemble sampler.

    Parameters
    ----------
    log_prob : callable
        Vectorised log-posterior: (n, ndim) array -> (n,) array; -inf outside the prior.
    start_points : sequence of array_like
        Start vectors (the best solution first, then alternatives). Half of the walkers
        start around the first, the others are shared among the rest, so alternative
        minima are explored.
    scales : array_like, shape (ndim,)
        Typical 1-sigma size of each coordinate; the start balls have radius
        ``0.1 * scales``.
    names : sequence of str
        Coordinate names, for the diagnostics.
    walkers : int
        Number of walkers, at least 2 * ndim.
    steps : int
        Steps of every walker (at most, with ``stop_when_converged``).
    seed : int
        Seeds the start balls and the ensemble moves (independent streams).
    progress : bool
        Show a progress bar on standard error.
    stop_when_converged : bool
        Every ``_CHECK_EVERY`` steps estimate the autocorrelation time tau and stop once
        the chain is ``MIN_TAU_MULTIPLE`` tau long and tau changed by less than
        ``_TAU_SETTLED`` since the last check (the convergence rule of the flag below).
    differential : bool
        Differential-evolution moves (ter Braak 2006, Statistics and Computing 16, 239)
        instead of stretch moves (Goodman & Weare 2010). On the three-dimensional
        visual-orbit chain they give tau ~ 11 steps instead of ~ 34 (measured on the
        sample pair, 16 walkers; benchmarks/bench_likelihood.py).

    Returns
    -------
    PosteriorSample
    """
    emcee = _emcee()
    ndim = len(names)
    if walkers < 2 * ndim:
        raise InputError(f"--walkers: need at least {2 * ndim} walkers for {ndim} sampled "
                         f"parameters ({', '.join(names)}), got {walkers}")
    if steps < 2:
        raise InputError(f"--steps: need at least 2 steps, got {steps}")
    ball_seq, move_seq = np.random.SeedSequence(seed).spawn(2)
    p0 = _start_ball(log_prob, start_points, scales, walkers, np.random.default_rng(ball_seq))
    moves = emcee.moves.DEMove() if differential else None
    sampler = emcee.EnsembleSampler(walkers, ndim, log_prob, vectorize=True, moves=moves)
    sampler.random_state = np.random.RandomState(np.random.MT19937(move_seq)).get_state()
    if stop_when_converged:
        _run_until_converged(sampler, p0, steps, progress)
    else:
        sampler.run_mcmc(p0, steps, progress=progress)
    done = sampler.iteration
    tau = np.asarray(sampler.get_autocorr_time(tol=0), float)
    burn, thin = _burn_and_thin(tau, done)
    converged = bool(np.all(np.isfinite(tau)) and done >= MIN_TAU_MULTIPLE * np.max(tau))
    sample = PosteriorSample(tuple(names), sampler.get_chain(), sampler.get_log_prob(),
                             float(np.mean(sampler.acceptance_fraction)), tau, burn, thin,
                             converged, int(seed))
    sample.warnings.extend(_diagnostics(sample, done, len(np.atleast_2d(start_points))))
    return sample


def _emcee():
    """emcee, imported without scipy.stats when nothing has loaded it yet.

    emcee loads scipy.stats (0.7-0.9 s, a quarter of a sampled fit from the command line;
    benchmarks/bench_likelihood.py) only for its KDE move, which it makes optional and
    this module never uses; a None entry in sys.modules turns that import into the
    ImportError emcee expects.
    """
    import sys

    if "emcee" in sys.modules or "scipy.stats" in sys.modules:
        import emcee
        return emcee
    sys.modules["scipy.stats"] = None
    try:
        import emcee
    finally:
        del sys.modules["scipy.stats"]
    return emcee


def _run_until_converged(sampler, p0, steps, progress):
    """Run in chunks of ``_CHECK_EVERY`` steps until the stopping rule holds or ``steps``."""
    state, previous = p0, None
    while sampler.iteration < steps:
        state = sampler.run_mcmc(state, min(_CHECK_EVERY, steps - sampler.iteration),
                                 progress=progress)
        tau = np.asarray(sampler.get_autocorr_time(tol=0), float)
        if not np.all(np.isfinite(tau)):
            continue
        long_enough = sampler.iteration >= MIN_TAU_MULTIPLE * np.max(tau)
        if long_enough and previous is not None and np.all(
                np.abs(tau - previous) < _TAU_SETTLED * tau):
            return
        previous = tau


def _diagnostics(sample, steps, n_starts):
    out = []
    tau = sample.autocorr_time
    if not np.all(np.isfinite(tau)):
        out.append(f"chain too short: the autocorrelation time could not be estimated from "
                   f"{steps} steps; half the chain was discarded as burn-in. Run with "
                   f"--steps {10 * steps}.")
    elif not sample.converged:
        worst = int(np.argmax(tau))
        need = int(math.ceil(MIN_TAU_MULTIPLE * tau[worst] / 100.0) * 100)
        out.append(f"chain too short: {steps} steps are {steps / tau[worst]:.0f} "
                   f"autocorrelation times of {sample.names[worst]} ({tau[worst]:.0f} steps); "
                   f"at least {MIN_TAU_MULTIPLE} are needed for reliable intervals. Run with "
                   f"--steps {need}.")
    if sample.acceptance < _LOW_ACCEPTANCE:
        out.append(f"low acceptance fraction ({sample.acceptance:.2f}): the walkers hardly "
                   f"move; the posterior may be multimodal or very narrow.")
    if n_starts > 1:
        out.append(f"the walkers started at {n_starts} distinct orbits (best and "
                   f"alternatives); ensemble moves weigh well-separated modes unreliably, so "
                   f"the split of the draws between them is indicative only.")
    return out


# ------------------------------------------------------------ result documents
#: Default walkers of the visual-orbit posterior: the chain runs over at most three
#: coordinates (ln P, T, e), so 16 walkers are five times the dimension.
VISUAL_WALKERS = 16
_LINEAR_ELEMENTS = ("a", "i", "Omega", "omega")
_IID_DRAWS = 4000              # draws when P, T and e are all held (no chain)
_LOW_EFFECTIVE = 0.25          # effective / weighted draws below this is warned of
_DRAW_STREAM, _PARALLAX_STREAM = 2, 3   # SeedSequence spawn keys beside the sampler's 0, 1


@dataclass
class VisualPosterior:
    """Equally weighted draws of the visual-orbit posterior, with how they were made.

    Attributes
    ----------
    sample : PosteriorSample or None
        The chain (None when no element is left to sample in it).
    model : MarginalPosterior or DirectPosterior
    elements : ndarray, shape (n, 7)
        Draws of P, T, e, a, i, Omega, omega [yr, Julian yr, -, arcsec, deg x3].
    parallax : ndarray or None
        Parallax draws [mas], one per row of ``elements`` (with a parallax prior).
    weighted : int
        Weighted draws before resampling.
    effective : float
        Their effective number, (sum w)^2 / sum w^2.
    priors : dict
        The priors in words, keyed by element.
    gaussian : dict
        The user's Gaussian priors as given, name -> (mean, sigma).
    fixed : dict
        Held elements in the document's units.
    parallax_prior : (float, float) or None
    sigma_scale : float
        Factor applied to the measurement sigmas: sqrt(reduced chi2) when above 1.
    seed : int
    warnings : list of str
    """

    sample: PosteriorSample | None
    model: object
    elements: np.ndarray
    parallax: np.ndarray | None
    weighted: int
    effective: float
    priors: dict
    gaussian: dict
    fixed: dict
    parallax_prior: tuple | None
    sigma_scale: float
    seed: int
    warnings: list = field(default_factory=list)

    @property
    def method(self):
        return "marginal" if isinstance(self.model, MarginalPosterior) else "direct"


def _start_scales(doc, best, names):
    """Start-ball scales of the walker coordinates from the document's covariance."""
    err = {k: math.nan for k in ELEMENT_KEYS}
    cov = doc.get("covariance")
    if cov:
        diag = np.diag(np.asarray(cov["matrix"], float))
        err.update({k: math.sqrt(max(diag[j], 0.0)) for j, k in enumerate(cov["parameters"])
                    if k in err})
    scale = {"ln_P": err["P"] / best.period_yr, "T": err["T"], "e": err["e"],
             "ln_a": err["a"] / best.a_arcsec,
             "cos_i": math.sin(math.radians(best.i_deg)) * math.radians(err["i"]),
             "Omega": math.radians(err["Omega"]), "omega": math.radians(err["omega"])}
    fallback = {"T": 1e-3 * best.period_yr}
    # a loose orbit's covariance errors can exceed the prior's support; the start needs
    # only a ball of the right shape near the best orbit
    cap = {"ln_P": 0.5, "T": 0.1 * best.period_yr, "e": 0.2, "ln_a": 0.5, "cos_i": 0.3,
           "Omega": 0.5, "omega": 0.5}
    return np.array([min(scale[n], cap[n]) if np.isfinite(scale[n]) and scale[n] > 0
                     else fallback.get(n, 1e-3) for n in names])


def _given(doc):
    """The elements held with --fix in the fit, in the document's units, as given."""
    return {k: float(v) for k, v in ((doc.get("fit") or {}).get("fixed") or {}).items()}


def _held(doc, best):
    """Held elements in the document's units (with a circular orbit's omega = 0,
    ``elements.held_elements``), a held Omega or omega on the branch of the reported
    orbit (``elements.held_angles_as_reported``)."""
    from .elements import held_angles_as_reported, held_elements

    return held_angles_as_reported(held_elements(_given(doc)), best.node_deg, best.omega_deg)


def _internal_fixed(fixed_doc, doc, direct):
    """Held elements in the posterior's internal units (T Julian yr, angles rad)."""
    from .reductions import to_julian_year
    from .result import epoch_scale_of

    fixed = dict(fixed_doc)
    if "T" in fixed:
        fixed["T"] = float(to_julian_year(fixed["T"], epoch_scale_of(doc)))
    if not direct:
        return {k: v for k, v in fixed.items() if k in ("P", "T", "e")}
    return {k: (math.radians(v) if k in ("i", "Omega", "omega") else v)
            for k, v in fixed.items()}


def _element_priors(doc, best, gaussian):
    """ElementPriors of a document: period support, a support, the user's Gaussians."""
    from .elements import convention_held
    from .formatting import epoch_label
    from .reductions import to_julian_year
    from .result import epoch_scale_of

    fit = doc.get("fit") or {}
    fixed = _held(doc, best)
    bounds = fit.get("period_bounds")
    if "P" in fixed:
        period_range, source = (fixed["P"], fixed["P"]), "held"
    elif bounds:
        period_range, source = tuple(map(float, bounds)), "the period bounds, --period-range"
    else:
        period_range = tuple(float(p) for p in doc["options"]["period_range_yr"])
        source = "the fit's search range"
    internal = {k: v for k, v in gaussian.items() if k != "parallax"}
    if "T" in internal:
        mean, sigma = internal["T"]
        internal["T"] = (float(to_julian_year(mean, epoch_scale_of(doc))), sigma)
    return ElementPriors(period_range=period_range,
                         a_range=(best.a_arcsec / _A_PRIOR_FACTOR,
                                  best.a_arcsec * _A_PRIOR_FACTOR),
                         gaussian=internal, period_source=source,
                         epoch_label=epoch_label(epoch_scale_of(doc)),
                         gaussian_given=dict(gaussian), fixed=tuple(fixed),
                         convention=tuple(convention_held(_given(doc)))), fixed


def sample_document(doc, walkers=None, steps=DEFAULT_STEPS, seed=0, priors=None,
                    parallax=None, progress=False):
    """Sample the visual-orbit posterior of a fit's result document.

    Parameters
    ----------
    doc : dict
        Result document of a fit (residuals, elements, options, fit, covariance).
    walkers : int, optional
        Walkers of the ensemble (default ``VISUAL_WALKERS``).
    steps : int
        At most this many steps: the chain stops as soon as it is ``MIN_TAU_MULTIPLE``
        autocorrelation times long (and the estimate has settled).
    seed : int
        Seeds the walkers, the Thiele-Innes draws, the resampling and the parallax draws
        (independent streams).
    priors : dict, optional
        Gaussian priors name -> (mean, sigma) in the document's units (``priors``).
    parallax : (float, float), optional
        Parallax and its error [mas]: sampled with this Gaussian prior.
    progress : bool
        Show a progress bar on standard error.

    Returns
    -------
    VisualPosterior
    """
    from .result import elements_from_document

    gaussian = dict(priors or {})
    if parallax is not None and "parallax" in gaussian:
        raise InputError("the parallax is given twice (--parallax and --prior parallax=...): "
                         "give it once")
    if parallax is None and "parallax" in gaussian:
        parallax = gaussian.pop("parallax")
    check_gaussian_priors(gaussian, _given(doc))
    reduced = float(doc["statistics"]["reduced_chi2"])
    scale = math.sqrt(reduced) if reduced > 1.0 else 1.0
    positions = Positions.from_document(doc, scale)
    best = elements_from_document(doc)
    element_priors, fixed_doc = _element_priors(doc, best, gaussian)
    direct = any(k in fixed_doc for k in _LINEAR_ELEMENTS)
    fixed = _internal_fixed(fixed_doc, doc, direct)
    if direct:
        model = DirectPosterior(positions, element_priors, fixed, best.periastron_yr,
                                (math.radians(best.node_deg), math.radians(best.omega_deg)))
    else:
        model = MarginalPosterior(positions, element_priors, fixed, best.periastron_yr)
    names = model.names
    sample = None
    if names:
        starts = [model.coordinates(best)]
        for alt in doc.get("alternatives") or []:
            starts.append(model.coordinates(elements_from_document(
                {"elements": alt["elements"], "_path": doc.get("_path", "result document")})))
        starts = [_into_support(q, names, element_priors) for q in starts]
        sample = sample_posterior(model, starts, _start_scales(doc, best, names), names,
                                  walkers=walkers or VISUAL_WALKERS, steps=steps, seed=seed,
                                  progress=progress, stop_when_converged=True,
                                  differential=True)
        q = sample.draws()
    else:
        q = np.zeros((_IID_DRAWS, 0))
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(_DRAW_STREAM,)))
    draws, log_w = model.draw(q, rng)
    for key, value in fixed_doc.items():     # exactly the held value, no unit round trip
        draws[:, ELEMENT_KEYS.index(key)] = fixed["T"] if key == "T" and "T" in fixed \
            else value
    elements, effective = _resample(draws, log_w, rng)
    plx = None
    if parallax is not None:
        prng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(_PARALLAX_STREAM,)))
        plx = prng.normal(float(parallax[0]), float(parallax[1]), len(elements))
    from .formatting import fixed as fixed_decimals
    t_label = "; reported in the period centred on the fit's T"
    words = element_priors.describe(fixed_doc, t_label, parallax)
    result = VisualPosterior(sample, model, elements, plx, len(draws), effective, words,
                             gaussian, fixed_doc, None if parallax is None else
                             (float(parallax[0]), float(parallax[1])), scale, int(seed))
    result.warnings.extend(sample.warnings if sample is not None else [])
    if not names:
        result.warnings.append("P, T and e are all held: the draws are independent draws of "
                               "the Thiele-Innes constants, no chain was run.")
    if effective < _LOW_EFFECTIVE * len(draws):
        result.warnings.append(
            f"uneven importance weights: the {len(draws)} draws count as "
            f"{fixed_decimals(effective, 0)} "
            f"independent ones; the intervals are less precise than their number suggests "
            f"(the posterior is far from Gaussian in the Thiele-Innes constants, e.g. "
            f"nearly face-on, or a narrow prior on a, i, Omega or omega). Run with more "
            f"--steps or --walkers.")
    return result


def _into_support(q, names, priors):
    """A start point moved into the prior's support: a fit may end beyond the searched
    periods or at e up to 0.995 (the refinement's bound)."""
    q = np.array(q, float)
    lo, hi = np.log(priors.period_range)
    margin = 1e-3 * (hi - lo)
    for name, (low, high) in (("ln_P", (lo + margin, hi - margin)), ("e", (0.0, E_MAX - 0.01))):
        if name in names:
            k = names.index(name)
            q[k] = min(max(q[k], low), high)
    return q


def _resample(draws, log_w, rng):
    """Systematic resampling of weighted draws into as many equally weighted ones.

    Returns the draws and the effective number (sum w)^2 / sum w^2 of the weighted ones.
    """
    finite = np.isfinite(log_w)
    if not finite.any():
        raise FitError("no posterior draw has a finite weight: the priors exclude every "
                       "orbit the data allow")
    w = np.where(finite, np.exp(log_w - np.max(log_w[finite])), 0.0)
    effective = float(w.sum() ** 2 / np.sum(w * w))
    if np.all(w == w[0]):
        return draws, effective
    edges = np.cumsum(w / w.sum())
    edges[-1] = 1.0
    picks = np.searchsorted(edges, (rng.uniform() + np.arange(len(w))) / len(w), side="right")
    return draws[np.minimum(picks, len(w) - 1)], effective


def _sampling_meta(result):
    sample = result.sample
    meta = {"seed": int(result.seed), "priors": dict(result.priors), "method": result.method,
            "sigma_scale": float(result.sigma_scale), "weighted_draws": int(result.weighted),
            "effective_draws": float(result.effective),
            "gaussian_priors": {k: {"mean": float(m), "sigma": float(s)}
                                for k, (m, s) in result.gaussian.items()},
            "fixed": {k: float(v) for k, v in result.fixed.items()}}
    if result.parallax_prior is not None:
        meta["parallax_prior"] = {"value": result.parallax_prior[0],
                                  "error": result.parallax_prior[1], "unit": "mas"}
    if sample is None:
        return {**meta, "walkers": 0, "steps": 0, "burn": 0, "thin": 1,
                "acceptance_fraction": None, "autocorr_time": {}, "converged": True}
    steps, walkers, _ = sample.chain.shape
    return {**meta, "walkers": int(walkers), "steps": int(steps), "burn": int(sample.burn),
            "thin": int(sample.thin), "acceptance_fraction": float(sample.acceptance),
            "autocorr_time": {n: float(t) for n, t in zip(sample.names, sample.autocorr_time)},
            "converged": bool(sample.converged)}


def write_draws(path, result, inputs=()):
    """Save the draws as an ECSV table; returns the number of draws.

    Columns P [yr], T [Julian yr], e, a [arcsec], i, Omega, omega [deg] (as
    ``result.read_draws`` reads them), and parallax [mas] when it was sampled; the
    metadata hold the seed, priors, walkers, steps, burn-in, thinning, acceptance,
    autocorrelation times, weights and the convergence flag. Written as a whole
    (``files.write_atomic``); onto one of ``inputs`` is refused.
    """
    from .ecsv import ecsv_text
    from .files import write_atomic
    from .result import remember_draws
    units = {"P": "yr", "T": "yr", "e": None, "a": "arcsec", "i": "deg", "Omega": "deg",
             "omega": "deg"}
    columns = [result.elements[:, k] for k in range(7)]
    names, col_units = list(ELEMENT_KEYS), [units[k] for k in ELEMENT_KEYS]
    if result.parallax is not None:
        columns.append(result.parallax)
        names.append("parallax")
        col_units.append("mas")
    meta = {"description": "posterior draws of the Campbell elements; T is a decimal Julian "
                           "year", **_sampling_meta(result)}
    write_atomic(path, ecsv_text(columns, names, col_units, meta), inputs=inputs)
    remember_draws(path, result.elements, result.parallax, meta)
    return len(result.elements)


def _centred(draws, best, held):
    """Draws with the angles on the branch nearest the best values (for percentiles).

    Where a node's half turn moves T (``elements.phase_in_periastron``: a circular orbit,
    omega held), T moves with it and is taken back to the period centred on the best T.
    """
    from .elements import nearest_passage, phase_in_periastron, turn_node, wrap_degrees

    out = draws.copy()
    shift = 180.0 * np.round((out[:, 5] - best[5]) / 180.0)
    phase = phase_in_periastron(held)
    out[:, 5], omega, t_peri = turn_node(out[:, 5], out[:, 6], out[:, 1], out[:, 0], shift,
                                         phase)
    out[:, 6] = best[6] + wrap_degrees(omega - best[6])
    if phase:
        t_peri = nearest_passage(t_peri, out[:, 0], best[1])
    out[:, 1] = t_peri
    return out


def posterior_block(doc, result, draws_file):
    """The document's "posterior" block.

    Summary percentiles (median, 15.9th and 84.1th, 2.5th and 97.5th) are in the units of the elements block (T in
    the document's epoch scale); angles are summarised on the branch nearest the best
    value, so an interval may cross 0 or 180 deg. A held element is given with its value
    and "fixed": true; the sampled parallax under "parallax".
    """
    from .reductions import from_julian_year
    from .result import elements_from_document, epoch_scale_of

    best = np.array(elements_from_document(doc).as_tuple())
    draws = _centred(result.elements, best, result.fixed)
    percentiles = np.percentile(draws, _PERCENTILES, axis=0)
    scale = epoch_scale_of(doc)
    summary = {}
    for j, key in enumerate(ELEMENT_KEYS):
        values = percentiles[:, j]
        if key == "T":
            values = from_julian_year(values, scale)
        low95, low, median, high, high95 = (float(v) for v in values)
        entry = {"median": median, "low": low, "high": high, "low95": low95,
                 "high95": high95, "unit": doc["elements"][key].get("unit", "")}
        if key in result.fixed:
            value = float(result.fixed[key])
            entry.update(median=value, low=value, high=value, low95=value, high95=value,
                         fixed=True)
        if key == "T":
            entry["scale"] = scale
        summary[key] = entry
    if result.parallax is not None:
        low95, low, median, high, high95 = (float(v) for v in
                                            np.percentile(result.parallax, _PERCENTILES))
        summary["parallax"] = {"median": median, "low": low, "high": high, "low95": low95,
                               "high95": high95, "unit": "mas"}
    return {"draws_file": draws_file, "n_draws": int(len(draws)), **_sampling_meta(result),
            "summary": summary, "warnings": list(result.warnings)}


def attach_posterior(doc, block):
    """Put the block under doc["posterior"]; add "low"/"high" to each sampled element's
    entry and the sampling warnings and notes to the document's lists (no key changed)."""
    doc["posterior"] = block
    for key, entry in block["summary"].items():
        if key in doc["elements"] and not entry.get("fixed"):
            doc["elements"][key].update(low=entry["low"], high=entry["high"])
    doc["warnings"].extend(f"Posterior: {w}" for w in block["warnings"])
    if block["sigma_scale"] > 1.0:
        doc.setdefault("notes", []).append(
            f"The posterior used the measurement sigmas scaled by sqrt(reduced chi2) = "
            f"{block['sigma_scale']:.2f}, as the fit's errors.")


def format_posterior(block):
    """Plain-text summary of a "posterior" block."""
    from . import formatting as fmt

    tau = ", ".join(f"{k} {fmt.fixed(v, 0)}" for k, v in block["autocorr_time"].items())
    if block["walkers"]:
        head = (f"Posterior ({block['walkers']} walkers x {block['steps']} steps, burn-in "
                f"{block['burn']}, thinning {block['thin']}: {block['n_draws']} draws, seed "
                f"{block['seed']})")
        chain = (f"  acceptance {fmt.fixed(block['acceptance_fraction'], 2)}; "
                 f"autocorrelation times [steps]: {tau}; "
                 + ("converged" if block["converged"] else "NOT converged"))
    else:
        head = f"Posterior (no chain: {block['n_draws']} independent draws, seed {block['seed']})"
        chain = "  P, T and e held"
    how = ("Thiele-Innes constants integrated out, importance-weighted to the priors below"
           if block.get("method") == "marginal" else "all free elements sampled directly")
    lines = [head, chain,
             f"  {how}; effective draws {fmt.fixed(block['effective_draws'], 0)} of "
             f"{block['weighted_draws']}",
             f"  {'element':<8}{'median':>14}  68% interval"]
    for key, s in block["summary"].items():
        unit = fmt.epoch_label(s["scale"]) if "scale" in s else s["unit"]
        if s.get("fixed"):
            held = f"{unit} (held fixed)" if unit else "(held fixed)"
            lines.append(f"  {key:<8}{fmt.number(s['median'], 8):>14}  {held}")
            continue
        median, low, high = fmt.interval_parts(s["median"], s["low"], s["high"])
        lines.append(f"  {key:<8}{median:>14}  [{low}, {high}] {unit}".rstrip())
    lines.append("  priors:")
    lines += [f"    {k:<8} {v}" for k, v in block["priors"].items()]
    if block["sigma_scale"] > 1.0:
        lines.append(f"  sigmas scaled by sqrt(reduced chi2) = {fmt.fixed(block['sigma_scale'], 2)}")
    lines.append(f"  draws: {block['draws_file'] or 'not saved (give --out DIR or --json PATH)'}")
    return "\n".join(lines)
