"""Command-line options shared by the commands: a measurement log, masses, elements."""
from __future__ import annotations

__all__ = ["add_log_arguments", "load_log", "add_mass_arguments", "check_mass_arguments",
           "add_elements_arguments", "load_elements_document", "check_options", "LIMITS",
           "MAX_SAMPLER_EVALUATIONS", "MAX_SEED"]

#: Bounds of the numeric options: (command or None for every other, option) -> (lowest,
#: highest, why). Whole numbers that memory or time follow, and the physical values of
#: ``plan`` (an infinite or NaN value is outside every range). At the limits of the counts
#: (24-row log, CPU time and peak memory, benchmarks/bench_option_limits.py): mass
#: 2 x 10^5 draws 0.5 s, 90 MB; compare 10^4 draws 2 s, 480 MB; ephemeris 10^4 draws x
#: 10^4 epochs 28 s, 350 MB; sampling at the default 32 x 5000 steps 7 s, 160 MB. Beyond
#: them (same machine, /usr/bin/time): mass 10^6 draws 0.7 GB, compare 10^5 draws 3.8 GB.
LIMITS = {
    ("mass", "draws"): (2, 200_000, "a million draws take 0.7 GB"),
    (None, "draws"): (2, 10_000, "a 68 % band from 10,000 draws is far finer than its "
                      "width, and memory grows with the draws"),
    (None, "walkers"): (14, 1_000, "at least twice the seven elements; every walker is a "
                        "chain held in memory"),
    (None, "steps"): (2, 1_000_000, "the chain is held in memory"),
    (None, "workers"): (1, 64, "every worker is a process with its own memory, about "
                        "150 MB"),
    ("plan", "aperture_mm"): (1, 100_000, "a telescope's diameter in mm, for Dawes' limit "
                              "116\"/D; the largest telescopes are under 40 m"),
    ("plan", "sigma_mas"): (0.001, 100_000, "the new measurement's precision in mas, from "
                            "a microarcsecond to 100\""),
    ("plan", "min_separation"): (0, 1_000, "the gap between recommended epochs in years"),
}
#: Largest walkers x steps of one sampling (about 12 times the default 32 x 5000, a few
#: minutes and about 100 MB of chain).
MAX_SAMPLER_EVALUATIONS = 2_000_000
#: Seeds are non-negative (numpy's SeedSequence) and fit in 64 bits.
MAX_SEED = 2 ** 63 - 1


def add_log_arguments(parser):
    """Add LOG, --columns, --target-ra, --target-dec and --strict to ``parser``."""
    parser.add_argument("log", metavar="LOG",
                        help="measurement log: CSV, whitespace-separated or ECSV")
    parser.add_argument("--columns", metavar="MAP",
                        help="your header names for the canonical columns, e.g. "
                             "'epoch=date,theta=pa,rho=sep' (canonical: epoch, theta, rho, "
                             "sigma_theta, sigma_rho, weight, technique, flag, note)")
    parser.add_argument("--target-ra", metavar="RA",
                        help="J2000 right ascension of the pair, degrees or hh:mm:ss.s; with "
                             "--target-dec, position angles are precessed to equinox J2000")
    parser.add_argument("--target-dec", metavar="DEC",
                        help="J2000 declination of the pair, degrees or sexagesimal "
                             "(-16.716, -16:42:58, -16d42m58s)")
    parser.add_argument("--strict", action="store_true",
                        help="stop at the first unusable row instead of rejecting it")


def load_log(args):
    """The ``MeasurementSet`` described by the options of ``add_log_arguments``."""
    from ..measurements import read_measurements
    from ..tables import parse_column_mapping

    columns = parse_column_mapping(args.columns) if args.columns else None
    return read_measurements(args.log, columns=columns, target_ra_deg=args.target_ra,
                             target_dec_deg=args.target_dec, strict=args.strict)


def add_mass_arguments(parser):
    """Add --parallax, --mass-ratio | --rv-amplitudes, --magnitudes and --band."""
    parser.add_argument("--parallax", nargs=2, type=float, metavar=("VALUE", "ERROR"),
                        help="trigonometric parallax and its error [mas]")
    ratio = parser.add_mutually_exclusive_group()
    ratio.add_argument("--mass-ratio", nargs=2, type=float, metavar=("Q", "QERR"),
                       help="mass ratio q = M2/M1 and its error, for the component masses")
    ratio.add_argument("--rv-amplitudes", nargs=4, type=float,
                       metavar=("K1", "K1ERR", "K2", "K2ERR"),
                       help="radial-velocity amplitudes and errors [km/s]; q = K1/K2")
    parser.add_argument("--magnitudes", nargs="+", type=float, metavar="MAG",
                        help="apparent magnitudes of primary and secondary, M1 M2 or with "
                             "their 1-sigma errors M1 ERR1 M2 ERR2 (e.g. 5.10 0.03 6.20 0.05), "
                             "for a dynamical parallax when no trigonometric one is known; "
                             "the errors and the relation's scatter enter its interval")
    parser.add_argument("--bolometric-corrections", nargs=2, type=float, metavar=("BC1", "BC2"),
                        help="bolometric corrections of primary and secondary in --band (e.g. "
                             "V), from a table of your choice: m_bol = m + BC; the Eker et al. "
                             "2018 relation is then used")
    parser.add_argument("--band", default=None,
                        help="band of --magnitudes: 'bol' (bolometric; coefficients of "
                             "Eker et al. 2018, scatter assumed, not the paper's), 'K' (2MASS "
                             "Ks; Mann et al. 2019, scatter quoted from memory of the paper), "
                             "or e.g. 'V' with --bolometric-corrections")


def check_mass_arguments(args):
    """Refuse mass options that are out of range or would be ignored, before any fitting
    (the rule is ``masses.check_mass_inputs``, shared with the batch manifest)."""
    from ..masses import check_mass_inputs

    check_mass_inputs(args.parallax, args.mass_ratio, args.rv_amplitudes, args.magnitudes,
                      args.band, args.bolometric_corrections,
                      velocity_log=bool(getattr(args, "rv", None)))


def add_elements_arguments(parser, name="result", help_text="result document of 'orbweigh "
                           "fit --json'"):
    """Add the positional document (now optional), --elements and --elements-file."""
    parser.add_argument(name, metavar="RESULT.json", nargs="?", help=help_text + "; or give "
                        "--elements / --elements-file instead")
    parser.add_argument("--elements", metavar="'P=… T=… …'",
                        help="published elements instead of a document, e.g. 'P=41.623±0.05 "
                             "T=1934.008 e=0.2763 a=0.907 i=59.025 Omega=23.717 "
                             "omega=219.907' (errors optional, ± or +-; T in any epoch form "
                             "of a log: 1934.008 is Besselian, J1934.0, JD…, MJD…, ISO)")
    parser.add_argument("--elements-file", metavar="FILE.toml",
                        help="published elements in a TOML file: each element a number or "
                             "{value = …, error = …}, optional name, reference, ra, dec, "
                             "parallax (see docs/elements-file.md)")


def load_elements_document(args, name="result"):
    """The result document named by the options of ``add_elements_arguments``."""
    from ..errors import InputError
    from ..published import parse_elements_option, read_elements_file
    from ..result import load_result

    given = [x for x in (getattr(args, name), args.elements, args.elements_file) if x]
    if len(given) != 1:
        raise InputError("give exactly one source of elements: a result document, "
                         "--elements 'P=… T=… e=… a=… i=… Omega=… omega=…', or "
                         "--elements-file FILE.toml")
    if args.elements:
        return parse_elements_option(args.elements)
    if args.elements_file:
        return read_elements_file(args.elements_file)
    return load_result(getattr(args, name))


def check_options(args):
    """Refuse, before any reading, fitting or sampling, an option out of its range.

    ``main`` calls it for every command: the bounds of ``LIMITS`` (memory and time follow
    the counts; physical values must be finite and make sense) and the seed. Rules that join several options live beside them
    (``check_mass_arguments``, the sampling and velocity checks of ``fit``); the range of
    a single physical value is checked where it is used, before the slow work.
    """
    from ..errors import InputError

    command = getattr(args, "command", None)
    for (where, name), (low, high, why) in LIMITS.items():
        value = getattr(args, name, None)
        if value is None or where not in (None, command) or \
                (where is None and (command, name) in LIMITS):
            continue
        if not low <= value <= high:
            raise InputError(f"--{name.replace('_', '-')} {value} is outside {low}..{high:,} "
                             f"({why}); give a value in that range")
    seed = getattr(args, "seed", None)
    if seed is not None and not 0 <= seed <= MAX_SEED:
        raise InputError(f"--seed {seed}: a seed is a whole number from 0 to 2^63 - 1")
