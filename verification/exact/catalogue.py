"""The catalogue: one explicit registry of exact cases, filled in this file only."""

import difflib
from collections.abc import Mapping

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


class _Registry(Mapping):
    """Name -> case. An entry may be a factory (a case that solves a conformal map
    when built): it is built on first access and kept, so importing the catalogue
    stays cheap."""

    def __init__(self, cases, factories):
        self._items = {case.name: case for case in cases}
        self._items.update(factories)

    def __getitem__(self, name):
        item = self._items[name]
        if callable(item) and not hasattr(item, "conditions"):
            item = self._items[name] = item()
        return item

    def __iter__(self):
        return iter(self._items)

    def __len__(self):
        return len(self._items)


def _sc_lhexagon():
    from ..exact.quadrilateral import quadrilateral_case

    # Electrodes: u = 0 on the left side (vertex 5 -> 0), u = 1 on the right end of the
    # arm (vertex 1 -> 2); the re-entrant corner (1, 1) lies inside an insulated arc.
    return quadrilateral_case([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)], (0, 1, 2, 4),
                              name="sc-lhexagon",
                              description="L-shaped hexagon between two electrodes; exact "
                                          "potential and capacitance from a Schwarz-Christoffel "
                                          "map")


_CASE_LIST = (
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
)

CASES = _Registry(_CASE_LIST, {"sc-lhexagon": _sc_lhexagon})


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
