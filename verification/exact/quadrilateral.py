"""A polygon with four marked vertices as an exact case, from a Schwarz-Christoffel map.

The convention is that of :mod:`verification.modulus`: the arc ``c3 -> c0`` is
an electrode at u = 0, the arc ``c1 -> c2`` an electrode at u = 1, the arcs
``c0 -> c1`` and ``c2 -> c3`` are insulated. The exact potential is
``Re g(w(z)) / M`` (``g`` the map of the half-plane onto the rectangle
``[0, M] x [0, 1]``, ``w`` the inverse polygon map), its gradient
``g'(w) / (M f'(w))`` conjugated: both exact up to the map's residual, no
finite differences. The reference quantity is the capacitance ``eps / M``.

Corner singularities
--------------------
At a corner of interior angle ``α`` the solution behaves like ``r**λ`` with
``λ = π / α`` where the two sides carry the same kind of condition (both on
one electrode, or both insulated) and ``λ = π / (2 α)`` where an electrode
meets an insulated arc: at the four marked corners (Grisvard, Elliptic Problems
in Nonsmooth Domains, 1985, sec. 5.1). An integer λ gives a polynomial term: no
singularity. The case's ``singular_exponent`` is the smallest non-integer λ,
and ``singular_point`` the corner where it sits; every corner is listed in
``extras["corners"]``.

Slits
-----
``lapsolve``'s mesher joins the two sides of a slit into one segment, so a
finite-element model of a slit is only right when both sides carry the same
potential. A slit must therefore lie inside one electrode arc; others are
refused (the modulus itself, :func:`verification.modulus.quadrilateral_modulus`,
takes any slit).
"""

from dataclasses import asdict, dataclass

import numpy as np

from lapsolve.errors import GeometryError, InputError
from lapsolve.geometry import CircleLoop, PolygonLoop, make_polygon
from lapsolve.problem import PHYSICS, Physics, Problem

from ..grading import Grading, default_mu
from ..modulus import quadrilateral_modulus
from ..sc.parameters import RESIDUAL_LIMIT
from ..sc.polygon import doubled_edges
from .case import ExactCase, PartSpec, Reference
from .cases.analytic import complex_points

LOW, HIGH = "electrode-low", "electrode-high"
INSULATED_01, INSULATED_23 = "insulated-c0-c1", "insulated-c2-c3"
SOURCE = ("conformal modulus M of the quadrilateral from a Schwarz-Christoffel map, computed "
          "(Papamichael & Stylianopoulos, Numerical Conformal Mapping: Domain Decomposition "
          "and the Mapping of Quadrilaterals, 2010; Driscoll & Trefethen, Schwarz-Christoffel "
          "Mapping, 2002)")


@dataclass(frozen=True)
class Corner:
    """A vertex of the case's polygon and its corner singularity.

    Attributes
    ----------
    index : int
        Vertex index in the case's (counter-clockwise) polygon.
    point : tuple
    angle : float
        Interior angle in degrees.
    kind : str
        ``"electrode-insulated"`` (a marked corner), ``"electrode"`` or
        ``"insulated"`` (inside an arc of that kind).
    exponent : float
        λ of the leading term ``r**λ``.
    singular : bool
        λ is not an integer.
    """

    index: int
    point: tuple
    angle: float
    kind: str
    exponent: float
    singular: bool

    def to_dict(self):
        return {**asdict(self), "point": [float(c) for c in self.point]}


def arc_edges(n, start, stop):
    """Edges from vertex ``start`` forward to vertex ``stop`` of an ``n``-gon."""
    return tuple(int(e) for e in (start + np.arange((stop - start) % n)) % n)


def corner_exponents(vertices, angles, corners):
    """The corner singularity at every vertex.

    Parameters
    ----------
    vertices : ndarray of complex, shape (n,)
        Counter-clockwise polygon.
    angles : ndarray, shape (n,)
        Interior angles / π.
    corners : (int, int, int, int)
        ``c0 .. c3`` as indices into ``vertices``.

    Returns
    -------
    tuple of Corner
    """
    n = vertices.size
    c0, c1, c2, c3 = corners
    electrode = set(arc_edges(n, c3, c0)) | set(arc_edges(n, c1, c2))
    out = []
    for j in range(n):
        if j in corners:
            kind, lam = "electrode-insulated", 1.0 / (2.0 * angles[j])
        else:
            kind = "electrode" if j in electrode else "insulated"
            lam = 1.0 / angles[j]
        singular = abs(lam - round(lam)) > 1e-9 * max(1.0, lam)
        out.append(Corner(j, (float(vertices[j].real), float(vertices[j].imag)),
                          float(180.0 * angles[j]), kind, float(lam), bool(singular)))
    return tuple(out)


def _physics(physics):
    if isinstance(physics, Physics):
        return physics
    if physics not in PHYSICS:
        raise InputError(f"unknown physics '{physics}' (choose from {', '.join(PHYSICS)})",
                         field="physics")
    return PHYSICS[physics]


def quadrilateral_case(vertices, corners, name="quadrilateral", *, coefficient=1.0,
                       physics="generic", description=None, default_size=None,
                       normalisation=None, limit=RESIDUAL_LIMIT):
    """The exact case of a polygon with four marked vertices.

    Parameters
    ----------
    vertices : array_like
        Shape (n, 2) or complex (n,); clockwise lists are reversed (the case's
        polygon, edges and ``extras["vertices"]`` are counter-clockwise).
    corners : sequence of 4 int
        ``c0 .. c3`` as indices into ``vertices`` as given.
    name : str
    coefficient : float
        Material coefficient (relative permittivity for electrostatics).
    physics : str or Physics
        Scales the coefficient (``eps = physics.scale * coefficient``).
    description : str, optional
    default_size : float, optional
        Default mesh size; a tenth of the polygon's diameter if omitted.
    normalisation : (int, int), optional
        Passed to :func:`~verification.modulus.quadrilateral_modulus`.
    limit : float
        Largest accepted residual of the map.

    Returns
    -------
    ExactCase

    Raises
    ------
    GeometryError
        Invalid polygon, a map that does not converge (residual in the
        message), or a slit outside an electrode arc.
    InputError
        Bad corners or coefficient.
    """
    physics = _physics(physics)
    eps = physics.scale * float(coefficient)
    result = quadrilateral_modulus(vertices, corners, eps=eps, limit=limit,
                                   normalisation=normalisation)
    z = result.map.vertices
    n = z.size
    c0, c1, c2, c3 = ccw = result.ccw_corners
    edges = {LOW: arc_edges(n, c3, c0), HIGH: arc_edges(n, c1, c2),
             INSULATED_01: arc_edges(n, c0, c1), INSULATED_23: arc_edges(n, c2, c3)}
    slits = doubled_edges(z)
    _check_slits(slits, edges)
    table = corner_exponents(z, result.map.angles, ccw)
    singular = [c for c in table if c.singular]
    worst = min(singular, key=lambda c: c.exponent) if singular else None
    points = np.column_stack([z.real, z.imag])
    diameter = result.map.diameter

    def build(size):
        outer = (PolygonLoop("outer", points.copy()) if slits
                 else make_polygon("outer", points))
        return Problem(name, outer, coefficient=float(coefficient), physics=physics)

    m = result.modulus
    text = description or (f"polygon with {n} vertices, corners {tuple(corners)}: u = 0 on the "
                           f"arc c3->c0, u = 1 on c1->c2, the others insulated; M = {m:.12g}")
    return ExactCase(
        name=name, description=text, build_geometry=build,
        conditions={LOW: PartSpec("outer", edges[LOW], "dirichlet", 0.0),
                    HIGH: PartSpec("outer", edges[HIGH], "dirichlet", 1.0),
                    INSULATED_01: PartSpec("outer", edges[INSULATED_01], "insulated"),
                    INSULATED_23: PartSpec("outer", edges[INSULATED_23], "insulated")},
        u=_potential(result), v=_conjugate(result), grad=_gradient(result),
        singular_exponent=worst.exponent if worst else np.inf,
        singular_point=worst.point if worst else None,
        references=(
            Reference("capacitance", eps / m, f"C' = eps / M; {SOURCE}; map residual "
                      f"{result.residual:.1e}", scope="domain"),
            Reference("energy", 0.5 * eps / m, f"W = C' V^2 / 2 with V = 1; {SOURCE}",
                      scope="domain"),
        ),
        smooth=worst is None,
        default_size=float(default_size or diameter / 10.0),
        extras={"domain": f"polygon with {n} vertices{' and a slit' if slits else ''}, "
                          f"four marked corners",
                "modulus": m, "residual": result.residual, "eps": eps,
                "vertices": points.tolist(), "corners_given": tuple(int(c) for c in corners),
                "corners_ccw": ccw, "corners": [c.to_dict() for c in table],
                "singular_corners": [c.to_dict() for c in singular], "slits": slits,
                "diameter": diameter, "modulus_result": result,
                "flux_electrode": HIGH, "voltage": 1.0},
    )


def _check_slits(slits, edges):
    for p, q in slits:
        if not any(p in arc and q in arc for arc in (edges[LOW], edges[HIGH])):
            raise GeometryError(
                f"edges {p} and {q} are the two sides of a slit outside an electrode arc: the "
                "mesher joins the sides of a slit, so a finite-element model is only right when "
                "both sides carry one potential; put the slit inside an electrode arc")


def _potential(result):
    def u(x, y):
        z = complex_points(x, y)
        return result.potential(z.ravel()).reshape(z.shape)

    return u


def _conjugate(result):
    def v(x, y):
        z = complex_points(x, y)
        return result.complex_potential(z.ravel()).imag.reshape(z.shape)

    return v


def _gradient(result):
    def grad(x, y):
        z = complex_points(x, y)
        g = result.gradient(z.ravel())
        return g[:, 0].reshape(z.shape), g[:, 1].reshape(z.shape)

    return grad


def polygon_of(problem):
    """The outer polygon of a problem, in the order the file lists it.

    Raises
    ------
    GeometryError
        The problem has holes (the map needs a simply connected domain) or a
        circular outer boundary.
    InputError
        The problem has material regions (the modulus assumes one material).
    """
    if problem.holes:
        raise GeometryError(
            f"the domain has {len(problem.holes)} hole(s); the conformal modulus needs a simply "
            "connected domain (a Schwarz-Christoffel map sends the half-plane onto a polygon "
            "without holes): remove the [[holes]]", source=problem.origin, field="holes")
    if isinstance(problem.outer, CircleLoop):
        raise GeometryError("the outer boundary is a circle; the modulus needs a polygon with "
                            "four marked vertices", source=problem.origin, field="outer")
    if problem.regions:
        raise InputError("the domain has material regions; the modulus assumes one uniform "
                         "material: remove the [[regions]]", source=problem.origin,
                         field="regions")
    loop = problem.outer
    # make_polygon stores a clockwise list reversed and records it in edge_ids.
    return loop.vertices[::-1].copy() if loop.edge_ids is not None else loop.vertices.copy()


def case_from_problem(problem, corners, name=None, **options):
    """The quadrilateral case of a problem's outer polygon (its physics and coefficient).

    The problem's boundary conditions and source are not used: the case fixes
    its own electrodes.
    """
    vertices = polygon_of(problem)
    try:
        return quadrilateral_case(vertices, corners, name or problem.name,
                                  coefficient=problem.coefficient, physics=problem.physics,
                                  **options)
    except InputError as exc:
        if exc.source is None:
            raise type(exc)(exc.message, source=problem.origin, field=exc.field) from None
        raise


def case_from_problem_file(path, corners, name=None, **options):
    """:func:`case_from_problem` for a problem file (TOML)."""
    from lapsolve.problem_file import load_problem

    return case_from_problem(load_problem(path), corners, name, **options)


def corner_gradings(case, order):
    """A grading toward every corner with ``λ < order`` (all that limit the rate).

    Uses the power-law rule of :mod:`verification.grading` with ``μ = 0.9 λ / p``
    and the polygon's diameter as grading radius.

    Returns
    -------
    list of Grading
    """
    radius = float(case.extras["diameter"])
    return [Grading(tuple(c["point"]), default_mu(c["exponent"], order), radius)
            for c in case.extras["singular_corners"] if c["exponent"] < order]


def graded_size_field(case, size, order):
    """Local size limit ``points -> sizes`` graded toward every singular corner."""
    fields = [g.size_field(size) for g in corner_gradings(case, order)]

    def field(points):
        h = np.full(len(points), float(size))
        for f in fields:
            h = np.minimum(h, f(points))
        return h

    return field

