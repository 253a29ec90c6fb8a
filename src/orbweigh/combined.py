"""Combined visual-spectroscopic orbit: relative positions and radial velocities fitted together.

The relative astrometry fixes P, T, e, a [arcsec], i and (Omega, omega) up to a common
180 deg shift; the velocities add gamma, K1 (and K2 for a double-lined pair) and, through
their sign, pick the node, so Omega runs over [0, 360). The velocity convention is the
one of ``spectroscopic`` (ascending node: the secondary recedes there; omega1 = omega +
180 deg).

Fit (``fit_combined``): Levenberg-Marquardt (``bounded_least_squares``) on the concatenation of

* the astrometric normalised tangential and radial residuals of the visual fit's final
  point set (quadrant-flipped rows corrected; outliers and excluded rows left out), and
* (V_obs - V_model) / sigma_rv of every usable velocity,

so the relative weight of the two kinds of data is set by their own sigmas. It starts
from the visual solution with gamma, K1, K2 from a linear solve for the fixed orbit, once
for each node choice (Omega, omega) and (Omega + 180, omega + 180); amplitudes are kept
positive, so the wrong choice cannot mimic the right one by a sign change of K. The better
one is kept and the chi2 difference reported. Uncertainties come from the covariance,
scaled by the reduced chi2 when it exceeds 1.

Elements held in the visual fit (``FitOptions.held``: --fix, and a circular orbit's
omega = 0 by convention) stay held: they are not fitted, carry no error and do not count
in the degrees of freedom. Here Omega runs over [0, 360), so a held Omega or omega also
fixes the node choice: that fit is kept whatever its chi2, the other choice is fitted with
the held angles + 180 deg for comparison, and a warning says so when the velocities prefer
it. Not so a held omega with e held at 0 (``elements.phase_in_periastron``): the other
node is then (Omega + 180, T + P/2) with omega as held, and the better choice is kept; T
is the epoch of passage through the ascending node.

Distance and masses (``combined_blocks``), per draw of the joint covariance (multivariate
normal, seeded): the linear semi-major axis a_au = (K1 + K2) P sqrt(1 - e^2) / (2 pi sin i),
the orbital parallax a["] / a_au and the component masses from a_au, P and q = K1/K2.
With one component's velocities only (SB1), the distance must come from a trigonometric
parallax: M1 + M2 from the third law with a["] / parallax, and the measured component's
share from its own orbit, a1 = a q / (1 + q), i.e. M2 = (M1 + M2) a1 / a with
a1 = K1 P sqrt(1 - e^2) / (2 pi sin i).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from . import formatting as fmt
from .bounded_least_squares import fit_bounded
from .constants import JULIAN_YEAR_D as _DAYS_PER_YEAR
from .elements import (ELEMENT_KEYS, CampbellElements, centre_angles, convention_held,
                       held_angles_as_reported, held_elements, nearest_passage,
                       phase_in_periastron, thiele_innes_from_campbell, turn_node)
from .errors import InputError
from .fitting import held_constraints
from .masses import format_mass_blocks, summarise, total_mass_msun
from .model import normalised_residuals, predict_theta_rho, wrap_degrees
from .reductions import from_julian_year, interval_in_scale
from .spectroscopic import (component_masses_from_orbit, mass_function_msun,
                            radial_velocities, semi_major_axis_au_from_rv)
from .tables import rows_left_out

__all__ = ["PARAMETER_KEYS", "PARAMETER_UNITS", "NODE_DECISIVE_DELTA_CHI2", "JointData",
           "CombinedSolution", "rv_model", "joint_residuals", "fit_combined", "parameter_draws",
           "JointPosterior", "sample_combined", "combined_blocks", "add_to_document",
           "format_combined"]

#: Order of the joint parameters (SB1: the amplitude of the missing component is absent).
PARAMETER_KEYS = ("P", "T", "e", "a", "i", "Omega", "omega", "gamma", "K1", "K2")
PARAMETER_UNITS = {"P": "yr", "T": "yr", "e": "", "a": "arcsec", "i": "deg", "Omega": "deg",
                   "omega": "deg", "gamma": "km/s", "K1": "km/s", "K2": "km/s"}
#: Below this chi2 difference (3 sigma-equivalent) the node choice is not decisive.
NODE_DECISIVE_DELTA_CHI2 = 9.0
_E_MAX = 0.995
_RV_OUTLIER_SIGMA = 4.0
# Physical ranges; K >= 0 keeps the wrong node from mimicking the right one with K < 0.
_BOUNDS = {"P": (0.0, np.inf), "e": (0.0, _E_MAX), "a": (0.0, np.inf), "i": (0.0, 180.0),
           "K1": (0.0, np.inf), "K2": (0.0, np.inf)}


@dataclass
class JointData:
    """The points of a joint fit as plain arrays.

    Attributes
    ----------
    t_ast, theta_deg, rho_arcsec, sigma_theta_deg, sigma_rho_arcsec : ndarray
        Astrometry: epochs [Julian yr], position angles [deg, flips corrected],
        separations [arcsec] and effective sigmas (weights applied).
    t_rv, rv_kms, sigma_rv_kms : ndarray
        Usable velocities: epochs [Julian yr], velocities and sigmas [km/s].
    component : ndarray of int
        1 or 2 per velocity.
    rv_rows : ndarray of int
        Index of each velocity in the ``VelocitySet``.
    """

    t_ast: np.ndarray
    theta_deg: np.ndarray
    rho_arcsec: np.ndarray
    sigma_theta_deg: np.ndarray
    sigma_rho_arcsec: np.ndarray
    t_rv: np.ndarray
    rv_kms: np.ndarray
    sigma_rv_kms: np.ndarray
    component: np.ndarray
    rv_rows: np.ndarray

    @classmethod
    def from_solution(cls, solution, velocities):
        """The visual fit's final point set and the usable velocities."""
        d = solution.data
        keep = np.isin(solution.status, ("used", "flipped"))
        theta = np.mod(d.theta_deg + np.where(solution.status == "flipped", 180.0, 0.0), 360.0)
        w = np.sqrt(d.weight) / solution.sigma_factor   # the technique factors of the fit
        rows = np.flatnonzero(velocities.usable)
        return cls(d.epoch_yr[keep], theta[keep], d.rho_arcsec[keep],
                   (d.sigma_theta_deg / w)[keep], (d.sigma_rho_arcsec / w)[keep],
                   velocities.epoch_yr[rows], velocities.rv_kms[rows],
                   velocities.sigma_rv_kms[rows], velocities.component[rows], rows)

    def amplitude_keys(self):
        """'K1' and/or 'K2': the components with velocities."""
        return tuple(f"K{c}" for c in (1, 2) if np.any(self.component == c))


def _orbit_params(v):
    """(P, T, e, A, B, F, G) of the relative orbit from a dict of joint parameters."""
    A, B, F, G = thiele_innes_from_campbell(
        v["a"], *np.radians([v["i"], v["Omega"], v["omega"]]))
    return (v["P"], v["T"], v["e"], A, B, F, G)


def rv_model(v, t, component):
    """Model velocities [km/s] of the given components at epochs t [Julian yr]."""
    v1, v2 = radial_velocities(t, v["P"], v["T"], v["e"], v["omega"], v.get("K1", 0.0),
                               v.get("K2", 0.0), v["gamma"])
    return np.where(component == 1, v1, v2)


def joint_residuals(v, data):
    """Normalised residuals: astrometric tangential, radial, then velocities.

    Values may be arrays of shape (n, 1) (n parameter sets): the residuals then have
    shape (n, 2 n_ast + n_rv).
    """
    r_theta, r_rho, _, _ = normalised_residuals(
        _orbit_params(v), data.t_ast, data.theta_deg, data.rho_arcsec,
        data.sigma_theta_deg, data.sigma_rho_arcsec)
    r_rv = (data.rv_kms - rv_model(v, data.t_rv, data.component)) / data.sigma_rv_kms
    return np.concatenate([r_theta, r_rho, r_rv], axis=-1)


@dataclass
class CombinedSolution:
    """Best joint orbit of positions and velocities.

    Attributes
    ----------
    visual : OrbitSolution
        The visual fit it started from (its final point set was fitted).
    velocities : VelocitySet
        The velocity log.
    data : JointData
        The fitted points.
    keys : tuple of str
        Fitted (free) parameters, in ``PARAMETER_KEYS`` order; held elements are absent.
    values, errors : dict
        Best values and 1-sigma errors of every parameter (``parameters``) in
        ``PARAMETER_UNITS`` (T a Julian year; Omega in [0, 360), omega in [0, 360)); a held
        element has its held value and error None.
    covariance : ndarray or None
        Covariance of ``keys`` (scaled by the reduced chi2 when > 1).
    chi2, chi2_astrometric, chi2_rv : float
        Total chi2 and its two parts.
    dof, reduced_chi2, errors_scaled
        Degrees of freedom (2 n_ast + n_rv - n_par), chi2/dof, whether errors were scaled.
    other_node : dict
        Best fit with the other node choice: {"values", "chi2"}.
    node_delta_chi2 : float
        chi2 of the other node choice minus the kept one's (negative only when a held
        angle kept the worse choice).
    held : dict
        Held elements of the kept fit in internal units (T a Julian year, angles deg);
        empty when none.
    warnings, notes : list of str
        Plain-language caveats.
    """

    visual: object
    velocities: object
    data: JointData
    keys: tuple
    values: dict
    errors: dict
    covariance: np.ndarray | None
    chi2: float
    chi2_astrometric: float
    chi2_rv: float
    dof: int
    reduced_chi2: float
    errors_scaled: bool
    other_node: dict
    node_delta_chi2: float
    held: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def __repr__(self):
        v = self.values
        amps = ", ".join(f"{k}={v[k]:.3f}" for k in self.keys if k.startswith("K"))
        return (f"<CombinedSolution Omega={v['Omega']:.2f} omega={v['omega']:.2f} "
                f"gamma={v['gamma']:.3f} {amps} chi2/dof={self.chi2:.1f}/{self.dof} "
                f"node delta chi2={self.node_delta_chi2:.1f}>")

    @property
    def elements(self):
        """``CampbellElements`` of the joint orbit (Omega in [0, 360))."""
        return CampbellElements(*(self.values[k] for k in ELEMENT_KEYS))

    @property
    def double_lined(self):
        return "K1" in self.keys and "K2" in self.keys

    @property
    def parameters(self):
        """Every joint parameter, held or fitted, in ``PARAMETER_KEYS`` order."""
        return tuple(k for k in PARAMETER_KEYS if k in self.values)

    @property
    def held_angles(self):
        """The held ones of Omega and omega that fix the node choice (``_node_angles``)."""
        return _node_angles(self.held)

    def full_covariance(self):
        """Covariance of ``parameters`` (held rows and columns zero), or None."""
        if self.covariance is None:
            return None
        index = [self.parameters.index(k) for k in self.keys]
        full = np.zeros((len(self.parameters),) * 2)
        full[np.ix_(index, index)] = self.covariance
        return full


def _linear_amplitudes(v, data):
    """gamma and the amplitudes for a fixed orbit, by weighted linear least squares.

    V1 = gamma + K1 s(t), V2 = gamma - K2 s(t) with s = cos(nu + omega1) + e cos omega1.
    """
    amps = data.amplitude_keys()
    shape = rv_model({**v, "gamma": 0.0, "K1": 1.0, "K2": -1.0}, data.t_rv, data.component)
    columns = [np.ones_like(shape)] + [np.where(data.component == int(k[1]), shape, 0.0) * (
        1.0 if k == "K1" else -1.0) for k in amps]
    design = np.column_stack(columns) / data.sigma_rv_kms[:, None]
    sol = np.linalg.lstsq(design, data.rv_kms / data.sigma_rv_kms, rcond=None)[0]
    return float(sol[0]), dict(zip(amps, sol[1:]))


def _node_angles(held):
    """The held ones of Omega and omega that fix the node choice: a held omega of a
    circular orbit does not (the node's half turn moves T instead)."""
    return tuple(k for k in ("Omega", "omega") if k in held
                 and not (k == "omega" and phase_in_periastron(held)))


def _start(elements, data, shift_node, held):
    """Start values from the visual elements, one node choice, the held values and the
    velocities."""
    v = dict(zip(ELEMENT_KEYS, elements.as_tuple()))
    if shift_node:
        v["Omega"], v["omega"], v["T"] = (float(x) for x in turn_node(
            v["Omega"], v["omega"], v["T"], v["P"], -180.0, phase_in_periastron(held)))
    v.update(held)
    gamma, amps = _linear_amplitudes(v, data)
    v["gamma"] = gamma
    for k, value in amps.items():
        measured = data.rv_kms[data.component == int(k[1])]
        # a wrong node turns the linear amplitude negative: start from half the range
        v[k] = value if value > 0 else max(0.5 * np.ptp(measured), 0.1)
    return v


def _least_squares(v0, data, keys, held):
    """Levenberg-Marquardt of ``keys`` on the joint residuals, ``held`` fixed; (values of
    every parameter, chi2, unscaled covariance of ``keys``)."""
    lower = [_BOUNDS.get(k, (-np.inf, np.inf))[0] for k in keys]
    upper = [_BOUNDS.get(k, (-np.inf, np.inf))[1] for k in keys]
    start = [v0[k] if k != "e" else min(max(v0[k], 1e-4), _E_MAX - 1e-3) for k in keys]

    def resid(x):
        return joint_residuals({**held, **dict(zip(keys, x))}, data)

    out = fit_bounded(resid, start, lower, upper, np.ones(len(keys), bool))
    values = {**{k: float(v) for k, v in held.items()},
              **{k: float(v) for k, v in zip(keys, out.x)}}
    for k in ("Omega", "omega"):
        values[k] = float(np.mod(values[k], 360.0))
    return values, float(np.sum(resid(out.x) ** 2)), out.covariance


def _node_fits(solution, data, keys, held):
    """(kept, other) fits of the two node choices, each (values, chi2, covariance).

    Without a held angle the better one is kept. A held Omega or omega fixes the choice:
    the kept fit starts from the visual orbit on the held angle's branch, the other one
    holds the angle(s) + 180 deg.
    """
    angles = _node_angles(held)
    el = solution.elements
    if not angles:
        fits = sorted((_least_squares(_start(el, data, shift, held), data, keys, held)
                       for shift in (False, True)), key=lambda f: f[1])
        return fits[0], fits[1]
    # the visual orbit is reported with Omega in [0, 180): is the held angle on the other branch?
    shift = held_angles_as_reported(held, el.node_deg, el.omega_deg) != held
    turned = {**held, **{k: float(np.mod(held[k] + 180.0, 360.0)) for k in angles}}
    return (_least_squares(_start(el, data, shift, held), data, keys, held),
            _least_squares(_start(el, data, not shift, turned), data, keys, turned))


def _periastron_near(values, covar, keys, t_ref):
    """T moved by whole periods (the same orbit) to the passage nearest t_ref, with the
    covariance carried along (T - k P); a held T stays.

    The fit of the other node starts half a period away under the circular convention
    (``_start``), and a free T may end periods away from the data; near their mean it is
    least correlated with P, as in the visual fit.
    """
    k = float(np.round((values["T"] - t_ref) / values["P"]))
    if "T" not in keys or k == 0.0:
        return values, covar
    if covar is not None and "P" in keys:
        jac = np.eye(len(keys))
        jac[keys.index("T"), keys.index("P")] = -k
        covar = jac @ covar @ jac.T
    return {**values, "T": values["T"] - k * values["P"]}, covar


def fit_combined(solution, velocities):
    """Joint least-squares fit of a visual solution's points and a velocity log.

    Parameters
    ----------
    solution : OrbitSolution
        Result of ``fitting.fit_orbit`` (start values and the final astrometric points).
    velocities : VelocitySet
        Radial velocities (``spectroscopic.read_velocities``).

    Returns
    -------
    CombinedSolution

    Raises
    ------
    InputError
        Fewer than three usable velocities (gamma and one amplitude need more).

    Elements held in the visual fit (``solution.options.fixed``) stay held here (see the
    module's description).
    """
    data = JointData.from_solution(solution, velocities)
    if data.t_rv.size < 3:
        left_out = rows_left_out(velocities.rejected, velocities.line[velocities.excluded])
        usable = fmt.counted(data.t_rv.size, "usable radial velocity",
                             "usable radial velocities")
        raise InputError(f"{velocities.source}: {usable}; a combined solution needs at least "
                         "3 (gamma and an amplitude)"
                         + (f". Left out: {left_out}" if left_out else ""))
    held = held_constraints(solution.options, solution.data).fixed
    keys = tuple(k for k in ELEMENT_KEYS if k not in held) + ("gamma",) + data.amplitude_keys()
    (values, chi2, covar), (other, other_chi2, _) = _node_fits(solution, data, keys, held)
    t_ref = float(np.mean(data.t_ast))          # as the visual fit's start (least P-T correlation)
    values, covar = _periastron_near(values, covar, keys, t_ref)
    other, _ = _periastron_near(other, None, keys, t_ref)
    dof = max(2 * data.t_ast.size + data.t_rv.size - len(keys), 1)
    reduced = chi2 / dof
    cov = None if covar is None else covar * max(reduced, 1.0)
    errors = {k: (None if cov is None or k in held else
                  float(np.sqrt(max(cov[keys.index(k), keys.index(k)], 0.0))))
              for k in values}
    n_ast = data.t_ast.size
    r = joint_residuals(values, data)
    sol = CombinedSolution(
        visual=solution, velocities=velocities, data=data, keys=keys, values=values,
        errors=errors, covariance=cov, chi2=chi2,
        chi2_astrometric=float(np.sum(r[:2 * n_ast] ** 2)),
        chi2_rv=float(np.sum(r[2 * n_ast:] ** 2)), dof=int(dof), reduced_chi2=float(reduced),
        errors_scaled=bool(reduced > 1.0 and cov is not None),
        other_node={"values": other, "chi2": other_chi2}, node_delta_chi2=other_chi2 - chi2,
        held=dict(held))
    sol.warnings.extend(_warnings(sol, r[2 * n_ast:]))
    sol.notes.append(("With radial velocities " if sol.held_angles else
                      "Radial velocities fix the node: ") +
                     "Omega is the ascending node (where the secondary recedes) and runs over "
                     "[0, 360) deg; omega is the secondary's, the primary's spectroscopic "
                     "omega1 = omega + 180 deg.")
    if sol.held_angles:
        verb = "fixes" if len(sol.held_angles) == 1 else "fix"
        sol.notes.append(f"Held {_held_words(sol)} {verb} the node choice; the other choice "
                         f"was fitted with {' and '.join(sol.held_angles)} + 180 deg for "
                         "comparison only.")
    if sol.errors_scaled:
        sol.notes.append(f"Uncertainties of the combined solution were scaled by "
                         f"sqrt(reduced chi2) = {np.sqrt(reduced):.2f}.")
    return sol


def _held_words(sol):
    """'Omega = 300 deg' (and 'omega = 40 deg'): the held angles, as the user gave them."""
    return " and ".join(f"{k} = {fmt.number(sol.held[k], 6)} deg" for k in sol.held_angles)


def _node_warning(sol):
    """The node choice in words when it is not decided, or when a held angle kept the
    choice the velocities reject."""
    delta, other = sol.node_delta_chi2, sol.other_node["values"]
    if abs(delta) < NODE_DECISIVE_DELTA_CHI2:
        which = "better" if delta < 0 else "worse"
        return (f"The node is not decided: the other choice (Omega = {other['Omega']:.2f} deg) "
                f"fits {which} by only delta chi2 = {abs(delta):.1f} (< "
                f"{NODE_DECISIVE_DELTA_CHI2:g}); the velocities do not constrain the orbit's "
                "phase well enough.")
    if _held_node_rejected(sol):
        return (f"The velocities prefer the other node: Omega = {other['Omega']:.2f} deg, "
                f"omega = {other['omega']:.2f} deg (the held {' and '.join(sol.held_angles)} "
                f"+ 180 deg) fits better by "
                f"delta chi2 = {-delta:.1f}. The held {_held_words(sol)} "
                + ("was kept as given (--fix); check it, or free it." if len(sol.held_angles) == 1
                   else "were kept as given (--fix); check them, or free them."))
    return None


def _held_node_rejected(sol):
    """Whether a held angle kept the node choice the velocities decisively reject."""
    return sol.node_delta_chi2 <= -NODE_DECISIVE_DELTA_CHI2


def _warnings(sol, r_rv):
    out = [w for w in (_node_warning(sol),) if w]
    if sol.covariance is None:
        out.append("The covariance of the combined fit could not be estimated (degenerate "
                   "solution): no uncertainties, orbital parallax or masses are given.")
    n_ast, n_rv = 2 * sol.data.t_ast.size, sol.data.t_rv.size
    per_ast, per_rv = sol.chi2_astrometric / n_ast, sol.chi2_rv / n_rv
    if max(per_ast, per_rv) > 2.0 * max(min(per_ast, per_rv), 0.5):
        out.append(f"The two kinds of data disagree on their own sigmas: chi2 per number "
                   f"{per_ast:.2f} (astrometry) against {per_rv:.2f} (velocities); the relative "
                   f"weight of the velocities rests on their quoted sigmas.")
    far = np.flatnonzero(np.abs(r_rv) > _RV_OUTLIER_SIGMA)
    if far.size:
        lines = fmt.line_list([sol.velocities.line[sol.data.rv_rows[j]] for j in far], most=len(far))
        advice = ("most likely because of the held node the velocities reject (above), not "
                  "faulty velocities" if _held_node_rejected(sol) else
                  "they were kept in the fit: flag them in the log if they are faulty")
        out.append(f"{far.size} radial velocit{'y lies' if far.size == 1 else 'ies lie'} beyond "
                   f"{_RV_OUTLIER_SIGMA:g} sigma of the combined orbit ({lines}); {advice}.")
    if not sol.double_lined:
        out.append("Only one component's velocities: no orbital parallax; the component "
                   "masses need a trigonometric parallax.")
    return out


# ----------------------------------------------------------------- distance and masses
def parameter_draws(sol, n, seed):
    """Draws of the joint parameters from the covariance, shape (n, len(sol.parameters)).

    Multivariate normal around the best values with ``numpy.random.default_rng(seed)``
    (held elements constant at their values); e is folded into [0, 0.999), P, a and the
    amplitudes are taken positive.
    """
    rng = np.random.default_rng(seed)
    best = np.array([sol.values[k] for k in sol.parameters])
    draws = rng.multivariate_normal(best, sol.full_covariance(), size=n, method="eigh")
    for j, k in enumerate(sol.parameters):
        if k in sol.held:
            draws[:, j] = sol.held[k]
        elif k in ("P", "a", "K1", "K2"):
            draws[:, j] = np.abs(draws[:, j])
        elif k == "e":
            draws[:, j] = np.clip(np.abs(draws[:, j]), 0.0, 0.999)
    return draws


def _interval(samples, unit):
    """Percentile summary plus a symmetric 1-sigma 'error' (half the 68 % interval)."""
    s = summarise(samples, unit)
    return {**s, "error": 0.5 * (s["high"] - s["low"])}


def combined_blocks(sol, parallax=None, combine=False, n_draws=4000, seed=1, draws=None):
    """Orbital parallax, parallax and mass blocks of a combined solution.

    Parameters
    ----------
    sol : CombinedSolution
    parallax : (float, float), optional
        Trigonometric parallax and its error [mas]: compared with the orbital one; needed
        for masses of a single-lined pair.
    combine : bool
        Weighted mean of the orbital and trigonometric parallaxes for the masses
        (double-lined pair with a trigonometric parallax).
    n_draws : int
        Draws of the joint covariance.
    seed : int
        Seed of the parameter draws (``default_rng(seed)``); the trigonometric parallax
        is drawn from ``default_rng(SeedSequence(seed).spawn(1)[0])``.
    draws : ndarray, optional
        Posterior draws of ``sol.parameters`` (``sample_combined``) to use instead of the
        covariance draws; ``n_draws`` is then their number.

    Returns
    -------
    dict
        Keys "orbital_parallax" (double-lined only), "parallax", "mass" (when masses
        follow), "mass_function" (single-lined), "warnings".
    """
    if sol.covariance is None and draws is None:
        return {"warnings": []}
    if combine and (parallax is None or not sol.double_lined):
        raise InputError("--combine-parallax needs a trigonometric parallax (--parallax VALUE "
                         "ERROR) and the velocities of both components")
    if parallax is not None:
        value, error = (float(x) for x in parallax)
        if not (np.isfinite(value) and value > 0 and np.isfinite(error) and error > 0):
            raise InputError(f"the trigonometric parallax must be positive with a positive "
                             f"error to be combined with the orbit; got {value} +/- {error} mas")
    source = "covariance" if draws is None else "posterior"
    if draws is None:
        draws = parameter_draws(sol, n_draws, seed)
    n_draws = len(draws)
    d = dict(zip(sol.parameters, np.asarray(draws, float).T))
    trig = None
    if parallax is not None:
        rng = np.random.default_rng(np.random.SeedSequence(seed).spawn(1)[0])
        trig = rng.normal(value, error, n_draws)
    mass = {"draws": int(n_draws), "seed": int(seed), "draws_source": source}
    if sol.double_lined:
        blocks = _double_lined(d, trig, parallax, combine, mass)
    else:
        blocks = _single_lined(sol, d, trig, parallax, mass)
    mass["warnings"] = blocks["warnings"]
    return blocks


def _double_lined(d, trig, parallax, combine, mass):
    a_au = semi_major_axis_au_from_rv(d["K1"], d["K2"], d["P"], d["e"], d["i"])
    orbital = 1e3 * d["a"] / a_au
    plx_orb = _interval(orbital, "mas")
    blocks = {"orbital_parallax": plx_orb, "warnings": []}
    if parallax is None:
        m1, m2 = component_masses_from_orbit(a_au, d["P"], d["K1"], d["K2"])
        mass["parallax_used"] = "orbital"
        blocks["parallax"] = {**plx_orb, "kind": "orbital"}
    else:
        value, error = parallax
        sigma = float(np.hypot(plx_orb["error"], error))
        agreement = (plx_orb["value"] - value) / sigma
        block = {"value": value, "error": error, "unit": "mas", "kind": "trigonometric",
                 "orbital": {**plx_orb, "agreement_sigma": float(agreement)}}
        if abs(agreement) > 3.0:
            blocks["warnings"].append(
                f"The orbital parallax ({fmt.value_error(plx_orb['value'], plx_orb['error'], 'mas')}"
                f") and the trigonometric one ({fmt.value_error(value, error, 'mas')}) differ "
                f"by {agreement:+.1f} sigma.")
        if combine:
            w_orb, w_trig = 1.0 / plx_orb["error"] ** 2, 1.0 / error**2
            mixed = (w_orb * orbital + w_trig * trig) / (w_orb + w_trig)
            total = total_mass_msun(d["a"], mixed, d["P"])
            q = d["K1"] / d["K2"]
            m1, m2 = total / (1.0 + q), total * q / (1.0 + q)
            block["combined"] = {
                "value": float((w_orb * plx_orb["value"] + w_trig * value) / (w_orb + w_trig)),
                "error": float(1.0 / np.sqrt(w_orb + w_trig)), "unit": "mas",
                "rule": "inverse-variance weighted mean of the orbital and trigonometric "
                        "parallaxes"}
            mass["parallax_used"] = "combined"
        else:
            m1, m2 = component_masses_from_orbit(a_au, d["P"], d["K1"], d["K2"])
            mass["parallax_used"] = "orbital"
        blocks["parallax"] = block
    mass.update(total=summarise(m1 + m2, "solMass"), primary=summarise(m1, "solMass"),
                secondary=summarise(m2, "solMass"))
    blocks["mass"] = mass
    return blocks


def _single_lined(sol, d, trig, parallax, mass):
    """Mass function, and with a parallax the masses through the measured component's orbit."""
    key, = sol.data.amplitude_keys()          # 'K1' or 'K2', the measured component
    f_key = mass_function_msun(d[key], d["P"] * _DAYS_PER_YEAR, d["e"])
    blocks = {"mass_function": {**summarise(f_key, "solMass"), "component": int(key[1])},
              "warnings": []}
    if parallax is None:
        blocks["warnings"].append("Single-lined velocities and no parallax: only the mass "
                                  "function is known; give --parallax for the masses.")
        return blocks
    value, error = parallax
    total = total_mass_msun(d["a"], trig, d["P"])
    # a_k / a = share of the OTHER component's mass (a1 = a M2 / (M1 + M2))
    share = semi_major_axis_au_from_rv(d[key], 0.0, d["P"], d["e"], d["i"]) / (
        d["a"] / (1e-3 * trig))
    other = total * share
    m1, m2 = (total - other, other) if key == "K1" else (other, total - other)
    if np.any(share >= 1.0):
        blocks["warnings"].append(f"In {np.mean(share >= 1.0):.0%} of the draws the measured "
                                  f"component's orbit exceeds the relative orbit (a{key[1]} "
                                  f">= a): velocities and parallax are inconsistent there.")
    mass["parallax_used"] = "trigonometric"
    mass.update(total=summarise(total, "solMass"), primary=summarise(m1, "solMass"),
                secondary=summarise(m2, "solMass"))
    blocks["parallax"] = {"value": value, "error": error, "unit": "mas",
                          "kind": "trigonometric"}
    blocks["mass"] = mass
    return blocks


# ------------------------------------------------------------------ joint posterior
class JointPosterior:
    """Log-posterior of the joint parameters given positions and velocities.

    Sampled coordinates (``names``), one for each fitted parameter (``sol.keys``; held
    elements are not sampled): ln P [P in yr], T [Julian yr], e, ln a [a in arcsec],
    cos i, Omega [deg], omega [deg], gamma [km/s], K1 and/or K2 [km/s].

    Priors: ``PRIORS`` (``priors`` names the held elements instead). ln L = -chi2/2 of
    ``joint_residuals``, with every sigma scaled by sqrt(reduced chi2) of the joint fit
    when that exceeds 1, as for the fit's own errors.
    """

    E_MAX = 0.99
    PRIORS = {"P": "log-uniform over the visual fit's period search range",
              "T": "uniform over one period (density 1/P); reported in the period centred on "
                   "the best T",
              "e": "uniform on [0, 0.99)", "a": "log-uniform from 1/100 to 100 times the best a",
              "i": "uniform in cos i (isotropic orientation)",
              "Omega": "uniform on the circle; reported in [0, 360) deg",
              "omega": "uniform on the circle; reported in [0, 360) deg",
              "gamma": "uniform",
              "K": "uniform on [0, inf): positive, so the node is not mimicked by a sign change"}
    #: Walker coordinate of a parameter sampled in a transformed scale.
    COORDINATES = {"P": "ln_P", "a": "ln_a", "i": "cos_i"}

    def __init__(self, sol):
        self.keys = sol.keys
        self.held = dict(sol.held)
        self.names = tuple(self.COORDINATES.get(k, k) for k in sol.keys)
        self.priors = {**self.PRIORS, **_held_priors(sol)}
        scale = np.sqrt(max(sol.reduced_chi2, 1.0))
        d = sol.data
        self.data = dataclasses.replace(
            d, sigma_theta_deg=d.sigma_theta_deg * scale,
            sigma_rho_arcsec=d.sigma_rho_arcsec * scale, sigma_rv_kms=d.sigma_rv_kms * scale)
        self.sigma_scale = float(scale)
        self.ln_p_range = np.log(sol.visual.statistics["period_range_yr"])
        self.ln_a_range = np.log(sol.values["a"]) + np.log(100.0) * np.array([-1.0, 1.0])
        self.t_ref = sol.values["T"]

    def values(self, q):
        """Every joint parameter in ``PARAMETER_UNITS`` from walker coordinates q, (n, ndim);
        held elements at their values."""
        q = np.atleast_2d(q)
        v = {k: np.full(len(q), x) for k, x in self.held.items()}
        for k, x in zip(self.keys, q.T):
            v[k] = (np.exp(x) if k in ("P", "a") else
                    np.degrees(np.arccos(np.clip(x, -1.0, 1.0))) if k == "i" else x)
        return v

    def coordinates(self, values):
        """Walker coordinates of a dict of joint parameters."""
        return np.array([np.log(values[k]) if k in ("P", "a") else
                         np.cos(np.radians(values[k])) if k == "i" else values[k]
                         for k in self.keys], float)

    def _inside(self, q):
        """Walkers inside the prior's support."""
        limits = {"ln_P": self.ln_p_range, "ln_a": self.ln_a_range, "cos_i": (-1.0, 1.0),
                  "e": (0.0, self.E_MAX), "K1": (0.0, np.inf), "K2": (0.0, np.inf)}
        inside = np.ones(len(q), bool)
        for name, x in zip(self.names, q.T):
            if name in limits:
                lo, hi = limits[name]
                inside &= (x >= lo) & ((x < hi) if name == "e" else (x <= hi))
        return inside

    def __call__(self, q):
        q = np.atleast_2d(q)
        inside = self._inside(q)
        out = np.full(len(q), -np.inf)
        if inside.any():
            v = {k: x[:, None] for k, x in self.values(q[inside]).items()}
            r = joint_residuals(v, self.data)
            out[inside] = -0.5 * np.einsum("ij,ij->i", r, r)
            if "P" in self.keys and "T" in self.keys:  # T's density 1/P, in ln P; none if held
                out[inside] -= q[inside, self.keys.index("P")]
        return out


def sample_combined(sol, walkers=40, steps=2000, seed=0, progress=False):
    """Sample the joint posterior (``JointPosterior``) with ``sampling.sample_posterior``.

    Walkers start around the least-squares solution with ball sizes from its errors.

    Returns
    -------
    draws : ndarray, shape (n, len(sol.parameters))
        Draws in ``PARAMETER_UNITS`` (T in the period centred on the best T; Omega and
        omega each within 180 deg of its best value, so a summary interval may cross
        0 deg; held elements constant at their values), ready for ``combined_blocks``.
    info : dict
        Walkers, steps, burn, thin, acceptance, converged, seed, sigma scale, priors, the
        held elements (document units) and the sampler's warnings, for the result document.
    """
    from .sampling import sample_posterior

    if sol.covariance is None:
        raise InputError("the combined fit has no covariance: cannot size the walkers' start")
    post = JointPosterior(sol)
    best = post.coordinates(sol.values)
    scales = np.array([sol.errors[k] / sol.values[k] if k in ("P", "a") else
                       np.sin(np.radians(sol.values["i"])) * np.radians(sol.errors[k])
                       if k == "i" else sol.errors[k] for k in sol.keys])
    sample = sample_posterior(post, [best], scales, post.names, walkers=walkers, steps=steps,
                              seed=seed, progress=progress)
    v = post.values(sample.draws())
    if "T" not in sol.held:
        v["T"] = nearest_passage(v["T"], v["P"], post.t_ref)
    v["Omega"], v["omega"] = centre_angles(v["Omega"], v["omega"], sol.values["Omega"],
                                           sol.values["omega"], 360.0)
    v.update({k: np.full(len(v["T"]), x) for k, x in sol.held.items()})  # exactly as held
    info = {"walkers": int(walkers), "steps": int(steps), "burn": int(sample.burn),
            "thin": int(sample.thin), "n_draws": int(len(sample.draws())),
            "acceptance": float(sample.acceptance), "converged": bool(sample.converged),
            "seed": int(seed), "sigma_scale": post.sigma_scale, "priors": dict(post.priors),
            "fixed": _held_in_document(sol), "warnings": list(sample.warnings)}
    return np.column_stack([v[k] for k in sol.parameters]), info


# ------------------------------------------------------------------- result document
def _entry(value, error, unit):
    return {"value": float(value), "error": None if error is None else float(error),
            "unit": unit}


def _held_in_document(sol):
    """The held elements in document units: as given (T in the log's epoch scale), and a
    circular orbit's omega = 0 by convention (``elements.held_elements``)."""
    return {k: float(v) for k, v in held_elements(sol.visual.options.fixed).items()}


def _held_priors(sol):
    """The priors' words for the held elements: by --fix, or by the circular convention."""
    from .priors import held_words

    convention = convention_held(sol.visual.options.fixed)
    return {k: held_words(v, k in convention) for k, v in _held_in_document(sol).items()}


def _thiele_innes(sol):
    """A, B, F, G [arcsec] and errors propagated from (a, i, Omega, omega) (held: none)."""
    names = ("a", "i", "Omega", "omega")
    x = np.array([sol.values[k] for k in names])

    def ti(x):
        return np.array(thiele_innes_from_campbell(x[0], *np.radians(x[1:])))

    best = ti(x)
    if sol.covariance is None:
        return {k: _entry(best[j], None, "arcsec") for j, k in enumerate("ABFG")}
    idx = [sol.parameters.index(k) for k in names]
    jac = np.column_stack([(ti(x + h) - ti(x - h)) / 2e-6 for h in 1e-6 * np.eye(4)])
    cov = jac @ sol.full_covariance()[np.ix_(idx, idx)] @ jac.T
    return {k: _entry(best[j], np.sqrt(max(cov[j, j], 0.0)), "arcsec")
            for j, k in enumerate("ABFG")}


def _rv_rows(sol):
    vs, scale = sol.velocities, sol.velocities.epoch_scale
    model = rv_model(sol.values, vs.epoch_yr, vs.component)
    status = np.where(vs.usable, "used", "excluded")
    rows = [{"line": int(vs.line[k]), "epoch": float(from_julian_year(vs.epoch_yr[k], scale)),
             "epoch_text": str(vs.epoch_text[k]), "epoch_yr": float(vs.epoch_yr[k]),
             "component": int(vs.component[k]), "rv": float(vs.rv_kms[k]),
             "sigma": float(vs.sigma_rv_kms[k]), "model": float(model[k]),
             "residual": float(vs.rv_kms[k] - model[k]), "status": str(status[k]),
             "reason": "" if vs.usable[k] else "excluded by the log's flag column",
             "note": str(vs.note[k])} for k in range(len(vs))]
    rows += [{"line": int(p.line), "status": "rejected",
              "reason": (f"column '{p.column}': " if p.column else "") + p.reason}
             for p in vs.rejected]
    return sorted(rows, key=lambda r: r["line"])


def _update_astrometry(doc, sol):
    """Elements, Thiele-Innes constants, covariance and position residuals of the joint orbit.

    Held elements keep "fixed": true, no error, and their values as given."""
    scale = sol.visual.data.epoch_scale
    for k in ELEMENT_KEYS:
        doc["elements"][k].update(value=float(sol.values[k]), error=sol.errors[k])
    t = doc["elements"]["T"]
    t["value"] = float(from_julian_year(sol.values["T"], scale))
    if t["error"] is not None:
        t["error"] = float(interval_in_scale(t["error"], scale))
    for k, value in _held_in_document(sol).items():
        doc["elements"][k].update(value=value, error=None, fixed=True)
    doc["thiele_innes"] = _thiele_innes(sol)
    doc["covariance"] = None if sol.covariance is None else {
        "parameters": list(ELEMENT_KEYS), "matrix": sol.full_covariance()[:7, :7].tolist(),
        "units": "P yr, T Julian yr, e, a arcsec, i Omega omega deg; held elements' rows "
                 "and columns zero"}
    theta_pred, rho_pred = predict_theta_rho(_orbit_params(sol.values), sol.visual.data.epoch_yr)
    rows = [r for r in doc["residuals"] if r["status"] != "rejected"]
    for r, tp, rp in zip(rows, theta_pred, rho_pred):  # both in the data's row order
        theta_obs = r["theta_deg"] + (180.0 if r["status"] == "flipped" else 0.0)
        r.update(theta_pred_deg=float(tp), rho_pred_arcsec=float(rp),
                 d_theta_deg=float(wrap_degrees(theta_obs - tp)),
                 d_rho_arcsec=float(r["rho_arcsec"] - rp))
    return [r for r in rows if r["status"] in ("used", "flipped")]


def _posterior_summary(sol, draws):
    """Median and 68 %, 95 % intervals of each joint parameter (draws of ``sol.parameters``);
    T in the log's epoch scale; a held element its value as given, with "fixed": true."""
    scale = sol.visual.data.epoch_scale
    held = _held_in_document(sol)
    out = {}
    for j, k in enumerate(sol.parameters):
        values = draws[:, j] if k != "T" else from_julian_year(draws[:, j], scale)
        out[k] = summarise(values, PARAMETER_UNITS[k])
        if k in held:
            out[k].update(dict.fromkeys(("low95", "low", "value", "high", "high95"), held[k]),
                          fixed=True)
        if k == "T":
            out[k]["scale"] = scale
    return out


def add_to_document(doc, sol, blocks, posterior=None):
    """Write a combined solution and its blocks into a visual fit's result document.

    The elements (Omega now in [0, 360)), Thiele-Innes constants, covariance, position
    residuals and statistics become those of the joint fit; "gamma", "K1", "K2", "node",
    "combined", "velocities", "rv_residuals" and the blocks of ``combined_blocks`` are added.
    ``posterior``: (draws, info) of ``sample_combined``, summarised in
    doc["combined"]["posterior"] (median, 68 % and 95 % intervals of every parameter, T in
    the log's epoch scale).
    """
    from .solution import undetermined_warning

    visual_verdict = undetermined_warning(doc["elements"])
    fitted = _update_astrometry(doc, sol)
    joint_verdict = undetermined_warning(doc["elements"])
    s = doc["statistics"]
    vs = sol.velocities
    rv_res = (vs.rv_kms - rv_model(sol.values, vs.epoch_yr, vs.component))[vs.usable]
    s.update(chi2=sol.chi2, dof=sol.dof, reduced_chi2=sol.reduced_chi2,
             errors_scaled=sol.errors_scaled, chi2_astrometric=sol.chi2_astrometric,
             chi2_rv=sol.chi2_rv, n_rv_used=int(vs.usable.sum()),
             n_rv_excluded=int((~vs.usable).sum()), n_rv_rejected=len(vs.rejected),
             rms_theta_deg=float(np.sqrt(np.mean([r["d_theta_deg"] ** 2 for r in fitted]))),
             rms_rho_arcsec=float(np.sqrt(np.mean([r["d_rho_arcsec"] ** 2 for r in fitted]))),
             rms_rv_kms=float(np.sqrt(np.mean(rv_res**2))))
    for k in ("gamma", "K1", "K2"):
        if k in sol.keys:
            doc[k] = _entry(sol.values[k], sol.errors[k], "km/s")
    other = sol.other_node
    chosen = (f"chosen by the held {_held_words(sol)} (--fix)" if sol.held_angles else
              "fixed by the radial velocities")
    doc["node"] = {"Omega_deg": float(sol.values["Omega"]),
                   "omega_deg": float(sol.values["omega"]),
                   "other": {"Omega_deg": float(other["values"]["Omega"]),
                             "omega_deg": float(other["values"]["omega"]),
                             "chi2": float(other["chi2"])},
                   "delta_chi2": float(sol.node_delta_chi2),
                   "decisive": bool(abs(sol.node_delta_chi2) >= NODE_DECISIVE_DELTA_CHI2),
                   "held": list(sol.held_angles),
                   "note": f"{chosen}; Omega runs over [0, 360) deg"}
    doc["combined"] = {
        "parameters": list(sol.keys),
        "units": {k: PARAMETER_UNITS[k] for k in sol.keys},
        "covariance": None if sol.covariance is None else sol.covariance.tolist(),
        "fixed": _held_in_document(sol),
        "visual_chi2": float(sol.visual.chi2), "visual_dof": int(sol.visual.dof),
        "double_lined": sol.double_lined,
        "weighting": "each datum by its own sigma (no relative factor)"}
    if posterior is not None:
        draws, info = posterior
        doc["combined"]["posterior"] = {**info, "parameters": _posterior_summary(sol, draws)}
        doc["warnings"].extend(f"Joint posterior: {w}" for w in info["warnings"])
    doc["velocities"] = {"source": str(vs.source), "n_input": int(vs.n_lines or len(vs)),
                         "n_used": int(vs.usable.sum()), "n_excluded": int((~vs.usable).sum()),
                         "n_rejected": len(vs.rejected), "epoch_scale": vs.epoch_scale}
    doc["rv_residuals"] = _rv_rows(sol)
    # The visual fit's words on the node ambiguity (and on a held angle moved to [0, 180)),
    # on its error scaling and on undetermined elements are not about the joint elements.
    doc["notes"] = [n for n in doc["notes"] if "[0, 180)" not in n
                    and not n.startswith("Uncertainties were scaled")] + sol.notes
    doc["warnings"] = [w for w in doc["warnings"] if "[0, 180)" not in w
                       and w != visual_verdict] + [w for w in (joint_verdict,) if w] + sol.warnings
    for key in ("orbital_parallax", "parallax", "mass", "mass_function"):
        if key in blocks:
            doc[key] = blocks[key]
    doc["warnings"].extend(blocks.get("warnings", []))
    return doc


def _node_line(node):
    """The node choice in one line: kept (or held) and how the other one fits."""
    delta = node["delta_chi2"]
    kept = "held (--fix)" if node.get("held") else "kept"
    line = (f"  node: Omega = {node['Omega_deg']:.2f} deg {kept}; Omega = "
            f"{node['other']['Omega_deg']:.2f} deg fits {'worse' if delta >= 0 else 'BETTER'} "
            f"by delta chi2 = {abs(delta):.1f}")
    if not node["decisive"]:
        return line + " (NOT decisive)"
    return line + (": the velocities prefer it" if delta < 0 else "")


def format_combined(doc):
    """Plain-text summary of the combined-solution keys of a result document."""
    s, node, v = doc["statistics"], doc["node"], doc["velocities"]
    out = [f"Combined with radial velocities ({v['source']}: {v['n_used']} used, "
           f"{v['n_excluded']} excluded, {v['n_rejected']} rejected)"]
    out += [f"  {label:<26}{fmt.value_error(doc[k]['value'], doc[k].get('error'), 'km/s')}"
            for k, label in
            (("gamma", "gamma (systemic velocity)"), ("K1", "K1 (primary)"),
             ("K2", "K2 (secondary)")) if k in doc]
    out.append(_node_line(node))
    out.append(f"  chi2 {s['chi2']:.2f} for {s['dof']} degrees of freedom: astrometry "
               f"{s['chi2_astrometric']:.2f}, velocities {s['chi2_rv']:.2f} "
               f"(rms {s['rms_rv_kms']:.3f} km/s)")
    post = doc["combined"].get("posterior")
    if post:
        out.append(f"  joint posterior: {post['walkers']} walkers x {post['steps']} steps, "
                   f"{post['n_draws']} draws, acceptance {post['acceptance']:.2f}, "
                   f"{'converged' if post['converged'] else 'NOT converged'}, seed {post['seed']}")
    if "orbital_parallax" in doc:
        o = doc["orbital_parallax"]
        value, low, high = fmt.interval_parts(o["value"], o["low"], o["high"])
        out.append(f"  orbital parallax {value} mas, 68% [{low}, {high}]")
    plx = doc.get("parallax", {})
    if "agreement_sigma" in plx.get("orbital", {}):
        out.append(f"  orbital - trigonometric parallax: "
                   f"{plx['orbital']['agreement_sigma']:+.2f} sigma")
    if "combined" in plx:
        c = plx["combined"]
        out.append(f"  combined parallax {fmt.value_error(c['value'], c['error'], 'mas')} "
                   f"({c['rule']})")
    if "mass_function" in doc:
        f = doc["mass_function"]
        value, low, high = fmt.interval_parts(f["value"], f["low"], f["high"])
        out.append(f"  mass function f(M) of component {f['component']}: {value} "
                   f"M_sun, 68% [{low}, {high}]")
    if "mass" in doc:
        m = doc["mass"]
        out.append(f"Masses (parallax used: {m['parallax_used']}; draws of the "
                   f"{m['draws_source']})")
        out.append(format_mass_blocks({"mass": m, "parallax": plx, "warnings": []}))
    return "\n".join(out)
