"""The catalogue: one explicit registry of exact cases, filled in this file only."""

import difflib

import numpy as np

from lapsolve.errors import InputError

from .cases import (
    coax,
    cylinder,
    dielectric,
    dn_corner,
    eccentric,
    near_singular,
    smooth,
    wedge,
    wires,
)

CASES = {case.name: case for case in (
    smooth.SMOOTH_SQUARE,
    smooth.SMOOTH_MIXED,
    smooth.SMOOTH_NEUMANN,
    smooth.SMOOTH_NONCONVEX,
    near_singular.NEAR_SINGULAR,
    wedge.WEDGE_135,
    wedge.WEDGE_225,
    wedge.LSHAPE,
    wedge.SLIT,
    dn_corner.DN_CORNER,
    coax.CASE,
    eccentric.CASE,
    wires.TWO_WIRE,
    wires.WIRE_OVER_GROUND,
    cylinder.CASE,
    dielectric.CASE,
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


def describe(case):
    """Plain data about a case for listings: domain, λ, parts and references.

    Returns
    -------
    dict
        JSON-ready (an infinite λ, a smooth case, is ``None``).
    """
    lam = case.singular_exponent
    return {
        "name": case.name,
        "description": case.description,
        "domain": case.extras.get("domain", ""),
        "lambda": None if not np.isfinite(lam) else float(lam),
        "singular_point": None if case.singular_point is None else list(case.singular_point),
        "smooth": bool(case.smooth),
        "default_size": float(case.default_size),
        "formula": case.extras.get("formula"),
        "parts": {name: {"loop": spec.loop,
                         "edges": None if spec.edges is None else list(spec.edges),
                         "kind": spec.kind,
                         "electrode": spec.electrode}
                  for name, spec in case.conditions.items()},
        "references": [{"quantity": ref.quantity, "value": float(ref.value),
                        "source": ref.source, "scope": ref.scope}
                       for ref in case.references],
    }
