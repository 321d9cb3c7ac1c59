"""Geometric multigrid for P1 on uniformly refined meshes.

A mesh made by :meth:`Mesh.refined` remembers the parents of every midpoint
vertex, which gives the exact P1 prolongation of each refinement (new vertex =
mean of its two parents). With Galerkin coarse operators ``P^T A P`` this is a
multigrid V-cycle without the aggregation setup of algebraic multigrid; it is
used as a CG preconditioner through pyamg's ``MultilevelSolver``.
"""

import numpy as np
import scipy.sparse as sp


def prolongations(mesh):
    """Prolongation matrices, finest first: ``P[l]`` maps level l+1 to level l."""
    out = []
    n_fine = len(mesh.points)
    for lo, hi in reversed(mesh.parents):
        n_coarse = n_fine - len(lo)
        m = len(lo)
        rows = np.concatenate([np.arange(n_coarse), n_coarse + np.arange(m),
                               n_coarse + np.arange(m)])
        cols = np.concatenate([np.arange(n_coarse), lo, hi])
        vals = np.concatenate([np.ones(n_coarse), np.full(2 * m, 0.5)])
        out.append(sp.csr_matrix((vals, (rows, cols)), shape=(n_fine, n_coarse)))
        n_fine = n_coarse
    return out


def p2_to_p1(n_vertices, facets):
    """Exact embedding of P1 into P2 on one mesh (vertex DOFs first, then one per edge)."""
    m = facets.shape[1]
    rows = np.concatenate([np.arange(n_vertices), n_vertices + np.arange(m),
                           n_vertices + np.arange(m)])
    cols = np.concatenate([np.arange(n_vertices), facets[0], facets[1]])
    vals = np.concatenate([np.ones(n_vertices), np.full(2 * m, 0.5)])
    return sp.csr_matrix((vals, (rows, cols)), shape=(n_vertices + m, n_vertices))


def hierarchy(A, mesh, fixed=None, min_coarse=2000, facets=None, embed=None, twins=None,
              plus=None):
    """A pyamg multilevel solver built from the mesh's refinement history.

    Parameters
    ----------
    A : csr_matrix
        The (Dirichlet-eliminated) P1 system on ``mesh``.
    mesh : lapsolve.mesh.Mesh
    facets : ndarray (2, n_edges), optional
        For a P2 system: the mesh edges in DOF order; the first coarsening is
        then P2 -> P1 on the same mesh (p-multigrid), the rest geometric.
    fixed : ndarray of bool, optional
        Degrees of freedom held by Dirichlet conditions; the prolongation does
        not interpolate into them.
    min_coarse : int
        Stop coarsening below this many unknowns (direct solve there).
    embed, twins : ndarray of int, optional
        For a system whose unknowns are not the mesh's DOFs (a field cut open
        along mesh edges): per unknown, the mesh DOF it is the value of, or -1.
        ``twins`` marks unknowns that are the value of a DOF on the plus side of
        a cut (the DOF's own unknown being the minus side), else -1. Unknowns
        that are neither (a constant on a boundary run, a jump) are carried
        unchanged to every level, so the coarsest direct solve treats them
        exactly; twins coarsen with their cut, from the plus side.
    plus : ndarray of bool, optional
        With ``twins``: mesh DOFs that lie on the plus side next to a cut (their
        triangles use the plus-side values of the cut's DOFs).

    Returns
    -------
    pyamg.multilevel.MultilevelSolver or None
        None when the mesh has no refinement history.
    """
    from pyamg.multilevel import MultilevelSolver
    from pyamg.relaxation.smoothing import change_smoothers

    Ps = prolongations(mesh)
    if facets is not None:
        Ps = [p2_to_p1(len(mesh.points), facets)] + Ps
    if not Ps:
        return None
    if embed is not None:
        Ps = _cut_open(Ps, mesh, np.asarray(embed), twins, plus, facets is not None)
    levels = []
    A = A.tocsr()
    for i, P in enumerate(Ps):
        if A.shape[0] <= min_coarse:
            break
        if i == 0 and fixed is not None:
            P = sp.diags((~fixed).astype(float)) @ P
        lvl = MultilevelSolver.Level()
        lvl.A, lvl.P, lvl.R = A, P.tocsr(), P.T.tocsr()
        levels.append(lvl)
        A = (lvl.R @ A @ lvl.P).tocsr()
        A.eliminate_zeros()
        # coarse unknowns that see no fine unknown give empty rows: keep them solvable
        empty = np.flatnonzero(np.asarray(abs(A).sum(axis=1)).ravel() == 0)
        if len(empty):
            A = A + sp.csr_matrix((np.ones(len(empty)), (empty, empty)), shape=A.shape)
    coarse = MultilevelSolver.Level()
    coarse.A = A
    levels.append(coarse)
    ml = MultilevelSolver(levels, coarse_solver="splu")
    change_smoothers(ml, presmoother=("gauss_seidel", {"sweep": "symmetric"}),
                     postsmoother=("gauss_seidel", {"sweep": "symmetric"}))
    return ml


def _cut_open(Ps, mesh, embed, twins=None, plus=None, p2=False):
    """Prolongations for the unknowns of a field cut open along mesh edges.

    Level 0 has the given unknowns; every coarser level has its vertices, then the
    own unknowns (carried by identity), then plus-side values of its cut vertices.
    A row on the plus side of a cut takes the plus-side values of its cut parents.
    """
    n = len(embed)
    twins = np.full(n, -1) if twins is None else np.asarray(twins)
    own = np.flatnonzero((embed < 0) & (twins < 0))
    n_own = len(own)
    cut_dofs = twins[twins >= 0]
    n_vertices = len(mesh.points)
    cut_vertices = np.unique(cut_dofs[cut_dofs < n_vertices])
    plus_v = (np.zeros(n_vertices, bool) if plus is None
              else np.asarray(plus, bool)[:n_vertices].copy())
    out = []
    rows_mesh, rows_twin = embed, twins  # level-0 unknowns
    plus_rows = (np.zeros(Ps[0].shape[0], bool) if plus is None else np.asarray(plus, bool))
    sides = _vertex_sides(mesh, cut_vertices, plus_v)
    for k, P in enumerate(Ps):
        n_coarse = P.shape[1]
        q_next = cut_vertices[cut_vertices < n_coarse]
        q_col = np.full(n_coarse, -1)
        q_col[q_next] = n_coarse + n_own + np.arange(len(q_next))
        if k > 0:
            # vertex level j = k (P1) or k - 1 (P2: level 0 is the P2 -> P1 step)
            plus_rows = sides[k - 1 if p2 else k]
        elif not p2:
            plus_rows = sides[0]
        P = P.tocsr()
        blocks = []
        for row_dofs, twin in ((rows_mesh, False), (rows_twin, True)):
            sel = np.flatnonzero(row_dofs >= 0)
            sub = P[row_dofs[sel]].tocoo()
            r, c = sel[sub.row], sub.col
            move = q_col[c] >= 0
            if not twin:
                move &= plus_rows[row_dofs[r]]
            blocks.append((r, np.where(move, q_col[c], c), sub.data))
        r = np.concatenate([blocks[0][0], blocks[1][0], own])
        c = np.concatenate([blocks[0][1], blocks[1][1], n_coarse + np.arange(n_own)])
        v = np.concatenate([blocks[0][2], blocks[1][2], np.ones(n_own)])
        width = n_coarse + n_own + len(q_next)
        out.append(sp.csr_matrix((v, (r, c)), shape=(len(rows_mesh), width)))
        # the next level's unknowns: its vertices, own unknowns, cut vertices' plus values
        rows_mesh = np.concatenate([np.arange(n_coarse), np.full(n_own + len(q_next), -1)])
        rows_twin = np.concatenate([np.full(n_coarse + n_own, -1), q_next])
        own = n_coarse + np.arange(n_own)
    return out


def _vertex_sides(mesh, cut_vertices, plus_finest):
    """Per vertex level (finest first): which vertices lie on the plus side of a cut.

    Only vertices that a coarsening interpolates from a cut vertex matter: a
    midpoint ``d`` of ``(v, w)`` with ``v`` on the cut lies on the side of the
    finer midpoint of ``(v, d)``, and so on down to the finest mesh, where the
    caller's ``plus_finest`` decides.
    """
    sides = [plus_finest]
    if not len(cut_vertices):
        return [plus_finest] * (len(mesh.parents) + 1)
    on_cut = np.zeros(len(mesh.points), bool)
    on_cut[cut_vertices] = True
    steps = list(reversed(mesh.parents))  # finest step first
    n_fine = len(mesh.points)
    children = []
    for lo, hi in steps:
        n_coarse = n_fine - len(lo)
        near = on_cut[lo] | on_cut[hi]
        idx = np.flatnonzero(near)
        children.append({(int(a), int(b)): n_coarse + int(i)
                         for a, b, i in zip(lo[idx], hi[idx], idx)})
        children[-1].update({(int(b), int(a)): n_coarse + int(i)
                             for a, b, i in zip(lo[idx], hi[idx], idx)})
        n_fine = n_coarse
    for j in range(1, len(steps)):  # level 0 is the caller's
        lo, hi = steps[j]
        n_level = len(mesh.points) - sum(len(s[0]) for s in steps[:j])
        side = np.zeros(n_level, bool)
        n_coarse = n_level - len(lo)
        for i in np.flatnonzero(on_cut[lo] ^ on_cut[hi]):
            v, w = (lo[i], hi[i]) if on_cut[lo[i]] else (hi[i], lo[i])
            d = n_coarse + i  # a midpoint at this level, interpolated from v
            y = d
            for t in range(j - 1, -1, -1):
                y = children[t].get((int(v), int(y)))
                if y is None:
                    break
            if y is not None:
                side[d] = plus_finest[y]
        sides.append(side)
    return sides
