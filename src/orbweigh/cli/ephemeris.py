"""``orbweigh ephemeris``: predicted theta, rho (and x, y) at chosen epochs.

Epochs given on the command line are read like a log's (a plain decimal year is a
Besselian year; J2030.0, JD…, MJD…, ISO dates; plain small numbers are MJD when the
document's T is a day count) and written back in the scale given; the computation runs
on Julian years. When the document has posterior draws or a covariance, each row also
gets its 68 % band; with only the elements' own errors the band comes from independent
draws and the output says the correlations are unknown.
"""
from __future__ import annotations

import json

import numpy as np

from ..errors import InputError
from ..files import write_atomic

__all__ = ["add_arguments", "run", "epoch_grid", "parse_epoch_option", "parse_epoch_list",
           "epochs_from_options", "ephemeris_rows", "target_of", "to_equinox_of_date",
           "MAX_ROWS", "MAX_BAND_POINTS"]

#: Largest number of epochs one command computes (a guard against a mistyped --step).
MAX_ROWS = 100_000
#: Largest draws x epochs of the 68 % bands (computed in chunks: time, not memory,
#: follows it; 10^8 take about 30 s of CPU, benchmarks/bench_option_limits.py).
MAX_BAND_POINTS = 100_000_000

_BAND_KEYS = ("theta_low_deg", "theta_high_deg", "rho_low_arcsec", "rho_high_arcsec")
_UNITS = {"theta_deg": "deg", "rho_arcsec": "arcsec", "x_arcsec": "arcsec",
          "y_arcsec": "arcsec", "theta_low_deg": "deg", "theta_high_deg": "deg",
          "rho_low_arcsec": "arcsec", "rho_high_arcsec": "arcsec"}


def add_arguments(parser):
    from .common import add_elements_arguments
    add_elements_arguments(parser, "document", "result document of 'orbweigh fit --json', "
                           "or a file holding just its 'elements' block")
    parser.add_argument("--start", help="first epoch, in any form a log accepts (2027.0 is a "
                        "Besselian year; J2027.0, JD2461406.5, MJD61406, 2027-01-01)")
    parser.add_argument("--stop", help="last epoch (included when on the grid)")
    parser.add_argument("--step", type=float, default=1.0,
                        help="spacing of the epochs (yr; d when --start is a JD or MJD) [1.0]; "
                             f"at most {MAX_ROWS:,} epochs")
    parser.add_argument("--epochs", help="comma-separated list of epochs instead of a grid, "
                        "e.g. 2027.3,J2031.9,2033-05-17")
    parser.add_argument("--equinox", choices=("J2000", "date"), default="J2000",
                        help="equinox of the theta columns: J2000 (as fitted) or 'date' "
                             "(precessed to each epoch's equinox, as an observer measures; "
                             "needs the pair's coordinates) [J2000]")
    parser.add_argument("--target-ra", metavar="RA", help="J2000 right ascension of the pair "
                        "(degrees or hh:mm:ss.s), for --equinox date")
    parser.add_argument("--target-dec", metavar="DEC", help="J2000 declination of the pair "
                        "(degrees, -16:42:58 or -16d42m58s), for --equinox date")
    parser.add_argument("--json", metavar="PATH|-", help="write the rows as JSON ('-' for "
                        "standard output, which then replaces the printed table)")
    parser.add_argument("--ecsv", metavar="PATH", help="write the rows as an ECSV table")
    parser.add_argument("--draws", type=int, default=1000,
                        help="element draws used for the 68%% bands, 2 to 10,000, and draws "
                             f"x epochs at most {MAX_BAND_POINTS:,} [1000]")
    parser.add_argument("--seed", type=int, default=1,
                        help="seed of the random choice of draws [1]")


def epoch_grid(start, stop, step, names=("--start", "--stop")):
    """Epochs start, start + step, ... up to stop (included), with checks.

    ``names`` are the option names used in error messages.

    Raises
    ------
    InputError
        When start >= stop, step <= 0 or the grid would exceed ``MAX_ROWS`` epochs.
    """
    if start is None or stop is None:
        raise InputError("give either --start and --stop (with --step), or --epochs")
    if not np.isfinite([start, stop, step]).all():
        raise InputError(f"{names[0]}, {names[1]} and --step must be finite numbers")
    if not start < stop:
        raise InputError(f"{names[0]} ({start}) must be earlier than {names[1]} ({stop})")
    if not step > 0:
        raise InputError(f"--step must be positive, got {step}")
    n = np.floor((stop - start) / step * (1 + 1e-12)) + 1   # a float: may be huge or inf
    if not n <= MAX_ROWS:
        raise InputError(f"{names[0]} {start} {names[1]} {stop} --step {step} gives "
                         f"{f'{n:,.0f}' if n < 1e15 else f'{n:.3g}'} epochs, more than {MAX_ROWS:,}; use a larger --step or a shorter "
                         "span")
    return start + step * np.arange(int(n))


def parse_epoch_option(text, option, day_unit=False):
    """(number, scale) of one epoch given on the command line, read like a log's epoch."""
    from ..reductions import split_epoch
    try:
        return split_epoch(text, day_unit)
    except ValueError as exc:
        raise InputError(f"{option}: {exc}") from None


def parse_epoch_list(text, day_unit=False):
    """Epochs (numbers in their scale) and the one scale of a list such as '2027.3,2031.9'.

    Raises
    ------
    InputError
        Naming the first item that is not an epoch, or when the items mix scales.
    """
    values, scales = [], set()
    for k, item in enumerate(text.split(","), start=1):
        value, scale = parse_epoch_option(item, f"--epochs: item {k} ({item.strip()!r})",
                                          day_unit)
        values.append(value)
        scales.add(scale)
    if len(values) > MAX_ROWS:
        raise InputError(f"--epochs lists {len(values)} epochs, more than {MAX_ROWS}")
    if len(scales) > 1:
        raise InputError(f"--epochs mixes epoch scales ({', '.join(sorted(scales))}); write "
                         "all the epochs of one list in the same form")
    return np.array(values), scales.pop()


def epochs_from_options(start, stop, step, epochs=None, day_unit=False,
                        names=("--start", "--stop")):
    """(epochs in the user's scale, that scale, Julian years) from --start/--stop or --epochs.

    The grid runs in the scale of ``start`` (a ``stop`` in another form is converted);
    ``step`` is in that scale's unit (yr, or d for JD/MJD).
    """
    from ..reductions import from_julian_year, to_julian_year
    if epochs is not None:
        if start is not None or stop is not None:
            raise InputError("give either --epochs or --start/--stop, not both")
        values, scale = parse_epoch_list(epochs, day_unit)
    else:
        if start is None or stop is None:
            raise InputError("give either --start and --stop (with --step), or --epochs")
        first, scale = parse_epoch_option(start, names[0], day_unit)
        last, last_scale = parse_epoch_option(stop, names[1], day_unit)
        if last_scale != scale:
            last = float(from_julian_year(to_julian_year(last, last_scale), scale))
        values = epoch_grid(first, last, step, names)
    return values, scale, to_julian_year(values, scale)


def ephemeris_rows(doc, epochs, t_yr, n_draws=1000, seed=1):
    """Ephemeris rows (dicts) at ``t_yr``, each labelled with its epoch as the user wrote it.

    Parameters
    ----------
    doc : dict
        Result document (see ``orbweigh.result``).
    epochs : array_like
        Epochs in the user's scale (written back in the rows).
    t_yr : array_like
        The same epochs as decimal Julian years.
    n_draws : int
        Element draws for the bands (when the document has draws or a covariance).
    seed : int
        Seed of the draws.

    Returns
    -------
    rows : list of dict
        Keys epoch (as given), theta_deg, rho_arcsec, x_arcsec, y_arcsec, and the
        ``*_low/*_high`` band keys when draws exist.
    n_used : int
        Number of draws behind the bands (0 when there are none).
    independent : bool
        True when the draws come from the elements' own errors taken as independent.
    """
    from ..ephemeris import ephemeris, ephemeris_bands
    from ..result import element_draws, elements_from_document, independent_draws

    epochs = np.asarray(epochs, float)
    t = np.asarray(t_yr, float)
    elements = elements_from_document(doc)
    eph = ephemeris(elements, t)
    columns = {"epoch": epochs, "theta_deg": eph.theta_deg, "rho_arcsec": eph.rho_arcsec,
               "x_arcsec": eph.x_arcsec, "y_arcsec": eph.y_arcsec}
    if n_draws * epochs.size > MAX_BAND_POINTS:
        raise InputError(f"--draws {n_draws} at {epochs.size:,} epochs is "
                         f"{n_draws * epochs.size:,} predictions for the bands, more than "
                         f"{MAX_BAND_POINTS:,} (half a minute of CPU); use fewer --draws, a larger "
                         "--step or a shorter span")
    draws = element_draws(doc, n_draws, seed)
    independent = draws is None
    if independent:
        draws = independent_draws(doc, n_draws, seed)
    if draws is not None:
        bands = ephemeris_bands(elements, draws, t)
        columns.update(zip(_BAND_KEYS, (bands.theta_low_deg, bands.theta_high_deg,
                                        bands.rho_low_arcsec, bands.rho_high_arcsec)))
    rows = [{k: float(v[j]) for k, v in columns.items()} for j in range(epochs.size)]
    return rows, 0 if draws is None else len(draws), independent and draws is not None


def target_of(doc, ra=None, dec=None):
    """(ra_deg, dec_deg) of the pair: the options, else the document's ``target``; or None."""
    from ..reductions import parse_target_coordinates
    if (ra is None) != (dec is None):
        raise InputError("give both --target-ra and --target-dec, or neither")
    if ra is not None:
        return parse_target_coordinates(ra, dec)
    target = doc.get("target")
    if isinstance(target, dict) and "ra_deg" in target and "dec_deg" in target:
        return parse_target_coordinates(target["ra_deg"], target["dec_deg"])
    return None


def to_equinox_of_date(rows, t_yr, target):
    """Theta columns of ``rows`` precessed from equinox J2000 to each epoch's equinox."""
    from ..reductions import precess_theta_to_date
    t = np.asarray(t_yr, float)
    for key in ("theta_deg", "theta_low_deg", "theta_high_deg"):
        if key in rows[0]:
            values = precess_theta_to_date([r[key] for r in rows], t, *target)
            for r, v in zip(rows, values):
                r[key] = float(v)


def _format_table(rows, header):
    keys = list(rows[0])
    lines = [f"# {h}" for h in header]
    lines.append("  ".join(f"{k:>15s}" for k in keys))
    for row in rows:
        cells = [f"{row['epoch']:15.4f}"]
        cells += [f"{row[k]:15.3f}" if k.startswith("theta") else f"{row[k]:15.4f}"
                  for k in keys[1:]]
        lines.append("  ".join(cells))
    return "\n".join(lines)


def _write_ecsv(path, rows, meta, scale, inputs=()):
    from astropy.table import Table

    from ..files import write_table
    from ..reductions import epoch_unit
    table = Table(rows=[list(r.values()) for r in rows], names=list(rows[0]), meta=meta)
    table["epoch"].unit = epoch_unit(scale)
    table["epoch"].description = f"epoch ({scale} scale, as given)"
    for name in table.colnames[1:]:
        table[name].unit = _UNITS[name]
    write_table(path, table, inputs=inputs)


def run(args):
    from ..published import INDEPENDENT_ERRORS_NOTE
    from ..reductions import epoch_unit
    from ..result import epoch_scale_of
    from .common import load_elements_document

    doc = load_elements_document(args, "document")
    source = doc["_path"]
    day_unit = epoch_unit(epoch_scale_of(doc)) == "d"
    epochs, scale, t = epochs_from_options(args.start, args.stop, args.step, args.epochs,
                                           day_unit)
    rows, n_used, independent = ephemeris_rows(doc, epochs, t, args.draws, args.seed)
    target = target_of(doc, args.target_ra, args.target_dec)
    if args.equinox == "date":
        if target is None:
            raise InputError("--equinox date needs the pair's J2000 coordinates: give "
                             "--target-ra and --target-dec, or ra and dec in the elements file")
        to_equinox_of_date(rows, t, target)
        equinox = "equinox of date (each epoch's own), precessed from J2000 with astropy FK5"
    else:
        equinox = "J2000"
    bands = ("central 68% of the element draws" if n_used else
             "none (no draws, covariance or element errors in the document)")
    if independent:
        bands += "; " + INDEPENDENT_ERRORS_NOTE
    meta = {"source": source, "epoch_scale": scale, "theta_equinox": equinox,
            "n_draws": n_used,
            "seed": args.seed if n_used else None, "bands": bands,
            "correlations": "unknown" if independent else ("from the document" if n_used
                                                           else None)}
    if args.json:
        text = json.dumps({**meta, "ephemeris": rows}, indent=1)
        if args.json == "-":
            print(text)
        else:
            write_atomic(args.json, text + "\n", [source, args.elements_file])
    if args.ecsv:
        _write_ecsv(args.ecsv, rows, meta, scale, [source, args.elements_file])
    if args.json != "-":
        header = [f"ephemeris of {source}; epochs in the {scale} scale, as given",
                  f"theta columns: {equinox}",
                  f"68% bands from {n_used} element draws, seed {args.seed}" if n_used
                  else "no draws, covariance or element errors in the document: no bands"]
        if independent:
            header.append(INDEPENDENT_ERRORS_NOTE)
        print(_format_table(rows, header))
    return 0
