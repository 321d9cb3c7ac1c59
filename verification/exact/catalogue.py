"""The catalogue: one explicit registry of exact cases, filled in this file only."""

import difflib

from lapsolve.errors import InputError

from .cases import coax

CASES = {case.name: case for case in (
    coax.CASE,
)}


def get_case(name):
    """The case called ``name``; an unknown name suggests the closest ones."""
    try:
        return CASES[name]
    except KeyError:
        close = difflib.get_close_matches(name, CASES, n=3, cutoff=0.4)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        raise InputError(f"unknown case '{name}'{hint} (see 'lapsolve cases')",
                         field="case") from None
