"""The contract every exact case follows.

A case is an exact harmonic (or piecewise-harmonic) solution on a domain with
named boundary parts. Boundary data are always computed from the exact solution
at the very points that need them (nodes, quadrature points, actual edge
normals), so the polygonal or quadratic approximation of a curved boundary still
has an exact discrete target: the error measured is discretisation error only.
"""

from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from lapsolve.problem import BoundaryPart, Condition, MeshControls, constant


@dataclass(frozen=True)
class Reference:
    """A reference value of a quantity of interest and where it comes from.

    ``scope`` says whether the value belongs to the meshed domain exactly
    (``"domain"``) or to an idealised problem (``"untruncated"``, ``"true circle"``)
    that the mesh only approximates.
    """

    quantity: str
    value: float
    source: str
    scope: str = "domain"


@dataclass(frozen=True)
class PartSpec:
    """A boundary part of a case: ``kind`` is dirichlet, neumann or insulated.

    ``electrode`` gives the constant potential of a conductor surface (where the
    exact u is constant); such parts make capacitance well defined.
    """

    loop: str
    edges: Optional[tuple] = None
    kind: str = "dirichlet"
    electrode: Optional[float] = None


@dataclass(frozen=True)
class ExactCase:
    """An exact solution with its domain, boundary parts and references.

    Attributes
    ----------
    name, description : str
    build_geometry : callable
        ``(max_size) -> Problem`` without boundary conditions (outer, holes,
        regions, coefficients, mesh controls).
    conditions : dict
        Part name -> :class:`PartSpec`. Data come from the exact solution.
    u, v : callable
        ``(x, y) -> ndarray``; ``v`` is the harmonic conjugate (field lines).
    grad : callable
        ``(x, y) -> (gx, gy)`` exact gradient of ``u``, no finite differences.
    singular_exponent : float
        λ of the leading singular term ``r**λ`` (``inf`` for smooth cases).
    singular_point : tuple or None
        Where the singularity sits.
    references : tuple of Reference
    smooth : bool
        Whether the case is in the P3 suite.
    coefficient : callable or None
        ``(x, y) -> k`` when k is piecewise (material regions); else k = 1.
    """

    name: str
    description: str
    build_geometry: Callable
    conditions: dict
    u: Callable
    v: Callable
    grad: Callable
    singular_exponent: float = np.inf
    singular_point: Optional[tuple] = None
    references: tuple = ()
    smooth: bool = True
    coefficient: Optional[Callable] = None
    default_size: float = 0.1
    extras: dict = field(default_factory=dict)

    def k(self, x, y):
        return self.coefficient(x, y) if self.coefficient else np.ones(np.shape(x))

    def flux_data(self):
        """Neumann data ``k du/dn`` at points with the actual outward normals."""
        def g(x, y, nx, ny):
            gx, gy = self.grad(x, y)
            return self.k(x, y) * (gx * nx + gy * ny)

        return g

    def dirichlet_data(self):
        def g(x, y, nx=None, ny=None):
            return self.u(x, y)

        return g

    def problem(self, max_size=None):
        """The problem-model object: geometry plus exact boundary data."""
        from dataclasses import replace

        base = self.build_geometry(max_size or self.default_size)
        parts = []
        for name, spec in self.conditions.items():
            if spec.kind == "dirichlet" and spec.electrode is not None:
                cond = Condition("dirichlet", constant(spec.electrode))
            elif spec.kind == "dirichlet":
                cond = Condition("dirichlet", self.dirichlet_data())
            elif spec.kind == "neumann":
                cond = Condition("neumann", self.flux_data())
            else:
                cond = Condition("insulated")
            parts.append(BoundaryPart(name, spec.loop, spec.edges, cond))
        if base.mesh is None:
            base = replace(base, mesh=MeshControls(max_size or self.default_size))
        return replace(base, name=self.name, parts=tuple(parts),
                       description=self.description, origin=f"case:{self.name}")
