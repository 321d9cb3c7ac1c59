"""The problem model: what a problem file (or an exact case) describes.

The equation is ``-div(k grad u) = f`` on a 2D domain bounded by an outer loop
and optional holes, with piecewise-constant ``k`` per material region.

Boundary data are callables ``data(x, y, nx, ny) -> array`` so that exact cases
can give Neumann data that depend on the outward normal of the actual mesh edge;
formula data simply ignore the normal.
"""

from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

EPSILON_0 = 8.8541878188e-12  # F/m, CODATA 2022 recommended value

CONDITION_KINDS = ("dirichlet", "neumann", "robin", "insulated")


@dataclass(frozen=True)
class Physics:
    """Units and labels of the derived quantities.

    ``scale`` multiplies the user coefficient (epsilon_0 for electrostatics,
    where the file gives relative permittivities).
    """

    kind: str
    scale: float
    potential_unit: str
    coefficient_label: str
    flux_label: str
    flux_unit: str
    capacity_label: str
    capacity_unit: str
    resistance_label: str
    resistance_unit: str


PHYSICS = {
    "electrostatic": Physics("electrostatic", EPSILON_0, "V", "relative permittivity",
                             "charge per unit length", "C/m",
                             "capacitance per unit length", "F/m",
                             "", ""),
    "thermal": Physics("thermal", 1.0, "K", "thermal conductivity W/(m K)",
                       "heat flow per unit length", "W/m",
                       "thermal conductance per unit length", "W/(m K)",
                       "thermal resistance per unit length", "K m/W"),
    "generic": Physics("generic", 1.0, "", "coefficient k",
                       "flux per unit length", "",
                       "conductance per unit length", "",
                       "resistance per unit length", ""),
}


def constant(value):
    """Boundary data that is the same number everywhere."""
    value = float(value)

    def data(x, y, nx=None, ny=None):
        return np.full(np.shape(x), value)

    data.constant = value
    data.text = repr(value)
    return data


@dataclass(frozen=True)
class Condition:
    """A boundary condition.

    ``dirichlet``: u = value. ``neumann``: k du/dn = value (inflow per unit length,
    n the outward normal). ``robin``: k du/dn = h (u_ref - u). ``insulated``: zero flux.
    """

    kind: str
    value: Optional[Callable] = None
    h: float = 0.0
    u_ref: Optional[Callable] = None

    @property
    def constant_value(self):
        return getattr(self.value, "constant", None)


@dataclass(frozen=True)
class BoundaryPart:
    """A named piece of boundary: whole loop or listed edges of one loop."""

    name: str
    loop: str
    edges: Optional[tuple]
    condition: Condition


@dataclass(frozen=True)
class Region:
    """A material region (polygon or circle loop) with its own coefficient."""

    name: str
    loop: object
    coefficient: float


@dataclass(frozen=True)
class Grading:
    """Local size ``size`` at ``point``, growing by ``growth`` per unit distance."""

    point: tuple
    size: float
    growth: float = 0.3


@dataclass(frozen=True)
class MeshControls:
    max_size: float
    min_angle: float = 28.0
    grading: tuple = ()

    @property
    def max_area(self):
        return np.sqrt(3) / 4 * self.max_size**2


@dataclass(frozen=True)
class Problem:
    """A complete boundary-value problem; build with :func:`lapsolve.load_problem`."""

    name: str
    outer: object
    holes: tuple = ()
    regions: tuple = ()
    parts: tuple = ()
    coefficient: float = 1.0
    source: Optional[Callable] = None
    physics: Physics = PHYSICS["generic"]
    mesh: MeshControls = None
    origin: str = "<memory>"
    description: str = ""
    extras: dict = field(default_factory=dict)

    def loops(self):
        """Boundary loops in a fixed order: outer first, then holes."""
        return (self.outer,) + tuple(self.holes)

    def loop(self, name):
        for lp in self.loops():
            if lp.name == name:
                return lp
        raise KeyError(name)

    def coefficients(self):
        """Scaled coefficient per region id (0 = background)."""
        k = [self.coefficient] + [r.coefficient for r in self.regions]
        return self.physics.scale * np.asarray(k, float)

    def part_of_edge(self):
        """Map ``(loop name, edge index) -> part index``; unlisted edges are insulated."""
        table = {}
        for i, part in enumerate(self.parts):
            edges = part.edges if part.edges is not None else range(self.loop(part.loop).n_edges)
            for e in edges:
                table[(part.loop, int(e))] = i
        return table

    def with_mesh(self, **changes):
        """A copy with some mesh controls changed."""
        from dataclasses import replace

        return replace(self, mesh=replace(self.mesh, **changes))
