"""``orbweigh compare OLD NEW``: two orbits of one pair, element by element and on the sky.

Each of OLD and NEW is a result document (JSON) or a TOML elements file. Per element:
the difference NEW - OLD and that difference in units of the combined sigma (errors in
quadrature, as far as known), after the common 180 deg node shift and with T moved to the
periastron passage nearest the old T (``revision.align_orbits``, the same as ``batch``).
Then the largest distance between the two predicted positions over a window (default:
the next 10 years), in arcsec and in units of the new orbit's 1-sigma positional band,
and the difference of the total masses when both documents give one.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["add_arguments", "run", "compare_documents", "position_sigma_arcsec"]


def add_arguments(parser):
    parser.add_argument("old", metavar="OLD", help="the older orbit: result document (JSON) "
                        "or elements file (.toml)")
    parser.add_argument("new", metavar="NEW", help="the newer orbit, same forms")
    parser.add_argument("--window", nargs=2, metavar=("START", "STOP"),
                        help="prediction window, in any epoch form a log accepts "
                             "[now to 10 years on]")
    parser.add_argument("--json", metavar="PATH|-", help="write the comparison as JSON ('-' "
                        "for standard output, which then replaces the printed text)")
    parser.add_argument("--figure", metavar="PATH", help="figure of both orbits on the sky "
                        "and their separation against time (.png, .pdf or .svg)")
    parser.add_argument("--draws", type=int, default=1000,
                        help="draws of the new elements for its 1-sigma band, 2 to 10,000 "
                             "[1000]")
    parser.add_argument("--seed", type=int, default=1, help="seed of the draws [1]")


def _load(path):
    from ..published import read_elements_file
    from ..result import load_result
    return read_elements_file(path) if str(path).lower().endswith(".toml") else load_result(path)


def position_sigma_arcsec(doc, epoch_yr, n_draws, seed):
    """1-sigma positional band of the document's orbit at each epoch [arcsec], or None.

    sqrt((var x + var y) / 2) over element draws (posterior, covariance or independent
    element errors), the spread per axis of the predicted position.
    """
    from ..ephemeris import orbit_xy
    from ..elements import thiele_innes_from_campbell
    from ..result import element_draws, independent_draws
    draws = element_draws(doc, n_draws, seed)
    if draws is None:
        draws = independent_draws(doc, n_draws, seed)
    if draws is None:
        return None
    A, B, F, G = thiele_innes_from_campbell(draws[:, 3], *np.radians(draws[:, 4:7].T))
    x, y = orbit_xy(np.asarray(epoch_yr)[None, :], draws[:, 0, None], draws[:, 1, None],
                    draws[:, 2, None], A[:, None], B[:, None], F[:, None], G[:, None])
    return np.sqrt(0.5 * (x.var(axis=0) + y.var(axis=0)))


def _window(window):
    """(start, stop) in Julian years: the options, or now to ten years on."""
    from ..reductions import to_julian_year
    from .ephemeris import parse_epoch_option
    if window is None:
        from astropy.time import Time
        start = float(Time.now().jyear)
        return start, start + 10.0
    ends = []
    for text, name in zip(window, ("--window START", "STOP")):
        value, scale = parse_epoch_option(text, name)
        ends.append(float(to_julian_year(value, scale)))
    if not ends[0] < ends[1]:
        raise InputError(f"--window: START must be earlier than STOP, got {window[0]} "
                         f"and {window[1]}")
    return ends[0], ends[1]


def _total_mass(doc):
    total = (doc.get("mass") or {}).get("total") or {}
    value = total.get("value")
    if not isinstance(value, (int, float)):
        return None
    low, high = total.get("low"), total.get("high")
    error = (0.5 * (high - low) if isinstance(low, (int, float)) and isinstance(high, (int, float))
             else None)
    return float(value), error


def compare_documents(old_doc, new_doc, start_yr, stop_yr, n_draws=1000, seed=1,
                      n_epochs=401):
    """The comparison of two documents as a JSON-ready dict (see the module notes)."""
    from ..result import covariance_from_document, element_errors, elements_from_document
    from ..revision import compare_orbits
    epochs = np.linspace(start_yr, stop_yr, n_epochs)
    sigma = position_sigma_arcsec(new_doc, epochs, n_draws, seed)
    cov = covariance_from_document(new_doc)
    comp = compare_orbits(elements_from_document(old_doc), elements_from_document(new_doc),
                          start_yr, sigma if sigma is not None else np.nan,
                          element_errors(old_doc), element_errors(new_doc),
                          years=stop_yr - start_yr, n_epochs=n_epochs,
                          new_pt_covariance=0.0 if cov is None else float(cov[0, 1]))
    from ..result import epoch_scale_of
    out = {"old": old_doc["_path"], "new": new_doc["_path"], "elements": {},
           "epoch_scale": epoch_scale_of(new_doc)}
    for key, e in comp["elements"].items():
        out["elements"][key] = {"old": e["old"], "new": e["new"], "new_error": e["new_error"],
                                "difference": e["difference"], "sigma": e["sigma"] or None,
                                "difference_sigma": e["n_sigma"]}
    out["elements"]["T"]["note"] = ("Julian years (the text output writes T in the new "
                                    "orbit's epoch scale, epoch_scale); new T moved by whole "
                                    "periods to the passage nearest the old T, its sigma "
                                    "with the period's (k periods: sqrt(sT^2 + k^2 sP^2 + "
                                    "2k cov(P, T)))")
    out.update(window_yr=comp["window_yr"], max_separation_arcsec=comp["max_separation_arcsec"],
               epoch_of_max_yr=comp["epoch_of_max_yr"],
               max_separation_sigma=(comp["max_separation_sigma"] if sigma is not None
                                     else None),
               sigma_source=("1-sigma positional band of the new orbit from "
                             f"{n_draws} element draws, seed {seed}" if sigma is not None
                             else "the new orbit has no errors: no separation in sigma"),
               seed=seed)
    masses = _total_mass(old_doc), _total_mass(new_doc)
    if None not in masses:
        diff = masses[1][0] - masses[0][0]
        errs = [m[1] for m in masses]
        comb = float(np.hypot(*errs)) if None not in errs else None
        out["mass_difference_msun"] = {"old": masses[0][0], "new": masses[1][0],
                                       "difference": diff,
                                       "difference_sigma": diff / comb if comb else None}
    return out


def _epoch(jyear, scale, label=False):
    """An epoch given in Julian years, written in ``scale`` to 0.01 yr (0.1 d)."""
    from ..formatting import epoch
    return epoch(jyear, scale, decimals=1 if scale in ("jd", "mjd") else 2, label=label,
                 internal=True)


def _element_cell(key, value, error, scale):
    """value ± error; T (Julian years inside) in the new orbit's epoch scale."""
    from ..formatting import value_error
    if key != "T":
        return value_error(value, error)
    from ..reductions import from_julian_year, interval_in_scale
    return value_error(float(from_julian_year(value, scale)),
                       None if error is None else float(interval_in_scale(error, scale)))


def _difference(value, sigma):
    """A difference at the decimal place of its combined sigma (4 digits without one)."""
    from ..formatting import decimals_for, fixed, number
    if isinstance(sigma, (int, float)) and sigma > 0:
        return fixed(value, decimals_for(sigma))
    return number(value, 4)


def _text(c, old_errors):
    from ..formatting import epoch_label, number
    scale = c.get("epoch_scale", "julian")
    lines = [f"compare {c['old']} (old) with {c['new']} (new)",
             f"{'element':>8s} {'old':>22s} {'new':>22s} {'new-old':>11s} {'in sigma':>9s}"]
    for key, e in c["elements"].items():
        ns = "" if e["difference_sigma"] is None else f"{e['difference_sigma']:9.2f}"
        lines.append(f"{key:>8s} {_element_cell(key, e['old'], old_errors.get(key), scale):>22s} "
                     f"{_element_cell(key, e['new'], e.get('new_error'), scale):>22s} "
                     f"{_difference(e['difference'], e.get('sigma')):>11s} {ns}")
    lines.append(f"(Omega, omega after the common 180 deg shift; T as a {epoch_label(scale)}, "
                 "the new T at the passage nearest the old one; T's difference in yr)")
    w = c["window_yr"]
    sig = ("" if c["max_separation_sigma"] is None else
           f", at most {c['max_separation_sigma']:.2f} x the new orbit's 1-sigma band")
    lines.append(f"largest distance between the predictions over {_epoch(w[0], scale)} to "
                 f"{_epoch(w[1], scale, label=True)}: "
                 f"{number(c['max_separation_arcsec'], 3)}\" (at "
                 f"{_epoch(c['epoch_of_max_yr'], scale)}){sig}")
    lines.append(c["sigma_source"])
    if "mass_difference_msun" in c:
        m = c["mass_difference_msun"]
        ns = "" if m["difference_sigma"] is None else f" ({m['difference_sigma']:.2f} sigma)"
        comb = (abs(m["difference"] / m["difference_sigma"]) if m["difference_sigma"]
                else None)
        lines.append(f"total mass: {number(m['old'])} -> {number(m['new'])} M_sun, difference "
                     f"{_difference(m['difference'], comb)}{ns}")
    return "\n".join(lines)


def _figure(path, old_doc, new_doc, comp):
    from ..ephemeris import ephemeris
    from ..report.style import (BAND, DOUBLE_COLUMN_IN, ORBIT, figure_style, new_figure,
                                save_figure)
    from ..result import elements_from_document
    fmt = str(path).rsplit(".", 1)[-1].lower()
    if fmt not in ("png", "pdf", "svg"):
        raise InputError(f"--figure {path}: give a .png, .pdf or .svg file name")
    old, new = elements_from_document(old_doc), elements_from_document(new_doc)
    with figure_style():
        fig, (sky, sep) = new_figure(DOUBLE_COLUMN_IN, 3.2, ncols=2)
        for el, colour, label in ((old, BAND, "old"), (new, ORBIT, "new")):
            t = el.periastron_yr + np.linspace(0.0, el.period_yr, 721)
            e = ephemeris(el, t)
            sky.plot(e.y_arcsec, e.x_arcsec, color=colour, label=f"{label} orbit")
        sky.plot([0], [0], marker="+", color=ORBIT, ls="none")
        sky.set_aspect("equal", adjustable="datalim")
        sky.invert_xaxis()                      # East left, North up
        sky.set_xlabel("East  \N{LEFTWARDS ARROW}  [arcsec]")
        sky.set_ylabel("North [arcsec]")
        sky.legend(loc="best")
        from ..formatting import epoch_label
        from ..reductions import from_julian_year
        w, scale = comp["window_yr"], comp["epoch_scale"]
        t = np.linspace(w[0], w[1], 401)
        a, b = ephemeris(old, t), ephemeris(new, t)
        sep.plot(from_julian_year(t, scale), np.hypot(a.x_arcsec - b.x_arcsec,
                                                      a.y_arcsec - b.y_arcsec), color=ORBIT)
        sep.set_xlabel(f"epoch [{epoch_label(scale)}]")
        sep.set_ylabel("|new - old| predicted position [arcsec]")
    save_figure(fig, Path(path).with_suffix(""), [fmt])


def run(args):
    from ..files import write_atomic
    old_doc, new_doc = _load(args.old), _load(args.new)
    start, stop = _window(args.window)
    comp = compare_documents(old_doc, new_doc, start, stop, args.draws, args.seed)
    if args.json:
        text = json.dumps(comp, indent=1)
        if args.json == "-":
            print(text)
        else:
            write_atomic(args.json, text + "\n")
    if args.figure:
        _figure(args.figure, old_doc, new_doc, comp)
    if args.json != "-":
        from ..result import element_errors
        print(_text(comp, element_errors(old_doc)))
    return 0
