"""Entry point of the ``orbweigh`` command.

Each sub-command lives in its own module ``orbweigh.cli.<name>`` with two functions,
``add_arguments(parser)`` and ``run(args) -> int``. Modules are imported only for the
command being run, so ``orbweigh --help`` stays fast (no matplotlib, emcee or scipy).
"""
from __future__ import annotations

import argparse
import importlib
import sys

__all__ = ["main", "COMMANDS"]

#: name -> one-line help. The module orbweigh.cli.<name> implements it.
COMMANDS = {
    "check": "read a measurement log and report every row: used, excluded or rejected",
    "ephemeris": "predict position angle and separation at chosen epochs",
    "fit": "fit an apparent orbit (and masses) to a measurement log",
    "mass": "recompute masses from a saved fit result with a new parallax or mass ratio",
    "report": "write an HTML report, figures and tables from a saved fit result",
    "plan": "advise when a new measurement would best improve the orbit and mass",
    "batch": "check and refit many systems listed in a manifest",
    "compare": "compare two orbits of one pair: elements in sigma, predictions on the sky",
}


def build_parser(command=None):
    from .. import __version__
    parser = argparse.ArgumentParser(
        prog="orbweigh",
        description="Weigh binary stars by their orbits: measurement log -> apparent orbit "
                    "-> dynamical masses.")
    parser.add_argument("--version", action="version", version=f"orbweigh {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, help_text in COMMANDS.items():
        p = sub.add_parser(name, help=help_text, description=help_text[0].upper() + help_text[1:] + ".")
        if name == command:
            importlib.import_module(f"orbweigh.cli.{name}").add_arguments(p)
    return parser


def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    command = next((a for a in argv if a in COMMANDS), None)
    parser = build_parser(command)
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    from ..errors import OrbweighError
    try:
        return importlib.import_module(f"orbweigh.cli.{args.command}").run(args) or 0
    except OrbweighError as exc:
        print(f"orbweigh {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"orbweigh {args.command}: error: {exc.strerror or exc}: "
              f"{getattr(exc, 'filename', '') or ''}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"orbweigh {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
