"""``orbweigh fit``: measurement log -> apparent orbit (and masses with a parallax)."""
from __future__ import annotations

import json
import os
import sys
from pathlib import Path

from ..files import check_target, write_atomic
from .common import add_log_arguments, add_mass_arguments, check_mass_arguments, load_log

__all__ = ["add_arguments", "run", "parse_fixed", "parse_priors"]


def add_arguments(parser):
    add_log_arguments(parser)
    add_mass_arguments(parser)
    parser.add_argument("--rv", metavar="RVLOG",
                        help="radial-velocity log (epoch, component, rv, sigma_rv [, flag, "
                             "note]): combined visual-spectroscopic solution, node fixed, "
                             "orbital parallax and component masses")
    parser.add_argument("--rv-columns", metavar="MAP",
                        help="your header names for the velocity log's columns, e.g. "
                             "'rv=vrad,sigma_rv=err' (canonical: epoch, component, rv, "
                             "sigma_rv, flag, note)")
    parser.add_argument("--combine-parallax", action="store_true",
                        help="with --rv and --parallax: masses from the weighted mean of the "
                             "orbital and trigonometric parallaxes (default: orbital only)")
    parser.add_argument("--period-range", nargs=2, type=float, metavar=("PMIN", "PMAX"),
                        help="the period lies between PMIN and PMAX years: a bound of the "
                             "search and the refinement, warned of when the solution sits "
                             "on it (default: search from the sampling, up to 20 times the "
                             "time span, unbounded)")
    parser.add_argument("--fix", action="append", default=[], metavar="NAME=VALUE",
                        help="hold an element at VALUE (repeatable; NAME one of P, T, e, a, "
                             "i, Omega, omega; P in yr, T in the log's epoch scale, a in "
                             "arcsec, angles in deg, Omega and omega in [0, 360)), e.g. --fix "
                             "e=0 for a circular orbit (omega is then held at 0 and T is the "
                             "epoch of passage through the node, by convention); without --rv "
                             "a node held beyond 180 deg is reported as Omega - 180 with "
                             "omega + 180 (the same apparent orbit), with a warning; with --rv "
                             "a held Omega or omega picks the node, and a warning says when "
                             "the velocities prefer the other")
    parser.add_argument("--technique-scales", action="store_true",
                        help="estimate one sigma factor per observing technique (each "
                             "technique's reduced chi2 brought to about 1, iterated with the "
                             "fit) and fit with the scaled sigmas; a technique with fewer than "
                             "5 points keeps factor 1. Per-technique rms and reduced chi2 are "
                             "printed in any case")
    parser.add_argument("--loss", choices=("linear", "soft_l1", "huber"), default="linear",
                        help="loss of the refinement (default linear = plain least squares)")
    parser.add_argument("--no-flips", action="store_true",
                        help="do not correct 180 deg quadrant errors")
    parser.add_argument("--outlier-sigma", type=float, default=4.0, metavar="S",
                        help="leave out points beyond S sigma (default 4)")
    parser.add_argument("--seed", type=int, default=1, metavar="N",
                        help="seed of every random step (default 1); reported in the result")
    parser.add_argument("--json", metavar="PATH",
                        help="write the result document to PATH ('-' for standard output)")
    parser.add_argument("--out", metavar="DIR",
                        help="write result.json (and any draws) into DIR")
    _add_sampling_arguments(parser)
    parser.add_argument("--report", metavar="DIR",
                        help="also write the HTML report, figures and tables into DIR")
    parser.add_argument("--name", metavar="NAME",
                        help="the object's name, kept in the result and shown in the report's "
                             "title and the LaTeX caption (default: the log's file stem)")


def run(args):
    from ..fitting import FitOptions, fit_orbit
    from ..solution import undetermined_advice
    from ..summary import format_result

    _check_sampling_arguments(args)
    check_mass_arguments(args)
    _check_targets(args)
    options = FitOptions(period_bounds=tuple(args.period_range) if args.period_range else None,
                         loss=args.loss, flips=not args.no_flips,
                         outlier_sigma=args.outlier_sigma, seed=args.seed,
                         fixed=parse_fixed(args.fix),
                         technique_scales=args.technique_scales)   # checked: before reading
    velocities = _read_velocities(args)  # before the fit: a bad log fails fast
    data = load_log(args)
    solution = fit_orbit(data, options)
    doc = solution.to_document()
    if args.name:
        doc["name"] = args.name
    advice = None     # why no mass is given, if so
    if args.sample and not args.rv:   # with --rv the joint posterior is sampled instead
        _add_posterior(doc, args)
    if args.rv:
        _add_combined(doc, solution, velocities, args)
    elif args.parallax is not None or args.magnitudes is not None:
        advice = undetermined_advice(doc, "mass and no dynamical parallax")
        if advice is None:
            _add_masses(doc, args)
    text = format_result(doc)
    if advice is not None:
        text += "\n" + advice
    if "posterior" in doc:
        from ..sampling import format_posterior
        text += "\n" + format_posterior(doc["posterior"])
    if "node" in doc:
        from ..combined import format_combined
        text += "\n" + format_combined(doc)
    elif "mass" in doc:
        from ..masses import format_mass_blocks
        text += "\n" + format_mass_blocks({"mass": doc["mass"], "parallax": doc["parallax"],
                                           "warnings": doc["mass"].get("warnings", [])})
    print(text, file=sys.stderr if args.json == "-" else sys.stdout)
    _write_outputs(doc, args)
    if args.report:
        from ..report import write_report
        saved = Path(args.out) / "result.json" if args.out else args.json
        if saved and saved != "-":   # saved draws are found relative to the document
            doc = {**doc, "_path": str(saved)}
        kept = [*_inputs(args), Path(args.out) / "result.json" if args.out else args.json]
        written = write_report(doc, args.report, keep=[k for k in kept if k != "-"])
        print(f"report: {Path(args.report) / 'report.html'} ({len(written)} files)",
              file=sys.stderr if args.json == "-" else sys.stdout)
    return 0


def parse_fixed(items):
    """{name: value} from --fix NAME=VALUE items (names checked by FitOptions)."""
    from ..errors import InputError

    fixed = {}
    for item in items:
        name, sep, value = item.partition("=")
        name = name.strip()
        try:
            number = float(value)
        except ValueError:
            number = None
        if not sep or not name or number is None:
            raise InputError(f"--fix {item!r}: expected NAME=VALUE with a number, e.g. "
                             "--fix e=0 or --fix P=25.3")
        if name in fixed:
            raise InputError(f"--fix gives {name} twice; give each element once")
        fixed[name] = number
    return fixed


def _read_velocities(args):
    """The velocity log of --rv (None without it), after checking the options around it."""
    from ..errors import InputError
    from ..spectroscopic import read_velocities
    from ..tables import parse_column_mapping

    if not args.rv and (args.rv_columns or args.combine_parallax):
        raise InputError("--rv-columns and --combine-parallax describe a velocity log; give it "
                         "with --rv RVLOG")
    if args.combine_parallax and (args.parallax is None or args.parallax[1] <= 0):
        raise InputError("--combine-parallax weighs the trigonometric parallax against the "
                         "orbital one: give --parallax VALUE ERROR with a positive error")
    if not args.rv:
        return None
    columns = (parse_column_mapping(args.rv_columns, option="--rv-columns")
               if args.rv_columns else None)
    return read_velocities(args.rv, columns=columns, strict=args.strict)


def _add_combined(doc, solution, velocities, args):
    from ..combined import add_to_document, combined_blocks, fit_combined

    combined = fit_combined(solution, velocities)
    posterior = None
    if getattr(args, "sample", False):  # the joint posterior instead of covariance draws
        from ..combined import sample_combined
        posterior = sample_combined(combined, walkers=args.walkers, steps=args.steps,
                                    seed=args.seed)
    blocks = combined_blocks(combined, parallax=args.parallax, combine=args.combine_parallax,
                             seed=args.seed, draws=None if posterior is None else posterior[0])
    add_to_document(doc, combined, blocks, posterior)


def _add_masses(doc, args):
    from ..masses import masses_for_document

    blocks = masses_for_document(doc, parallax=args.parallax, mass_ratio=args.mass_ratio,
                                 rv_amplitudes=args.rv_amplitudes, magnitudes=args.magnitudes,
                                 band=args.band, seed=args.seed,
                                 bolometric_corrections=args.bolometric_corrections)
    doc["mass"], doc["parallax"] = blocks["mass"], blocks["parallax"]
    doc["warnings"].extend(blocks["warnings"])


def _write_outputs(doc, args):
    if args.json == "-":
        sys.stdout.write(_payload(doc, Path(args.out) / "result.json" if args.out else None))
    elif args.json:
        write_atomic(Path(args.json), _payload(doc, Path(args.json)), _inputs(args))
    if args.out:
        out = Path(args.out)
        write_atomic(out / "result.json", _payload(doc, out / "result.json"), _inputs(args))


def _check_targets(args):
    """Refuse, before the fit, outputs that would land on an input or a folder in use."""
    saved = [Path(args.out) / "result.json"] if args.out else []
    saved += [Path(args.json)] if args.json and args.json != "-" else []
    for path in saved:
        check_target(path, _inputs(args))
    if args.report:
        from ..report.writer import check_report_folder
        check_report_folder(args.report, [*_inputs(args), *saved])


def _inputs(args):
    """The files this run reads: no output may be written onto them."""
    return [args.log, getattr(args, "rv", None)]


def _payload(doc, where):
    """The document as JSON text; a draws file is named relative to ``where``'s folder."""
    out = {k: v for k, v in doc.items() if k != "_path"}
    if (out.get("posterior") or {}).get("draws_file") and where is not None:
        draws = Path(doc["_path"]).parent / out["posterior"]["draws_file"]
        out["posterior"] = {**out["posterior"],
                            "draws_file": os.path.relpath(draws, where.parent)}
    return json.dumps(out, indent=2) + "\n"


# ------------------------------------------------------------------ posterior sampling
def _add_sampling_arguments(parser):
    from ..priors import PRIOR_NAMES
    from ..sampling import DEFAULT_STEPS, DEFAULT_WALKERS, MIN_TAU_MULTIPLE, VISUAL_WALKERS

    parser.add_argument("--sample", action="store_true",
                        help="sample the posterior of the elements (emcee) and save the draws "
                             "beside the result (DIR/draws.ecsv with --out, else "
                             "<stem>.draws.ecsv beside --json PATH); masses then come from "
                             "the draws")
    parser.add_argument("--walkers", type=int, metavar="N",
                        help=f"walkers of the ensemble, 14 to 1,000 (default {VISUAL_WALKERS}; "
                             f"with --rv {DEFAULT_WALKERS}); walkers x steps at most 2,000,000")
    parser.add_argument("--steps", type=int, metavar="N",
                        help=f"steps of every walker, 2 to 1,000,000 (default {DEFAULT_STEPS}); "
                             f"the visual-orbit posterior stops earlier, as soon as the chain "
                             f"is {MIN_TAU_MULTIPLE} autocorrelation times long")
    parser.add_argument("--prior", action="append", default=[], metavar="NAME=MEAN,SIGMA",
                        help="Gaussian prior of the posterior (repeatable; NAME one of "
                             f"{', '.join(PRIOR_NAMES)}; units as --fix, parallax in mas), "
                             "e.g. --prior e=0.3,0.05; replaces that element's default "
                             "prior within the same support")
    parser.add_argument("--quiet", action="store_true", help="no progress bar (it is drawn only on a terminal)")


def _check_sampling_arguments(args):
    """Refuse sampling options that cannot work, before the (slow) fit; parse --prior
    into args.priors (a parallax prior becomes the parallax when none is given)."""
    from ..errors import InputError
    from ..priors import check_gaussian_priors
    from ..sampling import DEFAULT_STEPS, DEFAULT_WALKERS, VISUAL_WALKERS
    from .common import MAX_SAMPLER_EVALUATIONS

    args.priors = parse_priors(args.prior)
    if not args.sample:
        if args.walkers is not None or args.steps is not None or args.priors:
            raise InputError("--walkers, --steps and --prior set up the posterior sampling; "
                             "add --sample, or drop them")
        return
    if args.rv and args.priors:
        raise InputError("--prior applies to the visual-orbit posterior; with --rv the joint "
                         "posterior keeps its own priors: drop --prior or --rv")
    check_gaussian_priors(args.priors, parse_fixed(args.fix))
    if "parallax" in args.priors:
        if args.parallax is not None:
            raise InputError("the parallax is given twice (--parallax and --prior "
                             "parallax=...): give it once")
        args.parallax = list(args.priors.pop("parallax"))
    args.walkers = (DEFAULT_WALKERS if args.rv else VISUAL_WALKERS) \
        if args.walkers is None else args.walkers
    args.steps = DEFAULT_STEPS if args.steps is None else args.steps
    if args.walkers * args.steps > MAX_SAMPLER_EVALUATIONS:
        raise InputError(f"--walkers {args.walkers} x --steps {args.steps} = "
                         f"{args.walkers * args.steps:,} evaluations, more than "
                         f"{MAX_SAMPLER_EVALUATIONS:,} (minutes of sampling and a chain held "
                         "in memory); use fewer walkers or steps")
    if not args.rv and args.out is None and args.json in (None, "-"):
        raise InputError("--sample saves its draws in a file beside the result document: "
                         "give --out DIR (draws in DIR/draws.ecsv), or --json PATH (draws in "
                         "<stem>.draws.ecsv beside PATH)")


def parse_priors(items):
    """{name: (mean, sigma)} from --prior NAME=MEAN,SIGMA items (checked by
    ``priors.check_gaussian_priors``)."""
    from ..errors import InputError

    priors = {}
    for item in items:
        name, sep, value = item.partition("=")
        name = name.strip()
        parts = value.split(",")
        try:
            mean, sigma = (float(v) for v in parts) if len(parts) == 2 else (None, None)
        except ValueError:
            mean = sigma = None
        if not sep or not name or mean is None:
            raise InputError(f"--prior {item!r}: expected NAME=MEAN,SIGMA with two numbers, "
                             "e.g. --prior e=0.3,0.05 or --prior parallax=40.7,0.4")
        if name in priors:
            raise InputError(f"--prior gives {name} twice; give each element once")
        priors[name] = (mean, sigma)
    return priors


def _add_posterior(doc, args):
    """Sample, save the draws beside the result, and point the document at them.

    doc["_path"] is the result's location, so that the masses read the draws (it is not
    written out).
    """
    from ..errors import FitError
    from ..sampling import attach_posterior, posterior_block, sample_document, write_draws

    if args.out:
        where, draws = Path(args.out) / "result.json", Path(args.out) / "draws.ecsv"
    else:
        where = Path(args.json)
        draws = where.with_name(where.stem + ".draws.ecsv")
    try:
        result = sample_document(doc, walkers=args.walkers, steps=args.steps, seed=args.seed,
                                 priors=args.priors,
                                 progress=not args.quiet and sys.stderr.isatty(),
                                 parallax=None if args.parallax is None else
                                 tuple(args.parallax))
    except ValueError as exc:
        raise FitError(f"{doc['source']}: cannot sample the posterior: {exc}") from None
    write_draws(draws, result, _inputs(args))
    attach_posterior(doc, posterior_block(doc, result, draws.name))
    doc["_path"] = str(where)
