"""The orbit solution object and its result document (schema orbweigh.result/1)."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import formatting as fmt
from .elements import (
    CIRCULAR_NOTE, ELEMENT_KEYS, ELEMENT_UNITS, CampbellElements, campbell_from_thiele_innes,
    convention_held, held_angles_as_reported, phase_in_periastron, turn_node,
)
from .model import predict_theta_rho, wrap_degrees
from .reductions import epoch_unit, from_julian_year, interval_in_scale
from .result import SCHEMA

__all__ = ["OrbitSolution", "build_solution", "campbell_covariance", "undetermined_elements",
           "undetermined_warning", "undetermined_advice", "require_determined"]

_PHASE_BINS = 20


@dataclass
class OrbitSolution:
    """Best apparent orbit of a log, with uncertainties and a row-by-row account.

    Attributes
    ----------
    data : MeasurementSet
        The log that was fitted.
    params : ndarray
        Best (P, T, e, A, B, F, G) [yr, Julian yr, -, arcsec x4].
    fit_covariance : ndarray or None
        Covariance of ``params`` (scaled by the reduced chi2 when > 1).
    elements : CampbellElements
        Best Campbell elements (Omega in [0, 180) deg, T a Julian year).
    covariance : ndarray or None
        Covariance of (P, T, e, a, i, Omega, omega) [yr, Julian yr, -, arcsec, deg x3].
    errors : dict
        1-sigma error of each element keyed P, T, e, a, i, Omega, omega (None if unknown).
    thiele_innes, thiele_innes_errors : dict
        A, B, F, G [arcsec] and their 1-sigma errors.
    status : ndarray of str
        Per row of ``data``: 'used', 'flipped', 'outlier' or 'excluded'.
    theta_pred_deg, rho_pred_arcsec, d_theta_deg, d_rho_arcsec : ndarray
        Predictions and O-C per row of ``data`` (flipped rows after correction).
    chi2, dof, reduced_chi2 : float
        Of the final fit (outliers and excluded rows left out).
    errors_scaled : bool
        Whether the covariance was scaled by the reduced chi2.
    alternatives : list of (CampbellElements, float)
        Other distinct minima and their chi2.
    sigma_factor : ndarray
        Per row of ``data``: the technique's sigma factor the fit applied (1 without
        ``technique_scales`` and for excluded rows).
    warnings : list of str
        Plain-language caveats.
    """

    data: object
    params: np.ndarray
    fit_covariance: np.ndarray | None
    elements: CampbellElements
    covariance: np.ndarray | None
    errors: dict
    thiele_innes: dict
    thiele_innes_errors: dict
    status: np.ndarray
    theta_pred_deg: np.ndarray
    rho_pred_arcsec: np.ndarray
    d_theta_deg: np.ndarray
    d_rho_arcsec: np.ndarray
    chi2: float
    dof: int
    reduced_chi2: float
    errors_scaled: bool
    alternatives: list
    statistics: dict
    options: object
    sigma_factor: np.ndarray | None = None
    warnings: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def __repr__(self):
        el = self.elements
        return (f"<OrbitSolution P={el.period_yr:.4g} yr e={el.e:.3f} a={el.a_arcsec:.4g}\" "
                f"i={el.i_deg:.1f} chi2/dof={self.chi2:.1f}/{self.dof}, "
                f"{len(self.alternatives)} alternatives, {len(self.warnings)} warnings>")

    def to_document(self):
        """The result document (a JSON-ready dict), schema orbweigh.result/1."""
        from . import __version__
        scale = self.data.epoch_scale
        doc = {"schema": SCHEMA, "source": str(self.data.source),
               "elements": _elements_block(self.elements, self.errors, scale,
                                           self.options.held),
               "thiele_innes": {k: _entry(self.thiele_innes[k], self.thiele_innes_errors[k],
                                          "arcsec") for k in "ABFG"},
               "covariance": None if self.covariance is None else {
                   "parameters": list(ELEMENT_KEYS), "matrix": self.covariance.tolist(),
                   "units": "P yr, T Julian yr, e, a arcsec, i Omega omega deg"},
               "statistics": {k: _plain(v) for k, v in self.statistics.items()},
               "residuals": self._residual_rows(),
               "alternatives": [{"elements": _elements_block(el, None, scale),
                                 "chi2": float(c), "delta_chi2": float(c - self.chi2)}
                                for el, c in self.alternatives],
               "options": {"period_range_yr": list(map(float, self.statistics["period_range_yr"])),
                           "loss": self.options.loss, "flips": self.options.flips,
                           "outlier_sigma": self.options.outlier_sigma,
                           "technique_scales": bool(self.options.technique_scales),
                           "alternative_delta_chi2": self.options.alternative_delta_chi2},
               "fit": {"fixed": {k: float(v) for k, v in self.options.fixed.items()},
                       "period_bounds": (None if self.options.period_bounds is None else
                                         [float(p) for p in self.options.period_bounds])},
               "precession": dict(self.data.meta.get("precession") or {"applied": False}),
               "warnings": list(self.warnings), "notes": list(self.notes),
               "seed": int(self.options.seed), "version": __version__}
        return doc

    def _residual_rows(self):
        d = self.data
        scaled = bool(self.options.technique_scales)
        factor = np.asarray(self.sigma_factor, float)
        root_w = np.sqrt(d.weight)
        reasons = {s: _reason(s, self.options) for s in set(self.status.tolist())}
        columns = zip(d.line.tolist(), from_julian_year(d.epoch_yr, d.epoch_scale).tolist(),
                      d.epoch_text.tolist(), d.epoch_yr.tolist(), d.theta_deg.tolist(),
                      d.rho_arcsec.tolist(), (factor * d.sigma_theta_deg / root_w).tolist(),
                      (factor * d.sigma_rho_arcsec / root_w).tolist(), factor.tolist(),
                      d.technique.tolist(), d.technique_input.tolist(),
                      self.theta_pred_deg.tolist(), self.rho_pred_arcsec.tolist(),
                      self.d_theta_deg.tolist(), self.d_rho_arcsec.tolist(),
                      self.status.tolist(), d.note.tolist())
        rows = [{"line": line, "epoch": epoch, "epoch_text": str(text), "epoch_yr": t,
                 "theta_deg": theta, "rho_arcsec": rho, "sigma_theta_deg": s_theta,
                 "sigma_rho_arcsec": s_rho, **({"sigma_factor": f} if scaled else {}),
                 "technique": str(technique), "technique_text": str(technique_text),
                 "theta_pred_deg": theta_pred, "rho_pred_arcsec": rho_pred,
                 "d_theta_deg": d_theta, "d_rho_arcsec": d_rho, "status": str(status),
                 "reason": reasons[status], "note": str(note)}
                for (line, epoch, text, t, theta, rho, s_theta, s_rho, f, technique,
                     technique_text, theta_pred, rho_pred, d_theta, d_rho, status, note)
                in columns]
        for problem in d.rejected:
            rows.append({"line": int(problem.line), "status": "rejected",
                         "reason": (f"column '{problem.column}': " if problem.column else "")
                         + problem.reason})
        rows.sort(key=lambda r: r["line"])
        return rows


def _reason(status, options):
    return {"used": "", "flipped": "theta corrected by 180 deg (quadrant error)",
            "outlier": f"beyond {options.outlier_sigma:g} sigma, left out of the fit",
            "excluded": "excluded by the log's flag column"}[str(status)]


def _plain(value):
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    if isinstance(value, (tuple, np.ndarray)):
        return [_plain(v) for v in value]
    return value


def _entry(value, error, unit):
    return {"value": float(value), "error": None if error is None else float(error),
            "unit": unit}


def _elements_block(elements, errors, scale, fixed=()):
    """Elements in the document's units; held ones carry "fixed": true and no error."""
    values = elements.to_keys()
    block = {}
    for k in ELEMENT_KEYS:
        err = None if errors is None or k in fixed else errors.get(k)
        block[k] = _entry(values[k], err, ELEMENT_UNITS[k])
        if k in fixed:
            block[k]["fixed"] = True
    block["T"]["value"] = float(from_julian_year(values["T"], scale))
    if block["T"]["error"] is not None:
        block["T"]["error"] = float(interval_in_scale(block["T"]["error"], scale))
    block["T"].update(unit=epoch_unit(scale), scale=scale)
    return block


def _campbell_vector(params):
    """(P, T, e, a, i, Omega, omega) [angles in deg] from (P, T, e, A, B, F, G)."""
    a, i, node, omega = campbell_from_thiele_innes(*params[3:])
    return np.array([params[0], params[1], params[2], a,
                     np.degrees(i), np.degrees(node), np.degrees(omega)], float)


def _campbell_solution(best, scale, held, t_ref):
    """Campbell elements of a refined solution and their covariance (errors scaled).

    Taken as refined when the refinement ran in Campbell elements (a held angle then
    stays exactly as held, even face-on), otherwise from the Thiele-Innes constants.
    Omega is brought into [0, 180); where that turns a held omega of a circular orbit it
    moves T by half a period instead (``elements.turn_node``), and T is then taken to
    the passage nearest ``t_ref`` (the covariance carried along, T + c P).
    """
    if best.campbell is None:
        return _campbell_vector(best.params), (
            None if best.covariance is None else
            campbell_covariance(best.params, best.covariance * scale))
    vec = np.array(best.campbell, float)      # i is bounded to [0, 180] there
    cov = None if best.campbell_covariance is None else best.campbell_covariance * scale
    shift = np.floor(vec[5] / 180.0) * 180.0   # in degrees, so a held 60 stays 60.0
    phase = phase_in_periastron(held)
    node, omega, t_peri = turn_node(vec[5], vec[6], vec[1], vec[0], shift, phase)
    vec[5], vec[6] = node, np.mod(omega, 360.0)
    if phase:
        turns = (t_peri - vec[1]) / vec[0] - np.round((t_peri - t_ref) / vec[0])
        vec[1] += turns * vec[0]
        if cov is not None:
            jac = np.eye(7)
            jac[1, 0] = turns
            cov = jac @ cov @ jac.T
    return vec, cov


def campbell_covariance(params, fit_covariance):
    """Propagate the (P, T, e, A, B, F, G) covariance to Campbell elements.

    The Jacobian of (a, i, Omega, omega) with respect to (A, B, F, G) is the inverse of
    the analytic forward one (``refine.thiele_innes_jacobian``): no finite step, so none
    can cross the Omega = 0/180 deg seam where omega jumps by 180 deg. It is singular
    only for an exactly face-on orbit, where Omega and omega are individually undefined
    (the pseudo-inverse then gives finite but meaningless angle errors; a warning says so).
    """
    from .refine import thiele_innes_jacobian

    vec = _campbell_vector(np.asarray(params, float))
    jac = np.eye(7)
    forward = thiele_innes_jacobian(*vec[3:])
    try:
        jac[3:, 3:] = np.linalg.inv(forward)
    except np.linalg.LinAlgError:
        jac[3:, 3:] = np.linalg.pinv(forward)
    return jac @ fit_covariance @ jac.T


def build_solution(data, rows, points, best, alternatives, flipped, outlier, options,
                   period_range, n_trials, fit_seconds, sigma_factor=None,
                   technique_scales=None):
    """Assemble an ``OrbitSolution`` from the fit's pieces (see fitting.fit_orbit).

    ``sigma_factor`` is the technique factor of each fitted row (``rows``), and
    ``technique_scales`` the document block of those factors (None when not estimated).
    """
    from .technique_weights import technique_statistics
    params = best.params
    n_fit = int((~outlier).sum())
    held = options.held
    dof = max(2 * n_fit - options.n_free, 1)
    reduced = best.chi2 / dof
    scale = max(reduced, 1.0)
    fit_cov = None if best.covariance is None else best.covariance * scale
    t_ref = float(np.mean(points.t[~outlier]))
    vec, cov = _campbell_solution(best, scale, held, t_ref)
    elements = CampbellElements(*vec)
    errors = {k: (None if cov is None or k in held
                  else float(np.sqrt(max(cov[j, j], 0.0))))
              for j, k in enumerate(ELEMENT_KEYS)}
    ti = dict(zip("ABFG", params[3:]))
    ti_err = {k: (None if fit_cov is None else float(np.sqrt(max(fit_cov[3 + j, 3 + j], 0.0))))
              for j, k in enumerate("ABFG")}

    status = np.where(data.usable, "used", "excluded").astype("<U8")
    status[rows[flipped]] = "flipped"
    status[rows[outlier]] = "outlier"
    all_flips = np.zeros(len(data), bool)
    all_flips[rows[flipped]] = True
    theta_obs = np.mod(data.theta_deg + 180.0 * all_flips, 360.0)
    theta_pred, rho_pred = predict_theta_rho(params, data.epoch_yr)
    d_theta = wrap_degrees(theta_obs - theta_pred)
    d_rho = data.rho_arcsec - rho_pred
    fitted = rows[~outlier]
    factor = np.ones(len(data))
    if sigma_factor is not None:
        factor[rows] = sigma_factor
    as_fitted = factor[fitted] / np.sqrt(data.weight[fitted])   # sigma factor and weight
    by_technique = technique_statistics(
        data.technique[fitted], d_theta[fitted] / (as_fitted * data.sigma_theta_deg[fitted]),
        d_rho[fitted] / (as_fitted * data.sigma_rho_arcsec[fitted]),
        d_theta[fitted], d_rho[fitted], options.n_free)
    stats = {
        "n_input": int(data.n_lines or len(data)), "n_used": n_fit,
        "n_rejected": len(data.rejected), "n_excluded": int((~data.usable).sum()),
        "n_flipped": int(flipped.sum()), "n_outliers": int(outlier.sum()),
        "chi2": float(best.chi2), "dof": int(dof), "reduced_chi2": float(reduced),
        "errors_scaled": bool(reduced > 1.0 and fit_cov is not None),
        "rms_theta_deg": float(np.sqrt(np.mean(d_theta[fitted] ** 2))),
        "rms_rho_arcsec": float(np.sqrt(np.mean(d_rho[fitted] ** 2))),
        "fit_seconds": float(fit_seconds),
        "epoch_first": float(from_julian_year(data.epoch_yr[fitted].min(), data.epoch_scale)),
        "epoch_last": float(from_julian_year(data.epoch_yr[fitted].max(), data.epoch_scale)),
        "phase_coverage": _phase_coverage(data.epoch_yr[fitted], params[0], params[1]),
        "period_range_yr": tuple(float(p) for p in period_range),
        "n_trials": int(n_trials),
        "techniques": by_technique,
    }
    if technique_scales is not None:
        stats["technique_scales"] = technique_scales
    alts = [(CampbellElements(*_campbell_solution(r, scale, held, t_ref)[0]), r.chi2)
            for r in alternatives]
    solution = OrbitSolution(
        data=data, params=params, fit_covariance=fit_cov, elements=elements, covariance=cov,
        errors=errors, thiele_innes=ti, thiele_innes_errors=ti_err, status=status,
        theta_pred_deg=theta_pred, rho_pred_arcsec=rho_pred, d_theta_deg=d_theta,
        d_rho_arcsec=d_rho, chi2=float(best.chi2), dof=int(dof), reduced_chi2=float(reduced),
        errors_scaled=stats["errors_scaled"], alternatives=alts, statistics=stats,
        options=options, sigma_factor=factor)
    solution.warnings.extend(_warnings(solution, data, rows, flipped, outlier, best))
    if convention_held(options.fixed):
        solution.notes.append(CIRCULAR_NOTE)
    if phase_in_periastron(held):
        solution.notes.append("Without radial velocities Omega is known only up to 180 deg: "
                              "for a circular orbit (Omega + 180, T + P/2) is the same "
                              "apparent orbit; Omega is given in [0, 180) deg.")
    else:
        solution.notes.append("Without radial velocities Omega and omega are known only up "
                              "to a common 180 deg shift; Omega is given in [0, 180) deg.")
    if solution.errors_scaled:
        solution.notes.append(f"Uncertainties were scaled by sqrt(reduced chi2) = "
                              f"{np.sqrt(reduced):.2f}.")
    return solution


def undetermined_elements(elements):
    """Of P and a, those whose error exceeds half the value (elements block of a document).

    An orbit with either undetermined gives no usable mass, parallax or plan."""
    return [k for k in ("P", "a") if isinstance(elements[k].get("error"), (int, float))
            and elements[k]["error"] > 0.5 * abs(elements[k]["value"])]


def undetermined_warning(elements):
    """The warning for an elements block whose P or a is undetermined; None otherwise."""
    bad = undetermined_elements(elements)
    if not bad:
        return None
    return (f"{' and '.join(bad)} undetermined (error above half the value): the data "
            "constrain only the motion along the observed arc. Do not use these elements, "
            "nor any mass from them.")


def undetermined_advice(doc, what):
    """None, or why ``what`` (e.g. 'a mass') cannot be given and which data would help."""
    bad = undetermined_elements(doc["elements"])
    if not bad and not _degenerate_fit(doc):
        return None
    el, stats = doc["elements"], doc.get("statistics", {})
    span = ""
    if "epoch_first" in stats and "epoch_last" in stats:
        span = (f" The fitted measurements span {stats['epoch_first']:.1f}-"
                f"{stats['epoch_last']:.1f}, a small part of the orbit.")
    if bad:
        values = ", ".join(f"{k} = {el[k]['value']:.3g} +- {el[k]['error']:.2g} "
                           f"{el[k]['unit']}" for k in bad)
        why = f"{' and '.join(bad)} undetermined ({values}; error above half the value)"
    else:
        why = ("the fit is degenerate (its covariance could not be estimated), so P and a "
               "have no uncertainty")
    return (f"{doc.get('source', 'this orbit')}: no {what}: {why}, and the mass goes as "
            f"a^3/P^2.{span} What would fix it: measurements over a longer arc (the arc's curvature fixes P "
            "and a), or a period or other element known independently, e.g. from "
            "spectroscopy, held with --fix.")


def _degenerate_fit(doc):
    """A fitted orbit (not published elements) left without any uncertainty."""
    return ("chi2" in (doc.get("statistics") or {}) and doc.get("covariance") is None
            and not (doc.get("posterior") or {}).get("draws_file"))


def require_determined(doc, what):
    """Raise FitError with ``undetermined_advice`` when P or a is undetermined."""
    from .errors import FitError

    advice = undetermined_advice(doc, what)
    if advice is not None:
        raise FitError(advice)


def _phase_coverage(t, period, t_peri):
    """Fraction of 20 equal bins of orbital phase holding at least one measurement."""
    phase = np.mod((t - t_peri) / period, 1.0)
    return float(np.unique((phase * _PHASE_BINS).astype(int)).size / _PHASE_BINS)


def _lines(data, idx):
    return fmt.line_list(data.line[idx])


#: A log longer than this without coordinates gets the precession warning (at 30 yr and
#: Dec 60 deg the neglected change in theta reaches about 0.3 deg).
_UNPRECESSED_SPAN_YR = 30.0


#: sin i below this (i within about 1 deg of 0 or 180) counts as face-on for a held angle.
_FACE_ON_SIN_I = 0.02


def _held_branch_note(fixed, el, phase):
    """Say so when a held Omega or omega is reported on the other node branch (with
    ``phase``, a circular orbit's held omega, the branch moves T by half a period)."""
    shown = held_angles_as_reported(fixed, el.node_deg, el.omega_deg)
    moved = [k for k in ("Omega", "omega") if k in fixed and shown[k] != fixed[k]]
    if not moved:
        return []
    from .formatting import number

    given = ", ".join(f"{k} = {number(float(fixed[k]), 6)}" for k in moved)
    if phase:
        return [f"Held {given} deg is reported as Omega = {number(float(el.node_deg), 6)} "
                "deg with T half a period away, the same apparent orbit: without radial "
                "velocities a circular orbit's (Omega, T) and (Omega + 180, T + P/2) cannot "
                "be told apart, and Omega is reported in [0, 180)."]
    return [f"Held {given} deg is reported as Omega = {number(float(el.node_deg), 6)}, "
            f"omega = {number(float(el.omega_deg), 6)} deg, the same apparent orbit: "
            "without radial velocities (Omega, omega) and (Omega + 180, omega + 180) "
            "cannot be told apart, and Omega is reported in [0, 180)."]


def _warnings(sol, data, rows, flipped, outlier, best):
    el, stats = sol.elements, sol.statistics
    out = []
    span = float(np.ptp(data.epoch_yr[rows[~outlier]]))
    if span < el.period_yr:
        out.append(f"The measurements span {span:.1f} yr, {100 * span / el.period_yr:.0f}% of "
                   f"the {el.period_yr:.1f} yr period: P, e, T and a rest on a partial arc "
                   "and may change with new data.")
    precession = data.meta.get("precession") or {}
    if not precession.get("applied") and np.ptp(data.epoch_yr) > _UNPRECESSED_SPAN_YR:
        out.append(f"The log spans {np.ptp(data.epoch_yr):.0f} yr but gives no coordinates of "
                   "the pair: the position angles stay in the equinox of each date, not "
                   "precessed, and the error grows with the span and the declination (about "
                   "0.0056 deg sin(RA) sec(Dec) a year). Give --target-ra and --target-dec.")
    if stats["phase_coverage"] < 0.5:
        out.append(f"Poor phase coverage: measurements fall in "
                   f"{100 * stats['phase_coverage']:.0f}% of the orbit's phase bins.")
    if stats["n_used"] < 15:
        out.append(f"Only {stats['n_used']} measurements were fitted; treat the orbit as "
                   "preliminary.")
    if sol.reduced_chi2 > 2.0:
        out.append(f"Reduced chi2 = {sol.reduced_chi2:.2f}: the quoted sigmas underestimate "
                   "the scatter; uncertainties were scaled up accordingly.")
    elif sol.reduced_chi2 < 0.3:
        out.append(f"Reduced chi2 = {sol.reduced_chi2:.2f}: the quoted sigmas look too large; "
                   "uncertainties may be overestimated.")
    undetermined = undetermined_warning(sol.to_document()["elements"])
    if undetermined:
        out.append(undetermined)
    bounds = sol.options.period_bounds
    if bounds is not None and "P" not in sol.options.fixed and any(
            abs(np.log(el.period_yr / b)) < 1e-3 for b in bounds):
        out.append(f"The period {el.period_yr:.4g} yr sits on the bound {bounds[0]:g}-"
                   f"{bounds[1]:g} yr: the data prefer a period outside it, so the elements "
                   "are those of the best orbit allowed, not of a minimum.")
    if sol.options.fixed:
        convention = "".join(f", and {k} = {v:g} by convention (circular orbit)"
                             for k, v in convention_held(sol.options.fixed).items())
        out.append("Held fixed (no error, not counted in the degrees of freedom): "
                   + ", ".join(f"{k} = {v:g}" for k, v in sol.options.fixed.items())
                   + convention + ".")
        out.extend(_held_branch_note(sol.options.fixed, el,
                                     phase_in_periastron(sol.options.held)))
    if best.covariance is None:
        out.append("The covariance could not be estimated (degenerate solution): "
                   "no uncertainties are given.")
    if sol.alternatives:
        deltas = ", ".join(f"{c - sol.chi2:.1f}" for _, c in sol.alternatives)
        out.append(f"{len(sol.alternatives)} other distinct orbit(s) fit nearly as well "
                   f"(delta chi2 = {deltas}); the solution is not unique.")
    if el.i_deg < 10 or el.i_deg > 170:
        out.append("Nearly face-on orbit: Omega and omega are individually poorly defined; "
                   "only their sum (or difference) is.")
    held_angles = [k for k in ("Omega", "omega") if k in sol.options.fixed]
    if held_angles and np.sin(np.radians(el.i_deg)) < _FACE_ON_SIN_I:
        out.append(f"With {' and '.join(held_angles)} held the fit went face-on "
                   f"(i = {fmt.number(float(el.i_deg), 3)} deg), where the held angle has no "
                   "effect: the data disfavour the held value. Check it, or free it.")
    if el.e < 0.05 and not phase_in_periastron(sol.options.held):
        out.append("Nearly circular orbit: omega and T are poorly defined.")
    kept = [f"{k} ({v['n_points']} points)" for k, v in
            (stats.get("technique_scales") or {}).get("factors", {}).items() if not v["estimated"]]
    if kept:
        from .technique_weights import MIN_POINTS
        out.append(f"Sigma factor not estimated, kept at 1, for {', '.join(kept)}: a technique "
                   f"needs at least {MIN_POINTS} fitted points for its own factor.")
    if flipped.any():
        out.append(f"{fmt.counted(int(flipped.sum()), 'measurement')} corrected for a 180 deg "
                   f"quadrant error ({_lines(data, rows[flipped])}).")
    if outlier.any():
        n_out = int(outlier.sum())
        out.append(f"{fmt.counted(n_out, 'measurement')} left out as "
                   f"{'an outlier' if n_out == 1 else 'outliers'} beyond "
                   f"{sol.options.outlier_sigma:g} sigma ({_lines(data, rows[outlier])}).")
    defaulted = np.flatnonzero(data.sigma_defaulted)
    if defaulted.size:
        out.append(f"{fmt.counted(defaulted.size, 'measurement')} had no sigma and used the "
                   f"technique's default ({_lines(data, defaulted)}).")
    if data.rejected:
        out.append(f"{fmt.counted(len(data.rejected), 'log line')} could not be used "
                   f"({fmt.line_list([p.line for p in data.rejected])}).")
    return out
