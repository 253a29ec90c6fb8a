"""``orbweigh ephemeris``: predicted theta, rho (and x, y) at chosen epochs.

Epochs given on the command line are read in the scale of the document's T (a plain
decimal year is a Besselian year unless the document says otherwise) and written back in
that scale; the computation runs on Julian years. When the document has posterior draws
or a covariance, each row also gets its 68 % band.
"""
from __future__ import annotations

import json

import numpy as np

from ..errors import InputError

__all__ = ["add_arguments", "run", "epoch_grid", "parse_epoch_list", "ephemeris_rows",
           "MAX_ROWS"]

#: Largest number of epochs one command computes (a guard against a mistyped --step).
MAX_ROWS = 100_000

_BAND_KEYS = ("theta_low_deg", "theta_high_deg", "rho_low_arcsec", "rho_high_arcsec")
_UNITS = {"theta_deg": "deg", "rho_arcsec": "arcsec", "x_arcsec": "arcsec",
          "y_arcsec": "arcsec", "theta_low_deg": "deg", "theta_high_deg": "deg",
          "rho_low_arcsec": "arcsec", "rho_high_arcsec": "arcsec"}


def add_arguments(parser):
    parser.add_argument("elements", metavar="ELEMENTS.json",
                        help="result document of 'orbweigh fit --json', or a file holding "
                             "just its 'elements' block")
    parser.add_argument("--start", type=float, help="first epoch (in the scale of T in the "
                        "document; a plain decimal year is a Besselian year)")
    parser.add_argument("--stop", type=float, help="last epoch (included when on the grid)")
    parser.add_argument("--step", type=float, default=1.0,
                        help="spacing of the epochs (yr; d when T is a JD or MJD) [1.0]")
    parser.add_argument("--epochs", help="comma-separated list of epochs instead of a grid, "
                        "e.g. 2027.3,2031.9")
    parser.add_argument("--json", metavar="PATH|-", help="write the rows as JSON ('-' for "
                        "standard output, which then replaces the printed table)")
    parser.add_argument("--ecsv", metavar="PATH", help="write the rows as an ECSV table")
    parser.add_argument("--draws", type=int, default=1000,
                        help="element draws used for the 68%% bands [1000]")
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
    n = int(np.floor((stop - start) / step * (1 + 1e-12))) + 1
    if n > MAX_ROWS:
        raise InputError(f"{names[0]} {start} {names[1]} {stop} --step {step} gives {n} epochs, "
                         f"more than {MAX_ROWS}; use a larger --step or a shorter span")
    return start + step * np.arange(n)


def parse_epoch_list(text):
    """Epochs from a comma-separated list such as '2027.3,2031.9'.

    Raises
    ------
    InputError
        Naming the first item that is not a finite number.
    """
    items = text.split(",")
    values = []
    for k, item in enumerate(items, start=1):
        try:
            value = float(item)
        except ValueError:
            value = np.nan
        if not np.isfinite(value):
            raise InputError(f"--epochs: item {k} ({item.strip()!r}) is not a finite decimal "
                             "number; write the epochs as e.g. --epochs 2027.3,2031.9")
        values.append(value)
    if len(values) > MAX_ROWS:
        raise InputError(f"--epochs lists {len(values)} epochs, more than {MAX_ROWS}")
    return np.array(values)


def ephemeris_rows(doc, epochs, n_draws=1000, seed=1):
    """Ephemeris rows (dicts) for epochs written in the scale of the document's T.

    Parameters
    ----------
    doc : dict
        Result document (see ``orbweigh.result``).
    epochs : array_like
        Epochs in the document's scale (Besselian years by default).
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
    """
    from ..ephemeris import ephemeris, ephemeris_bands
    from ..reductions import to_julian_year
    from ..result import element_draws, elements_from_document, epoch_scale_of

    if n_draws < 2:
        raise InputError(f"--draws must be at least 2, got {n_draws}")
    epochs = np.asarray(epochs, float)
    t = to_julian_year(epochs, epoch_scale_of(doc))
    elements = elements_from_document(doc)
    eph = ephemeris(elements, t)
    columns = {"epoch": epochs, "theta_deg": eph.theta_deg, "rho_arcsec": eph.rho_arcsec,
               "x_arcsec": eph.x_arcsec, "y_arcsec": eph.y_arcsec}
    draws = element_draws(doc, n_draws, seed)
    if draws is not None:
        bands = ephemeris_bands(elements, draws, t)
        columns.update(zip(_BAND_KEYS, (bands.theta_low_deg, bands.theta_high_deg,
                                        bands.rho_low_arcsec, bands.rho_high_arcsec)))
    rows = [{k: float(v[j]) for k, v in columns.items()} for j in range(epochs.size)]
    return rows, 0 if draws is None else len(draws)


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


def _write_ecsv(path, rows, meta, scale):
    from astropy.table import Table

    from ..reductions import epoch_unit
    table = Table(rows=[list(r.values()) for r in rows], names=list(rows[0]), meta=meta)
    table["epoch"].unit = epoch_unit(scale)
    table["epoch"].description = f"epoch ({scale} scale, as T in the document)"
    for name in table.colnames[1:]:
        table[name].unit = _UNITS[name]
    table.write(path, format="ascii.ecsv", overwrite=True)


def run(args):
    from ..result import epoch_scale_of, load_result

    doc = load_result(args.elements)
    if args.epochs is not None:
        if args.start is not None or args.stop is not None:
            raise InputError("give either --epochs or --start/--stop, not both")
        epochs = parse_epoch_list(args.epochs)
    else:
        epochs = epoch_grid(args.start, args.stop, args.step)
    rows, n_used = ephemeris_rows(doc, epochs, args.draws, args.seed)
    scale = epoch_scale_of(doc)
    meta = {"source": str(args.elements), "epoch_scale": scale, "n_draws": n_used,
            "seed": args.seed if n_used else None,
            "bands": "central 68% of the element draws" if n_used else "none (no draws "
                     "or covariance in the document)"}
    if args.json:
        text = json.dumps({**meta, "ephemeris": rows}, indent=1)
        if args.json == "-":
            print(text)
        else:
            with open(args.json, "w") as fh:
                fh.write(text + "\n")
    if args.ecsv:
        _write_ecsv(args.ecsv, rows, meta, scale)
    if args.json != "-":
        header = [f"ephemeris of {args.elements}; epochs in the {scale} scale of T",
                  f"68% bands from {n_used} element draws, seed {args.seed}" if n_used
                  else "no draws or covariance in the document: no bands"]
        print(_format_table(rows, header))
    return 0
