"""User-defined exact cases: a problem file whose top level gives ``exact = "f(z)"``.

The formula is parsed by the whitelisting parser in analytic mode (no ``eval``;
``conj``, ``abs``, ``re`` ... are refused there) and differentiated symbolically.
``u = Re f`` must be harmonic on the domain, so the formula is sampled before
use: a pole, a singular point or a branch cut inside the domain is an
:class:`~lapsolve.errors.InputError`; a branch cut running along the boundary
gives a warning (boundary data on the cut itself may come from the other side).
The boundary data written in the file are replaced by exact data.
"""

import logging
from dataclasses import dataclass, replace

import numpy as np

from lapsolve.errors import InputError
from lapsolve.formula import parse
from lapsolve.geometry import CircleLoop, distance_to_loop

from .case import ExactCase, PartSpec
from .cases.analytic import from_analytic

log = logging.getLogger(__name__)

#: Cells across the domain's extent in the first sampling grid.
START_CELLS = 16
#: Smallest sampling cell, as a fraction of the extent: singular points closer
#: than about three such cells to the boundary are not told apart from it.
MIN_CELL = 1.0 / 512
#: Relative mismatch allowed between a value at a cell's centre and its circle mean.
TOLERANCE = 1e-9

#: Points of the trapezoidal rule on the circle that covers a sampling cell.
CIRCLE_POINTS = 32
_ANGLES = 2 * np.pi * np.arange(CIRCLE_POINTS) / CIRCLE_POINTS
_RING = np.column_stack([np.cos(_ANGLES), np.sin(_ANGLES)])


@dataclass(frozen=True)
class Domain:
    """Membership and boundary distance of a problem's domain (outer minus holes)."""

    loops: tuple
    interfaces: tuple = ()

    @classmethod
    def of(cls, problem, interfaces=False):
        """The domain of ``problem``; with ``interfaces``, region loops count as boundary."""
        regions = tuple(r.loop for r in problem.regions) if interfaces else ()
        return cls(tuple(problem.loops()), regions)

    def contains(self, points):
        inside = self.loops[0].contains(points)
        for hole in self.loops[1:]:
            inside &= ~hole.contains(points)
        return inside

    def distance(self, points, chunk=2000):
        """Distance to the nearest boundary loop (computed in chunks to bound memory)."""
        out = np.empty(len(points))
        for start in range(0, len(points), chunk):
            block = points[start:start + chunk]
            out[start:start + chunk] = np.min([distance_to_loop(block, lp)
                                               for lp in self.loops + self.interfaces], axis=0)
        return out

    def extent(self):
        lo, hi = self.loops[0].bbox()
        return np.asarray(lo, float), float(np.max(np.asarray(hi) - np.asarray(lo)))


def case_from_problem(problem):
    """The exact case of a problem whose ``extras["exact"]`` holds a formula in ``z``.

    Parameters
    ----------
    problem : Problem
        As loaded from a file with a top-level ``exact = "..."``.

    Returns
    -------
    ExactCase
        ``extras`` holds ``formula``, ``f``, ``fprime`` and the list of
        ``warnings`` (also logged).

    Raises
    ------
    InputError
        No formula; a refused formula (``FormulaError``); a source term, a
        coefficient that changes between regions or a Robin part; a singularity
        or branch cut inside the domain; an infinite value at a boundary vertex.
    """
    text = problem.extras.get("exact")
    if text is None:
        raise InputError("no exact solution: give a top-level exact = \"f(z)\"",
                         source=problem.origin, field="exact")
    formula = parse(text, variables=("z",), analytic=True, source=problem.origin,
                    field="exact")
    derivative = formula.derivative("z")

    def f(z):
        return formula(z=z)

    def fprime(z):
        return derivative(z=z)

    _check_supported(problem)
    u, v, grad = from_analytic(f, fprime)
    warnings = check_analytic(u, grad, problem)
    for message in warnings:
        log.warning("%s: %s", problem.origin, message)
    k = float(problem.coefficients()[0])
    conditions, notes = _conditions(problem, u, grad)
    for message in notes:
        log.warning("%s: %s", problem.origin, message)
    base = replace(problem, parts=())
    return ExactCase(
        name=problem.name,
        description=f"user-defined exact solution u = Re({text})",
        build_geometry=lambda size: base.with_mesh(max_size=size),
        conditions=conditions, u=u, v=v, grad=grad,
        smooth=False,
        coefficient=lambda x, y: np.full(np.shape(x), k),
        default_size=problem.mesh.max_size,
        extras={"formula": text, "f": f, "fprime": fprime, "warnings": warnings + notes,
                "domain": domain_summary(problem), "origin": problem.origin},
    )


def _check_supported(problem):
    if problem.source is not None:
        raise InputError("an exact formula describes a harmonic u: remove the source term",
                         source=problem.origin, field="source")
    for region in problem.regions:
        if region.coefficient != problem.coefficient:
            raise InputError(f"region '{region.name}' has coefficient {region.coefficient}, "
                             f"not {problem.coefficient}: a single analytic f(z) is exact "
                             "only for a uniform coefficient", source=problem.origin,
                             field="regions")
    for part in problem.parts:
        if part.condition.kind == "robin":
            raise InputError("exact files support dirichlet, neumann and insulated parts, "
                             "not robin", source=problem.origin,
                             field=f"boundary.{part.name}.type")


def _conditions(problem, u, grad):
    """Part specs with exact data; constant Dirichlet parts become electrodes."""
    conditions, notes = {}, []
    for part in problem.parts:
        loop = problem.loop(part.loop)
        pts, normals = loop_samples(loop, part.edges)
        kind = part.condition.kind
        if kind == "dirichlet":
            values = u(pts[:, 0], pts[:, 1])
            level = np.max(np.abs(values)) if len(values) else 0.0
            electrode = None
            if np.ptp(values) <= 1e-12 * max(1.0, level):
                electrode = float(np.median(values))
                electrode = 0.0 if abs(electrode) <= 1e-13 else electrode
            conditions[part.name] = PartSpec(part.loop, part.edges, "dirichlet", electrode)
            continue
        if kind == "insulated" and _flux_not_zero(pts, normals, grad):
            notes.append(f"part '{part.name}' is insulated but the exact flux through it "
                         "is not zero: it gets the exact flux as Neumann data")
        conditions[part.name] = PartSpec(part.loop, part.edges, "neumann")
    covered = problem.part_of_edge()
    for loop in problem.loops():
        missing = tuple(e for e in range(loop.n_edges) if (loop.name, e) not in covered)
        if not missing:
            continue
        name = f"unlisted-{loop.name}"
        conditions[name] = PartSpec(loop.name, None if len(missing) == loop.n_edges
                                    else missing, "neumann")
        pts, normals = loop_samples(loop, missing)
        if _flux_not_zero(pts, normals, grad):
            notes.append(f"edges {list(missing)} of loop '{loop.name}' have no condition "
                         "(insulated) but the exact flux through them is not zero: they "
                         f"get the exact flux as Neumann data (part '{name}')")
    return conditions, notes


def _flux_not_zero(pts, normals, grad):
    gx, gy = grad(pts[:, 0], pts[:, 1])
    flux = gx * normals[:, 0] + gy * normals[:, 1]
    scale = np.max(np.hypot(gx, gy)) if len(gx) else 0.0
    return bool(np.any(np.abs(flux) > 1e-9 * max(scale, 1e-300)))


def loop_samples(loop, edges=None, per_edge=64, per_circle=256):
    """Points strictly inside the edges of a loop, and the loop's unit normals there.

    Returns
    -------
    points, normals : ndarray (n, 2)
        ``normals`` point away from the region the loop encloses: out of the
        domain on the outer loop, into the domain on a hole.
    """
    if isinstance(loop, CircleLoop):
        t = 2 * np.pi * (np.arange(per_circle) + 0.5) / per_circle
        n = np.column_stack([np.cos(t), np.sin(t)])
        return np.asarray(loop.center) + loop.radius * n, n
    edges = range(loop.n_edges) if edges is None else edges
    t = (np.arange(per_edge) + 0.5) / per_edge
    pts, normals = [], []
    for e in edges:
        a, b = loop.edge_points(e)
        d = b - a
        pts.append(a + t[:, None] * d)
        normals.append(np.tile(np.array([d[1], -d[0]]) / np.hypot(*d), (per_edge, 1)))
    if not pts:
        return np.zeros((0, 2)), np.zeros((0, 2))
    return np.vstack(pts), np.vstack(normals)


def check_analytic(u, grad, problem, interfaces=False):
    """Sample ``u``: errors for interior singularities, warnings at the boundary.

    Interior: a quadtree of square cells covers the domain; a cell counts as
    interior when its centre lies more than two cell sizes from the boundary
    (and, with ``interfaces``, from every region loop). On the circle through
    the cell's corners (and a little beyond), the means of ``u`` and of both
    components of ``grad u`` must equal their values at the centre: the
    mean-value property of harmonic functions. A jump, a kink, a pole or a
    branch point inside the circle breaks it. A cell that fails is split; a
    failure that persists down to ``MIN_CELL`` is a singularity or a branch cut
    inside the domain.

    Boundary: u and grad u at points on each loop are compared with their
    values a hair inside the domain; a jump is a branch cut along the boundary.

    Parameters
    ----------
    u, grad : callable
        ``(x, y) -> u`` and ``(x, y) -> (du/dx, du/dy)``.
    problem : Problem
    interfaces : bool
        Treat region loops as boundaries (piecewise solutions).

    Returns
    -------
    list of str
        Warnings.

    Raises
    ------
    InputError
        A singularity or branch cut inside the domain, or a non-finite value of
        u at a boundary vertex.
    """
    domain = Domain.of(problem, interfaces)
    origin, extent = domain.extent()
    bad = _interior_failure(u, grad, domain, origin, extent)
    if bad is not None:
        raise InputError(f"the exact solution is not harmonic inside the domain near "
                         f"({bad[0]:.6g}, {bad[1]:.6g}): a pole, a singular point or a branch "
                         "cut of f(z) lies there; u = Re f must be harmonic in the whole domain",
                         source=problem.origin, field="exact")
    _check_vertices(u, problem)
    return _boundary_warnings(u, grad, problem, extent)


def _interior_failure(u, grad, domain, origin, extent):
    """Centre of a cell where harmonicity fails away from the boundary, or None."""
    size = extent / START_CELLS
    idx = (np.arange(START_CELLS) + 0.5) * size
    gx, gy = np.meshgrid(origin[0] + idx, origin[1] + idx)
    centres = np.column_stack([gx.ravel(), gy.ravel()])
    min_size = extent * MIN_CELL
    while len(centres):
        inside = domain.contains(centres)
        dist = domain.distance(centres)
        interior = inside & (dist > 2.0 * size)
        near = ~interior & (inside | (dist <= 0.75 * size))
        failed = centres[interior][~_cells_pass(u, grad, centres[interior], size)]
        if size / 2 < min_size:
            return tuple(failed[0]) if len(failed) else None
        refine = np.vstack([failed, centres[near]])
        centres = _children(refine, size)
        size /= 2
    return None


def _children(centres, size):
    q = 0.25 * size
    shifts = np.array([[-q, -q], [q, -q], [q, q], [-q, q]])
    return (centres[:, None, :] + shifts[None, :, :]).reshape(-1, 2)


def _cells_pass(u, grad, centres, size):
    """Per cell: the mean-value property of u, du/dx and du/dy on a covering circle.

    For a function harmonic on a disc, the mean over its circle equals the value
    at the centre, and the trapezoidal rule with ``CIRCLE_POINTS`` points gets
    the mean to about ``(R/d)**CIRCLE_POINTS``, d the distance to the nearest
    singularity: with d > 2.6 R for an interior cell, far below the tolerance.
    """
    if len(centres) == 0:
        return np.zeros(0, bool)
    ring = centres[:, None, :] + 0.75 * size * _RING[None, :, :]
    x, y = ring[..., 0], ring[..., 1]
    cx, cy = centres[:, 0], centres[:, 1]
    ok = np.ones(len(centres), bool)
    with np.errstate(all="ignore"):
        for on_ring, at_centre in ((u(x, y), u(cx, cy)),
                                   *zip(grad(x, y), grad(cx, cy))):
            scale = np.max(np.abs(on_ring), axis=1) + 1e-300
            ok &= np.all(np.isfinite(on_ring), axis=1) & np.isfinite(at_centre)
            ok &= np.abs(np.mean(on_ring, axis=1) - at_centre) <= TOLERANCE * scale
    return ok


def _check_vertices(u, problem):
    for loop in problem.loops():
        if isinstance(loop, CircleLoop):
            continue
        with np.errstate(all="ignore"):
            bad = ~np.isfinite(u(loop.vertices[:, 0], loop.vertices[:, 1]))
        if np.any(bad):
            x, y = loop.vertices[np.argmax(bad)]
            raise InputError(f"the exact formula is infinite or undefined at the boundary "
                             f"vertex ({x:.6g}, {y:.6g}) of loop '{loop.name}'",
                             source=problem.origin, field="exact")


def _boundary_warnings(u, grad, problem, extent):
    eps = 1e-7 * extent
    warnings = []
    for k, loop in enumerate(problem.loops()):
        pts, normals = loop_samples(loop)
        inner = pts + eps * (-normals if k == 0 else normals)
        with np.errstate(all="ignore"):
            u0, u1 = u(*pts.T), u(*inner.T)
            g0, g1 = np.column_stack(grad(*pts.T)), np.column_stack(grad(*inner.T))
        finite = (np.isfinite(u0) & np.isfinite(u1) & np.all(np.isfinite(g0), axis=1)
                  & np.all(np.isfinite(g1), axis=1))
        if not np.all(finite):
            x, y = pts[np.argmin(finite)]
            warnings.append(f"the exact formula is infinite or undefined on loop '{loop.name}' "
                            f"near ({x:.6g}, {y:.6g})")
            continue
        slope = np.maximum(np.hypot(*g0.T), np.hypot(*g1.T))
        jump_u = np.abs(u0 - u1) > 10 * eps * slope + 1e-12 * (1 + np.abs(u0))
        jump_g = np.hypot(*(g0 - g1).T) > 1e-3 * slope + 1e-12
        for jump, what in ((jump_u, "u"), (jump_g, "grad u")):
            if np.any(jump):
                x, y = pts[np.argmax(jump)]
                warnings.append(
                    f"{what} jumps across the boundary of loop '{loop.name}' near "
                    f"({x:.6g}, {y:.6g}): a branch cut runs along the boundary, and the "
                    "boundary data there may take the value from the far side of the cut")
    return warnings


def domain_summary(problem):
    """A one-line description of a problem's domain."""
    def one(loop):
        if isinstance(loop, CircleLoop):
            return f"circle r={loop.radius:g} at ({loop.center[0]:g}, {loop.center[1]:g})"
        return f"polygon with {loop.n_edges} edges"

    text = one(problem.outer)
    if problem.holes:
        text += " minus " + ", ".join(one(h) for h in problem.holes)
    return text
