"""Command-line options shared by the commands that read a measurement log."""
from __future__ import annotations

__all__ = ["add_log_arguments", "load_log"]


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
                        help="J2000 declination of the pair, degrees or +dd:mm:ss (write "
                             "--target-dec=-16:42:58 for a negative sexagesimal value)")
    parser.add_argument("--strict", action="store_true",
                        help="stop at the first unusable row instead of rejecting it")


def load_log(args):
    """The ``MeasurementSet`` described by the options of ``add_log_arguments``."""
    from ..measurements import parse_column_mapping, read_measurements

    columns = parse_column_mapping(args.columns) if args.columns else None
    return read_measurements(args.log, columns=columns, target_ra_deg=args.target_ra,
                             target_dec_deg=args.target_dec, strict=args.strict)
