"""The conjugate (stream-function) problem of a two-terminal problem.

A two-terminal problem has two electrodes (Dirichlet parts at two constant
potentials), every other boundary piece insulated, and no source. In 2D every
divergence-free flux is ``sigma = J grad psi`` with ``J`` the rotation by 90
degrees; ``sigma . n = -d psi / ds`` along the boundary (counter-clockwise
tangent), so an insulated arc is a level line of ``psi`` and the flux through an
electrode arc is the change of ``psi`` along it. The stream function minimises
``int (1/k) |grad psi|^2`` with the condition types swapped: ``psi`` is constant
on insulated arcs and free (natural) on the electrodes.

Two electrode layouts are supported:

* ``quadrilateral``: one boundary loop divided electrode - insulated - electrode -
  insulated; ``psi = 0`` on one insulated arc and ``1`` on the other (unit flux).
* ``loops``: every electrode is made of whole boundary loops (a coaxial line, a
  conductor in a shield, two wires in an insulated box, a busbar in a grounded
  duct beside a grounded rod). ``psi`` is then multivalued: its period around an
  electrode loop is the flux through it. Each electrode loop but one reference
  loop gets a cut, a shortest path of mesh edges to the reference loop.
  ``psi`` is stored by its values on the minus side of every cut; the triangles
  touching a cut from its plus side (its *strip*) see the values plus the cut's
  jump at the cut's degrees of freedom. Substituting the jumps this way keeps
  the uncut stiffness matrix as the operator and moves the jumps into the load
  vector; jumps that are not fixed by the unit total flux are extra unknowns.

In both layouts every other loop must be wholly insulated; ``psi`` is constant
there with a free value (its degrees of freedom are merged into one unknown).
"""

import logging
import time
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp

from . import fem
from .errors import InputError, SolverError
from .linear import solve_linear
from .solve import eliminate, segment_parts

log = logging.getLogger(__name__)

HIGH, LOW, INSULATING = "high", "low", "insulated"

SUPPORTED = ("supported layouts: (a) one boundary loop divided electrode-insulated-"
             "electrode-insulated, every other loop insulated, or (b) electrodes made of "
             "whole boundary loops, every other loop insulated")


@dataclass(frozen=True)
class Terminals:
    """The two electrodes of a two-terminal problem: part names and potentials."""

    high: tuple
    low: tuple
    v_high: float
    v_low: float

    @property
    def delta_v(self):
        return self.v_high - self.v_low


def two_terminal(problem):
    """The electrodes of ``problem``, or an :class:`InputError` saying why it has none.

    Two-terminal means: no source, Dirichlet parts with constant values at exactly
    two distinct potentials, every other part insulated (or a zero Neumann flux).

    Returns
    -------
    Terminals
    """
    def refuse(why):
        raise InputError(f"not a two-terminal problem: {why}; bounds need two electrodes at "
                         "constant potentials, the rest insulated, and no source",
                         source=problem.origin)

    if problem.source is not None:
        refuse("it has a source term")
    levels = {}
    for part in problem.parts:
        cond = part.condition
        if cond.kind == "dirichlet":
            if cond.constant_value is None:
                refuse(f"part '{part.name}' has non-constant Dirichlet data")
            levels.setdefault(float(cond.constant_value), []).append(part.name)
        elif cond.kind == "neumann":
            if cond.constant_value != 0.0:
                refuse(f"part '{part.name}' has a nonzero flux condition")
        elif cond.kind == "robin":
            refuse(f"part '{part.name}' has a Robin condition")
    if len(levels) != 2:
        refuse(f"Dirichlet parts at {len(levels)} distinct potential(s), not 2")
    low, high = sorted(levels)
    return Terminals(tuple(levels[high]), tuple(levels[low]), high, low)


@dataclass(frozen=True)
class Arc:
    """A maximal run of boundary edges of one loop with the same role."""

    role: str  # HIGH, LOW or INSULATING
    loop: str
    edges: tuple


@dataclass(frozen=True)
class Topology:
    """Electrode layout of a two-terminal problem (see the module docstring).

    Attributes
    ----------
    kind : {"quadrilateral", "loops"}
    zero_arc, one_arc : Arc or None
        Quadrilateral: the insulated arcs where ``psi = 0`` and ``psi = 1``.
    high_loops, low_loops : tuple of str
        Loops: the loops that make up each electrode.
    free_loops : tuple of str
        Wholly insulated loops (``psi`` constant there, value free).
    """

    kind: str
    zero_arc: Arc = None
    one_arc: Arc = None
    high_loops: tuple = ()
    low_loops: tuple = ()
    free_loops: tuple = ()

    def describe(self):
        free = (f"; insulated loops {', '.join(self.free_loops)} carry a free constant"
                if self.free_loops else "")
        if self.kind == "loops":
            return (f"whole-loop electrodes: {', '.join(self.high_loops)} (high) and "
                    f"{', '.join(self.low_loops)} (low); psi is multivalued, cut along "
                    f"{len(self.high_loops) + len(self.low_loops) - 1} path(s) of mesh "
                    f"edges{free}")
        return (f"quadrilateral on loop '{self.zero_arc.loop}': psi = 0 on edges "
                f"{list(self.zero_arc.edges)}, psi = 1 on edges {list(self.one_arc.edges)}"
                f"{free}")


def loop_arcs(problem, loop, terminals):
    """The cyclic runs of edge roles around ``loop`` (a whole-loop run is one arc)."""
    table = problem.part_of_edge()
    names = [p.name for p in problem.parts]
    roles = []
    for e in range(loop.n_edges):
        part = table.get((loop.name, e))
        name = names[part] if part is not None else None
        roles.append(HIGH if name in terminals.high else LOW if name in terminals.low
                     else INSULATING)
    n = len(roles)
    if len(set(roles)) == 1:
        return [Arc(roles[0], loop.name, tuple(range(n)))], roles
    start = next(i for i in range(n) if roles[i] != roles[i - 1])
    arcs, current = [], [start]
    for step in range(1, n):
        e = (start + step) % n
        if roles[e] == roles[current[-1]]:
            current.append(e)
        else:
            arcs.append(Arc(roles[current[0]], loop.name, tuple(current)))
            current = [e]
    arcs.append(Arc(roles[current[0]], loop.name, tuple(current)))
    return arcs, roles


def classify(problem, terminals):
    """The :class:`Topology` of a two-terminal problem, or an :class:`InputError`.

    Refuses electrodes of different potential that touch (share a polygon vertex)
    and electrode layouts other than the two supported ones.
    """
    def refuse(message):
        raise InputError(message, source=problem.origin)

    mixed, whole, free = [], [], []
    for loop in problem.loops():
        arcs, roles = loop_arcs(problem, loop, terminals)
        n = len(roles)
        for e in range(n):
            pair = {roles[e], roles[(e + 1) % n]}
            if pair == {HIGH, LOW}:
                x, y = loop.vertices[(e + 1) % n]
                refuse(f"the electrodes touch at vertex ({x:g}, {y:g}) of loop '{loop.name}': "
                       "a two-terminal bound needs an insulated gap between electrodes of "
                       "different potential")
        if len(arcs) == 1:
            (free if arcs[0].role == INSULATING else whole).append(arcs[0])
        else:
            mixed.append(arcs)
    roles = {a.role for a in whole}
    if not mixed and roles == {HIGH, LOW}:
        return Topology("loops", high_loops=tuple(a.loop for a in whole if a.role == HIGH),
                        low_loops=tuple(a.loop for a in whole if a.role == LOW),
                        free_loops=tuple(a.loop for a in free))
    if len(mixed) == 1 and not whole:
        arcs = mixed[0]
        roles = [a.role for a in arcs]
        electrodes = [r for r in roles if r != INSULATING]
        if len(arcs) == 4 and len(electrodes) == 2 and set(electrodes) == {HIGH, LOW}:
            insulated = [a for a in arcs if a.role == INSULATING]
            return Topology("quadrilateral", zero_arc=insulated[0], one_arc=insulated[1],
                            free_loops=tuple(a.loop for a in free))
        refuse(f"unsupported electrode layout: loop '{arcs[0].loop}' has {len(electrodes)} "
               f"electrode arcs; {SUPPORTED}")
    loops = [arcs[0].loop for arcs in mixed] + [a.loop for a in whole]
    refuse(f"unsupported electrode layout: electrodes on loops {', '.join(loops)}; {SUPPORTED}")


@dataclass
class Cut:
    """A cut of a multivalued stream function: ``psi`` jumps by ``jump`` across ``path``.

    Attributes
    ----------
    path : ndarray
        Vertex indices from the cut's electrode loop to the reference loop.
    strip : ndarray
        Triangles touching the path from its left (plus) side.
    dofs : ndarray
        Degrees of freedom on the path (vertices and edge interiors).
    jump : float or ndarray
        Flux through the cut's electrode loop; for a slit (:mod:`lapsolve.stream`)
        one jump per entry of ``dofs``.
    loop : str
        That loop.
    """

    path: np.ndarray
    strip: np.ndarray
    dofs: np.ndarray
    jump: float = 1.0
    loop: str = ""
    fixed: bool = False  # jump set by flux data (a hole wholly of flux boundary)


class CutField:
    """Element-local values of a field stored by DOF values plus jumps across cuts.

    Needs ``psi``, ``cuts``, ``order``, ``mesh`` and ``disc`` attributes.
    """

    def element_dofs(self):
        """Degrees of freedom per triangle, shape (n_local, n_triangles)."""
        if self.order == 1:
            return self.mesh.triangles.T
        return self.disc.basis.element_dofs

    def local_values(self, dofs=None):
        """Element-local values of the (cut) field, shape (n_local, n_triangles).

        On the plus side of each cut the values are those of ``psi`` plus the
        cut's jump at its degrees of freedom. ``dofs`` gives another local order
        of the same DOFs per triangle (default :meth:`element_dofs`).
        """
        dofs = self.element_dofs() if dofs is None else dofs
        local = self.psi[dofs]
        for cut in self.cuts:
            add = np.zeros(len(self.psi))
            add[cut.dofs] = cut.jump  # one jump, or one per DOF (a slit)
            local[:, cut.strip] += add[dofs[:, cut.strip]]
        return local


@dataclass
class Conjugate(CutField):
    """A solved stream function on the mesh of a primal solution.

    ``psi`` holds degrees of freedom of the primal basis (same numbering as
    ``Solution.u``). With whole-loop electrodes they are the values on the minus
    side of every cut; :meth:`local_values` adds the jumps on the plus side.

    Attributes
    ----------
    problem, mesh, disc, order, topology, terminals
    psi : ndarray
    cuts : list of Cut
        Empty for a quadrilateral.
    solver : lapsolve.linear.SolveInfo
    flux : float
        Total flux of ``J grad psi`` through each electrode (1 by construction).
    timings : dict
    notes : list of str
    """

    problem: object
    mesh: object
    disc: object
    order: int
    topology: Topology
    terminals: Terminals
    psi: np.ndarray
    cuts: list
    solver: object
    flux: float = 1.0
    timings: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)


def solve_conjugate(solution, solver="auto", rtol=None):
    """Solve the stream-function problem on the mesh and basis of ``solution``.

    Parameters
    ----------
    solution : lapsolve.Solution
        A solved two-terminal problem (its discretisation is reused).
    solver : {"auto", "direct", "amg", "gmg"}
    rtol : float, optional
        Relative residual of an iterative solve; default that of the primal solve.

    Returns
    -------
    Conjugate
    """
    problem, mesh, disc = solution.problem, solution.mesh, solution.disc
    terminals = two_terminal(problem)
    topology = classify(problem, terminals)
    timings = {}
    t0 = time.perf_counter()
    _check_gap(problem, mesh, segment_parts(problem, mesh), terminals)
    inverse = replace(disc, k_cell=1.0 / disc.k_cell)
    A = fem.stiffness(inverse).tocsr()
    n = A.shape[0]
    groups = [_loop_dofs(disc, mesh, name) for name in topology.free_loops]
    if topology.kind == "loops":
        cuts, reference_high = _make_cuts(mesh, disc, topology, problem.outer.name)
        A, b, combos = _periodic_system(inverse, A, cuts, topology, reference_high)
        fixed, values = np.array([cuts[0].path[0]]), np.zeros(1)
    else:
        cuts, combos = [], []
        b = np.zeros(n)
        zero = _arc_dofs(disc, mesh, topology.zero_arc)
        one = _arc_dofs(disc, mesh, topology.one_arc)
        fixed = np.concatenate([zero, one])
        values = np.concatenate([np.zeros(len(zero)), np.ones(len(one))])
    timings["assemble"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    extra = A.shape[0] - n
    merge = _merge_matrix(n, groups, extra) if groups else None
    if merge is not None:
        A, b = (merge.T @ A @ merge).tocsr(), merge.T @ b
        fixed = merge.indices[fixed]  # one entry per row: the merged index of each DOF
    rtol = rtol or solution.solver.rtol
    Ac, bc, lift = eliminate(A, b, fixed, values)
    notes = []
    multilevel = _multilevel(Ac, disc, fixed) if merge is None and not extra else None
    if solver == "gmg" and multilevel is None:
        notes.append("geometric multigrid does not apply to this conjugate system: used AMG")
        solver = "amg"
    z, info = solve_linear(Ac, bc, method=solver, rtol=rtol, multilevel=multilevel)
    z = lift + z
    z[fixed] = values  # exact constraint values: psi stays admissible whatever the solve
    if merge is not None:
        z = merge @ z
    psi, periods = z[:n], z[n:]
    for i, cut in enumerate(cuts):
        cut.jump = float(sum(c.get(i, 0.0) * w for c, w in zip(combos, np.r_[1.0, periods])))
    timings["solve"] = time.perf_counter() - t0
    return Conjugate(problem, mesh, disc, disc.order, topology, terminals, psi, cuts, info,
                     1.0, timings, notes)


def _make_cuts(mesh, disc, topology, outer):
    """One cut from every electrode loop but a reference loop (the outer loop when it
    is an electrode) to the reference loop.

    Returns
    -------
    cuts : list of Cut
    reference_high : bool
        Whether the reference loop belongs to the high electrode.
    """
    loops = list(topology.high_loops) + list(topology.low_loops)
    reference = outer if outer in loops else loops[0]
    blocked = np.unique(mesh.segments[mesh.boundary_mask()])
    target = np.unique(mesh.segments[_loop_mask(mesh, reference)])
    cuts = []
    for name in loops:
        if name != reference:
            start = np.unique(mesh.segments[_loop_mask(mesh, name)])
            path = cut_path(mesh, start, target, blocked, disc.skmesh.facets)
            cuts.append(Cut(path, strip_triangles(mesh, path), _path_dofs(disc, mesh, path),
                            loop=name))
    return cuts, reference in topology.high_loops


def _periodic_system(inverse, A, cuts, topology, reference_high):
    """The stream-function system with the cut jumps substituted.

    The flux through a cut's loop equals its jump. With the reference loop on one
    side, the jumps of the loops on the other side sum to the total flux 1; the
    first of them takes ``1 - (the others)``. Every other jump is a free unknown
    appended after the degrees of freedom.

    Returns
    -------
    A, b : bordered matrix and load
    combos : list of dict
        Per column (the fixed part first, then each free jump): cut index ->
        coefficient of that column in the cut's jump.
    """
    n = A.shape[0]
    opposite = [i for i, c in enumerate(cuts)
                if (c.loop in topology.high_loops) != reference_high]
    first = opposite[0]
    combos = [{first: 1.0}]
    for i in range(len(cuts)):
        if i == first:
            continue
        combos.append({i: 1.0, first: -1.0} if i in opposite else {i: 1.0})
    chi, couple = [], []
    for cut in cuts:
        x = np.zeros(n)
        x[cut.dofs] = 1.0
        chi.append(x)
        couple.append(_strip_stiffness(inverse, cut.strip) @ x)
    m = len(cuts)
    gram = np.zeros((m, m))
    for i in range(m):
        for j in range(i, m):
            both = np.intersect1d(cuts[i].strip, cuts[j].strip)
            if len(both):
                gram[i, j] = gram[j, i] = chi[i] @ (_strip_stiffness(inverse, both) @ chi[j])
    coef = np.zeros((len(combos), m))
    for r, c in enumerate(combos):
        for i, w in c.items():
            coef[r, i] = w
    C = np.column_stack(couple) @ coef.T  # (n, columns)
    G = coef @ gram @ coef.T
    b = np.concatenate([-C[:, 0], -G[1:, 0]])
    if len(combos) == 1:
        return A, b, combos
    border = sp.csr_matrix(C[:, 1:])
    full = sp.bmat([[A, border], [border.T, sp.csr_matrix(G[1:, 1:])]], format="csr")
    return full, b, combos


def _multilevel(A, disc, fixed):
    """A deferred geometric multigrid hierarchy on the primal mesh, or None."""
    mesh = disc.mesh
    if disc.order > 2 or not getattr(mesh, "parents", ()):
        return None

    def build():
        from .multigrid import hierarchy

        mask = np.zeros(A.shape[0], bool)
        mask[fixed] = True
        facets = disc.skmesh.facets if disc.order == 2 else None
        return hierarchy(A, mesh, mask, facets=facets)

    return build


def _check_gap(problem, mesh, parts, terminals):
    """Refuse electrodes of different potential that share a mesh vertex."""
    names = [p.name for p in problem.parts]
    role = np.array([1 if names[i] in terminals.high else -1 if names[i] in terminals.low
                     else 0 for i in range(len(names))] + [0], int)
    seg_role = role[np.where(parts >= 0, parts, len(names))]
    high = np.unique(mesh.segments[seg_role == 1])
    low = np.unique(mesh.segments[seg_role == -1])
    common = np.intersect1d(high, low)
    if len(common):
        x, y = mesh.points[common[0]]
        raise InputError(f"the electrodes touch at ({x:g}, {y:g}): a two-terminal bound needs "
                         "an insulated gap between electrodes of different potential",
                         source=problem.origin)


def _loop_mask(mesh, loop, edges=None):
    tag_ok = np.array([t.boundary and t.loop == loop and (edges is None or t.edge in edges)
                       for t in mesh.tags], bool)
    return tag_ok[mesh.segment_tags]


def _loop_dofs(disc, mesh, loop):
    return disc.facet_dofs(disc.facets_of(_loop_mask(mesh, loop)))


def _arc_dofs(disc, mesh, arc):
    return disc.facet_dofs(disc.facets_of(_loop_mask(mesh, arc.loop, set(arc.edges))))


def _merge_matrix(n, groups, extra=0):
    """0/1 matrix mapping merged unknowns to unknowns: each group of DOFs becomes one.

    The ``extra`` unknowns after the ``n`` degrees of freedom are kept as they are.
    """
    rep = np.arange(n + extra)
    for g in groups:
        rep[g] = g[0]
    _, col = np.unique(rep, return_inverse=True)
    total = n + extra
    return sp.csr_matrix((np.ones(total), col, np.arange(total + 1)),
                         shape=(total, int(col.max()) + 1))


def cut_path(mesh, start, end, blocked=(), edges=None):
    """Shortest path of mesh edges from a vertex in ``start`` to one in ``end``.

    Edge lengths are Euclidean, so the path has no chords: two path vertices that
    are not consecutive are never joined by a mesh edge (the triangle inequality
    is strict for non-degenerate triangles). Interior vertices of the path avoid
    ``blocked`` (other boundary vertices) and the start and end sets.
    ``edges`` (2, n_edges) lists each mesh edge once (default: found from the
    triangles).

    Returns
    -------
    ndarray of int
        Vertex indices from the start set to the end set.
    """
    from scipy.sparse.csgraph import dijkstra

    n = len(mesh.points)
    if edges is None:
        t = mesh.triangles
        edges = np.unique(np.sort(np.vstack([t[:, [0, 1]], t[:, [1, 2]], t[:, [2, 0]]]),
                                  axis=1), axis=0).T
    a = np.concatenate([edges[0], edges[1]])
    b = np.concatenate([edges[1], edges[0]])
    role = np.zeros(n, np.int8)
    role[np.asarray(blocked, int)] = 3
    role[start] = 1
    role[end] = 2
    # directed moves: out of start or interior vertices, into interior or end vertices
    keep = (role[a] <= 1) & ((role[b] == 0) | (role[b] == 2))
    src, dst = a[keep], b[keep]
    length = np.linalg.norm(mesh.points[src] - mesh.points[dst], axis=1)
    graph = sp.csr_matrix((length, (src, dst)), shape=(n, n))
    dist, pred, _ = dijkstra(graph, indices=np.asarray(start, int), min_only=True,
                             return_predecessors=True)
    end = np.asarray(end, int)
    target = end[np.argmin(dist[end])]
    if not np.isfinite(dist[target]):
        raise SolverError("no path of mesh edges joins the two electrode loops")
    path = [target]
    while pred[path[-1]] >= 0:
        path.append(pred[path[-1]])
    return np.array(path[::-1], int)


def _edge_keys(a, b, n):
    return np.minimum(a, b).astype(np.int64) * n + np.maximum(a, b)


def strip_triangles(mesh, path):
    """Triangles that touch the cut ``path`` from its left side.

    The triangles around the path's vertices split into two groups when their
    shared edges through a path vertex are joined, except across path edges;
    a triangle on a path edge with its third vertex to the left of the edge's
    direction marks the left group.
    """
    path = np.asarray(path, int)
    return side_triangles(mesh, path, np.column_stack([path[:-1], path[1:]]))


def side_triangles(mesh, pivots, edges):
    """Triangles around the vertices ``pivots`` on the left of the oriented ``edges``.

    Triangles that share an edge through a pivot are joined unless that edge is
    one of ``edges``; the groups so formed must each lie wholly left or wholly
    right of ``edges`` (else :class:`SolverError`). Returns the left groups.
    """
    from scipy.sparse.csgraph import connected_components

    p, t = mesh.points, mesh.triangles
    n = len(p)
    pivots = np.asarray(pivots, int)
    edges = np.asarray(edges, int).reshape(-1, 2)
    on_path = np.zeros(n, bool)
    on_path[pivots] = True
    star = np.flatnonzero(on_path[t].any(axis=1))
    local = t[star]
    m = len(star)
    ea = np.concatenate([local[:, 0], local[:, 1], local[:, 2]])
    eb = np.concatenate([local[:, 1], local[:, 2], local[:, 0]])
    third = np.concatenate([local[:, 2], local[:, 0], local[:, 1]])
    owner = np.tile(np.arange(m), 3)
    keys = _edge_keys(ea, eb, n)
    path_keys = _edge_keys(edges[:, 0], edges[:, 1], n)
    order = np.argsort(path_keys)
    pos = np.searchsorted(path_keys[order], keys)
    pos = np.minimum(pos, len(path_keys) - 1)
    on_cut = path_keys[order][pos] == keys
    joins = (on_path[ea] | on_path[eb]) & ~on_cut
    k, o = keys[joins], owner[joins]
    srt = np.argsort(k, kind="stable")
    k, o = k[srt], o[srt]
    same = np.flatnonzero(k[1:] == k[:-1])
    graph = sp.csr_matrix((np.ones(len(same)), (o[same], o[same + 1])), shape=(m, m))
    _, comp = connected_components(graph, directed=False)
    idx = order[pos[on_cut]]
    start, stop = p[edges[idx, 0]], p[edges[idx, 1]]
    w = p[third[on_cut]]
    cross = ((stop[:, 0] - start[:, 0]) * (w[:, 1] - start[:, 1])
             - (stop[:, 1] - start[:, 1]) * (w[:, 0] - start[:, 0]))
    left = np.unique(comp[owner[on_cut][cross > 0]])
    right = np.unique(comp[owner[on_cut][cross < 0]])
    if len(np.intersect1d(left, right)) or len(np.union1d(left, right)) != comp.max() + 1:
        raise SolverError("the cut path does not split its neighbourhood into two sides")
    return star[np.isin(comp, left)]


def _path_dofs(disc, mesh, path):
    """Degrees of freedom on the cut: its vertices and the interiors of its edges."""
    if disc.order == 1:
        return np.asarray(path, int)
    facets = disc.skmesh.facets
    n = len(mesh.points)
    keys = _edge_keys(facets[0], facets[1], n)
    order = np.argsort(keys)
    want = _edge_keys(path[:-1], path[1:], n)
    idx = order[np.searchsorted(keys[order], want)]
    return np.union1d(disc.facet_dofs(idx), path)


def _strip_stiffness(disc, strip):
    """Stiffness assembled over the triangles ``strip`` only (global numbering)."""
    if disc.order == 1:
        return fem.p1_stiffness(disc.mesh.points, disc.mesh.triangles[strip],
                                disc.k_cell[strip])
    from skfem import CellBasis, asm

    basis = disc.basis
    sub = CellBasis(disc.skmesh, basis.elem, elements=strip, intorder=disc.intorder
                    or 2 * disc.order, dofs=basis.dofs)
    return asm(fem.diffusion, sub, k=fem.cell_field(sub, disc.k_cell[strip]))


def stream_function_vertex_values(conjugate, all_dofs=False):
    """Stream-function values for a result file: at the mesh vertices, or at every DOF.

    For a ring layout the values are those of the minus side of the cut: they
    jump by the flux (1) across the cut path, which a contour plot shows as a
    seam; :func:`cut_triangulation` gives a seam-free triangulation.

    Parameters
    ----------
    conjugate : Conjugate
    all_dofs : bool
        Every degree of freedom (in the primal basis's order, as for a P2 result
        file) instead of the vertices only.
    """
    if all_dofs:
        return np.asarray(conjugate.psi, float)
    return np.asarray(conjugate.psi[: len(conjugate.mesh.points)], float)


def cut_triangulation(conjugate):
    """Points, triangles and vertex values of the stream function, cut open.

    Every triangle gets its own three vertices with its local values, so a
    multivalued stream function shows no seam along its cuts.

    Returns
    -------
    points : ndarray (3 n_triangles, 2)
    triangles : ndarray (n_triangles, 3)
    values : ndarray (3 n_triangles,)
    """
    mesh = conjugate.mesh
    if not conjugate.cuts:
        return mesh.points, mesh.triangles, stream_function_vertex_values(conjugate)
    # the first three local DOFs of every Lagrange element are its vertices, in the
    # order of the element's own vertex list (the DOF table's, not mesh.triangles')
    values = conjugate.local_values()[:3].T.ravel()
    corners = conjugate.element_dofs()[:3].T
    points = mesh.points[corners].reshape(-1, 2)
    return points, np.arange(len(points)).reshape(-1, 3), values


def draw_stream_lines(ax, conjugate, n_lines=16, color="white", linewidth=0.7, **style):
    """Draw field lines as level lines of the stream function on a matplotlib axis.

    Neighbouring lines carry equal flux (1/``n_lines`` of the total each), so
    their spacing shows the field strength. With several electrode loops on one
    side (a cut whose jump is not the whole flux), lines that cross that cut
    resume shifted by the jump's remainder modulo the spacing: equal-flux lines
    cannot close up around a loop whose flux is not a multiple of the spacing.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    conjugate : Conjugate
    n_lines : int
        Lines per unit of flux.
    color, linewidth, **style
        Passed to ``ax.tricontour``.

    Returns
    -------
    matplotlib.contour.TriContourSet
    """
    import matplotlib.tri as mtri

    points, triangles, values = cut_triangulation(conjugate)
    tri = mtri.Triangulation(points[:, 0], points[:, 1], triangles)
    lo, hi = float(values.min()), float(values.max())
    step = conjugate.flux / n_lines
    first = np.floor(lo / step) + 0.5
    levels = step * (first + np.arange(int(np.ceil((hi - lo) / step)) + 2))
    levels = levels[(levels > lo) & (levels < hi)]
    style.setdefault("linestyles", "solid")  # not dashed where psi < 0
    return ax.tricontour(tri, values, levels=levels, colors=color, linewidths=linewidth,
                         **style)


def conjugate_if_two_terminal(solution):
    """The stream function of a two-terminal solution, or None where there is none.

    Problems with a source, flux data or more than two potentials have no single
    stream function; their pictures trace field lines along -grad u instead.
    """
    try:
        classify(solution.problem, two_terminal(solution.problem))
    except InputError:
        return None
    return solve_conjugate(solution)
