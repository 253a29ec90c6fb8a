"""A realistic result document for the report tests, built from known elements.

The measurements are predictions of a known orbit plus seeded Gaussian noise, with one
flipped, one outlying, one excluded and two rejected rows, a covariance, a mass block and
(optionally) a posterior draws ECSV file. Nothing here is fitted: the "fit" is the truth,
which is all the report needs.
"""
from __future__ import annotations

import json
from html.parser import HTMLParser

import numpy as np

from orbweigh.elements import ELEMENT_KEYS, CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.reductions import from_julian_year
from orbweigh.masses import mass_blocks

__all__ = ["TRUE_ELEMENTS", "ERRORS", "build_document", "write_document"]

#: An invented pair (T as a Julian year).
TRUE_ELEMENTS = CampbellElements(period_yr=36.2, periastron_yr=2008.4, e=0.46, a_arcsec=0.62,
                                 i_deg=63.0, node_deg=118.0, omega_deg=252.0)
ERRORS = {"P": 0.8, "T": 0.15, "e": 0.012, "a": 0.011, "i": 1.1, "Omega": 0.9, "omega": 1.6}
_CORRELATIONS = {("P", "a"): 0.55, ("P", "T"): 0.3, ("e", "T"): -0.25, ("Omega", "omega"): 0.2}
#: (technique class, as the log wrote it, rows, sigma_theta [deg], sigma_rho [arcsec])
_TECHNIQUES = (("micrometer", "micrometer", 12, 1.0, 0.05),
               ("speckle", "Speckle", 16, 0.4, 0.008),
               ("adaptive_optics", "adaptive_optics", 8, 0.2, 0.004))
_PARALLAX = {"value": 45.0, "error": 0.9}


def _covariance():
    corr = np.eye(7)
    for (p, q), r in _CORRELATIONS.items():
        i, j = ELEMENT_KEYS.index(p), ELEMENT_KEYS.index(q)
        corr[i, j] = corr[j, i] = r
    sig = np.array([ERRORS[k] for k in ELEMENT_KEYS])
    return corr * np.outer(sig, sig)


def _wrap(d):
    return (np.asarray(d) + 180.0) % 360.0 - 180.0


def _residuals(el, rng, scale_factor):
    rows, line = [], 2  # line 1 of the invented log is its header
    epochs = np.sort(rng.uniform(1978.0, 2024.5, sum(t[2] for t in _TECHNIQUES)))
    besselian = from_julian_year(epochs, "besselian")
    pred = ephemeris(el, epochs)
    k = 0
    for tech, written, n, s_theta, s_rho in _TECHNIQUES:
        for _ in range(n):
            theta = float(pred.theta_deg[k] + rng.normal(0, s_theta)) % 360.0
            rho = float(pred.rho_arcsec[k] + rng.normal(0, s_rho * scale_factor))
            rows.append({"line": line, "epoch": round(float(besselian[k]), 4),
                         "epoch_text": f"{besselian[k]:.4f}",
                         "epoch_yr": float(epochs[k]), "theta_deg": theta, "rho_arcsec": rho,
                         "sigma_theta_deg": s_theta, "sigma_rho_arcsec": s_rho * scale_factor,
                         "technique": tech, "technique_text": written,
                         "theta_pred_deg": float(pred.theta_deg[k]),
                         "rho_pred_arcsec": float(pred.rho_arcsec[k]),
                         "status": "used", "reason": "", "note": ""})
            line += 1
            k += 1
    rows[5].update(status="flipped", theta_deg=(rows[5]["theta_deg"] + 180.0) % 360.0,
                   reason="quadrant: position angle off by 180 deg, corrected")
    rows[9].update(status="outlier", theta_deg=rows[9]["theta_deg"] + 6.0,
                   rho_arcsec=rows[9]["rho_arcsec"] + 0.25 * scale_factor,
                   reason="residual beyond 4 sigma; down-weighted")
    rows[14].update(status="excluded", reason="flag column marks the row excluded",
                    note="poor seeing")
    for r in rows:
        flip = 180.0 if r["status"] == "flipped" else 0.0
        r["d_theta_deg"] = float(_wrap(r["theta_deg"] + flip - r["theta_pred_deg"]))
        r["d_rho_arcsec"] = r["rho_arcsec"] - r["rho_pred_arcsec"]
    rows += [{"line": line, "status": "rejected", "reason": "column 'rho': 'n/a' is not a number"},
             {"line": line + 1, "status": "rejected", "reason": "column 'epoch' is empty"}]
    return rows


def _statistics(rows, el):
    used = [r for r in rows if r["status"] in ("used", "flipped")]
    count = lambda s: sum(r["status"] == s for r in rows)  # noqa: E731
    dt = np.array([r["d_theta_deg"] for r in used])
    dr = np.array([r["d_rho_arcsec"] for r in used])
    chi2 = float(np.sum((dt / [r["sigma_theta_deg"] for r in used]) ** 2)
                 + np.sum((dr / [r["sigma_rho_arcsec"] for r in used]) ** 2))
    dof = 2 * len(used) - 7
    epochs = [r["epoch"] for r in rows if "epoch" in r]
    phases = np.mod((np.array([r["epoch_yr"] for r in used]) - el.periastron_yr) / el.period_yr, 1)
    return {"n_input": len(rows), "n_used": len(used), "n_rejected": count("rejected"),
            "n_excluded": count("excluded"), "n_flipped": count("flipped"),
            "n_outliers": count("outlier"), "chi2": chi2, "dof": dof,
            "reduced_chi2": chi2 / dof, "errors_scaled": False,
            "rms_theta_deg": float(np.sqrt(np.mean(dt**2))),
            "rms_rho_arcsec": float(np.sqrt(np.mean(dr**2))), "fit_seconds": 1.84,
            "epoch_first": min(epochs), "epoch_last": max(epochs),
            "phase_coverage": float(len(np.unique(np.floor(phases * 20))) / 20)}


def _thiele_innes(el, cov):
    # Errors by linear propagation with a numerical Jacobian (step 1e-6 of each element).
    best = np.array(el.as_tuple())
    f = lambda v: np.array(CampbellElements(*v).thiele_innes())  # noqa: E731
    jac = np.column_stack([(f(best + h) - f(best - h)) / 2e-6 for h in np.eye(7) * 1e-6])
    err = np.sqrt(np.diag(jac @ cov @ jac.T))
    return {k: {"value": float(v), "error": float(s), "unit": "arcsec"}
            for k, v, s in zip("ABFG", f(best), err)}


def _mass_blocks(draws, seed):
    # The masses module writes these blocks for 'orbweigh fit' and 'orbweigh mass'.
    return mass_blocks(draws[:, 0], draws[:, 3], parallax=(_PARALLAX["value"], _PARALLAX["error"]),
                       mass_ratio=(0.82, 0.04), seed=seed)


def _summary(draws):
    """Median, 68 % and 95 % percentiles of the draws (T as a Besselian year), as the
    sampling module summarises them."""
    p = np.percentile(draws, (2.5, 15.865525393145708, 50.0, 84.13447460685429, 97.5), axis=0)
    out = {}
    for j, key in enumerate(ELEMENT_KEYS):
        values = from_julian_year(p[:, j], "besselian") if key == "T" else p[:, j]
        low95, low, median, high, high95 = (float(v) for v in values)
        out[key] = {"median": median, "low": low, "high": high, "low95": low95,
                    "high95": high95, "unit": {"a": "arcsec", "e": "", "P": "yr",
                                               "T": "yr"}.get(key, "deg")}
    out["T"]["scale"] = "besselian"
    return out


def build_document(seed=2024, elements=TRUE_ELEMENTS, n_draws=3000):
    """Result document (dict) and posterior draws (n, 7) of an invented pair.

    Parameters
    ----------
    seed : int
        Seed of the measurement noise and of the draws.
    elements : CampbellElements
        The orbit (T as a Julian year); measurements scale with its a.
    n_draws : int
        Number of posterior draws (normal around the elements, the fixture's covariance).
    """
    rng = np.random.default_rng(seed)
    scale_factor = elements.a_arcsec / TRUE_ELEMENTS.a_arcsec
    cov = _covariance()
    cov[3, :] *= scale_factor
    cov[:, 3] *= scale_factor
    rows = _residuals(elements, rng, scale_factor)
    values = elements.to_keys()
    block = {k: {"value": float(values[k]), "error": float(np.sqrt(cov[i, i])),
                 "unit": {"a": "arcsec", "e": "", "P": "yr", "T": "yr"}.get(k, "deg")}
             for i, k in enumerate(ELEMENT_KEYS)}
    block["T"].update(value=float(from_julian_year(values["T"], "besselian")), scale="besselian")
    draws = rng.multivariate_normal(np.array(elements.as_tuple()), cov, size=n_draws)
    alt = dict(values, omega=(values["omega"] + 180.0) % 360.0, Omega=(values["Omega"] + 7.0))
    stats = _statistics(rows, elements)
    masses = _mass_blocks(draws, seed)
    doc = {"schema": "orbweigh.result/1", "source": "logs/invented_pair.csv",
           "elements": block, "thiele_innes": _thiele_innes(elements, cov),
           "covariance": {"parameters": list(ELEMENT_KEYS), "matrix": cov.tolist(),
                          "units": "P yr, T Julian yr, e, a arcsec, angles deg"},
           "statistics": stats, "residuals": rows,
           "alternatives": [{"elements": alt, "chi2": stats["chi2"] + 41.5, "delta_chi2": 41.5}],
           "options": {"period_range_yr": [5.0, 200.0], "loss": "linear", "flips": True,
                       "outlier_sigma": 4.0},
           "warnings": ["1 measurement was flipped by 180 deg (line 7).",
                        "1 measurement left out as an outlier beyond 4 sigma (line 11)."]
           + masses["warnings"],
           "notes": ["Omega and omega are known only up to a common 180 deg shift (no radial "
                     "velocities); Omega is given in [0, 180) deg."],
           "seed": seed, "version": "0.1.0",
           "parallax": masses["parallax"], "mass": masses["mass"],
           "posterior": {"draws_file": None, "n_draws": n_draws, "seed": seed,
                         "walkers": 32, "steps": 3000, "burn": 1000, "thin": 20,
                         "acceptance_fraction": 0.41, "converged": True, "sigma_scale": 1.0,
                         "autocorr_time": {"ln_P": 48.2, "T": 51.7, "e": 44.0, "ln_a": 47.5,
                                           "cos_i": 40.3, "Omega": 39.9, "omega": 42.8},
                         "summary": _summary(draws),
                         "priors": {"P": "log-uniform over the search range",
                                    "T": "uniform over one period", "e": "uniform in [0, 1)",
                                    "a": "log-uniform", "i": "uniform in cos i",
                                    "Omega": "uniform in [0, 180) deg",
                                    "omega": "uniform in [0, 360) deg"}}}
    return doc, draws


def write_document(tmp_path, with_draws=True, **kwargs):
    """Write ``result.json`` (and ``result_draws.ecsv`` when ``with_draws``); return its path.

    Without draws the document keeps its covariance but loses the posterior block.
    """
    from astropy.table import Table
    doc, draws = build_document(**kwargs)
    if with_draws:
        table = Table(draws, names=ELEMENT_KEYS, meta={"seed": doc["seed"]})
        for key, unit in {"P": "yr", "T": "yr", "a": "arcsec", "i": "deg", "Omega": "deg",
                          "omega": "deg"}.items():
            table[key].unit = unit
        table.write(tmp_path / "result_draws.ecsv", format="ascii.ecsv", overwrite=True)
        doc["posterior"]["draws_file"] = "result_draws.ecsv"
    else:
        del doc["posterior"]
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc, indent=1))
    return path


class TableCells(HTMLParser):
    """The text of every table cell of a page, row by row (``rows``: list of lists)."""

    def __init__(self):
        super().__init__()
        self.rows, self.cell = [], None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self.cell = ""

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self.rows[-1].append(self.cell)
            self.cell = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell += data
