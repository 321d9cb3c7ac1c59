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

#: Built-in subcommands: name -> module (relative to this package).
COMMANDS = {
    "solve": ".solve_cmd",
    "bounds": ".bounds_cmd",
}

#: Entry-point group through which other packages add subcommands. The
#: ``verification`` package registers its commands there (see pyproject.toml),
#: so this package never imports it: the layers stay one-way.
PLUGIN_GROUP = "lapsolve.commands"


def _command_modules():
    for name, module in COMMANDS.items():
        try:
            yield name, importlib.import_module(module, __name__)
        except ImportError as exc:
            yield name, _Unavailable(name, exc)
    from importlib.metadata import entry_points

    for ep in sorted(entry_points(group=PLUGIN_GROUP), key=lambda e: e.name):
        if ep.name not in COMMANDS:
            try:
                yield ep.name, ep.load()
            except ImportError as exc:
                yield ep.name, _Unavailable(ep.name, exc)


class _UsageError(Exception):
    """A command line that argparse refuses; shown as one line like every error."""

    def __init__(self, prog, message):
        super().__init__(message)
        self.prog = prog


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        raise _UsageError(self.prog, message)


class _Unavailable:
    """Stands in for a registered command whose module cannot be imported."""

    HELP = "(unavailable in this installation)"

    def __init__(self, name, exc):
        self.name, self.exc = name, exc

    def add_args(self, parser):
        parser.add_argument("rest", nargs="*")

    def run(self, args):
        raise LapsolveError(f"command '{self.name}' is unavailable: {self.exc}")


def build_parser():
    parser = _Parser(
        prog="lapsolve",
        description="Solve the 2D Laplace equation with finite elements and certify "
                    "solvers and meshes against exact solutions.")
    parser.add_argument("--debug", action="store_true", help="show tracebacks and debug logs")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name, mod in _command_modules():
        p = sub.add_parser(name, help=mod.HELP, description=mod.HELP)
        mod.add_args(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None):
    """Run the command line; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except _UsageError as exc:
        text = " ".join(str(exc).split())
        print(f"lapsolve: error: {exc.prog}: {text} (see '{exc.prog} --help')", file=sys.stderr)
        return 2
    except SystemExit as exc:  # --help and --version exit through argparse
        return 2 if exc.code not in (0, None) else 0
    logging.basicConfig(level=logging.DEBUG if args.debug else logging.WARNING,
                        format="lapsolve: %(levelname)s: %(message)s")
    # Library warnings (numpy's RuntimeWarning, ...) go to the log, not as extra
    # lines on stderr: an error stays one line unless --debug asks for more.
    logging.captureWarnings(True)
    logging.getLogger("py.warnings").setLevel(logging.DEBUG if args.debug else logging.ERROR)
    try:
        return _run(args)
    finally:
        logging.captureWarnings(False)


def _run(args):
    """Run the chosen subcommand and map its outcome to an exit code."""
    try:
        return int(args._run(args) or 0)
    except LapsolveError as exc:
        print(f"lapsolve: error: {' '.join(str(exc).split())}", file=sys.stderr)
        return exc.exit_code
    except MemoryError:  # the estimates before allocating were not enough
        print("lapsolve: error: ran out of memory; use a larger element size, a lower order "
              "or fewer refinements", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("lapsolve: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # last line of defence: one line, no traceback
        if args.debug:
            raise
        text = " ".join(str(exc).split())[:300]
        print(f"lapsolve: internal error: {type(exc).__name__}: {text} "
              "(rerun with --debug for details)", file=sys.stderr)
        return 3
