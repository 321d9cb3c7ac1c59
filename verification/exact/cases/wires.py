"""Line charges in bipolar coordinates: two parallel wires, and a wire over a ground plane.

A wire of radius a whose centre is at distance s from the symmetry line is an
equipotential of the pair of line charges at ``±c``, ``c = sqrt(s**2 - a**2)``:
``|z - c| / |z + c| = e^{-β}`` on it with ``β = arccosh(s / a)``.

The unbounded problems are truncated by a rectangle that carries the exact
potential of the unbounded problem as Dirichlet data. The finite-element problem
on the truncated domain therefore has the unbounded potential, restricted, as its
exact solution, and the flux through a wire surface is exactly the charge of the
unbounded problem: the capacitance from the flux through a wire equals the
published C' of the unbounded problem. The energy of the truncated domain (and
so a capacitance from energy) is a different number: it misses the field outside
the rectangle and includes the work of the non-constant truncation data.
"""

import numpy as np

from lapsolve.geometry import make_circle, make_polygon
from lapsolve.problem import Problem

from ..case import PartSpec, Reference
from .analytic import analytic_case
from .energy import energy_reference

A = 0.25   # wire radius
S = 0.6    # centre distance from the symmetry line (two wires: D = 2 S)
C = float(np.sqrt(S * S - A * A))
BETA = float(np.arccosh(S / A))
SCOPE = "untruncated; equals the flux through a wire on the truncated domain"

TWO_WIRE_SOURCE = ("C' = pi eps / arccosh(D/(2a)); Smythe, Static and Dynamic Electricity, "
                   "3rd ed. (1968)")
GROUND_SOURCE = ("C' = 2 pi eps / arccosh(h/a); Smythe, Static and Dynamic Electricity, "
                 "3rd ed. (1968)")


def _two_wire_geometry(size):
    box = make_polygon("box", [(-2.0, -1.5), (2.0, -1.5), (2.0, 1.5), (-2.0, 1.5)])
    return Problem("two-wire", box, holes=(make_circle("wire+", (S, 0.0), A),
                                           make_circle("wire-", (-S, 0.0), A)))


def _ground_geometry(size):
    box = make_polygon("box", [(-2.0, 0.0), (2.0, 0.0), (2.0, 2.0), (-2.0, 2.0)])
    return Problem("wire-over-ground", box, holes=(make_circle("wire", (0.0, S), A),))


TWO_WIRE = analytic_case(
    "two-wire", "two parallel wires of radius 0.25, centres (+-0.6, 0), at u = +-1/2, "
                "in a 4 x 3 box carrying the exact untruncated potential",
    lambda z: 0.5 / BETA * np.log((z + C) / (z - C)),
    lambda z: 0.5 / BETA * (1.0 / (z + C) - 1.0 / (z - C)),
    f"{0.5 / BETA!r}*log((z + {C!r})/(z - {C!r}))",
    f"{0.25 / BETA!r}*log(((x + {C!r})**2 + y**2)/((x - {C!r})**2 + y**2))",
    domain="(-2,2)x(-1.5,1.5) minus discs r=0.25 at (+-0.6,0)",
    build_geometry=_two_wire_geometry,
    conditions={"wire+": PartSpec("wire+", electrode=0.5),
                "wire-": PartSpec("wire-", electrode=-0.5),
                "box": PartSpec("box")},
    references=(
        Reference("capacitance", np.pi / BETA, TWO_WIRE_SOURCE, scope=SCOPE),
        energy_reference(0.9756034479275083),
    ),
    default_size=0.2,
    extras={"flux_electrode": "wire+", "voltage": 1.0},
)

WIRE_OVER_GROUND = analytic_case(
    "wire-over-ground", "wire of radius 0.25 at height 0.6 over a ground plane, u = 1 on the "
                        "wire, in a 4 x 2 box carrying the exact untruncated potential",
    lambda z: np.log((z + 1j * C) / (z - 1j * C)) / BETA,
    lambda z: (1.0 / (z + 1j * C) - 1.0 / (z - 1j * C)) / BETA,
    f"log((z + {C!r}*i)/(z - {C!r}*i))/{BETA!r}",
    f"{0.5 / BETA!r}*log((x**2 + (y + {C!r})**2)/(x**2 + (y - {C!r})**2))",
    domain="(-2,2)x(0,2) minus the disc r=0.25 at (0,0.6)",
    build_geometry=_ground_geometry,
    conditions={"wire": PartSpec("wire", electrode=1.0),
                "ground": PartSpec("box", (0,), electrode=0.0),
                "box": PartSpec("box", (1, 2, 3))},
    references=(
        Reference("capacitance", 2 * np.pi / BETA, GROUND_SOURCE, scope=SCOPE),
        energy_reference(1.9812928314700348),
    ),
    default_size=0.2,
    extras={"flux_electrode": "wire", "voltage": 1.0},
)
