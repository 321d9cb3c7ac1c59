"""From a problem to a solution: mesh, assemble, apply conditions, solve, post-process."""

import logging
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from . import fem
from .errors import InputError
from .linear import solve_linear
from .meshing import triangulate
from .post import boundary_fluxes, two_level_capacity

log = logging.getLogger(__name__)

INSULATED = -1
INTERFACE = -2


@dataclass
class Solution:
    """A solved problem. ``u`` holds the degrees of freedom of ``disc.basis``."""

    problem: object
    mesh: object
    order: int
    disc: object
    u: np.ndarray
    solver: object
    fluxes: dict
    energy: float
    capacity: dict
    timings: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def basis(self):
        return self.disc.basis

    @property
    def dofs(self):
        return int(self.disc.n_dofs)

    def vertex_values(self):
        """u at the mesh vertices (the first degrees of freedom of each Lagrange basis)."""
        # scikit-fem numbers vertex DOFs first, in vertex order, for every degree
        return self.u[: len(self.mesh.points)]

    def evaluate(self, points):
        """u and grad u at arbitrary points inside the mesh.

        Returns
        -------
        u : ndarray (n,)
        grad : ndarray (n, 2)
        """
        from .probe import evaluate

        return evaluate(self.disc, self.u, points)


def segment_parts(problem, mesh):
    """Part index per mesh segment (INSULATED, INTERFACE for unlisted/internal)."""
    table = problem.part_of_edge()
    per_tag = np.array([table.get((t.loop, t.edge), INSULATED) if t.boundary else INTERFACE
                        for t in mesh.tags], int)
    return per_tag[mesh.segment_tags]


def auto_rtol(h, size, order):
    """Solver tolerance tied to the expected discretisation error.

    The algebraic error is at most cond(A) * residual with cond ~ (size/h)^2; the
    relative discretisation error is about (h/size)^(p+1). Asking for
    rtol = 0.01 (h/size)^(p+3) keeps the algebraic part two digits below it,
    clipped to [1e-14, 1e-8] (round-off bounds it from below).
    """
    return float(np.clip(0.01 * (h / size) ** (order + 3), 1e-14, 1e-8))


def solve(problem, order=1, mesh=None, refine=0, solver="auto", rtol=None):
    """Solve ``problem`` with Lagrange elements of degree ``order``.

    Parameters
    ----------
    problem : Problem
    order : {1, 2, 3}
    mesh : Mesh, optional
        Reuse a mesh (studies refine one mesh level by level); default triangulates.
    refine : int
        Uniform refinements applied to the mesh first.
    solver : {"auto", "direct", "amg"}
    rtol : float, optional
        Relative residual for the iterative solver; default :func:`auto_rtol`.

    Returns
    -------
    Solution
    """
    timings = {}
    t0 = time.perf_counter()
    if mesh is None:
        mesh = triangulate(problem)
    if refine:
        mesh = mesh.refined(refine)
    from .resources import check_solve

    check_solve(mesh.n_triangles, order)  # memory estimate before assembling
    timings["mesh"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    k_cell = problem.coefficients()[mesh.regions]
    disc = fem.discretize(mesh, order, k_cell)
    K = fem.stiffness(disc)
    f = fem.source_vector(disc, problem.source)
    parts = segment_parts(problem, mesh)
    natural, robin, dirichlet = _boundary_terms(problem, disc, parts)
    timings["assemble"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
    rtol = rtol or auto_rtol(disc.h(), float(np.max(hi - lo)), order)
    A = K + sum(robin.values()) if robin else K
    b = f + sum(natural.values()) if natural else f.copy()
    notes = []
    if dirichlet:
        D, xD = _dirichlet_values(disc, dirichlet, notes)
        Ac, bc, lift = eliminate(A, b, D, xD)
        w, info = solve_linear(Ac, bc, method=solver, rtol=rtol,
                               multilevel=_multilevel(Ac, disc, D))
        u = lift + w
        u[D] = xD
    elif robin:
        u, info = solve_linear(A, b, method=solver, rtol=rtol, multilevel=_multilevel(A, disc))
    else:
        u, info = _pure_neumann(disc, A, b, solver, rtol, problem, notes)
    timings["solve"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    fluxes = boundary_fluxes(problem, disc, K, f, u, natural, robin, dirichlet)
    energy = 0.5 * float(u @ (K @ u))
    capacity = two_level_capacity(problem, fluxes, energy)
    timings["post"] = time.perf_counter() - t0
    return Solution(problem, mesh, order, disc, u, info, fluxes, energy, capacity,
                    timings, notes)


def _multilevel(A, disc, D=None):
    """A deferred geometric/p-multigrid hierarchy, or None where it does not apply."""
    mesh = disc.mesh
    if disc.order > 2 or not mesh.parents:
        return None

    def build():
        from .multigrid import hierarchy

        fixed = None
        if D is not None:
            fixed = np.zeros(A.shape[0], bool)
            fixed[D] = True
        facets = disc.skmesh.facets if disc.order == 2 else None
        return hierarchy(A, mesh, fixed, facets=facets)

    return build


def _boundary_terms(problem, disc, parts):
    """Assemble per-part natural loads, Robin matrices and Dirichlet facets."""
    natural, robin, dirichlet = {}, {}, {}
    for i, part in enumerate(problem.parts):
        facets = disc.facets_of(parts == i)
        if len(facets) == 0:
            continue
        cond = part.condition
        if cond.kind == "dirichlet":
            dirichlet[part.name] = (facets, cond.value)
        elif cond.kind == "neumann":
            natural[part.name] = fem.boundary_vector(disc.facet_basis(facets), cond.value)
        elif cond.kind == "robin":
            fb = disc.facet_basis(facets)
            h = cond.h
            natural[part.name] = fem.boundary_vector(
                fb, lambda x, y, nx, ny, h=h, ref=cond.u_ref: h * ref(x, y, nx, ny))
            robin[part.name] = fem.boundary_matrix(fb, h)
    return natural, robin, dirichlet


def part_dofs(disc, facets):
    return disc.facet_dofs(facets)


def _dirichlet_values(disc, dirichlet, notes):
    dofs, vals = [], []
    for name, (facets, data) in dirichlet.items():
        d = part_dofs(disc, facets)
        x = disc.dof_locations(d)
        z = np.zeros(len(d))
        v = np.asarray(data(x[0], x[1], z, z), float)
        if not np.all(np.isfinite(v)):
            raise InputError("Dirichlet value is NaN or infinite at some boundary points",
                             field=f"boundary.{name}.value")
        dofs.append(d)
        vals.append(v)
    D = np.concatenate(dofs)
    X = np.concatenate(vals)
    uniq, first = np.unique(D, return_index=True)
    # A node shared by two Dirichlet parts: the parts must agree there.
    clash = np.zeros(len(uniq))
    np.maximum.at(clash, np.searchsorted(uniq, D), np.abs(X - X[first][np.searchsorted(uniq, D)]))
    if np.any(clash > 1e-9 * max(1.0, np.max(np.abs(X)))):
        notes.append(f"{int(np.count_nonzero(clash > 0))} nodes where two Dirichlet parts meet "
                     "with different values take the first part's value")
    return uniq, X[first]


def eliminate(A, b, D, xD):
    """Impose ``u[D] = xD`` symmetrically, keeping the system's size.

    Returns ``(A0, b0, lift)``: the solution is ``lift + w`` where ``A0 w = b0``;
    rows and columns of ``D`` in ``A0`` are those of the identity and ``b0[D] = 0``.
    One pass over the nonzeros (cheaper than extracting the interior block).
    """
    A = A.tocsr()
    n = A.shape[0]
    lift = np.zeros(n)
    lift[D] = xD
    b0 = b - A @ lift
    fixed = np.zeros(n, bool)
    fixed[D] = True
    rows = np.repeat(np.arange(n), np.diff(A.indptr))
    data = A.data.copy()
    data[fixed[rows] | fixed[A.indices]] = 0.0
    A0 = sp.csr_matrix((data, A.indices.copy(), A.indptr.copy()), shape=A.shape)
    A0.eliminate_zeros()
    diag = np.zeros(n)
    diag[D] = 1.0
    A0 = A0 + sp.diags(diag, format="csr")
    b0[D] = 0.0
    return A0, b0, lift


def _pure_neumann(disc, A, b, solver, rtol, problem, notes):
    """Mean-zero solution of a problem with flux data only, after a compatibility check."""
    mass = fem.source_vector(disc, lambda x, y: np.ones_like(x))
    total = float(np.sum(b))
    scale = float(np.sum(np.abs(b))) or 1.0
    if abs(total) > 1e-6 * scale:
        raise InputError(f"pure Neumann problem is incompatible: sources and boundary fluxes "
                         f"sum to {total:.3e}, not zero; the problem has no solution",
                         source=problem.origin, field="boundary")
    b = b - total * mass / mass.sum()
    if solver in ("amg", "gmg") or (solver == "auto" and A.shape[0] > 150_000):
        # Pin one DOF: with compatible data the pinned solution differs from any
        # solution of the singular system by a constant only. AMG-CG on the singular
        # system itself stalled (P3, 187k DOFs: residual 1.5e-6 after 2000
        # iterations; pinned: 89 iterations to 7e-12).
        A0, b0, lift = eliminate(A, b, np.array([0]), np.array([0.0]))
        w, info = solve_linear(A0, b0, method="amg", rtol=rtol)
        u = lift + w
    else:
        import scipy.sparse as sp

        c = sp.csr_matrix(mass[None, :])
        aug = sp.bmat([[A, c.T], [c, None]], format="csc")
        x, info = solve_linear(aug, np.append(b, 0.0), method="direct")
        u = x[:-1]
    u = u - (mass @ u) / mass.sum()
    notes.append(f"pure Neumann: solution normalised to zero mean (data imbalance {total:.2e})")
    return u, info
