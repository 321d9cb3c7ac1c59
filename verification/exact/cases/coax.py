"""Concentric coaxial line: u = ln(b/r) / ln(b/a), from f(z) = (ln b - log z) / ln(b/a).

``v = Im f`` is the field-line function; it is multivalued around the core (its
period is the flux), so its cut must cross the annulus. ``u`` and ``grad u`` are
single-valued and continuous: the cut of ``log`` only moves ``Im f``.
"""

import numpy as np

from lapsolve.geometry import make_circle
from lapsolve.problem import Problem

from ..case import PartSpec, Reference
from .analytic import analytic_case

A, B = 0.5, 2.0
SOURCE = ("C' = 2 pi eps / ln(b/a); Ramo, Whinnery & Van Duzer, Fields and Waves in "
          "Communication Electronics, 3rd ed. (1994)")


def _geometry(size):
    return Problem("coax", make_circle("shield", (0.0, 0.0), B),
                   holes=(make_circle("core", (0.0, 0.0), A),))


CAPACITANCE = 2 * np.pi / np.log(B / A)

CASE = analytic_case(
    "coax", "concentric coaxial line, core a=0.5 at u=1, shield b=2 at u=0",
    lambda z: (np.log(B) - np.log(z)) / np.log(B / A),
    lambda z: -1.0 / (z * np.log(B / A)),
    f"(log({B!r}) - log(z))/log({B / A!r})",
    f"(log({B!r}) - 0.5*log(x**2 + y**2))/log({B / A!r})",
    domain="annulus 0.5 < r < 2",
    build_geometry=_geometry,
    conditions={"core": PartSpec("core", electrode=1.0),
                "shield": PartSpec("shield", electrode=0.0)},
    references=(
        Reference("capacitance", CAPACITANCE, SOURCE, scope="true circle"),
        Reference("energy", 0.5 * CAPACITANCE, "W = C' V^2 / 2 with V = 1; " + SOURCE,
                  scope="true circle"),
    ),
    default_size=0.25,
)
