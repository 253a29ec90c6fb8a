"""Entry point of the ``orbweigh`` command.

Each sub-command lives in its own module ``orbweigh.cli.<name>`` with two functions,
``add_arguments(parser)`` and ``run(args) -> int``. Modules are imported only for the
command being run, so ``orbweigh --help`` stays fast (no matplotlib, emcee or scipy).
"""
from __future__ import annotations

import argparse
import importlib
import os
import re
import sys

__all__ = ["main", "COMMANDS", "BROKEN_PIPE_STATUS"]

#: Exit status when the reader of standard output goes away (``orbweigh check LOG | head``):
#: 128 + SIGPIPE, what a shell reports for a program that a closed pipe stops, so
#: ``set -o pipefail`` sees the same as for any other tool of the pipe.
BROKEN_PIPE_STATUS = 141

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


class _Parser(argparse.ArgumentParser):
    """argparse with values that start with '-' and a digit read as values.

    Plain argparse takes only '-8' and '-8.2' for values and reads '-08d12m05s',
    '-08:12:05' or '-1e-3' as an unknown option ("expected one argument"). No orbweigh
    option starts with '-' and a digit, so every such word is a value: southern
    declinations, negative epochs, magnitudes or corrections, as written.
    """

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = re.compile(r"^-\.?\d")


def build_parser(command=None):
    from .. import __version__
    parser = _Parser(
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
    try:
        return _main(sys.argv[1:] if argv is None else list(argv))
    except BrokenPipeError:
        return _closed_pipe()


def _main(argv):
    command = next((a for a in argv if a in COMMANDS), None)
    parser = build_parser(command)
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    from ..errors import OrbweighError
    try:
        from .common import check_options
        check_options(args)
        status = importlib.import_module(f"orbweigh.cli.{args.command}").run(args) or 0
        sys.stdout.flush()    # a closed pipe shows here, not at interpreter exit
        return status
    except BrokenPipeError:
        raise                 # not an error of the input: main() stops quietly
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


def _closed_pipe():
    """Stop quietly when standard output's reader has gone (the Python documentation's
    recipe for SIGPIPE): later writes and the final flush go to the null device."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, sys.stdout.fileno())
    return BROKEN_PIPE_STATUS


if __name__ == "__main__":
    sys.exit(main())
