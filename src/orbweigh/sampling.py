"""Posterior sampling of orbital elements with an affine-invariant ensemble (emcee).

Two layers:

* ``sample_posterior`` is generic: any vectorised log-posterior, walkers started in small
  balls around one or more start points, autocorrelation-based convergence check,
  burn-in and thinning. The joint astrometric + radial-velocity posterior reuses it.
* ``AstrometricPosterior`` is the posterior of the seven Campbell elements given the
  fit's measurements, with the priors below; ``sample_document`` samples it for a result
  document, ``write_draws`` saves the draws (ECSV) and ``posterior_block`` summarises them
  for the document's "posterior" key.

Priors of the astrometric posterior (walker coordinates in brackets):

* P log-uniform over the fit's period search range [ln P];
* T uniform over one period (density 1/P) [T, Julian yr]; drawn values are given in the
  period centred on the fit's T;
* e uniform on [0, 0.99);
* a log-uniform from 1/100 to 100 times the fit's a [ln a]: scale-free, so the prior
  favours no mass scale (M goes as a^3); the bounds only make it proper;
* cos i uniform on [-1, 1] (isotropic orientation of the orbit) [cos i];
* Omega and omega uniform [rad]; drawn values are normalised to Omega in [0, 180) deg
  and omega in [0, 360) deg (the node ambiguity without radial velocities).

The likelihood is periodic in T (period P), Omega and omega (2 pi). The walkers move in
a window of two periods centred on the fit's values (T within +-P, the angles within
+-2 pi), where the prior is uniform: a mode near a seam of the reported ranges lies whole
inside the window, so walkers cross the seam instead of being stopped by it, and after
mapping into one period the prior is exactly uniform. The window's walls keep the
ensemble from spreading without bound along a direction the data leave free (Omega -
omega of a face-on orbit, every angle under a flat likelihood), which would stall it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .elements import ELEMENT_KEYS, normalise_node, thiele_innes_from_campbell
from .errors import FitError, InputError

__all__ = ["PosteriorSample", "sample_posterior", "AstrometricPosterior", "sample_document",
           "write_draws", "posterior_block", "attach_posterior", "format_posterior",
           "cos_sin_eccentric_anomaly", "E_MAX", "MIN_TAU_MULTIPLE", "BURN_TAU_MULTIPLE",
           "DEFAULT_WALKERS", "DEFAULT_STEPS"]

#: Default ensemble: 32 walkers x 5000 steps is about 70 autocorrelation times on a
#: well-covered orbit (tau ~ 70 steps for the sample pair) and takes seconds.
DEFAULT_WALKERS = 32
DEFAULT_STEPS = 5000
#: Upper bound (excluded) of the eccentricity prior.
E_MAX = 0.99
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
_BLOCK_ELEMENTS = 5000         # walkers x points per likelihood block


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
                     steps=DEFAULT_STEPS, seed=0, progress=False):
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
        Steps of every walker.
    seed : int
        Seeds the start balls and the ensemble moves (independent streams).
    progress : bool
        Show a progress bar on standard error.

    Returns
    -------
    PosteriorSample
    """
    import emcee

    ndim = len(names)
    if walkers < 2 * ndim:
        raise InputError(f"--walkers: need at least {2 * ndim} walkers for {ndim} parameters, "
                         f"got {walkers}")
    if steps < 2:
        raise InputError(f"--steps: need at least 2 steps, got {steps}")
    ball_seq, move_seq = np.random.SeedSequence(seed).spawn(2)
    p0 = _start_ball(log_prob, start_points, scales, walkers, np.random.default_rng(ball_seq))
    sampler = emcee.EnsembleSampler(walkers, ndim, log_prob, vectorize=True)
    sampler.random_state = np.random.RandomState(np.random.MT19937(move_seq)).get_state()
    sampler.run_mcmc(p0, steps, progress=progress)
    tau = np.asarray(sampler.get_autocorr_time(tol=0), float)
    burn, thin = _burn_and_thin(tau, steps)
    converged = bool(np.all(np.isfinite(tau)) and steps >= MIN_TAU_MULTIPLE * np.max(tau))
    sample = PosteriorSample(tuple(names), sampler.get_chain(), sampler.get_log_prob(),
                             float(np.mean(sampler.acceptance_fraction)), tau, burn, thin,
                             converged, int(seed))
    sample.warnings.extend(_diagnostics(sample, steps, len(np.atleast_2d(start_points))))
    return sample


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


# ----------------------------------------------------------- astrometric posterior
@dataclass(frozen=True)
class AstrometricPosterior:
    """Log-posterior of the Campbell elements given relative positions (see module notes).

    Sampled coordinates, in order (``NAMES``): ln P [P in yr], T [Julian yr], e, ln a
    [a in arcsec], cos i, Omega [rad], omega [rad].

    Attributes
    ----------
    t : ndarray
        Epochs of the fitted measurements [Julian yr].
    cos_theta, sin_theta : ndarray
        cos and sin of the measured position angles (flips corrected).
    rho : ndarray
        Measured separations [arcsec].
    inv_sigma_theta : ndarray
        1 / sigma_theta [1/rad], sigmas scaled by ``sigma_scale``.
    inv_sigma_rho : ndarray
        1 / sigma_rho [1/arcsec], sigmas scaled by ``sigma_scale``.
    period_range : (float, float)
        Bounds of the log-uniform P prior [yr].
    a_range : (float, float)
        Bounds of the log-uniform a prior [arcsec].
    t_ref : float
        Centre of the window of T and of the period in which drawn T are reported
        [Julian yr].
    angle_ref : (float, float)
        Centres of the windows of Omega and omega [rad].
    sigma_scale : float
        Factor applied to the measurement sigmas: sqrt(reduced chi2) of the fit when that
        exceeds 1, as for the fit's own errors; else 1.

    Notes
    -----
    ln L = -chi2 / 2 with the fit's normalised residuals: the tangential one is the
    position-angle difference (wrapped into (-180, 180] deg) over sigma_theta, the radial
    one (rho_obs - rho_pred) / sigma_rho. The prior adds -ln P (T uniform over one
    period of the walker's own P) and is 0 elsewhere inside its bounds.
    """

    NAMES = ("ln_P", "T", "e", "ln_a", "cos_i", "Omega", "omega")

    t: np.ndarray
    cos_theta: np.ndarray
    sin_theta: np.ndarray
    rho: np.ndarray
    inv_sigma_theta: np.ndarray
    inv_sigma_rho: np.ndarray
    period_range: tuple
    a_range: tuple
    t_ref: float
    angle_ref: tuple = (0.0, 0.0)
    sigma_scale: float = 1.0

    @classmethod
    def from_document(cls, doc):
        """The posterior for a result document: its fitted rows, period range and best T.

        Rows with status 'used' or 'flipped' (theta + 180 deg) are the fit's final set;
        outliers, excluded and rejected rows stay out.
        """
        from .result import elements_from_document

        rows = [r for r in doc["residuals"] if r["status"] in ("used", "flipped")]
        if len(rows) < 4:
            raise InputError(f"{len(rows)} fitted measurements; sampling needs at least 4")
        col = {k: np.array([r[k] for r in rows], float)
               for k in ("epoch_yr", "theta_deg", "rho_arcsec", "sigma_theta_deg",
                         "sigma_rho_arcsec")}
        theta = np.radians(col["theta_deg"] + np.array([180.0 * (r["status"] == "flipped")
                                                        for r in rows]))
        reduced = float(doc["statistics"]["reduced_chi2"])
        scale = math.sqrt(reduced) if reduced > 1.0 else 1.0
        best = elements_from_document(doc)
        return cls(t=col["epoch_yr"], cos_theta=np.cos(theta), sin_theta=np.sin(theta),
                   rho=col["rho_arcsec"],
                   inv_sigma_theta=1.0 / (scale * np.radians(col["sigma_theta_deg"])),
                   inv_sigma_rho=1.0 / (scale * col["sigma_rho_arcsec"]),
                   period_range=tuple(float(p) for p in doc["options"]["period_range_yr"]),
                   a_range=(best.a_arcsec / _A_PRIOR_FACTOR, best.a_arcsec * _A_PRIOR_FACTOR),
                   t_ref=best.periastron_yr,
                   angle_ref=(math.radians(best.node_deg), math.radians(best.omega_deg)),
                   sigma_scale=scale)

    def priors(self):
        """The priors in words, keyed by element."""
        lo, hi = self.period_range
        a_lo, a_hi = self.a_range
        return {"P": f"log-uniform on [{lo:.6g}, {hi:.6g}] yr (the fit's search range)",
                "T": "uniform over one period (density 1/P); reported in the period centred "
                     "on the fit's T",
                "e": f"uniform on [0, {E_MAX})",
                "a": f"log-uniform on [{a_lo:.6g}, {a_hi:.6g}] arcsec (1/100 to 100 times the "
                     "fit's a)",
                "i": "uniform in cos i on [-1, 1] (isotropic orientation)",
                "Omega": "uniform; reported in [0, 180) deg (node ambiguity without radial "
                         "velocities)",
                "omega": "uniform; reported in [0, 360) deg"}

    def log_prior(self, q):
        """Log prior density (up to a constant) of walker positions q, shape (n, 7)."""
        q = np.atleast_2d(q)
        ln_p, e, ln_a, cos_i = q[:, 0], q[:, 2], q[:, 3], q[:, 4]
        inside = ((ln_p >= math.log(self.period_range[0]))
                  & (ln_p <= math.log(self.period_range[1]))
                  & (e >= 0.0) & (e < E_MAX) & (np.abs(cos_i) <= 1.0)
                  & (ln_a >= math.log(self.a_range[0])) & (ln_a <= math.log(self.a_range[1]))
                  & (np.abs(q[:, 1] - self.t_ref) < np.exp(ln_p))          # windows of two
                  & (np.abs(q[:, 5] - self.angle_ref[0]) < 2.0 * np.pi)     # periods
                  & (np.abs(q[:, 6] - self.angle_ref[1]) < 2.0 * np.pi))
        return np.where(inside, -ln_p, -np.inf)

    def log_likelihood(self, q):
        """-chi2/2 of walker positions q, shape (n, 7) (must lie inside the prior)."""
        q = np.atleast_2d(q)
        period, t_peri, e = np.exp(q[:, 0:1]), q[:, 1:2], q[:, 2:3]
        A, B, F, G = thiele_innes_from_campbell(np.exp(q[:, 3:4]), np.arccos(q[:, 4:5]),
                                                q[:, 5:6], q[:, 6:7])
        cos_E, sin_E = cos_sin_eccentric_anomaly((self.t - t_peri) * (2.0 * np.pi / period), e)
        X = cos_E - e
        Y = np.sqrt(1.0 - e * e) * sin_E
        x = A * X + F * Y
        y = B * X + G * Y
        # theta_obs - theta_pred from the cross and dot products: wrapped by construction.
        d_theta = np.arctan2(self.sin_theta * x - self.cos_theta * y,
                             self.cos_theta * x + self.sin_theta * y)
        r_theta = d_theta * self.inv_sigma_theta
        r_rho = (self.rho - np.sqrt(x * x + y * y)) * self.inv_sigma_rho
        return -0.5 * (np.einsum("ij,ij->i", r_theta, r_theta)
                       + np.einsum("ij,ij->i", r_rho, r_rho))

    def __call__(self, q):
        """Log-posterior (up to a constant), vectorised: (n, 7) -> (n,).

        Walkers are taken in blocks of about ``_BLOCK_ELEMENTS`` walker-points, which keeps
        the temporary arrays in the processor's cache (measured: ~1.3 times faster than
        one block of 256 walkers x 100 points, see benchmarks/bench_likelihood.py).
        """
        q = np.atleast_2d(q)
        out = self.log_prior(q)
        ok = np.flatnonzero(np.isfinite(out))
        block = max(1, _BLOCK_ELEMENTS // self.t.size)
        for start in range(0, ok.size, block):
            rows = ok[start:start + block]
            out[rows] += self.log_likelihood(q[rows])
        return out

    def coordinates(self, elements):
        """Walker coordinates of a ``CampbellElements``, T and the angles moved by whole
        periods to the middle of their windows."""
        period = elements.period_yr
        t_peri = self.t_ref + math.remainder(elements.periastron_yr - self.t_ref, period)
        node, omega = (ref + math.remainder(math.radians(angle) - ref, 2.0 * math.pi)
                       for ref, angle in zip(self.angle_ref,
                                             (elements.node_deg, elements.omega_deg)))
        return np.array([math.log(period), t_peri, elements.e, math.log(elements.a_arcsec),
                         math.cos(math.radians(elements.i_deg)), node, omega])

    def elements(self, q):
        """Element draws (P, T, e, a, i, Omega, omega) [yr, Julian yr, -, arcsec, deg x3].

        T is moved by whole periods into [t_ref - P/2, t_ref + P/2); Omega into
        [0, 180) deg with omega shifted alike, omega into [0, 360) deg.
        """
        q = np.atleast_2d(q)
        period = np.exp(q[:, 0])
        t_peri = self.t_ref + np.mod(q[:, 1] - self.t_ref + 0.5 * period, period) - 0.5 * period
        node, omega = normalise_node(q[:, 5], q[:, 6])
        return np.column_stack([period, t_peri, q[:, 2], np.exp(q[:, 3]),
                                np.degrees(np.arccos(np.clip(q[:, 4], -1.0, 1.0))),
                                np.degrees(node), np.degrees(omega)])


# ------------------------------------------------------------ result documents
def _start_scales(doc, best):
    """Start-ball scales in walker coordinates from the document's covariance."""
    fallback = np.array([1e-3, 1e-3 * best.period_yr, 1e-3, 1e-3, 1e-3, 1e-3, 1e-3])
    cov = doc.get("covariance")
    if not cov:
        return fallback
    order = [cov["parameters"].index(k) for k in ELEMENT_KEYS]
    err = np.sqrt(np.clip(np.diag(np.asarray(cov["matrix"], float))[order], 0.0, None))
    scales = np.array([err[0] / best.period_yr, err[1], err[2], err[3] / best.a_arcsec,
                       math.sin(math.radians(best.i_deg)) * math.radians(err[4]),
                       math.radians(err[5]), math.radians(err[6])])
    return np.where(np.isfinite(scales) & (scales > 0), scales, fallback)


def sample_document(doc, walkers=DEFAULT_WALKERS, steps=DEFAULT_STEPS, seed=0, progress=False):
    """Sample the astrometric posterior of a fit's result document.

    Walkers start around the best elements and the document's alternatives.

    Returns
    -------
    sample : PosteriorSample
    posterior : AstrometricPosterior
    """
    from .result import elements_from_document

    posterior = AstrometricPosterior.from_document(doc)
    best = elements_from_document(doc)
    starts = [posterior.coordinates(best)]
    for alt in doc.get("alternatives") or []:
        starts.append(posterior.coordinates(elements_from_document(
            {"elements": alt["elements"], "_path": doc.get("_path", "result document")})))
    sample = sample_posterior(posterior, starts, _start_scales(doc, best),
                              AstrometricPosterior.NAMES, walkers=walkers, steps=steps,
                              seed=seed, progress=progress)
    return sample, posterior


def _sampling_meta(sample, posterior):
    steps, walkers, _ = sample.chain.shape
    return {"seed": int(sample.seed), "priors": posterior.priors(), "walkers": int(walkers),
            "steps": int(steps), "burn": int(sample.burn), "thin": int(sample.thin),
            "acceptance_fraction": float(sample.acceptance),
            "autocorr_time": {n: float(t) for n, t in zip(sample.names, sample.autocorr_time)},
            "converged": bool(sample.converged), "sigma_scale": float(posterior.sigma_scale)}


def write_draws(path, sample, posterior, inputs=()):
    """Save the element draws as an ECSV table; returns the number of draws.

    Columns P [yr], T [Julian yr], e, a [arcsec], i, Omega, omega [deg] (as
    ``result.read_draws`` reads them); the metadata hold the seed, priors, walkers, steps,
    burn-in, thinning, acceptance, autocorrelation times and the convergence flag.
    Written as a whole (``files.write_table``); onto one of ``inputs`` is refused.
    """
    from astropy.table import Table

    from .files import write_table
    draws = posterior.elements(sample.draws())
    units = {"P": "yr", "T": "yr", "e": "", "a": "arcsec", "i": "deg", "Omega": "deg",
             "omega": "deg"}
    table = Table([draws[:, k] for k in range(7)], names=ELEMENT_KEYS,
                  units=[units[k] or None for k in ELEMENT_KEYS],
                  meta={"description": "posterior draws of the Campbell elements; T is a "
                                       "decimal Julian year", **_sampling_meta(sample, posterior)})
    write_table(path, table, inputs=inputs)
    return len(draws)


def _centred(draws, best):
    """Draws with the angles on the branch nearest the best values (for percentiles)."""
    from .elements import centre_angles

    out = draws.copy()
    out[:, 5], out[:, 6] = centre_angles(out[:, 5], out[:, 6], best[5], best[6], 180.0)
    return out


def posterior_block(doc, sample, posterior, draws_file):
    """The document's "posterior" block.

    Summary percentiles (median, 15.9th and 84.1th, 2.5th and 97.5th) are in the units of the elements block (T in
    the document's epoch scale); angles are summarised on the branch nearest the best
    value, so an interval may cross 0 or 180 deg.
    """
    from .reductions import from_julian_year
    from .result import elements_from_document, epoch_scale_of

    best = np.array(elements_from_document(doc).as_tuple())
    draws = _centred(posterior.elements(sample.draws()), best)
    percentiles = np.percentile(draws, _PERCENTILES, axis=0)
    scale = epoch_scale_of(doc)
    summary = {}
    for j, key in enumerate(ELEMENT_KEYS):
        values = percentiles[:, j]
        if key == "T":
            values = from_julian_year(values, scale)
        low95, low, median, high, high95 = (float(v) for v in values)
        summary[key] = {"median": median, "low": low, "high": high, "low95": low95,
                        "high95": high95, "unit": doc["elements"][key].get("unit", "")}
        if key == "T":
            summary[key]["scale"] = scale
    return {"draws_file": draws_file, "n_draws": int(len(draws)),
            **_sampling_meta(sample, posterior), "summary": summary,
            "warnings": list(sample.warnings)}


def attach_posterior(doc, block):
    """Put the block under doc["posterior"]; add "low"/"high" to each element entry and
    the sampling warnings and notes to the document's lists (no key changed)."""
    doc["posterior"] = block
    for key, entry in block["summary"].items():
        doc["elements"][key].update(low=entry["low"], high=entry["high"])
    doc["warnings"].extend(f"Posterior: {w}" for w in block["warnings"])
    if block["sigma_scale"] > 1.0:
        doc.setdefault("notes", []).append(
            f"The posterior used the measurement sigmas scaled by sqrt(reduced chi2) = "
            f"{block['sigma_scale']:.2f}, as the fit's errors.")


def format_posterior(block):
    """Plain-text summary of a "posterior" block."""
    from . import formatting as fmt

    tau = ", ".join(f"{k} {v:.0f}" for k, v in block["autocorr_time"].items())
    lines = [f"Posterior ({block['walkers']} walkers x {block['steps']} steps, burn-in "
             f"{block['burn']}, thinning {block['thin']}: {block['n_draws']} draws, seed "
             f"{block['seed']})",
             f"  acceptance {block['acceptance_fraction']:.2f}; autocorrelation times "
             f"[steps]: {tau}; " + ("converged" if block["converged"] else "NOT converged"),
             f"  {'element':<8}{'median':>14}  68% interval"]
    for key, s in block["summary"].items():
        median, low, high = fmt.interval_parts(s["median"], s["low"], s["high"])
        unit = fmt.epoch_label(s["scale"]) if "scale" in s else s["unit"]
        lines.append(f"  {key:<8}{median:>14}  [{low}, {high}] {unit}".rstrip())
    lines.append("  priors:")
    lines += [f"    {k:<6} {v}" for k, v in block["priors"].items()]
    if block["sigma_scale"] > 1.0:
        lines.append(f"  sigmas scaled by sqrt(reduced chi2) = {block['sigma_scale']:.2f}")
    lines.append(f"  draws: {block['draws_file'] or 'not saved (give --out DIR or --json PATH)'}")
    return "\n".join(lines)
