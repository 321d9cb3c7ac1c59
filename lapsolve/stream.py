"""The stream function of any source-free solution, and its orthogonality residual.

In 2D every divergence-free flux is ``sigma = J grad psi`` (``J`` the rotation by
90 degrees, ``J (a, b) = (-b, a)``), with ``sigma . n = -d psi / ds`` along the
boundary when ``s`` runs with the domain on its left. The discrete stream
function ``psi_h`` here is the member of an admissible family closest to the
finite-element flux ``k grad u_h``::

    psi_h = argmin || k grad u_h - J grad psi ||_{1/k}

over continuous Lagrange functions of the solution's degree (on its curved or
straight mesh) that

* on every run of flux boundary (Neumann or insulated edges) equal the
  integrated flux data ``G(s) = -int g ds`` plus a free constant per run, so
  ``J grad psi . n`` carries the flux data (exactly where it is zero);
* are multivalued around holes: one cut per hole (a path of mesh edges to a
  reference loop) across which ``psi`` jumps by the flux through that hole. The
  jump is free unless the hole is wholly a flux boundary, where it is that flux.

Dirichlet and Robin parts are natural (free) for ``psi``. Material regions need
nothing special: ``psi`` is continuous across interfaces and carries ``1/k``.

The minimum, the *orthogonality residual*
``eta = || k grad u_h - J grad psi_h ||_{1/k}``, is an a-posteriori estimate of the
energy error of ``u_h``. By the Prager-Synge identity it bounds that error from
above whenever ``J grad psi_h`` is exactly equilibrated and ``u_h`` meets the
Dirichlet data exactly (constant Dirichlet data, zero flux data, polygonal
boundary, no Robin part); elsewhere the data and geometry approximations enter
at higher order and :attr:`StreamFunction.guaranteed` is False. For two-terminal
problems ``psi_h`` is a multiple of :mod:`lapsolve.conjugate`'s unit-flux stream
function and ``eta`` equals the hypercircle residual of the bounds.
See ``docs/bounds.md``.
"""

import time
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp

from . import fem
from .conjugate import (
    Cut,
    CutField,
    _path_dofs,
    _strip_stiffness,
    cut_path,
    side_triangles,
    strip_triangles,
)
from .errors import InputError
from .linear import solve_linear
from .solve import INSULATED, INTERFACE, segment_parts

FLUX_KINDS = ("neumann", "insulated")


@dataclass
class StreamFunction(CutField):
    """A least-squares stream function on the mesh of a primal solution.

    Attributes
    ----------
    problem, mesh, disc, order
    psi : ndarray
        Degrees of freedom (primal numbering), minus side of every cut.
    cuts : list of Cut
        One per hole; ``jump`` is the flux through it.
    eta : float
        Orthogonality residual ``|| k grad u_h - J grad psi_h ||_{1/k}``.
    energy : float
        ``|| grad u_h ||_k`` (``eta / energy`` is the relative residual).
    guaranteed : bool
        Whether ``eta`` is a guaranteed upper bound of the energy error.
    conditions : list of str
        What the guarantee lacks (data or geometry approximations), or empty.
    solver : lapsolve.linear.SolveInfo
    flux : float
        Range of ``psi`` (spacing scale of drawn field lines).
    timings : dict
    notes : list of str
    """

    problem: object
    mesh: object
    disc: object
    order: int
    psi: np.ndarray
    cuts: list
    eta: float
    energy: float
    guaranteed: bool
    conditions: list
    solver: object
    flux: float = 1.0
    timings: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def relative(self):
        return self.eta / self.energy if self.energy > 0 else float("nan")

    def summary(self):
        """JSON-ready digest for ``summary.json``."""
        return {"eta": self.eta, "relative": self.relative, "guaranteed": self.guaranteed,
                "approximations": list(self.conditions), "cuts": len(self.cuts),
                "solver_relative_residual": self.solver.relative_residual}


def stream_function(solution, rtol=None, solver="auto"):
    """The least-squares stream function and orthogonality residual of ``solution``.

    Parameters
    ----------
    solution : lapsolve.Solution
    rtol : float, optional
        Relative residual of an iterative solve; default that of the primal solve.
    solver : {"auto", "direct", "amg", "gmg"}
        ``gmg`` needs P1 or P2 on a uniformly refined mesh (falls back to AMG).

    Returns
    -------
    StreamFunction

    Raises
    ------
    InputError
        The problem has a source (its flux is not divergence-free), or every
        boundary loop of a domain with holes is a flux boundary.
    """
    problem, mesh, disc = solution.problem, solution.mesh, solution.disc
    if problem.source is not None:
        raise InputError("no stream function: the problem has a source term, so its flux is "
                         "not divergence-free", source=problem.origin)
    timings = {}
    t0 = time.perf_counter()
    boundary = _Boundary(problem, mesh, disc)
    cuts = boundary.cuts() + boundary.slits()
    chains = boundary.chains(cuts)
    inverse = replace(disc, k_cell=1.0 / disc.k_cell)
    K = fem.stiffness(inverse).tocsr()
    n = K.shape[0]
    # each cut adds jump unknowns: one (a hole's flux) or one per DOF (a slit);
    # X maps them to DOF-sized vectors applied on the cut's strip of triangles
    X, offsets = [], [n]
    for cut in cuts:
        if np.ndim(cut.jump):
            X.append(sp.csr_matrix((np.ones(len(cut.dofs)), (cut.dofs, np.arange(len(cut.dofs)))),
                                   shape=(n, len(cut.dofs))))
        else:
            X.append(sp.csr_matrix((np.ones(len(cut.dofs)), (cut.dofs, np.zeros(len(cut.dofs),
                                                                                 int))),
                                   shape=(n, 1)))
        offsets.append(offsets[-1] + X[-1].shape[1])
    blocks = [[K] + [None] * len(cuts)] + [[None] * (len(cuts) + 1) for _ in cuts]
    rhs = [rotated_load(disc, solution.u)]
    for i, cut in enumerate(cuts):
        border = (_strip_stiffness(inverse, cut.strip) @ X[i]).tocsr()
        blocks[0][i + 1], blocks[i + 1][0] = border, border.T
        rhs.append(X[i].T @ rotated_load(disc, solution.u, cut.strip))
        for j in range(i, len(cuts)):
            both = np.intersect1d(cut.strip, cuts[j].strip)
            if len(both):
                g = (X[i].T @ _strip_stiffness(inverse, both) @ X[j]).tocsr()
                blocks[i + 1][j + 1] = g
                if j != i:
                    blocks[j + 1][i + 1] = g.T
    A = sp.bmat(blocks, format="csr") if cuts else K
    rhs = np.concatenate(rhs)
    total = A.shape[0]

    # affine map z = T y + z0 onto the admissible family
    z0 = np.zeros(total)
    column = np.arange(total)
    for i, cut in enumerate(cuts):
        if cut.fixed:
            z0[offsets[i]] = cut.jump
            column[offsets[i]] = -1
    for dofs, values in chains:
        z0[dofs] = values
    # chain i's constant takes the column of its first DOF; chain 0's is pinned to 0
    for c, (dofs, _) in enumerate(chains):
        column[dofs] = -1 if c == 0 else dofs[0]
    if not chains:
        column[0] = -1  # psi is defined up to a constant
    free = column >= 0
    present = np.zeros(total, bool)  # unique column values in O(n), no sort
    present[column[free]] = True
    columns = np.flatnonzero(present)
    col = (np.cumsum(present) - 1)[column[free]]
    rows = np.flatnonzero(free)
    T = sp.csr_matrix((np.ones(len(rows)), (rows, col)), shape=(total, int(col.max()) + 1))
    # A slit's unknowns are its plus-side values q = psi + jump, not the jumps: in
    # (psi, q) the matrix is the stiffness of the cut-open mesh, which AMG handles
    # well (in (psi, jump) AMG-CG took 104 iterations at 185k P1 DOFs)
    S = _plus_side_values(n, cuts, offsets)
    if S is not None:
        T, z0 = (S @ T).tocsr(), S @ z0
    Ar = (T.T @ A @ T).tocsr()
    br = T.T @ (rhs - A @ z0)
    timings["assemble"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    multilevel = _multilevel(Ar, disc, columns, n, chains, cuts, offsets)
    if solver == "gmg" and multilevel is None:
        solver = "amg"
    y, info = solve_linear(Ar, br, method=solver, rtol=rtol or solution.solver.rtol,
                           multilevel=multilevel)
    z = T @ y + z0
    timings["solve"] = time.perf_counter() - t0
    psi = z[:n]
    for i, cut in enumerate(cuts):
        jump = z[offsets[i]:offsets[i + 1]]
        cut.jump = jump.copy() if np.ndim(cut.jump) else float(jump[0])

    t0 = time.perf_counter()
    result = StreamFunction(problem, mesh, disc, disc.order, psi, cuts, 0.0, 0.0, False,
                            residual_notes(solution), info, timings=timings,
                            notes=boundary.notes)
    local = result.local_values()
    eta, energy = orthogonality(solution, result, local)
    result.eta, result.energy = eta, energy
    result.flux = float(local.max() - local.min()) or 1.0
    result.guaranteed = not result.conditions
    timings["residual"] = time.perf_counter() - t0
    return result


def _multilevel(A, disc, columns, n, chains, cuts, offsets):
    """A deferred geometric/p-multigrid hierarchy for the stream-function system, or None.

    ``columns`` names each unknown: a DOF (its value), a run's first DOF (the run's
    constant) or ``n + i`` (jump unknown ``i``). The mesh DOFs coarsen as in the
    primal solve; run constants and hole jumps stay unknowns of their own down to
    the coarsest (direct) level; a slit's plus-side values coarsen along the slit.
    """
    mesh = disc.mesh
    if disc.order > 2 or not getattr(mesh, "parents", ()):
        return None
    embed = columns.copy()
    embed[(columns >= n) | np.isin(columns, [dofs[0] for dofs, _ in chains[1:]])] = -1
    twins = np.full(len(columns), -1)
    plus = np.zeros(n, bool)
    slit_dofs = []
    for i, cut in enumerate(cuts):
        if np.ndim(cut.jump):  # a slit: jump unknowns offsets[i]... are plus-side values
            pos = np.searchsorted(columns, offsets[i] + np.arange(len(cut.dofs)))
            twins[pos] = cut.dofs
            dofs = disc.mesh.triangles[cut.strip].ravel() if disc.order == 1 else \
                disc.basis.element_dofs[:, cut.strip].ravel()
            plus[dofs] = True
            slit_dofs.append(cut.path)
            slit_dofs.append(cut.dofs)
    if slit_dofs:
        plus[np.concatenate(slit_dofs)] = False

    def build():
        from .multigrid import hierarchy

        facets = disc.skmesh.facets if disc.order == 2 else None
        return hierarchy(A, mesh, facets=facets, embed=embed, twins=twins, plus=plus)

    return build


def _plus_side_values(n, cuts, offsets):
    """``z = S w``: slit jumps from plus-side values, ``jump = q - psi`` (None if no slit)."""
    rows, cols, vals = [], [], []
    for i, cut in enumerate(cuts):
        if np.ndim(cut.jump):
            j = offsets[i] + np.arange(len(cut.dofs))
            rows.append(j)
            cols.append(cut.dofs)
            vals.append(-np.ones(len(j)))
    if not rows:
        return None
    total = offsets[-1]
    eye = sp.identity(total, format="csr")
    minus = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                          shape=(total, total))
    return eye + minus


def orthogonality(solution, stream, local=None):
    """``(|| k grad u_h - J grad psi_h ||_{1/k}, || grad u_h ||_k)`` by exact quadrature
    on straight triangles (quadrature of degree ``2 p`` on curved ones); ``local``:
    the stream function's element-local values if already at hand."""
    disc = solution.disc
    dofs = stream.element_dofs()
    (ux, uy), w = local_gradients(disc, solution.u[dofs])
    local = stream.local_values() if local is None else local
    (px, py), _ = local_gradients(disc, local)
    k = np.asarray(disc.k_cell, float)[:, None]
    rx, ry = k * ux + py, k * uy - px  # k grad u - J grad psi, J (a, b) = (-b, a)
    eta = float(np.sqrt(np.sum(w / k * (rx**2 + ry**2))))
    energy = float(np.sqrt(np.sum(w * k * (ux**2 + uy**2))))
    return eta, energy


def energy_norm(solution):
    """``|| grad u_h ||_k``, by exact quadrature on straight triangles."""
    disc = solution.disc
    dofs = disc.mesh.triangles.T if disc.order == 1 else disc.basis.element_dofs
    (gx, gy), w = local_gradients(disc, solution.u[dofs])
    k = np.asarray(disc.k_cell, float)[:, None]
    return float(np.sqrt(np.sum(w * k * (gx**2 + gy**2))))


def local_gradients(disc, local):
    """Gradient of a field with element-local values ``local`` (n_local, n_triangles)
    at the quadrature points: ``((gx, gy), weights)``, each (n_triangles, n_points).

    P1: one point per triangle (the gradient is constant), weight = area; else the
    basis's own rule (degree ``2 p``: exact for squared gradients on straight
    triangles). Local order: ``mesh.triangles`` for P1, the basis's DOF table else.
    """
    if disc.order == 1:
        p, t = disc.mesh.points, disc.mesh.triangles
        e1, e2 = p[t[:, 1]] - p[t[:, 0]], p[t[:, 2]] - p[t[:, 0]]
        det = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
        d1, d2 = local[1] - local[0], local[2] - local[0]
        gx = (e2[:, 1] * d1 - e1[:, 1] * d2) / det
        gy = (e1[:, 0] * d2 - e2[:, 0] * d1) / det
        return (gx[:, None], gy[:, None]), 0.5 * np.abs(det)[:, None]
    return basis_gradients(disc.basis, local), disc.basis.dx


def basis_gradients(basis, local):
    """``(gx, gy)`` at the quadrature points of a scikit-fem ``basis`` from element-local
    values ``local`` (n_local, n_elements) in the order of ``basis.element_dofs``
    (a field that need not be continuous, e.g. cut open along a path)."""
    gx = np.zeros(basis.dx.shape)
    gy = np.zeros(basis.dx.shape)
    for j in range(basis.Nbfun):
        g = basis.basis[j][0].grad
        gx += local[j][:, None] * g[0]
        gy += local[j][:, None] * g[1]
    return gx, gy


def residual_notes(solution):
    """What keeps the orthogonality residual of ``solution`` from being a guaranteed
    bound of its energy error (empty when it is one)."""
    from .bounds import geometry_status

    out = []
    for part in solution.problem.parts:
        cond = part.condition
        if cond.kind == "dirichlet" and cond.constant_value is None:
            out.append(f"part '{part.name}': non-constant Dirichlet data interpolated")
        elif cond.kind == "neumann" and cond.constant_value != 0.0:
            out.append(f"part '{part.name}': flux data integrated by quadrature")
        elif cond.kind == "robin":
            out.append(f"part '{part.name}': Robin condition left natural for psi")
    geo = geometry_status(solution.problem, solution.disc)
    if not geo["guaranteed"]:
        out.append(geo["note"])
    return out


@dataclass
class _Triangles:
    """Points and a subset of triangles, enough for :func:`local_gradients` (P1)."""

    points: np.ndarray
    triangles: np.ndarray


def rotated_load(disc, u, elements=None):
    """The vector ``int grad u_h . J grad phi_i`` (over ``elements`` only if given)."""
    if disc.order == 1:
        t = disc.mesh.triangles if elements is None else disc.mesh.triangles[elements]
        p = disc.mesh.points
        # J grad phi_i = (q - r) / det for the edge q -> r opposite vertex i (cyclic
        # order), so int over the triangle of grad u . J grad phi_i is
        # area * gu . (q - r) / det = sign(det) / 2 * gu . (q - r)
        (gx, gy), _ = local_gradients(replace(disc, mesh=_Triangles(p, t)), u[t.T])
        gx, gy = gx[:, 0], gy[:, 0]
        a, b, c = p[t[:, 0]], p[t[:, 1]], p[t[:, 2]]
        e1, e2 = b - a, c - a
        sign = np.sign(e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])
        out = np.zeros(len(p))
        for i, (q, r) in enumerate(((b, c), (c, a), (a, b))):
            val = 0.5 * sign * (gx * (q[:, 0] - r[:, 0]) + gy * (q[:, 1] - r[:, 1]))
            out += np.bincount(t[:, i], weights=val, minlength=len(p))
        return out
    from skfem import CellBasis, LinearForm, asm

    @LinearForm
    def form(v, w):
        return -w.gu[0] * v.grad[1] + w.gu[1] * v.grad[0]

    basis = disc.basis
    if elements is not None:
        basis = CellBasis(disc.skmesh, basis.elem, elements=elements,
                          intorder=disc.intorder or 2 * disc.order, dofs=basis.dofs)
    return asm(form, basis, gu=basis.interpolate(u).grad)


class _Boundary:
    """Oriented boundary segments (domain on the left), their parts and flux runs."""

    def __init__(self, problem, mesh, disc):
        self.problem, self.mesh, self.disc = problem, mesh, disc
        self.notes = []
        parts = segment_parts(problem, mesh)
        self.segs = np.flatnonzero(parts != INTERFACE)
        kinds = [p.condition.kind for p in problem.parts]
        part = parts[self.segs]
        self.part = part
        self.flux = np.array([pi == INSULATED or kinds[pi] in FLUX_KINDS for pi in part], bool)
        a, b = mesh.segments[self.segs].T.copy()
        facet = disc.segment_facets[self.segs]
        # a triangle on each boundary facet, and how many (2: a slit), without
        # scikit-fem's full facet-to-triangle inverse (0.8 s at 7e5 vertices)
        t2f = disc.straight.t2f
        on = np.zeros(t2f.max() + 1, bool)
        on[facet] = True
        hit = on[t2f]
        owner = np.broadcast_to(np.arange(t2f.shape[1]), t2f.shape)[hit]
        where = t2f[hit]
        first = np.full(len(on), -1)
        first[where[::-1]] = owner[::-1]
        self.sides = np.bincount(where, minlength=len(on))[facet]
        tri = first[facet]
        third = mesh.triangles[tri].sum(axis=1) - a - b
        p = mesh.points
        cross = ((p[b, 0] - p[a, 0]) * (p[third, 1] - p[a, 1])
                 - (p[b, 1] - p[a, 1]) * (p[third, 0] - p[a, 0]))
        swap = cross < 0
        a[swap], b[swap] = b[swap].copy(), a[swap].copy()
        self.a, self.b, self.facet, self.tri = a, b, facet, tri
        tags = mesh.tags
        self.loop = np.array([tags[t].loop for t in mesh.segment_tags[self.segs]], object)

    # -- cuts ---------------------------------------------------------------
    def _anchors(self, loop, wholly_flux):
        """Vertices of ``loop`` where a cut may end: no flux segment touches them."""
        on = self.loop == loop
        verts = np.unique(np.concatenate([self.a[on], self.b[on]]))
        if wholly_flux:
            return verts
        touch = np.unique(np.concatenate([self.a[on & self.flux], self.b[on & self.flux]]))
        return np.setdiff1d(verts, touch)

    def cuts(self):
        problem, mesh, disc = self.problem, self.mesh, self.disc
        if not problem.holes:
            return []
        names = [lp.name for lp in problem.loops()]
        wholly = {name: bool(np.all(self.flux[self.loop == name])) for name in names}
        reference = next((name for name in names if not wholly[name]), None)
        if reference is None:
            raise InputError("no stream function: every boundary loop of this domain with "
                             "holes is a flux boundary", source=problem.origin)
        target = self._anchors(reference, False)
        blocked = np.unique(np.concatenate([self.a, self.b]))
        cuts = []
        for name in names:
            if name == reference:
                continue
            start = self._anchors(name, wholly[name])
            if not len(start) or not len(target):
                raise InputError(f"no stream function: loop '{name}' or '{reference}' has no "
                                 "vertex clear of flux boundary to anchor a cut",
                                 source=problem.origin)
            path = cut_path(mesh, start, target, blocked, disc.skmesh.facets)
            cut = Cut(path, strip_triangles(mesh, path), _path_dofs(disc, mesh, path),
                      jump=0.0, loop=name)
            cut.fixed = wholly[name]
            cuts.append(cut)
        return cuts

    def slits(self):
        """Slits: boundary edges with the domain on both sides (the mesh is continuous
        across them, ``psi`` is not). Each slit gets one jump per DOF on it but its
        free tip, where both sides meet."""
        mesh, disc = self.mesh, self.disc
        two_sided = self.sides == 2
        if not np.any(two_sided):
            return []
        if np.any(two_sided & self.flux):
            raise InputError("no stream function: flux conditions on a slit (an edge with the "
                             "domain on both sides) are not supported", source=self.problem.origin)
        import scipy.sparse.csgraph as csgraph

        a, b = self.a[two_sided], self.b[two_sided]
        nv = len(mesh.points)
        graph = sp.csr_matrix((np.ones(len(a)), (a, b)), shape=(nv, nv))
        n_comp, label = csgraph.connected_components(graph, directed=False)
        degree = np.bincount(np.r_[a, b], minlength=nv)
        one_sided = np.unique(np.r_[self.a[~two_sided], self.b[~two_sided]])
        slits = []
        for comp in np.unique(label[a]):
            verts = np.flatnonzero((label == comp) & (degree > 0))
            ends = verts[degree[verts] == 1]
            if np.any(degree[verts] > 2) or len(ends) != 2:
                raise InputError("no stream function: a slit that branches or closes up is "
                                 "not supported", source=self.problem.origin)
            tips = ends[~np.isin(ends, one_sided)]
            if len(tips) != 1:
                raise InputError("no stream function: a slit must run from a free tip to "
                                 "another boundary", source=self.problem.origin)
            on = two_sided & (label[self.a] == comp)
            path = _walk_path(tips[0], self.a[on], self.b[on])
            pivots = path[1:]
            strip = side_triangles(mesh, pivots, np.column_stack([path[:-1], path[1:]]))
            dofs = np.setdiff1d(_path_dofs(disc, mesh, path), [self._vertex_dof(tips[0])])
            slits.append(Cut(path, strip, dofs, jump=np.zeros(len(dofs)), loop="slit"))
        self.notes.append(f"{len(slits)} slit(s): psi jumps across them by the flux through "
                          "their sides")
        return slits

    # -- flux runs ----------------------------------------------------------
    def chains(self, cuts):
        """Runs of flux segments: list of (dofs, values of ``G``), ``G = -int g ds``."""
        idx = np.flatnonzero(self.flux)
        if not len(idx):
            return []
        integrals, edge_dofs = self._integrals(idx)
        out_of = {int(self.a[s]): s for s in idx}
        into = {int(self.b[s]) for s in idx}
        seen, runs = set(), []
        for s in idx:
            if s in seen or int(self.a[s]) in into:
                continue
            runs.append((self._walk(s, out_of, seen), None))
        for s in idx:  # closed runs: whole loops of flux boundary
            if s in seen:
                continue
            cut = next((c for c in cuts if c.fixed and c.loop == self.loop[s]), None)
            first, sign = s, 1.0
            if cut is not None:
                # start where the cut leaves the loop; the side of the first segment
                # says whether the walk starts on the minus or the plus side
                v = int(cut.path[0])
                first = out_of[v]
                last = next(t for t in idx if int(self.b[t]) == v)
                plus = np.isin([self.tri[first], self.tri[last]], cut.strip)
                if plus[0] == plus[1]:
                    raise InputError(f"no stream function: the cut of loop '{cut.loop}' does "
                                     "not separate its two boundary neighbours",
                                     source=self.problem.origin)
                sign = -1.0 if plus[0] else 1.0
            runs.append((self._walk(first, out_of, seen), (cut, sign)))
        chains = []
        for (run, closed), cut_sign in runs:
            dofs, values = self._run_values(run, integrals, edge_dofs)
            if closed:
                total = values[-1]
                dofs, values = dofs[:-1], values[:-1]  # the start vertex, reached again
                cut, sign = cut_sign if cut_sign else (None, 1.0)
                if cut is not None:
                    # minus side first: plus = minus + jump at the start vertex gives
                    # jump = total; plus side first: the start keeps its value from
                    # the minus (closing) side, total, and jump = -total
                    cut.jump = float(sign * total)
                    if sign < 0:
                        values[0] = total
                else:
                    # a whole outer loop of flux data (no holes): G closes up only to
                    # the quadrature error of compatible data; spread the mismatch
                    frac = self._arc_fraction(dofs)
                    values = values - total * frac
                    scale = float(np.max(np.abs(values))) or 1.0
                    if abs(total) > 1e-8 * scale:
                        self.notes.append(f"flux data around loop '{self.loop[run[0]]}' sum "
                                          f"to {total:.3e}, not zero; spread along the loop")
            dofs, first = np.unique(dofs, return_index=True)
            chains.append((dofs, values[first]))
        return chains

    def _walk(self, s, out_of, seen):
        run = []
        while s not in seen:
            seen.add(s)
            run.append(s)
            nxt = out_of.get(int(self.b[s]))
            if nxt is None:
                return run, False
            s = nxt
        return run, True

    def _arc_fraction(self, dofs):
        """Fraction of a closed run's length (through its DOF locations) at each DOF."""
        x = self.disc.dof_locations(np.r_[dofs, dofs[:1]])
        step = np.hypot(np.diff(x[0]), np.diff(x[1]))
        return np.r_[0.0, np.cumsum(step)[:-1]] / np.sum(step)

    def _run_values(self, run, integrals, edge_dofs):
        """DOFs along a run and their ``G`` values (start vertex ``G = 0``)."""
        vertex = self._vertex_dof
        dofs, values = [vertex(self.a[run[0]])], [0.0]
        g = 0.0
        for s in run:
            for d, tau_value in zip(edge_dofs[s], integrals[s][:-1]):
                dofs.append(d)
                values.append(g - tau_value)
            g -= integrals[s][-1]
            dofs.append(vertex(self.b[s]))
            values.append(g)
        return np.array(dofs, int), np.array(values)

    def _vertex_dof(self, v):
        if self.disc.order == 1:
            return int(v)
        return int(self.disc.basis.nodal_dofs[0, v])

    def _geometry(self, s, tau):
        """Points and derivatives of segment ``s`` at parameters ``tau`` (shape (2, ...))."""
        p = self.mesh.points
        a, b = p[self.a[s]], p[self.b[s]]
        if self.disc.curved:
            nv = len(p)
            m = self.disc.skmesh.doflocs[:, nv + self.facet[s]]
            x = (np.multiply.outer(a.T, (1 - tau) * (1 - 2 * tau))
                 + np.multiply.outer(b.T, tau * (2 * tau - 1))
                 + np.multiply.outer(m, 4 * tau * (1 - tau)))
            dx = (np.multiply.outer(a.T, 4 * tau - 3) + np.multiply.outer(b.T, 4 * tau - 1)
                  + np.multiply.outer(m, 4 - 8 * tau))
            return x, dx
        x = np.multiply.outer(a.T, 1 - tau) + np.multiply.outer(b.T, tau)
        dx = np.multiply.outer((b - a).T, np.ones_like(tau))
        return x, dx

    def _integrals(self, idx):
        """Per flux segment: ``int_0^tau g ds`` at the edge DOFs' parameters and at 1,
        and the edge-interior DOFs in the order of increasing parameter."""
        order = self.disc.order
        xi, wq = np.polynomial.legendre.leggauss(2 * order + 4)
        xi, wq = 0.5 * (xi + 1.0), 0.5 * wq
        taus = np.arange(1, order + 1) / order
        names = self.problem.parts
        integrals, edge_dofs = {}, {}
        for s in idx:
            pi = self.part[s]
            cond = None if pi == INSULATED else names[pi].condition
            values = []
            for tau in taus:
                if cond is None or cond.kind == "insulated":
                    values.append(0.0)
                    continue
                t = tau * xi
                x, dx = self._geometry(s, t)
                speed = np.hypot(dx[0], dx[1])
                nx, ny = dx[1] / speed, -dx[0] / speed
                g = np.asarray(cond.value(x[0], x[1], nx, ny), float) * np.ones_like(t)
                if not np.all(np.isfinite(g)):
                    raise InputError("flux value is NaN or infinite at some boundary points",
                                     field=f"boundary.{names[pi].name}.value",
                                     source=self.problem.origin)
                values.append(float(tau * np.sum(wq * g * speed)))
            integrals[s] = values
            edge_dofs[s] = self._edge_dofs(s, taus[:-1])
        return integrals, edge_dofs

    def _edge_dofs(self, s, taus):
        if self.disc.order == 1:
            return []
        basis = self.disc.basis
        dofs = basis.facet_dofs[:, self.facet[s]]
        locs = basis.doflocs[:, dofs]
        x, _ = self._geometry(s, np.asarray(taus))
        # match each parameter to the nearest DOF location
        d = np.hypot(x[0][:, None] - locs[0][None], x[1][:, None] - locs[1][None])
        return [int(dofs[j]) for j in np.argmin(d, axis=1)]


def _walk_path(start, a, b):
    """Vertices of the simple path through the edges ``(a, b)`` from ``start``."""
    nbr = {}
    for x, y in zip(a.tolist(), b.tolist()):
        nbr.setdefault(x, []).append(y)
        nbr.setdefault(y, []).append(x)
    path, prev = [int(start)], None
    while True:
        nxt = [v for v in nbr[path[-1]] if v != prev]
        if not nxt:
            return np.array(path, int)
        prev = path[-1]
        path.append(nxt[0])
