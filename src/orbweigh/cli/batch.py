"""``orbweigh batch MANIFEST --out DIR``: revision verdicts and refits of many systems."""
from __future__ import annotations

__all__ = ["add_arguments", "run"]


def add_arguments(parser):
    parser.add_argument("manifest", metavar="MANIFEST",
                        help="CSV or TOML manifest, one system a row: id, log (relative to "
                             "the manifest), optional previous elements P T e a i Omega omega "
                             "(+ _err, last_epoch), parallax_mas, parallax_err_mas, q, q_err, "
                             "rv_log, ra_deg, dec_deg")
    parser.add_argument("--out", required=True, metavar="DIR",
                        help="output folder: summary.ecsv, summary.csv, index.html, systems/")
    parser.add_argument("--workers", type=int, metavar="N",
                        help="local worker processes, 1 to 64 (default: number of CPUs; 1 = "
                             "no pool)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run on this Dask distributed scheduler (e.g. tcp://host:8786) "
                             "instead of a local pool; workers must see the manifest folder")
    parser.add_argument("--only-contradicted", action="store_true",
                        help="fit only the systems whose previous orbit the new data contradict")
    parser.add_argument("--resume", action="store_true",
                        help="skip systems already done in DIR with the same inputs")
    parser.add_argument("--pages", choices=("flagged", "all", "none"), default="flagged",
                        help="HTML pages for: 'flagged' systems (contradicted, drifting, "
                             "failed or warned; default), 'all' fitted systems, or 'none'")
    parser.add_argument("--strict", action="store_true",
                        help="fail a system whose log has any rejected line (default: fit "
                             "without it and list it in the warnings column)")
    parser.add_argument("--seed", type=int, default=0, metavar="N",
                        help="batch seed; each system's seed derives from it and its id "
                             "(default 0)")
    parser.add_argument("--quiet", action="store_true",
                        help="no per-system lines and no progress bar")


def run(args):
    import sys

    from .. import formatting as fmt
    from ..batch import BatchOptions, run_batch
    from ..errors import InputError
    if args.workers and args.scheduler:
        raise InputError("give either --workers (local pool) or --scheduler (Dask cluster), "
                         "not both")
    options = BatchOptions(seed=args.seed, only_contradicted=args.only_contradicted,
                           pages=args.pages, strict=args.strict)
    counts = run_batch(args.manifest, args.out, options, workers=args.workers,
                       scheduler=args.scheduler, resume=args.resume, progress=not args.quiet)
    failed = counts.n_failed
    if not args.quiet:
        tally = ", ".join(f"{n} {v}" for v, n in sorted(counts.verdicts.items()))
        print(f"{fmt.counted(counts.n_systems, 'system')}{f' ({tally})' if tally else ''}; "
              f"{failed} failed. Summary: "
              f"{args.out}/summary.ecsv, index: {args.out}/index.html")
    if failed:
        print(f"orbweigh batch: {fmt.counted(failed, 'system')} failed; see the 'error' "
              f"column of {args.out}/summary.csv", file=sys.stderr)
    return 1 if failed else 0
