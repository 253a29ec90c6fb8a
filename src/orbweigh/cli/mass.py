"""``orbweigh mass``: recompute masses from a saved fit result, without refitting.

The (P, a) draws come from the fit's posterior draws file when the result has one, else
from its covariance matrix, else (with a warning) from the elements' own errors taken as
independent. With ``--json`` the input document is written back with its "mass" and
"parallax" blocks replaced and every other key kept.
"""
from __future__ import annotations

import json
import sys

__all__ = ["add_arguments", "run"]


def add_arguments(parser):
    parser.add_argument("result", metavar="RESULT.json", help="result document of 'orbweigh fit'")
    parser.add_argument("--parallax", nargs=2, type=float, metavar=("VALUE", "ERROR"),
                        help="trigonometric parallax and its error [mas]")
    ratio = parser.add_mutually_exclusive_group()
    ratio.add_argument("--mass-ratio", nargs=2, type=float, metavar=("Q", "QERR"),
                       help="mass ratio q = M2/M1 and its error, for the component masses")
    ratio.add_argument("--rv-amplitudes", nargs=4, type=float,
                       metavar=("K1", "K1ERR", "K2", "K2ERR"),
                       help="radial-velocity amplitudes and errors [km/s]; q = K1/K2")
    parser.add_argument("--magnitudes", nargs=2, type=float, metavar=("M1", "M2"),
                        help="apparent magnitudes of primary and secondary, for a dynamical "
                             "parallax when no trigonometric one is known")
    parser.add_argument("--band", default=None,
                        help="band of --magnitudes: 'bol' (bolometric; Eker et al. 2018) or "
                             "'K' (2MASS Ks; Mann et al. 2019)")
    parser.add_argument("--draws", type=int, default=4000, metavar="N",
                        help="number of (P, a) draws (default 4000)")
    parser.add_argument("--seed", type=int, default=1, metavar="N",
                        help="seed of every random draw (default 1)")
    parser.add_argument("--json", metavar="PATH", default=None,
                        help="write the result document with the mass blocks to PATH "
                             "('-' for standard output)")


def _draws(doc, n, seed):
    """(n, 7) element draws, their source, and the (P, a) covariance for the linear estimate."""
    import numpy as np

    from ..elements import ELEMENT_KEYS
    from ..errors import InputError
    from ..result import element_draws, elements_from_document

    draws = element_draws(doc, n, seed)
    if (doc.get("posterior") or {}).get("draws_file"):
        return draws, "posterior draws", None, []
    if draws is not None:
        cov = doc["covariance"]
        idx = [cov["parameters"].index(k) for k in ("P", "a")]
        return draws, "covariance", np.asarray(cov["matrix"], float)[np.ix_(idx, idx)], []
    errors = []
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        error = entry.get("error") if isinstance(entry, dict) else None
        if key in ("P", "a") and not (isinstance(error, (int, float)) and error >= 0):
            raise InputError(f"{doc['_path']}: no posterior draws, no covariance and no error "
                             f"for element '{key}': the mass needs the uncertainty of P and a")
        errors.append(float(error) if isinstance(error, (int, float)) else 0.0)
    best = np.array(elements_from_document(doc).as_tuple())
    draws = np.random.default_rng(seed).normal(best, errors, size=(n, len(best)))
    draws[:, [0, 3]] = np.abs(draws[:, [0, 3]])
    note = ("The result has no covariance matrix: P and a were drawn independently from "
            "their errors, ignoring their correlation.")
    return draws, "element errors", np.diag([errors[0] ** 2, errors[3] ** 2]), [note]


def run(args):
    from ..errors import InputError
    from ..masses import format_mass_blocks, mass_blocks
    from ..result import elements_from_document, load_result

    if args.parallax is None and args.magnitudes is None:
        raise InputError("the mass needs a distance: give --parallax VALUE ERROR [mas], or "
                         "--magnitudes M1 M2 --band bol|K for a dynamical parallax")
    if args.magnitudes is not None and args.band is None:
        raise InputError("--magnitudes needs --band: 'bol' (bolometric) or 'K' (2MASS Ks)")
    if args.band is not None and args.magnitudes is None:
        raise InputError("--band describes --magnitudes; give the magnitudes too, or drop --band")
    if args.draws < 2:
        raise InputError(f"--draws must be at least 2, got {args.draws}")
    doc = load_result(args.result)
    draws, source, cov_pa, notes = _draws(doc, args.draws, args.seed)
    best = elements_from_document(doc)
    blocks = mass_blocks(draws[:, 0], draws[:, 3], parallax=args.parallax,
                         mass_ratio=args.mass_ratio, rv_amplitudes=args.rv_amplitudes,
                         magnitudes=args.magnitudes, band=args.band, seed=args.seed,
                         best=(best.period_yr, best.a_arcsec), cov_Pa=cov_pa,
                         e_draws=draws[:, 2], i_draws=draws[:, 4])
    blocks["warnings"][:0] = notes
    blocks["mass"]["warnings"][:0] = notes
    blocks["mass"]["draws_source"] = source
    text = f"{doc['_path']}: (P, a) from {source}\n" + format_mass_blocks(blocks)
    print(text, file=sys.stderr if args.json == "-" else sys.stdout)
    if args.json:
        out = {k: v for k, v in doc.items() if k != "_path"}
        out["mass"], out["parallax"] = blocks["mass"], blocks["parallax"]
        payload = json.dumps(out, indent=2) + "\n"
        if args.json == "-":
            sys.stdout.write(payload)
        else:
            with open(args.json, "w") as handle:
                handle.write(payload)
    return 0
