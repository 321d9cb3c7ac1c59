"""Dielectric cylinder in a uniform field: piecewise harmonic across a circular interface.

A cylinder of radius a and coefficient ε2 sits in a medium ε1 with the applied
potential ``-E0 x``. With ``γ = (ε2 - ε1)/(ε2 + ε1)``:

* inside, ``u = -(2 ε1/(ε1 + ε2)) E0 x``: a uniform field ``2 ε1/(ε1 + ε2)``
  times the applied one;
* outside, ``u = -E0 (r - γ a**2/r) cos θ = Re(-E0 (z - γ a**2/z))``.

u and the normal flux ``ε du/dr`` are continuous at r = a. ``v = ε Im f`` in each
medium is the continuous stream function of the flux ``ε grad u``. The box
carries the exact outside potential as Dirichlet data; the coefficient is used
as given (generic physics, no ε0 scaling).
"""

import numpy as np

from lapsolve.geometry import make_circle, make_polygon
from lapsolve.problem import Problem, Region

from ..case import ExactCase, PartSpec, Reference
from .analytic import from_analytic
from .energy import energy_reference

A, E0 = 0.5, 1.0
EPS_OUT, EPS_IN = 1.0, 4.0
GAMMA = (EPS_IN - EPS_OUT) / (EPS_IN + EPS_OUT)
RATIO = 2 * EPS_OUT / (EPS_OUT + EPS_IN)  # interior field / applied field
SOURCE = ("interior field = 2 eps1/(eps1 + eps2) times the applied field, eps1 outside; "
          "Jackson, Classical Electrodynamics, 3rd ed. (1999)")


def _geometry(size):
    box = make_polygon("box", [(-2.0, -2.0), (2.0, -2.0), (2.0, 2.0), (-2.0, 2.0)])
    core = Region("core", make_circle("core", (0.0, 0.0), A), EPS_IN)
    return Problem("dielectric-cylinder", box, regions=(core,), coefficient=EPS_OUT)


def f_in(z):
    return -RATIO * E0 * z


def f_in_prime(z):
    return np.full(np.shape(z), -RATIO * E0, complex)


def f_out(z):
    return -E0 * (z - GAMMA * A * A / z)


def f_out_prime(z):
    return -E0 * (1.0 + GAMMA * A * A / (z * z))


_U_IN, _V_IN, _GRAD_IN = from_analytic(f_in, f_in_prime)
_U_OUT, _V_OUT, _GRAD_OUT = from_analytic(f_out, f_out_prime)


def _inside(x, y):
    return np.asarray(x) ** 2 + np.asarray(y) ** 2 < A * A


def _u(x, y):
    return np.where(_inside(x, y), _U_IN(x, y), _U_OUT(x, y))


def _v(x, y):
    return np.where(_inside(x, y), EPS_IN * _V_IN(x, y), EPS_OUT * _V_OUT(x, y))


def _grad(x, y):
    inside = _inside(x, y)
    gi, go = _GRAD_IN(x, y), _GRAD_OUT(x, y)
    return np.where(inside, gi[0], go[0]), np.where(inside, gi[1], go[1])


def _coefficient(x, y):
    return np.where(_inside(x, y), EPS_IN, EPS_OUT)


CASE = ExactCase(
    name="dielectric-cylinder",
    description="dielectric cylinder (k=4, radius 0.5) in a medium k=1 with applied field "
                "E0 = 1 along x; exact potential on a 4 x 4 box",
    build_geometry=_geometry,
    conditions={"box": PartSpec("box")},
    u=_u, v=_v, grad=_grad,
    references=(Reference("interior field ratio", RATIO, SOURCE, scope="true circle"),
                energy_reference(7.992769635330889)),
    coefficient=_coefficient,
    default_size=0.2,
    extras={"domain": "square (-2,2)^2, region r < 0.5 with k = 4",
            "u_xy": f"{-E0!r}*(x - {GAMMA * A * A!r}*x/(x**2 + y**2))",
            "pieces": {"inside": (f_in, f_in_prime), "outside": (f_out, f_out_prime)}},
)
