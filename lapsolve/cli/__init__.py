"""Command line: ``lapsolve SUBCOMMAND ...``.

Each subcommand is a module with ``add_args(parser)`` and ``run(args) -> int``.
Only this layer prints and chooses exit codes: 0 ok, 1 verification failed,
2 bad input, 130 interrupted, 3 internal error (a bug: please report it).
"""

import argparse
import importlib
import logging
import sys

from ..errors import LapsolveError

#: Subcommand name -> module (relative to this package). The one registry of commands.
COMMANDS = {
    "solve": ".solve_cmd",
}


def build_parser():
    parser = argparse.ArgumentParser(
        prog="lapsolve",
        description="Solve the 2D Laplace equation with finite elements and certify "
                    "solvers and meshes against exact solutions.")
    parser.add_argument("--debug", action="store_true", help="show tracebacks and debug logs")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name, module in COMMANDS.items():
        mod = importlib.import_module(module, __name__)
        p = sub.add_parser(name, help=mod.HELP, description=mod.HELP)
        mod.add_args(p)
        p.set_defaults(_run=mod.run)
    return parser


class _Parser(argparse.ArgumentParser):
    pass


def main(argv=None):
    """Run the command line; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed a usage line
        return 2 if exc.code not in (0, None) else 0
    logging.basicConfig(level=logging.DEBUG if args.debug else logging.WARNING,
                        format="lapsolve: %(levelname)s: %(message)s")
    try:
        return int(args._run(args) or 0)
    except LapsolveError as exc:
        print(f"lapsolve: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("lapsolve: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - last line of defence: one line, no traceback
        if args.debug:
            raise
        text = " ".join(str(exc).split())[:300]
        print(f"lapsolve: internal error: {type(exc).__name__}: {text} "
              "(rerun with --debug for details)", file=sys.stderr)
        return 3
