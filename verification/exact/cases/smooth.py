"""Smooth solutions on polygons: entire functions f(z), every boundary condition type.

These are the cases of the P3 suite: u is analytic on the closed domain and the
polygon is meshed exactly, so every element degree converges at its full rate.
"""

import numpy as np

from lapsolve.geometry import make_polygon
from lapsolve.problem import Problem

from ..case import PartSpec
from .analytic import analytic_case
from .energy import energy_reference

UNIT_SQUARE = [(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0)]
PENTAGON = [(0.0, 0.0), (2.0, 0.0), (2.5, 1.0), (1.0, 1.8), (-0.4, 1.0)]
HEXAGON = [(float(np.cos(k * np.pi / 3)), float(np.sin(k * np.pi / 3))) for k in range(6)]
U_SHAPE = [(0.0, 0.0), (3.0, 0.0), (3.0, 2.0), (2.0, 2.0), (2.0, 1.0), (1.0, 1.0),
           (1.0, 2.0), (0.0, 2.0)]


def polygon_geometry(name, vertices):
    """``build_geometry`` for a plain polygonal domain."""
    def build(size):
        return Problem(name, make_polygon("outer", vertices))

    return build


def _energy(value):
    return (energy_reference(value),)


SMOOTH_SQUARE = analytic_case(
    "smooth-square", "u = Re(sin 2z + cosh z) on the unit square, Dirichlet data",
    lambda z: np.sin(2 * z) + np.cosh(z),
    lambda z: 2 * np.cos(2 * z) + np.sinh(z),
    "sin(2*z) + cosh(z)",
    "sin(2*x)*cosh(2*y) + cosh(x)*cos(y)",
    domain="unit square (0,1)^2",
    build_geometry=polygon_geometry("smooth-square", UNIT_SQUARE),
    conditions={"boundary": PartSpec("outer")},
    references=_energy(5.731120834910596),
    default_size=0.1,
)

SMOOTH_MIXED = analytic_case(
    "smooth-mixed", "u = Re(e^z cos z) on a convex pentagon, Dirichlet on three edges, "
                    "Neumann on two",
    lambda z: np.exp(z) * np.cos(z),
    lambda z: np.exp(z) * (np.cos(z) - np.sin(z)),
    "exp(z)*cos(z)",
    "exp(x)*(cos(x)*cos(y)*cosh(y) + sin(x)*sin(y)*sinh(y))",
    domain="convex pentagon in (-0.4,2.5)x(0,1.8)",
    build_geometry=polygon_geometry("smooth-mixed", PENTAGON),
    conditions={"dirichlet": PartSpec("outer", (0, 1, 2)),
                "neumann": PartSpec("outer", (3, 4), kind="neumann")},
    references=_energy(112.05609595197751),
    default_size=0.15,
)

SMOOTH_NEUMANN = analytic_case(
    "smooth-neumann", "u = Re(cosh(3z/2) + z^2) on a regular hexagon, pure Neumann "
                      "(compared up to a constant: the solver returns the zero-mean solution)",
    lambda z: np.cosh(1.5 * z) + z * z,
    lambda z: 1.5 * np.sinh(1.5 * z) + 2 * z,
    "cosh(1.5*z) + z**2",
    "cosh(1.5*x)*cos(1.5*y) + x**2 - y**2",
    domain="regular hexagon of circumradius 1",
    build_geometry=polygon_geometry("smooth-neumann", HEXAGON),
    conditions={"boundary": PartSpec("outer", kind="neumann")},
    references=_energy(9.916259786977387),
    default_size=0.12,
)

SMOOTH_NONCONVEX = analytic_case(
    "smooth-nonconvex", "u = Re(sin z + e^{z/2}) on a U-shaped polygon, Dirichlet data "
                        "(smooth u: the re-entrant corners do not reduce the rates)",
    lambda z: np.sin(z) + np.exp(0.5 * z),
    lambda z: np.cos(z) + 0.5 * np.exp(0.5 * z),
    "sin(z) + exp(z/2)",
    "sin(x)*cosh(y) + exp(x/2)*cos(y/2)",
    domain="U-shaped octagon in (0,3)x(0,2)",
    build_geometry=polygon_geometry("smooth-nonconvex", U_SHAPE),
    conditions={"boundary": PartSpec("outer")},
    references=_energy(6.772311283492707),
    default_size=0.15,
)
