"""Guaranteed two-sided bounds on the capacitance (conductance) of a two-terminal problem.

Upper bound (Dirichlet principle): a conforming potential ``u_h`` equal to the
electrode potentials on the electrodes has ``int k |grad u_h|^2 >= C dV^2``.
Lower bound (Thomson's principle): a divergence-free flux ``sigma_h`` with zero
normal flux on insulated parts and total flux ``F`` through an electrode has
``int (1/k) |sigma_h|^2 >= F^2 / C``; ``sigma_h = J grad psi_h`` from
:mod:`lapsolve.conjugate` (``F = 1``). Both hold for any admissible ``u_h`` and
``psi_h``: the linear solves only decide how tight the interval is, never
whether it holds. See ``docs/bounds.md``.

The energies are integrated exactly (polynomials on straight triangles with
``k`` constant per triangle); a first-order floating-point error bound of that
integration widens the interval, so it holds in floating point too. On curved
(isoparametric) elements, and whenever circles are replaced by polygons, the
bounds hold for the meshed domain, not the true one: :func:`geometry_status`
says which and how far the meshed boundary lies from the curve.
"""

import time
from dataclasses import asdict, dataclass, field

import numpy as np

from .conjugate import classify, solve_conjugate, two_terminal
from .errors import InputError
from .geometry import CircleLoop

EPS = float(np.finfo(float).eps)


@dataclass
class GradientField:
    """Gradient of a finite-element field at the quadrature points of a mesh.

    Attributes
    ----------
    values : ndarray (2, n_triangles, n_points)
    error : ndarray (n_triangles, n_points)
        Bound on the floating-point error of ``|values|`` at each point.
    weights : ndarray (n_triangles, n_points)
        Quadrature weights times the element's area scale.
    weight_error : ndarray (n_triangles,)
        Relative floating-point error bound of the weights.
    """

    values: np.ndarray
    error: np.ndarray
    weights: np.ndarray
    weight_error: np.ndarray


@dataclass
class ElementGeometry:
    """Edge vectors ``e1 = p1 - p0``, ``e2 = p2 - p0``, twice the signed area and the
    shape factor ``max |a| |b| / |det|`` over the corners (1 / sine of the smallest
    angle) per triangle."""

    e1: np.ndarray
    e2: np.ndarray
    det: np.ndarray
    shape: np.ndarray

    @classmethod
    def of(cls, mesh):
        p = mesh.points[mesh.triangles]
        e1, e2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
        det = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
        e3 = p[:, 2] - p[:, 1]
        l1, l2, l3 = (np.sqrt(e[:, 0] ** 2 + e[:, 1] ** 2) for e in (e1, e2, e3))
        shape = np.maximum(np.maximum(l1 * l2, l1 * l3), l2 * l3)
        return cls(e1, e2, det, shape / np.abs(det))


def field_gradients(disc, local, geometry=None):
    """Gradients of the field with element-local values ``local`` (n_local, n_triangles).

    Gradients are formed from differences to each element's first value
    (``sum_j grad phi_j = 0``), which keeps their rounding error relative to the
    gradient itself rather than to the size of the values. ``geometry`` (an
    :class:`ElementGeometry` of ``disc.mesh``) may be passed to share it between fields.
    """
    g = geometry or ElementGeometry.of(disc.mesh)
    weight_error = 16 * EPS * (1 + g.shape)
    if disc.order == 1:
        du1, du2 = local[1] - local[0], local[2] - local[0]
        e1x, e1y, e2x, e2y = g.e1[:, 0], g.e1[:, 1], g.e2[:, 0], g.e2[:, 1]
        gx = (e2y * du1 - e1y * du2) / g.det
        gy = (e1x * du2 - e2x * du1) / g.det
        ad1, ad2 = np.abs(du1), np.abs(du2)
        ax = np.abs(e2y) * ad1 + np.abs(e1y) * ad2
        ay = np.abs(e2x) * ad1 + np.abs(e1x) * ad2
        error = 8 * EPS * (np.sqrt(ax**2 + ay**2) / np.abs(g.det)
                           + np.sqrt(gx**2 + gy**2) * g.shape)
        return GradientField(np.stack([gx, gy])[:, :, None], error[:, None],
                             0.5 * np.abs(g.det)[:, None], weight_error)
    basis = disc.basis
    diff = local - local[0]
    values = np.zeros((2,) + basis.dx.shape)
    error = np.zeros(basis.dx.shape)
    for j in range(1, basis.Nbfun):
        grad = basis.basis[j][0].grad
        values += diff[j][None, :, None] * grad
        error += np.abs(diff[j])[:, None] * np.sqrt(grad[0] ** 2 + grad[1] ** 2)
    # multiply-adds and the mapped basis gradients (inverse Jacobian) each add
    # a few units of rounding relative to the terms summed
    error *= 4 * (basis.Nbfun + 8) * EPS * (1 + g.shape)[:, None]
    return GradientField(values, error, basis.dx, weight_error)


def weighted_energy(gradient, k_cell):
    """``int k |g|^2`` and a bound on its floating-point error.

    Returns
    -------
    value, allowance : float
    """
    g = gradient.values
    mag = np.sqrt(g[0] ** 2 + g[1] ** 2)
    kw = np.asarray(k_cell, float)[:, None] * gradient.weights
    terms = kw * mag**2
    value = float(np.sum(terms))
    dg = gradient.error
    allowance = float(np.sum(kw * (2 * mag * dg + dg**2))
                      + np.sum(terms.sum(axis=1) * gradient.weight_error)
                      + (np.log2(terms.size + 1) + 8) * EPS * value)
    return value, allowance


def orthogonality_residual(grad_u, grad_psi, k_cell):
    """The hypercircle residual ``min_s || k grad u_h - s J grad psi_h ||_{1/k}``.

    For equilibrated ``s J grad psi_h`` (any ``s``) the Prager-Synge identity
    gives ``||grad(u - u_h)||_k^2 + ||sigma - sigma_h||_{1/k}^2 = ||k grad u_h -
    sigma_h||_{1/k}^2``: the residual bounds the energy error of ``u_h`` from above.

    Returns
    -------
    eta : float
    scale : float
        The minimising ``s`` (the flux of the best scaled ``sigma_h``).
    """
    gu, gp = grad_u.values, grad_psi.values
    w = grad_u.weights
    k = np.asarray(k_cell, float)[:, None]
    jx, jy = -gp[1], gp[0]
    cross = float(np.sum(w * (gu[0] * jx + gu[1] * jy)))
    e_psi = float(np.sum(w / k * (gp[0] ** 2 + gp[1] ** 2)))
    s = cross / e_psi
    rx, ry = k * gu[0] - s * jx, k * gu[1] - s * jy
    return float(np.sqrt(np.sum(w / k * (rx**2 + ry**2)))), s


def geometry_status(problem, disc):
    """Whether the meshed domain is the problem's domain, and how far off it lies.

    Returns
    -------
    dict
        ``kind`` (``exact``, ``polygonal`` or ``curved``), ``boundary_gap`` (largest
        distance between a meshed curved edge and its circle, sampled), ``guaranteed``
        and a one-line ``note``.
    """
    mesh = disc.mesh
    loops = list(problem.loops()) + [r.loop for r in problem.regions]
    if not any(isinstance(lp, CircleLoop) for lp in loops):
        return {"kind": "exact", "boundary_gap": 0.0, "guaranteed": True,
                "note": "polygonal domain meshed exactly: the bounds are guaranteed"}
    gap = 0.0
    t = np.linspace(0.0, 1.0, 9)[1:-1, None]
    for k, tag in enumerate(mesh.tags):
        if tag.circle is None:
            continue
        mask = mesh.segment_tags == k
        a, b = mesh.points[mesh.segments[mask, 0]], mesh.points[mesh.segments[mask, 1]]
        cx, cy, r = tag.circle
        if disc.curved:
            nv = len(mesh.points)
            mid = disc.skmesh.doflocs[:, nv + disc.segment_facets[mask]].T
            # quadratic edge through a, mid, b (isoparametric P2 geometry)
            pts = (a[None] * ((1 - t) * (1 - 2 * t))[..., None]
                   + b[None] * (t * (2 * t - 1))[..., None]
                   + mid[None] * (4 * t * (1 - t))[..., None])
        else:
            pts = a[None] + (b - a)[None] * t[..., None]
        d = np.hypot(pts[..., 0] - cx, pts[..., 1] - cy)
        gap = max(gap, float(np.max(np.abs(d - r))))
    if disc.curved:
        note = ("circles meshed by quadratic arcs: the bounds hold for the meshed domain, "
                "up to quadrature on curved elements")
        kind = "curved"
    else:
        note = "circles meshed by polygons: the bounds hold for the polygonal domain"
        kind = "polygonal"
    return {"kind": kind, "boundary_gap": gap, "guaranteed": False, "note": note}


@dataclass
class LevelBounds:
    """Bounds on one mesh.

    ``lower``/``upper`` are the guaranteed bounds (rounding allowance included);
    ``upper_raw``/``lower_raw`` without it. With an ``exact`` value:
    ``effectivity = (upper - lower) / (2 |exact - midpoint|)`` (the half-width
    bounds the midpoint's error, so it is at least 1 when the bounds hold) and
    ``upper_effectivity = (upper - lower) / (upper - exact)`` (the width as a
    bound on the error of the Galerkin value ``upper``).
    """

    level: int
    h: float
    dofs: int
    triangles: int
    lower: float
    upper: float
    lower_raw: float
    upper_raw: float
    roundoff: dict
    eta: float
    eta_scale: float
    solver_u: dict
    solver_psi: dict
    geometry: dict
    exact: float = None
    seconds: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def midpoint(self):
        return 0.5 * (self.lower + self.upper)

    @property
    def width(self):
        return self.upper - self.lower

    @property
    def relative_width(self):
        return self.width / abs(self.midpoint)

    @property
    def reciprocal_product(self):
        """``lower / upper``: for k = 1 the product of the Galerkin moduli of the
        problem and of its conjugate; it tends to 1 from below."""
        return self.lower_raw / self.upper_raw

    @property
    def contains(self):
        return None if self.exact is None else bool(self.lower <= self.exact <= self.upper)

    @property
    def effectivity(self):
        if self.exact is None:
            return None
        miss = abs(self.exact - self.midpoint)
        return float("inf") if miss == 0 else self.width / (2 * miss)

    @property
    def upper_effectivity(self):
        if self.exact is None or self.upper_raw <= self.exact:
            return None
        return self.width / (self.upper_raw - self.exact)

    def to_dict(self):
        out = asdict(self)
        for name in ("midpoint", "width", "relative_width", "reciprocal_product", "contains",
                     "effectivity", "upper_effectivity"):
            value = getattr(self, name)
            out[name] = None if isinstance(value, float) and not np.isfinite(value) else value
        return out


def level_bounds(solution, conjugate=None, solver="auto", rtol=None, exact=None, level=0):
    """Bounds from a solved two-terminal problem (and its stream function).

    Parameters
    ----------
    solution : lapsolve.Solution
    conjugate : lapsolve.conjugate.Conjugate, optional
        Solved here when not given.
    solver, rtol
        For the conjugate solve (see :func:`lapsolve.conjugate.solve_conjugate`).
    exact : float, optional
        A reference value for the effectivity indices.
    level : int
        Recorded in the result.

    Returns
    -------
    LevelBounds
    """
    t0 = time.perf_counter()
    if conjugate is None:
        conjugate = solve_conjugate(solution, solver=solver, rtol=rtol)
    t1 = time.perf_counter()
    disc = solution.disc
    terminals = conjugate.terminals
    dofs = conjugate.element_dofs()
    geometry = ElementGeometry.of(disc.mesh)
    grad_u = field_gradients(disc, solution.u[dofs], geometry)
    grad_psi = field_gradients(disc, conjugate.local_values(), geometry)
    e_u, du = weighted_energy(grad_u, disc.k_cell)
    e_psi, dpsi = weighted_energy(grad_psi, 1.0 / disc.k_cell)
    dv2 = terminals.delta_v**2
    if not (dv2 > 0 and e_u > 0 and e_psi > 0):
        raise InputError("the electrode potentials differ by so little that the energy "
                         f"underflows (difference {terminals.delta_v:.3g}); no bounds can be "
                         "computed", source=solution.problem.origin, field="boundary")
    upper_raw, lower_raw = e_u / dv2, conjugate.flux**2 / e_psi
    rel_u, rel_psi = du / e_u + 8 * EPS, dpsi / e_psi + 8 * EPS
    eta, scale = orthogonality_residual(grad_u, grad_psi, disc.k_cell)
    seconds = {"conjugate": t1 - t0, "bounds": time.perf_counter() - t1}
    return LevelBounds(
        level=level, h=_longest_edge(disc), dofs=solution.dofs,
        triangles=solution.mesh.n_triangles,
        lower=lower_raw / (1 + rel_psi), upper=upper_raw * (1 + rel_u),
        lower_raw=lower_raw, upper_raw=upper_raw,
        roundoff={"upper_relative": rel_u, "lower_relative": rel_psi},
        eta=eta, eta_scale=scale,
        solver_u=solution.solver.to_dict(), solver_psi=conjugate.solver.to_dict(),
        geometry=geometry_status(solution.problem, disc), exact=exact, seconds=seconds,
        notes=list(solution.notes) + list(conjugate.notes))


def _longest_edge(disc):
    f = disc.skmesh.facets
    p = disc.mesh.points
    return float(np.sqrt(np.max(np.sum((p[f[0]] - p[f[1]]) ** 2, axis=1))))


@dataclass
class BoundsResult:
    """Bounds on a sequence of uniformly refined meshes."""

    problem: str
    origin: str
    physics: str
    quantity: str
    unit: str
    order: int
    topology: str
    electrodes: dict
    levels: list
    exact: float = None
    resistance_label: str = ""
    resistance_unit: str = ""

    def width_orders(self):
        """Observed order of the width in h between consecutive levels (h halves)."""
        w = np.array([lv.width for lv in self.levels])
        with np.errstate(divide="ignore", invalid="ignore"):
            return [float(x) for x in np.log2(w[:-1] / w[1:])]

    def to_dict(self):
        return {
            "schema": "lapsolve.bounds/1",
            "problem": self.problem, "origin": self.origin, "physics": self.physics,
            "quantity": self.quantity, "unit": self.unit, "order": self.order,
            "topology": self.topology, "electrodes": self.electrodes, "exact": self.exact,
            "resistance_label": self.resistance_label, "resistance_unit": self.resistance_unit,
            "width_orders": self.width_orders(),
            "levels": [lv.to_dict() for lv in self.levels],
        }


def capacity_bounds(problem, order=2, levels=3, mesh=None, solver="auto", rtol=None,
                    exact=None):
    """Guaranteed bounds on a two-terminal problem's capacitance, level by level.

    Parameters
    ----------
    problem : Problem
        Two electrodes at constant potentials, the rest insulated, no source
        (else :class:`~lapsolve.errors.InputError`).
    order : {1, 2, 3}
    levels : int
        Number of meshes: the problem's mesh and ``levels - 1`` uniform refinements.
    mesh : Mesh, optional
        The coarsest mesh (default: triangulate the problem).
    solver : {"auto", "direct", "amg", "gmg"}
    rtol : float, optional
        Relative residual of iterative solves (default as in :func:`lapsolve.solve`).
    exact : float, optional
        Reference capacitance (same units) for effectivity indices.

    Returns
    -------
    BoundsResult
    """
    from .meshing import triangulate
    from .solve import solve

    terminals = two_terminal(problem)
    topology = classify(problem, terminals)
    if mesh is None:
        mesh = triangulate(problem)
    out = []
    for level in range(levels):
        if level:
            mesh = mesh.refined(1)
        t0 = time.perf_counter()
        solution = solve(problem, order=order, mesh=mesh, solver=solver, rtol=rtol)
        t1 = time.perf_counter()
        result = level_bounds(solution, solver=solver, rtol=rtol, exact=exact, level=level)
        result.seconds["primal"] = t1 - t0
        out.append(result)
    phys = problem.physics
    return BoundsResult(
        problem=problem.name, origin=problem.origin, physics=phys.kind,
        quantity=phys.capacity_label, unit=phys.capacity_unit, order=order,
        topology=topology.describe(),
        electrodes={"high": list(terminals.high), "low": list(terminals.low),
                    "v_high": terminals.v_high, "v_low": terminals.v_low},
        levels=out, exact=exact, resistance_label=phys.resistance_label,
        resistance_unit=phys.resistance_unit)
