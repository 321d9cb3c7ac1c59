"""A pole just outside a corner: u = Re 1/(z - z0), z0 = (1.07, 1.07), on the unit square.

The solution is analytic on the closed square, so the asymptotic rates are the
smooth ones, but its derivatives near the corner (1, 1) are huge: the
pre-asymptotic range is long on uniform meshes and grading pays off.
"""

from ..case import PartSpec
from .analytic import analytic_case
from .energy import energy_reference
from .smooth import UNIT_SQUARE, polygon_geometry

Z0 = 1.07 + 1.07j

NEAR_SINGULAR = analytic_case(
    "near-singular", "u = Re 1/(z - z0) with the pole z0 = (1.07, 1.07) at distance 0.099 "
                     "outside the corner (1, 1) of the unit square, Dirichlet data",
    lambda z: 1.0 / (z - Z0),
    lambda z: -1.0 / (z - Z0) ** 2,
    f"1/(z - {Z0.real!r} - {Z0.imag!r}*i)",
    f"(x - {Z0.real!r})/((x - {Z0.real!r})**2 + (y - {Z0.imag!r})**2)",
    domain="unit square (0,1)^2, pole outside at (1.07,1.07)",
    build_geometry=polygon_geometry("near-singular", UNIT_SQUARE),
    conditions={"boundary": PartSpec("outer")},
    references=(energy_reference(14.299466083949481),),
    default_size=0.05,
    extras={"pole": (Z0.real, Z0.imag)},
)
