"""Plain-text summary of a result document, as the ``fit`` command prints it."""
from __future__ import annotations

from . import formatting as fmt
from .result import epoch_scale_of, t_is_node_passage

__all__ = ["format_result"]

_LABELS = {"P": "P (period)", "T": "T (periastron)", "e": "e", "a": "a (semi-major axis)",
           "i": "i (inclination)", "Omega": "Omega (node)", "omega": "omega (periastron arg.)"}


def _label(key, elements):
    """An element's label; T of a circular orbit is the epoch of passage through the node
    (``result.t_is_node_passage``)."""
    if key == "T" and t_is_node_passage(elements):
        return "T (node passage)"
    return _LABELS.get(key, key)


def _value(entry):
    if entry.get("fixed"):
        return " ".join(filter(None, (fmt.number(entry["value"], 6), entry.get("unit", ""),
                                      "(fixed)")))
    return fmt.value_error(entry["value"], entry.get("error"), entry.get("unit", "")) + \
        ("" if entry.get("error") is not None else " (no error)")


def _technique_label(cls, rows):
    """A technique class as a reader knows it: words, and an unknown one by its written names."""
    if cls != "unknown":
        return cls.replace("_", " ")
    written = sorted({str(r["technique_text"]) for r in rows
                      if r.get("technique") == cls and r.get("technique_text")})
    return f"{', '.join(written)} (unknown)" if written else cls


def _technique_lines(stats, rows=()):
    """Per technique: points, rms theta [deg], rms rho [mas], reduced chi2, sigma factor."""
    techniques = stats.get("techniques")
    if not techniques:
        return []
    scales = stats.get("technique_scales")
    factors = (scales or {}).get("factors", {})
    labels = {name: _technique_label(name, rows) for name in techniques}
    width = max(16, *(len(label) + 2 for label in labels.values()))
    out = ["By technique (fitted points; reduced chi2 with the sigmas as fitted)",
           f"  {'technique':<{width}}{'points':>6}{'rms theta [deg]':>17}{'rms rho [mas]':>15}"
           f"{'reduced chi2':>14}" + ("   sigma factor" if scales else "")]
    for name, t in techniques.items():
        row = (f"  {labels[name]:<{width}}{t['n_points']:>6}{fmt.number(t['rms_theta_deg'], 3):>17}"
               f"{fmt.number(1e3 * t['rms_rho_arcsec'], 3):>15}"
               f"{fmt.fixed(t['reduced_chi2'], 2):>14}")
        f = factors.get(name)
        if f is not None:
            row += "   " + (fmt.value_error(f["factor"], f["error"]) if f["estimated"] else
                          f"1 (kept: fewer than {scales['min_points']} points)")
        out.append(row)
    if scales:
        state = "converged" if scales["converged"] else "NOT converged"
        out.append(f"  sigma factors {state} after {scales['rounds']} rounds, last change "
                   f"{fmt.percent(scales['last_change'])} (tolerance "
                   f"{fmt.percent(scales['tolerance'], 0)}); each factor's error is "
                   "1/sqrt(2 dof) of its technique")
    return out


def format_result(doc):
    """Elements, Thiele-Innes constants, statistics, flagged rows and warnings as text."""
    out = [f"Orbit of {doc.get('source', '?')}"]
    for key, entry in doc["elements"].items():
        label = _label(key, doc["elements"])
        extra = f"  [{fmt.epoch_label(entry['scale'])}]" if key == "T" else ""
        out.append(f"  {label:<26}{_value(entry)}{extra}")
    out.append("Thiele-Innes constants")
    for key, entry in doc["thiele_innes"].items():
        out.append(f"  {key:<26}{_value(entry)}")
    s = doc["statistics"]
    scale = epoch_scale_of(doc)
    out.append("Fit")
    out.append(f"  lines in log {s['n_input']}, fitted {s['n_used']}, flipped {s['n_flipped']}, "
               f"outliers {s['n_outliers']}, excluded {s['n_excluded']}, "
               f"rejected {s['n_rejected']}")
    out.append(f"  chi2 {s['chi2']:.2f} for {s['dof']} degrees of freedom "
               f"(reduced {s['reduced_chi2']:.2f}); rms theta {s['rms_theta_deg']:.3f} deg, "
               f"rms rho {s['rms_rho_arcsec']:.4f} arcsec")
    out.append(f"  epochs {fmt.epoch(s['epoch_first'], scale, label=False)} to "
               f"{fmt.epoch(s['epoch_last'], scale)}, phase coverage "
               f"{100 * s['phase_coverage']:.0f}%, periods searched "
               f"{s['period_range_yr'][0]:.3g}-{s['period_range_yr'][1]:.4g} yr "
               f"({s['n_trials']} trials), {s['fit_seconds']:.2f} s")
    out.extend(_technique_lines(s, doc.get("residuals", ())))
    flagged = [r for r in doc["residuals"] if r["status"] not in ("used",)]
    if flagged:
        out.append("Rows not fitted as given")
        for r in flagged:
            out.append(f"  line {r['line']:>5}  {r['status']:<9} {r['reason']}")
    for alt in doc.get("alternatives", []):
        el = alt["elements"]
        out.append(f"Alternative (delta chi2 {alt['delta_chi2']:.1f}): P {el['P']['value']:.3f} yr, "
                   f"e {el['e']['value']:.3f}, a {el['a']['value']:.4f} arcsec, "
                   f"i {el['i']['value']:.1f} deg")
    if doc.get("warnings"):
        out.append("Warnings")
        out.extend(f"  - {w}" for w in doc["warnings"])
    if doc.get("notes"):
        out.append("Notes")
        out.extend(f"  - {n}" for n in doc["notes"])
    out.append(f"seed {doc.get('seed')}, orbweigh {doc.get('version')}")
    return "\n".join(out)
