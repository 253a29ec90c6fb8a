"""``orbweigh plan``: when would one new measurement most improve P, a and the mass?

See ``orbweigh.planning`` for the rule (Fisher update of the element covariance, gains
of P, a and ln M, Dawes' limit).
"""
from __future__ import annotations

import json
import sys
from dataclasses import asdict

import numpy as np

from ..files import write_atomic
from ..formatting import number

__all__ = ["add_arguments", "run", "plan_to_dict"]


def add_arguments(parser):
    from .common import add_elements_arguments
    add_elements_arguments(parser, "result", "result document of 'orbweigh fit --json' (with "
                           "a covariance or posterior draws)")
    parser.add_argument("--window", nargs=2, required=True, metavar=("START", "STOP"),
                        help="first and last candidate epoch, in any form a log accepts "
                             "(2027.0 is a Besselian year; J2027.0, JD…, MJD…, ISO dates)")
    parser.add_argument("--step", type=float, help="spacing of the candidate epochs "
                        "[0.05 yr; days when START is a JD or MJD]; at most 100,000 epochs")
    parser.add_argument("--aperture-mm", type=float, help="telescope aperture D [mm], 1 to "
                        "100,000; epochs with rho below Dawes' limit 116\"/D are not "
                        "recommended")
    parser.add_argument("--sigma-mas", type=float, default=5.0,
                        help="expected precision of the new measurement in each coordinate "
                             "[mas], 0.001 to 100,000 (5 mas: speckle on a 4 m class "
                             "telescope) [5]")
    parser.add_argument("--top", type=int, default=3, help="number of epochs to recommend [3]")
    parser.add_argument("--min-separation", type=float, default=0.5,
                        help="smallest gap between recommended epochs [yr], 0 to 1,000 "
                             "[0.5]")
    parser.add_argument("--json", metavar="PATH|-", help="write the advice as JSON ('-' for "
                        "standard output, which then replaces the printed text)")
    parser.add_argument("--draws", type=int, default=1000,
                        help="element draws for the bands and a posterior covariance, 2 to "
                             "10,000 [1000]")
    parser.add_argument("--seed", type=int, default=1, help="seed of the draws [1]")


def plan_to_dict(plan, source, scale):
    """JSON-ready summary of a ``Plan`` (the grid of scores included)."""
    return {"source": source, "epoch_scale": scale,
            "rule": "score = mean fractional variance reduction of P, a and ln M = "
                    "3 ln a - 2 ln P after one measurement (linear Fisher update)",
            "sigma_mas": plan.sigma_arcsec * 1e3, "aperture_mm": plan.aperture_mm,
            "dawes_limit_arcsec": plan.dawes_limit_arcsec,
            "covariance_source": plan.covariance_source, "n_draws": plan.n_draws,
            "seed": plan.seed, "sigma_now": plan.sigma_now,
            "recommended": [asdict(a) for a in plan.recommended],
            "not_resolvable": [asdict(a) for a in plan.unresolvable],
            "warnings": plan.warnings,
            "grid": [{"epoch": float(e), "rho_arcsec": float(r), "gain_P": float(gp),
                      "gain_a": float(ga), "gain_mass": float(gm), "score": float(s)}
                     for e, r, gp, ga, gm, s in zip(plan.epochs, plan.rho_arcsec, plan.gain_P,
                                                    plan.gain_a, plan.gain_mass, plan.score)]}


def _advice_lines(advice, sigma_now):
    lines = [f"{'epoch':>10s} {'theta_deg':>9s} {'68% band':>15s} {'rho_arcsec':>10s} "
             f"{'68% band':>15s} {'var_P':>6s} {'var_a':>6s} {'var_M':>6s} {'score':>6s}  "
             f"sigma after: P, a, M"]
    for a in advice:
        after = [s * np.sqrt(1 - g) for s, g in zip(sigma_now.values(),
                                                     (a.gain_P, a.gain_a, a.gain_mass))]
        lines.append(
            f"{a.epoch:10.3f} {a.theta_deg:9.2f} {a.theta_low_deg:7.2f}-{a.theta_high_deg:<7.2f} "
            f"{a.rho_arcsec:10.4f} {a.rho_low_arcsec:7.4f}-{a.rho_high_arcsec:<7.4f} "
            f"{-100 * a.gain_P:5.1f}% {-100 * a.gain_a:5.1f}% {-100 * a.gain_mass:5.1f}% "
            f"{a.score:6.3f}  {number(after[0], 2)} yr, {number(after[1], 2)}\", "
            f"{number(100 * after[2], 2)}%")
    return lines


def _text(plan, source, scale, top):
    s = plan.sigma_now
    lines = [f"# next-measurement plan for {source}; epochs in the {scale} scale, as given",
             f"# new measurement: {plan.sigma_arcsec * 1e3:g} mas in x and y; uncertainty "
             f"from the {plan.covariance_source}; bands from {plan.n_draws} draws, "
             f"seed {plan.seed}",
             f"# now: sigma_P {number(s['P_yr'], 2)} yr, sigma_a {number(s['a_arcsec'], 2)}\", "
             f"mass from the orbit (3 ln a - 2 ln P) {number(100 * s['mass_relative'], 2)}%",
             "# score = mean fractional variance reduction of P, a and M (var_* columns)"]
    if plan.dawes_limit_arcsec is not None:
        lines.append(f"# aperture {plan.aperture_mm:g} mm: Dawes limit "
                     f"{plan.dawes_limit_arcsec:.3f}\"")
    if plan.recommended:
        lines += ["", "Recommended epochs (best first):"] + _advice_lines(plan.recommended, s)
    if 0 < len(plan.recommended) < top:
        lines.append(f"(the score has only {len(plan.recommended)} separated local maxima "
                     "in the window)")
    if plan.unresolvable:
        lines += ["", f"Better epochs NOT recommended for a {plan.aperture_mm:g} mm aperture "
                  f"(rho below {plan.dawes_limit_arcsec:.3f}\"):"]
        lines += _advice_lines(plan.unresolvable, s)
    lines += [f"warning: {w}" for w in plan.warnings]
    return "\n".join(lines)


def run(args):
    from ..planning import plan_observations
    from ..reductions import epoch_unit, interval_in_scale
    from ..result import epoch_scale_of
    from ..solution import require_determined
    from .common import load_elements_document
    from .ephemeris import epochs_from_options, parse_epoch_option

    doc = load_elements_document(args, "result")
    require_determined(doc, "plan")
    source = doc["_path"]
    day_unit = epoch_unit(epoch_scale_of(doc)) == "d"
    _, scale = parse_epoch_option(args.window[0], "--window START", day_unit)
    step = args.step if args.step is not None else float(interval_in_scale(0.05, scale))
    epochs, scale, _ = epochs_from_options(args.window[0], args.window[1], step, None,
                                           day_unit, ("--window START", "STOP"))
    plan = plan_observations(doc, epochs, args.sigma_mas / 1e3, args.aperture_mm, args.top,
                             args.draws, args.seed, args.min_separation, scale)
    if args.json:
        text = json.dumps(plan_to_dict(plan, source, scale), indent=1)
        if args.json == "-":
            print(text)
        else:
            write_atomic(args.json, text + "\n", [source, args.elements_file])
    if args.json == "-":    # the text (warnings included) is not printed: keep them
        for w in plan.warnings:
            print(f"orbweigh plan: warning: {w}", file=sys.stderr)
    else:
        print(_text(plan, source, scale, args.top))
    return 0
