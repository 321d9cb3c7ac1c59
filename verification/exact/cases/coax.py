"""Concentric coaxial line: u = ln(b/r) / ln(b/a), from f(z) = -log(z) / ln(b/a)."""

import numpy as np

from lapsolve.geometry import make_circle
from lapsolve.problem import Problem

from ..case import ExactCase, PartSpec, Reference

A, B = 0.5, 2.0


def _geometry(size):
    return Problem("coax", make_circle("shield", (0.0, 0.0), B),
                   holes=(make_circle("core", (0.0, 0.0), A),))


def _u(x, y):
    return np.log(B / np.hypot(x, y)) / np.log(B / A)


def _v(x, y):
    return -np.arctan2(y, x) / np.log(B / A)  # multivalued around the core: field lines only


def _grad(x, y):
    r2 = x * x + y * y
    c = -1.0 / np.log(B / A)
    return c * x / r2, c * y / r2


CASE = ExactCase(
    name="coax",
    description="concentric coaxial line, core a=0.5 at u=1, shield b=2 at u=0",
    build_geometry=_geometry,
    conditions={"core": PartSpec("core", electrode=1.0),
                "shield": PartSpec("shield", electrode=0.0)},
    u=_u, v=_v, grad=_grad,
    references=(Reference(
        "capacitance", 2 * np.pi / np.log(B / A),
        "C' = 2 pi eps / ln(b/a); Ramo, Whinnery & Van Duzer, Fields and Waves in "
        "Communication Electronics, 3rd ed. (1994)", scope="true circle"),),
    default_size=0.25,
)
