"""A Dirichlet-Neumann corner: u = r**λ sin(λθ), λ = π/(2ω).

On the side ``θ = 0`` u vanishes (Dirichlet); on the side ``θ = ω`` its normal
derivative ``(1/r) du/dθ = λ r**(λ-1) cos(λω)`` vanishes (Neumann) because
``λω = π/2``. The registered case has ω = π: a straight boundary whose condition
changes type at the origin, λ = 1/2, the half of the slit solution.
``f(z) = e^{-iπ/4} (z e^{-iω/2})**λ``; the cut of the power lies on the ray
``θ = ω/2 + π``, outside the wedge.
"""

import numpy as np

from lapsolve.geometry import make_polygon
from lapsolve.problem import Problem

from ..case import PartSpec
from .analytic import analytic_case
from .energy import energy_reference
from .wedge import rotated_angle_text, sector_vertices


def dn_corner_case(omega, name=None, energy=None):
    """Dirichlet on ``θ = 0``, zero flux on ``θ = omega`` (``0 < omega < 2π``)."""
    if not 0 < omega < 2 * np.pi:
        raise ValueError(f"omega must lie in (0, 2 pi), got {omega}")
    lam = np.pi / (2 * omega)
    rot = np.exp(-0.5j * omega)
    phase = np.exp(-0.25j * np.pi)
    degrees = round(float(np.degrees(omega)))
    name = name or f"dn-corner-{degrees}"
    vertices = sector_vertices(omega)
    n = len(vertices)

    def build(size):
        return Problem(name, make_polygon("outer", vertices))

    def f(z):
        return phase * (z * rot) ** lam

    def fprime(z):
        return phase * lam * rot * (z * rot) ** (lam - 1)

    formula = f"exp(-pi*i/4)*(z*exp({-omega / 2!r}*i))**{lam!r}"
    u_xy = (f"(x**2 + y**2)**{lam / 2!r}*sin({lam!r}*{rotated_angle_text(omega / 2)} "
            "+ pi/4)")
    references = () if energy is None else (energy_reference(energy),)
    return analytic_case(
        name, f"Dirichlet-Neumann corner of {degrees} degrees: u = r^{lam:.4g} "
              f"sin({lam:.4g} theta), u = 0 on theta = 0, zero flux on theta = {degrees} deg",
        f, fprime, formula, u_xy,
        domain=f"(-1,1)^2 cut to the wedge 0 <= theta <= {degrees} deg",
        build_geometry=build,
        conditions={"dirichlet-side": PartSpec("outer", (0,)),
                    "neumann-side": PartSpec("outer", (n - 1,), kind="neumann"),
                    "far": PartSpec("outer", tuple(range(1, n - 1)))},
        singular_exponent=float(lam), singular_point=(0.0, 0.0),
        references=references, smooth=False, default_size=0.1,
        extras={"omega": float(omega)},
    )


DN_CORNER = dn_corner_case(np.pi, name="dn-corner", energy=0.4406867935097715)
