"""Orbit-revision alarms: do new measurements still agree with a catalogued orbit?

O-C against the old orbit
-------------------------
Every measurement is compared with the old orbit's prediction at its epoch. The
tangential residual is the position-angle difference wrapped into (-180, 180] deg, the
radial one the separation difference; each is divided by the measurement's effective
sigma (sigma / sqrt(weight)):  z_theta = d_theta / sigma_theta,  z_rho = d_rho / sigma_rho.
A point whose theta + 180 deg lowers z_theta^2 + z_rho^2 by more than
``fitting.FLIP_MIN_GAIN`` is taken for a quadrant error (the fit's own rule) and scored
flipped. Rows the user's flag excludes get their O-C listed but do not vote.

The verdict
-----------
The N measurements newer than the old orbit's last data (all of them when that epoch is
not known) decide. The old orbit was not fitted to them, so if it is right and the
sigmas are honest the 2N normalised residuals are independent unit normals:

* ``chi2 = sum(z_theta^2 + z_rho^2)`` follows chi2 with 2N degrees of freedom; its tail
  probability is ``p_value``.
* For each component a straight line z = m + b (t - t_mean) is fitted; the part of chi2
  it explains, ``chi2_systematic = sum over components of N m^2 + b^2 S_tt``
  (S_tt = sum (t - t_mean)^2), follows chi2 with 4 dof (2 when the new data share one
  epoch: offset only); its tail probability is ``p_systematic``. It catches a coherent
  offset or drift that is still small point by point.
* ``p_value_inflated`` is the tail probability of chi2 / k^2 for 2N dof with
  k = ``ERROR_INFLATION`` = 3: the test repeated with every sigma tripled.

Rule, with ``ALPHA`` = 0.01 (a 1 % false-alarm rate per test):

=============== ===========================================================================
contradicted    ``p_value_inflated < ALPHA``: the new data reject the old orbit even with
                their errors tripled (stated errors of double-star measurements are
                commonly too small by up to a factor 2-3, common practice, no source; a
                threefold margin puts the alarm beyond that)
drifting        not contradicted, but ``p_value < ALPHA`` or ``p_systematic < ALPHA``: the
                new data depart from the old orbit beyond their errors, or coherently,
                but within three times their errors
consistent      neither test rejects the old orbit at the 1 % level
no new data     no measurement newer than the old orbit's last data
=============== ===========================================================================

For a correct orbit and honest errors the false-alarm rate (drifting or worse) is at most
2 % (two tests at 1 %). All the numbers are kept with the verdict.

Old against new
---------------
``compare_orbits`` gives each element's change in units of the combined sigma
(old and new errors in quadrature, as far as known; Omega/omega after the common 180 deg
shift that brings the nodes together, T moved by whole new periods to the passage nearest
the old T), and the largest separation between the two ephemerides over the decade that
follows the last measurement, in arcsec and in units of a typical measurement's
positional sigma.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from .elements import ELEMENT_KEYS, CampbellElements
from .ephemeris import ephemeris
from .fitting import FLIP_MIN_GAIN
from .model import wrap_degrees

__all__ = ["ALPHA", "chi2_tail", "ERROR_INFLATION", "VERDICTS", "RevisionCheck",
           "old_orbit_residuals", "check_revision", "typical_sigma_arcsec", "align_orbits",
           "compare_orbits"]

#: Size of each test (false-alarm probability).
ALPHA = 0.01
#: Factor on the sigmas beyond which a departure is a contradiction, not a drift.
ERROR_INFLATION = 3.0
#: Verdicts, most urgent first.
VERDICTS = ("contradicted", "drifting", "consistent", "no new data")


@dataclass
class RevisionCheck:
    """The verdict on an old orbit and the numbers behind it.

    Attributes
    ----------
    verdict : str
        One of ``VERDICTS``.
    reason : str
        One sentence with the deciding numbers.
    last_epoch_yr : float or None
        Epoch of the old orbit's last data (Julian year); None: all data decide.
    n_all, n_new, n_flipped : int
        Voting measurements, those newer than ``last_epoch_yr``, and those scored flipped.
    chi2_all, dof_all : float, int
        chi2 of all voting measurements about the old orbit, and 2 n_all.
    chi2_new, dof_new, reduced_chi2_new : float, int, float
        The same for the new measurements; reduced = chi2 / dof.
    p_value, p_value_inflated : float
        chi2 tail probabilities of the new data, as stated and with sigmas tripled.
    mean_z_theta, mean_z_rho : float
        Mean normalised residuals of the new data.
    trend_z_theta_per_yr, trend_z_rho_per_yr : float
        Their slopes against time [1/yr] (0 when the new data share one epoch).
    chi2_systematic, dof_systematic, p_systematic : float, int, float
        chi2 explained by offset and trend, its dof, and its tail probability.
    max_abs_z : float
        Largest |z| of the new data.
    decided_by, p_decisive : str, float
        Name and p-value of the test that decided the verdict (for consistent: the
        test closest to rejecting).
    residuals : list of dict
        O-C of every measurement: line, epoch_yr, d_theta_deg, d_rho_arcsec, z_theta,
        z_rho, new, flipped, status ('used' or 'excluded').
    """

    verdict: str
    reason: str
    last_epoch_yr: float | None
    n_all: int
    n_new: int
    n_flipped: int
    chi2_all: float
    dof_all: int
    chi2_new: float
    dof_new: int
    reduced_chi2_new: float
    p_value: float
    p_value_inflated: float
    mean_z_theta: float
    mean_z_rho: float
    trend_z_theta_per_yr: float
    trend_z_rho_per_yr: float
    chi2_systematic: float
    dof_systematic: int
    p_systematic: float
    max_abs_z: float
    decided_by: str = ""
    p_decisive: float = float("nan")
    residuals: list = field(default_factory=list)

    def to_dict(self):
        """Plain JSON-ready mapping (what ``dataclasses.asdict`` gives, without its deep
        copy of every value: the fields are plain numbers and text, the rows flat dicts)."""
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["residuals"] = [dict(row) for row in self.residuals]
        return out


def old_orbit_residuals(elements, data, flips=True):
    """O-C of every measurement of ``data`` against ``elements``.

    Parameters
    ----------
    elements : CampbellElements
        The old orbit.
    data : MeasurementSet
    flips : bool
        Score points whose theta + 180 deg fits decisively better as flipped.

    Returns
    -------
    dict of ndarray
        ``d_theta_deg``, ``d_rho_arcsec``, ``z_theta``, ``z_rho``, ``flipped`` (bool).
    """
    eph = ephemeris(elements, data.epoch_yr)
    root_w = np.sqrt(data.weight)
    sigma_theta, sigma_rho = data.sigma_theta_deg / root_w, data.sigma_rho_arcsec / root_w
    d_rho = data.rho_arcsec - eph.rho_arcsec
    d_theta = wrap_degrees(data.theta_deg - eph.theta_deg)
    d_theta_flip = wrap_degrees(data.theta_deg + 180.0 - eph.theta_deg)
    gain = (d_theta**2 - d_theta_flip**2) / sigma_theta**2
    flipped = (gain > FLIP_MIN_GAIN) if flips else np.zeros(len(data), bool)
    d_theta = np.where(flipped, d_theta_flip, d_theta)
    return {"d_theta_deg": d_theta, "d_rho_arcsec": d_rho, "z_theta": d_theta / sigma_theta,
            "z_rho": d_rho / sigma_rho, "flipped": flipped}


def chi2_tail(x, dof):
    """Tail probability of chi2 with a whole number ``dof`` of degrees of freedom:
    Q(dof/2, x/2), the regularized upper incomplete gamma function.

    For whole or half-whole a = dof/2 it is a finite sum (Abramowitz & Stegun 1964,
    Handbook of Mathematical Functions, 26.4.21 for even dof, the Poisson sum, and
    26.4.4 for odd; memory): Q(a, h) = [erfc(sqrt h) for odd dof] + sum over
    b = a - 1, a - 2, ... > 0 of h^b e^-h / Gamma(b + 1). Each term is formed from its
    logarithm, so none overflows; one below 1e-308 underflows to 0. Within 1e-10
    relative of mpmath up to dof = 10^4 (the rounding of exponents near 10^4), and no
    scipy to import in every batch worker (scipy.special: 0.14 s each).
    """
    h = 0.5 * float(x)
    if int(dof) != dof or dof < 1:
        raise ValueError(f"dof must be a whole number >= 1, got {dof}")
    if not h > 0.0:
        return 1.0 if h == 0.0 else float("nan")
    if math.isinf(h):
        return 0.0
    n, odd = divmod(int(dof), 2)
    b = np.arange(n) + (0.5 if odd else 0.0)          # the powers of h
    log_gamma = math.lgamma(b[0] + 1.0) + np.concatenate(
        [[0.0], np.cumsum(np.log(b[1:]))]) if n else b   # ln Gamma(b + 1)
    terms = np.exp(b * math.log(h) - h - log_gamma)
    return float((math.erfc(math.sqrt(h)) if odd else 0.0) + terms.sum())


def _offset_and_trend(z, t):
    """Mean, slope [1/yr], explained chi2 and its dof of unit-variance residuals z(t)."""
    mean = float(z.mean())
    s_tt = float(np.sum((t - t.mean()) ** 2))
    if z.size < 2 or s_tt <= 0:
        return mean, 0.0, z.size * mean**2, 1
    slope = float(np.sum((t - t.mean()) * z) / s_tt)
    return mean, slope, z.size * mean**2 + slope**2 * s_tt, 2


def check_revision(elements, data, last_epoch_yr=None, flips=True):
    """Verdict on an old orbit from the measurements (see the module notes for the rule).

    Parameters
    ----------
    elements : CampbellElements
        The old orbit, T as a Julian year.
    data : MeasurementSet
    last_epoch_yr : float, optional
        Epoch of the old orbit's last data [Julian year]; later measurements decide.
        None: all measurements decide.
    flips : bool
        Allow quadrant flips (see ``old_orbit_residuals``).

    Returns
    -------
    RevisionCheck
    """
    oc = old_orbit_residuals(elements, data, flips)
    votes = data.usable
    new = votes & (data.epoch_yr > last_epoch_yr if last_epoch_yr is not None else True)
    z2 = oc["z_theta"] ** 2 + oc["z_rho"] ** 2
    n_new = int(new.sum())
    chi2_new = float(z2[new].sum())
    t = data.epoch_yr[new]
    m_t, b_t, s_t, k_t = _offset_and_trend(oc["z_theta"][new], t) if n_new else (0, 0, 0, 0)
    m_r, b_r, s_r, k_r = _offset_and_trend(oc["z_rho"][new], t) if n_new else (0, 0, 0, 0)
    dof_sys = k_t + k_r
    numbers = dict(
        last_epoch_yr=last_epoch_yr, n_all=int(votes.sum()), n_new=n_new,
        n_flipped=int((oc["flipped"] & votes).sum()), chi2_all=float(z2[votes].sum()),
        dof_all=2 * int(votes.sum()), chi2_new=chi2_new, dof_new=2 * n_new,
        reduced_chi2_new=chi2_new / (2 * n_new) if n_new else float("nan"),
        p_value=float(chi2_tail(chi2_new, 2 * n_new)) if n_new else float("nan"),
        p_value_inflated=(float(chi2_tail(chi2_new / ERROR_INFLATION**2, 2 * n_new))
                          if n_new else float("nan")),
        mean_z_theta=float(m_t), mean_z_rho=float(m_r), trend_z_theta_per_yr=float(b_t),
        trend_z_rho_per_yr=float(b_r), chi2_systematic=float(s_t + s_r),
        dof_systematic=dof_sys,
        p_systematic=float(chi2_tail(s_t + s_r, dof_sys)) if n_new else float("nan"),
        max_abs_z=float(np.sqrt(np.max(np.maximum(oc["z_theta"][new] ** 2,
                                                  oc["z_rho"][new] ** 2)))) if n_new else 0.0)
    verdict, reason = _decide(numbers, data.epoch_scale)
    numbers["decided_by"], numbers["p_decisive"] = _decisive(verdict, numbers)
    columns = zip(data.line.tolist(), data.epoch_yr.tolist(), oc["d_theta_deg"].tolist(),
                  oc["d_rho_arcsec"].tolist(), oc["z_theta"].tolist(), oc["z_rho"].tolist(),
                  new.tolist(), oc["flipped"].tolist(),
                  votes.tolist())
    rows = [{"line": line, "epoch_yr": t, "d_theta_deg": d_theta, "d_rho_arcsec": d_rho,
             "z_theta": z_theta, "z_rho": z_rho, "new": is_new, "flipped": flipped,
             "status": "used" if vote else "excluded"}
            for line, t, d_theta, d_rho, z_theta, z_rho, is_new, flipped, vote in columns]
    return RevisionCheck(verdict=verdict, reason=reason, residuals=rows, **numbers)


def _decisive(verdict, n):
    """The test that decided the verdict and its p-value: the inflated test for
    contradicted; for drifting the test that rejected (the smaller p); for consistent the
    test closest to rejecting."""
    if verdict == "no new data":
        return "", float("nan")
    if verdict == "contradicted":
        return "p_value_inflated", n["p_value_inflated"]
    name = min(("p_value", "p_systematic"), key=lambda k: n[k])
    return name, n[name]


def _decide(n, scale):
    """Apply the rule of the module notes; returns (verdict, reason), epochs in ``scale``
    (the log's)."""
    from .formatting import epoch, p_value
    last = None if n["last_epoch_yr"] is None else epoch(n["last_epoch_yr"], scale,
                                                         internal=True)
    if n["n_new"] == 0:
        if last is None:
            return "no new data", "the log has no usable measurement"
        return "no new data", ("no usable measurement is newer than the old orbit's last data "
                               f"({last})")
    which = "all" if last is None else f"newer than {last}"
    numbers = (f"{n['n_new']} points {which}: chi2 = {n['chi2_new']:.1f} for {n['dof_new']} "
               f"dof ({p_value(n['p_value'], 'p')}; sigmas x{ERROR_INFLATION:g}: "
               f"{p_value(n['p_value_inflated'], 'p')}); offset and trend chi2 = "
               f"{n['chi2_systematic']:.1f} for {n['dof_systematic']} dof "
               f"({p_value(n['p_systematic'], 'p')})")
    if n["p_value_inflated"] < ALPHA:
        return "contradicted", (f"the new data reject the old orbit even with sigmas "
                                f"x{ERROR_INFLATION:g} at the {ALPHA:g} level; {numbers}")
    if n["p_value"] < ALPHA or n["p_systematic"] < ALPHA:
        return "drifting", (f"the new data depart from the old orbit beyond their sigmas but "
                            f"within x{ERROR_INFLATION:g} of them; {numbers}")
    return "consistent", f"no test rejects the old orbit at the {ALPHA:g} level; {numbers}"


def typical_sigma_arcsec(data, rows=None):
    """Median positional sigma per axis [arcsec] of the measurements ``rows`` (default all).

    Per measurement sqrt((sigma_rho^2 + (rho sigma_theta)^2) / 2), sigma_theta in radians,
    weights applied.
    """
    rows = np.ones(len(data), bool) if rows is None else rows
    root_w = np.sqrt(data.weight[rows])
    s_rho = data.sigma_rho_arcsec[rows] / root_w
    s_tan = data.rho_arcsec[rows] * np.radians(data.sigma_theta_deg[rows]) / root_w
    return float(np.median(np.sqrt(0.5 * (s_rho**2 + s_tan**2))))


def align_orbits(old, new):
    """Old and new elements named alike, for element-by-element comparison.

    Both are normalised; the new (Omega, omega) take the common 180 deg shift that brings
    the nodes closest; the new T is moved by whole new periods to the passage nearest the
    old T. Returns (old, new, new T [Julian yr], the whole periods it was moved by).
    """
    old, new = old.normalised(), new.normalised()
    if abs(wrap_degrees(new.node_deg - old.node_deg)) > 90.0:
        new = CampbellElements(new.period_yr, new.periastron_yr, new.e, new.a_arcsec, new.i_deg,
                               new.node_deg + 180.0, new.omega_deg + 180.0)
    turns = int(np.round((old.periastron_yr - new.periastron_yr) / new.period_yr))
    return old, new, float(new.periastron_yr + turns * new.period_yr), turns


def compare_orbits(old, new, start_yr, sigma_arcsec, old_errors=None, new_errors=None,
                   years=10.0, n_epochs=401, new_pt_covariance=0.0):
    """Element changes in sigma and the ephemeris difference over the next decade.

    Parameters
    ----------
    old, new : CampbellElements
        Old and new orbit (T as Julian years).
    start_yr : float
        Start of the prediction window [Julian year], e.g. the last measurement.
    sigma_arcsec : float or ndarray
        Typical positional sigma of a measurement [arcsec] (``typical_sigma_arcsec``), or
        one sigma for each of the ``n_epochs`` window epochs (e.g. the new orbit's band).
    old_errors, new_errors : dict, optional
        1-sigma errors by element key, internal units; missing keys count as 0. The new
        T moved by k periods (``align_orbits``) has the error
        sqrt(sigma_T^2 + k^2 sigma_P^2 + 2 k cov(P, T)).
    new_pt_covariance : float
        cov(P, T) of the new orbit [yr^2] (0 when unknown: the fit's T, the passage
        nearest its mean epoch, is the one least correlated with P).
    years : float
        Length of the prediction window [yr].
    n_epochs : int
        Epochs sampled in the window.

    Returns
    -------
    dict
        ``elements``: {key: {old, new, difference, sigma, n_sigma, new_error}} (n_sigma
        None when no error is known; new_error: the new value's, T's as moved, or None);
        ``window_yr``; ``max_separation_arcsec``; ``epoch_of_max_yr``;
        ``max_separation_sigma``; ``typical_sigma_arcsec``.
    """
    old_errors, new_errors = old_errors or {}, dict(new_errors or {})
    old_n, new_n, new_t, turns = align_orbits(old, new)
    old_v, new_v = old_n.to_keys(), new_n.to_keys()
    new_v["T"] = new_t
    if turns and "T" in new_errors:
        new_errors["T"] = math.sqrt(max(new_errors["T"] ** 2 + turns**2 * new_errors.get(
            "P", 0.0) ** 2 + 2 * turns * new_pt_covariance, 0.0))
    elements = {}
    for key in ELEMENT_KEYS:
        diff = new_v[key] - old_v[key]
        if key in ("Omega", "omega"):
            diff = float(wrap_degrees(diff))
        sigma = float(np.hypot(old_errors.get(key, 0.0), new_errors.get(key, 0.0)))
        elements[key] = {"old": old_v[key], "new": new_v[key], "difference": float(diff),
                         "sigma": sigma, "n_sigma": float(diff / sigma) if sigma > 0 else None,
                         "new_error": new_errors.get(key)}
    epochs = np.linspace(start_yr, start_yr + years, n_epochs)
    a, b = ephemeris(old, epochs), ephemeris(new, epochs)
    separation = np.hypot(a.x_arcsec - b.x_arcsec, a.y_arcsec - b.y_arcsec)
    k = int(np.argmax(separation))
    in_sigma = separation / np.asarray(sigma_arcsec, float)
    return {"elements": elements, "window_yr": [float(start_yr), float(start_yr + years)],
            "max_separation_arcsec": float(separation[k]), "epoch_of_max_yr": float(epochs[k]),
            "typical_sigma_arcsec": (float(sigma_arcsec) if np.ndim(sigma_arcsec) == 0
                                     else float(np.median(sigma_arcsec))),
            "max_separation_sigma": float(in_sigma.max()),
            "epoch_of_max_sigma_yr": float(epochs[int(np.argmax(in_sigma))])}
