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

from ..files import write_atomic
from .common import add_mass_arguments, check_mass_arguments


def add_arguments(parser):
    from .common import add_elements_arguments
    add_elements_arguments(parser, "result", "result document of 'orbweigh fit'")
    add_mass_arguments(parser)
    parser.add_argument("--draws", type=int, default=4000, metavar="N",
                        help="number of (P, a) draws, 2 to 200,000 (default 4000)")
    parser.add_argument("--seed", type=int, default=1, metavar="N",
                        help="seed of every random draw (default 1)")
    parser.add_argument("--json", metavar="PATH", default=None,
                        help="write the result document with the mass blocks to PATH "
                             "('-' for standard output)")


def run(args):
    from ..errors import InputError
    from ..masses import format_mass_blocks, masses_for_document
    from ..solution import require_determined
    from .common import load_elements_document

    doc = load_elements_document(args, "result")
    given = doc.get("parallax_input") or {}
    if args.parallax is None and given.get("error") is not None:
        args.parallax = [given["value"], given["error"]]   # from the elements file
    if args.parallax is None and args.magnitudes is None:
        raise InputError("the mass needs a distance: give --parallax VALUE ERROR [mas], or "
                         "--magnitudes M1 M2 --band bol|K for a dynamical parallax")
    check_mass_arguments(args)
    require_determined(doc, "mass and no dynamical parallax")
    blocks = masses_for_document(doc, parallax=args.parallax, mass_ratio=args.mass_ratio,
                                 rv_amplitudes=args.rv_amplitudes, magnitudes=args.magnitudes,
                                 band=args.band, n_draws=args.draws, seed=args.seed,
                                 bolometric_corrections=args.bolometric_corrections)
    source = blocks["mass"]["draws_source"]
    text = f"{doc['_path']}: (P, a) from {source}\n" + format_mass_blocks(blocks)
    print(text, file=sys.stderr if args.json == "-" else sys.stdout)
    if args.json:
        out = {k: v for k, v in doc.items() if k != "_path"}
        out["mass"], out["parallax"] = blocks["mass"], blocks["parallax"]
        payload = json.dumps(out, indent=2) + "\n"
        if args.json == "-":
            sys.stdout.write(payload)
        else:
            write_atomic(args.json, payload)
    return 0

