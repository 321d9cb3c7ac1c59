"""Corner singularities: u = r**λ sin(λθ) with λ = π/ω in a wedge of angle ω.

The wedge ``0 <= θ <= ω`` is cut out of the square ``(-1, 1)**2``; u vanishes
on both sides of the corner and the far edges carry its exact values. The
solution is ``Re f`` with ``f(z) = (z e^{-iω/2})**λ``: rotating by ``-ω/2``
puts the principal branch cut of the power on the ray ``θ = ω/2 + π``, which
lies outside the wedge for every ``ω < 2π``. For ``ω = 2π`` (the slit) that ray
is the slit itself: the cut lies along the boundary, never inside the domain.
"""

import numpy as np

from lapsolve.geometry import PolygonLoop, make_polygon
from lapsolve.problem import Problem

from ..case import PartSpec
from .analytic import analytic_case
from .energy import energy_reference


def sector_vertices(omega):
    """The square ``(-1, 1)**2`` cut to the wedge ``0 <= θ <= omega``, corner first.

    For ``omega = 2π`` the point ``(1, 0)`` appears twice: the polygon runs along
    the slit on both of its sides.
    """
    pts = [(0.0, 0.0), (1.0, 0.0)]
    for k, corner in enumerate(((1, 1), (-1, 1), (-1, -1), (1, -1))):
        if (2 * k + 1) * np.pi / 4 < omega - 1e-12:
            pts.append((float(corner[0]), float(corner[1])))
    c, s = np.cos(omega), np.sin(omega)
    t = 1.0 / max(abs(c), abs(s))
    end = (_clean(t * c), _clean(t * s))
    if not np.allclose(end, pts[-1]):
        pts.append(end)
    return pts


def _clean(value):
    return float(np.round(value, 14)) + 0.0


def _rotation(omega):
    """``exp(-i omega / 2)``, exact for the slit."""
    return -1.0 + 0j if np.isclose(omega, 2 * np.pi) else np.exp(-0.5j * omega)


def _geometry_factory(name, omega):
    vertices = sector_vertices(omega)

    def build(size):
        if np.isclose(omega, 2 * np.pi):
            # make_polygon refuses a polygon that runs along a slit twice; the mesher
            # merges the two copies of the slit into one constrained segment. With
            # u = 0 on both sides of the slit, a continuous finite-element space
            # with zero nodal values there is exactly the space of the slit domain.
            outer = PolygonLoop("outer", np.array(vertices, float))
        else:
            outer = make_polygon("outer", vertices)
        return Problem(name, outer)

    return build, len(vertices)


def rotated_angle_text(alpha):
    """``atan2`` of the point rotated by ``-alpha``, as a real formula in x, y."""
    ca, sa = _clean(np.cos(alpha)), _clean(np.sin(alpha))
    return f"atan2({_linear(-sa, ca)}, {_linear(ca, sa)})"


def _linear(a, b):
    """``a*x + b*y`` without zero terms."""
    terms = [f"({c!r})*{v}" for c, v in ((a, "x"), (b, "y")) if c != 0]
    return " + ".join(terms) or "0.0"


def wedge_case(omega, name=None, energy=None):
    """The corner case of opening angle ``omega`` (radians, ``0 < omega <= 2π``).

    Parameters
    ----------
    omega : float
    name : str, optional
        Default ``wedge-<degrees>``.
    energy : float, optional
        Reference energy of the domain (when known).

    Returns
    -------
    ExactCase
    """
    if not 0 < omega <= 2 * np.pi + 1e-12:
        raise ValueError(f"omega must lie in (0, 2 pi], got {omega}")
    lam = np.pi / omega
    rot = _rotation(omega)
    degrees = round(float(np.degrees(omega)))
    name = name or f"wedge-{degrees}"
    build, n = _geometry_factory(name, omega)

    def f(z):
        return (z * rot) ** lam

    def fprime(z):
        return lam * rot * (z * rot) ** (lam - 1)

    slit = np.isclose(omega, 2 * np.pi)
    formula = "sqrt(-z)" if slit else f"(z*exp({-omega / 2!r}*i))**{lam!r}"
    u_xy = f"(x**2 + y**2)**{lam / 2!r}*cos({lam!r}*{rotated_angle_text(omega / 2)})"
    references = ()
    if energy is not None:
        references = (energy_reference(energy),)
    return analytic_case(
        name, f"corner singularity r^{lam:.4g} sin({lam:.4g} theta) in a wedge of "
              f"{degrees} degrees, Dirichlet data",
        f, fprime, formula, u_xy,
        domain=("(-1,1)^2 minus the slit [0,1]x{0}" if slit else
                f"(-1,1)^2 cut to the wedge 0 <= theta <= {degrees} deg"),
        build_geometry=build,
        conditions={"sides": PartSpec("outer", (0, n - 1)),
                    "far": PartSpec("outer", tuple(range(1, n - 1)))},
        singular_exponent=float(lam), singular_point=(0.0, 0.0),
        references=references, smooth=False, default_size=0.1,
        extras={"omega": float(omega), "slit": bool(slit)},
    )


WEDGE_135 = wedge_case(3 * np.pi / 4, energy=1.094807832578116)
WEDGE_225 = wedge_case(5 * np.pi / 4, energy=0.949454259802859)
LSHAPE = wedge_case(3 * np.pi / 2, name="lshape", energy=0.9181133309375813)
SLIT = wedge_case(2 * np.pi, name="slit", energy=0.881373587019543)
