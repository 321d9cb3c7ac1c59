"""Eccentric coaxial line: inner conductor radius a centred at (d, 0) inside a shield of radius b.

Both circles are Apollonius circles of the two points p, q on the real axis that
are inverse with respect to both (``p q = b**2``, ``(p - d)(q - d) = a**2``), so
``|z - p| / |z - q|`` is constant on each. The potential is
``u = Re f``, ``f(z) = (ln(p/b) - log((z - p)/(z - q))) / β`` with
``β = arccosh((a**2 + b**2 - d**2) / (2 a b))``: u = 1 on the core, 0 on the shield.
As for the concentric line, only ``Im f`` is cut; u is single-valued.
"""

import numpy as np

from lapsolve.geometry import make_circle
from lapsolve.problem import Problem

from ..case import PartSpec, Reference
from .analytic import analytic_case

A, B, D = 0.5, 2.0, 0.6
_S = (B * B + D * D - A * A) / D  # p + q
P = float(0.5 * (_S - np.sqrt(_S * _S - 4 * B * B)))  # inside the core
Q = float(0.5 * (_S + np.sqrt(_S * _S - 4 * B * B)))  # outside the shield
BETA = float(np.arccosh((A * A + B * B - D * D) / (2 * A * B)))
LOG_RATIO_SHIELD = float(np.log(P / B))  # ln |z - p| / |z - q| on the shield
SOURCE = ("C' = 2 pi eps / arccosh((a^2 + b^2 - d^2)/(2 a b)); Smythe, Static and Dynamic "
          "Electricity, 3rd ed. (1968)")


def _geometry(size):
    return Problem("coax-eccentric", make_circle("shield", (0.0, 0.0), B),
                   holes=(make_circle("core", (D, 0.0), A),))


def _f(z):
    return (LOG_RATIO_SHIELD - np.log((z - P) / (z - Q))) / BETA


def _fprime(z):
    return -(1.0 / (z - P) - 1.0 / (z - Q)) / BETA


CAPACITANCE = 2 * np.pi / BETA

CASE = analytic_case(
    "coax-eccentric", "eccentric coaxial line: core a=0.5 centred at (0.6, 0) at u=1, "
                      "shield b=2 centred at the origin at u=0",
    _f, _fprime,
    f"({LOG_RATIO_SHIELD!r} - log((z - {P!r})/(z - {Q!r})))/{BETA!r}",
    f"({LOG_RATIO_SHIELD!r} - 0.5*log(((x - {P!r})**2 + y**2)/((x - {Q!r})**2 + y**2)))"
    f"/{BETA!r}",
    domain="disc r < 2 minus the disc |z - 0.6| < 0.5",
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
