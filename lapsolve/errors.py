"""Typed errors raised by the library.

The library never prints or exits; the command line maps these to one-line
messages and exit codes (see ``lapsolve.cli``).
"""


class LapsolveError(Exception):
    """Base class of every error the tool raises on purpose."""

    exit_code = 2


class InputError(LapsolveError):
    """Bad input: a file, a field or a value the user supplied.

    Parameters
    ----------
    message : str
        What is wrong, in one sentence.
    source : str, optional
        The file (or other origin) the value came from.
    field : str, optional
        The dotted name of the offending field, e.g. ``boundary.anode.value``.
    """

    def __init__(self, message, source=None, field=None):
        self.message = message
        self.source = source
        self.field = field
        super().__init__(self.one_line())

    def one_line(self):
        where = ": ".join(str(p) for p in (self.source, self.field) if p)
        text = f"{where}: {self.message}" if where else self.message
        return " ".join(text.split())


class FormulaError(InputError):
    """A formula that the whitelisting parser refuses."""


class GeometryError(InputError):
    """A polygon, circle or region that cannot describe a valid domain."""


class ResourceLimitError(InputError):
    """A request beyond a documented size or memory limit."""


class SolverError(LapsolveError):
    """A linear solve that failed to reach its tolerance, or a singular system."""

    exit_code = 2


class Interrupted(LapsolveError):
    """Work stopped by the user (Ctrl-C); partial results were saved."""

    exit_code = 130
