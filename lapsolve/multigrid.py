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


def hierarchy(A, mesh, fixed=None, min_coarse=2000, facets=None, embed=None):
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
    embed : ndarray of int, optional
        For a system whose unknowns are not the mesh's DOFs: per unknown, the mesh
        DOF it is the value of, or -1 for an unknown of its own (a constant on a
        boundary run, a jump). Those are carried unchanged to every level, so the
        coarsest direct solve treats them exactly.

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
        Ps = _embedded(Ps, np.asarray(embed))
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


def _embedded(Ps, embed):
    """Prolongations for unknowns ``embed`` (mesh DOF or -1 for an own unknown)."""
    mesh_rows = np.flatnonzero(embed >= 0)
    extra = np.flatnonzero(embed < 0)
    n, n_mesh, n_extra = len(embed), Ps[0].shape[0], len(extra)
    select = sp.csr_matrix((np.ones(len(mesh_rows)), (mesh_rows, embed[mesh_rows])),
                           shape=(n, n_mesh))
    own = sp.csr_matrix((np.ones(n_extra), (extra, np.arange(n_extra))), shape=(n, n_extra))
    out = [sp.hstack([select @ Ps[0], own]).tocsr()]
    eye = sp.identity(n_extra, format="csr")
    out += [sp.block_diag((P, eye), format="csr") for P in Ps[1:]]
    return out
