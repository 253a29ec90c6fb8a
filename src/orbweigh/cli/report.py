"""``orbweigh report RESULT.json --out DIR``: HTML report, figures and tables of a saved fit."""
from __future__ import annotations

from ..errors import InputError

__all__ = ["add_arguments", "run"]


def add_arguments(parser):
    parser.add_argument("result", metavar="RESULT.json",
                        help="result document written by 'orbweigh fit --json'")
    parser.add_argument("--out", required=True, metavar="DIR",
                        help="directory for report.html, elements.tex, residuals.ecsv and the "
                             "figures, written as a whole: a new folder, or one holding only an "
                             "earlier report, which is replaced")
    parser.add_argument("--formats", default="png,svg,pdf", metavar="LIST",
                        help="comma-separated figure formats among png, svg, pdf "
                             "(default: %(default)s); the HTML embeds its figures regardless")
    parser.add_argument("--seed", type=int, default=None,
                        help="seed of the figures' random draws (default: the fit's seed)")
    parser.add_argument("--name", metavar="NAME",
                        help="the object's name in the title and the LaTeX caption (default: "
                             "the name the fit recorded, else the log's file stem)")


def _formats(text):
    formats = tuple(f.strip().lower() for f in text.split(",") if f.strip())
    if not formats:
        raise InputError("--formats: give at least one of png, svg, pdf (comma-separated)")
    return formats


def run(args):
    from ..report import write_report
    from ..result import load_result
    formats = _formats(args.formats)
    doc = load_result(args.result)
    written = write_report(doc, args.out, formats=formats, seed=args.seed, name=args.name)
    print(f"wrote {len(written)} files to {args.out}: {written['report.html']}")
    return 0
