"""Insulating cylinder in a uniform field: u = E (r + a**2/r) cos θ, f(z) = E (z + a**2/z).

The normal derivative ``E (1 - a**2/r**2) cos θ`` vanishes on r = a: the cylinder
is a zero-flux (Neumann) boundary. This is the potential-flow form (uniform
stream past a circular cylinder), not a conducting cylinder. The box around it
carries the exact potential as Dirichlet data.
"""

from lapsolve.geometry import make_circle, make_polygon
from lapsolve.problem import Problem

from ..case import PartSpec, Reference
from .analytic import analytic_case
from .energy import energy_reference

A, E = 0.5, 1.0
SOURCE = ("surface potential 2 E a cos(theta) of a uniform stream past a circular cylinder "
          "(surface speed 2 U sin(theta)); Batchelor, An Introduction to Fluid Dynamics (1967)")


def _geometry(size):
    box = make_polygon("box", [(-2.0, -2.0), (2.0, -2.0), (2.0, 2.0), (-2.0, 2.0)])
    return Problem("cylinder-in-field", box, holes=(make_circle("cylinder", (0.0, 0.0), A),))


CASE = analytic_case(
    "cylinder-in-field", "insulating (zero-flux) cylinder of radius 0.5 in a uniform applied "
                         "field E = 1 along x; exact potential on a 4 x 4 box",
    lambda z: E * (z + A * A / z),
    lambda z: E * (1.0 - A * A / (z * z)),
    f"{E!r}*(z + {A * A!r}/z)",
    f"{E!r}*(x + {A * A!r}*x/(x**2 + y**2))",
    domain="square (-2,2)^2 minus the disc r < 0.5",
    build_geometry=_geometry,
    conditions={"box": PartSpec("box"),
                "cylinder": PartSpec("cylinder", kind="neumann")},
    references=(Reference("potential at (a, 0)", 2 * E * A, SOURCE, scope="true circle"),
                energy_reference(7.979915653696915)),
    default_size=0.2,
)
