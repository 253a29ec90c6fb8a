"""``orbweigh fit``: measurement log -> apparent orbit (and masses with a parallax)."""
from __future__ import annotations

import json
import sys
from pathlib import Path

from .common import add_log_arguments, add_mass_arguments, check_mass_arguments, load_log

__all__ = ["add_arguments", "run"]


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
                        help="search periods between PMIN and PMAX years (default: from the "
                             "sampling, up to 20 times the time span)")
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
    parser.add_argument("--report", metavar="DIR",
                        help="also write the HTML report, figures and tables into DIR")


def run(args):
    from ..fitting import FitOptions, fit_orbit
    from ..summary import format_result

    check_mass_arguments(args)
    velocities = _read_velocities(args)  # before the fit: a bad log fails fast
    data = load_log(args)
    options = FitOptions(period_range=tuple(args.period_range) if args.period_range else None,
                         loss=args.loss, flips=not args.no_flips,
                         outlier_sigma=args.outlier_sigma, seed=args.seed)
    solution = fit_orbit(data, options)
    doc = solution.to_document()
    if args.rv:
        _add_combined(doc, solution, velocities, args)
    elif args.parallax is not None or args.magnitudes is not None:
        _add_masses(doc, args)
    text = format_result(doc)
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
        written = write_report(doc, args.report)
        print(f"report: {Path(args.report) / 'report.html'} ({len(written)} files)",
              file=sys.stderr if args.json == "-" else sys.stdout)
    return 0


def _read_velocities(args):
    """The velocity log of --rv (None without it), after checking the options around it."""
    from ..errors import InputError
    from ..measurements import parse_column_mapping
    from ..spectroscopic import read_velocities

    if not args.rv and (args.rv_columns or args.combine_parallax):
        raise InputError("--rv-columns and --combine-parallax describe a velocity log; give it "
                         "with --rv RVLOG")
    if args.rv and (args.mass_ratio or args.rv_amplitudes or args.magnitudes):
        raise InputError("with --rv the velocity log gives K1, K2 (hence q) and the orbital "
                         "parallax; drop --mass-ratio, --rv-amplitudes and --magnitudes")
    if not args.rv:
        return None
    columns = parse_column_mapping(args.rv_columns) if args.rv_columns else None
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
                                 band=args.band, seed=args.seed)
    doc["mass"], doc["parallax"] = blocks["mass"], blocks["parallax"]
    doc["warnings"].extend(blocks["warnings"])


def _write_outputs(doc, args):
    payload = json.dumps(doc, indent=2) + "\n"
    if args.json == "-":
        sys.stdout.write(payload)
    elif args.json:
        _atomic_write(Path(args.json), payload)
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        _atomic_write(out / "result.json", payload)


def _atomic_write(path, text):
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text)
    tmp.replace(path)
