"""Lagrange P1/P2/P3 discretisation with scikit-fem.

For P2 and P3, edges on circles use quadratic (isoparametric) geometry: the edge
midpoint sits on the circle, so the boundary is represented to O(h^3).
"""

from dataclasses import dataclass

import numpy as np
from skfem import (
    Basis,
    BilinearForm,
    ElementTriP1,
    ElementTriP2,
    ElementTriP3,
    FacetBasis,
    LinearForm,
    MeshTri,
    MeshTri2,
    asm,
)
from skfem.helpers import dot, grad

ELEMENTS = {1: ElementTriP1, 2: ElementTriP2, 3: ElementTriP3}


@BilinearForm
def diffusion(u, v, w):
    return w.k * dot(grad(u), grad(v))


@BilinearForm
def boundary_mass(u, v, w):
    return w.h * u * v


@LinearForm
def weighted(v, w):
    return w.g * v


@dataclass
class Discretization:
    """A mesh, its scikit-fem twin and the finite-element basis on it.

    The scikit-fem basis is built on first use: the P1 pipeline assembles and
    solves without it, which matters at millions of unknowns.
    """

    mesh: object
    order: int
    skmesh: object
    segment_facets: np.ndarray
    k_cell: np.ndarray
    straight: object = None  # the straight-sided MeshTri (for point location)
    intorder: int = None
    _basis: object = None

    @property
    def curved(self):
        return isinstance(self.skmesh, MeshTri2)

    @property
    def basis(self):
        if self._basis is None:
            self._basis = Basis(self.skmesh, ELEMENTS[self.order](),
                                intorder=self.intorder or 2 * self.order)
        return self._basis

    @property
    def n_dofs(self):
        if self.order == 1:
            return len(self.mesh.points)
        return self.basis.N

    def h(self):
        """Largest edge length."""
        p, f = self.mesh.points, self.straight.facets
        d = p[f[0]] - p[f[1]]
        return float(np.sqrt(np.max(d[:, 0] ** 2 + d[:, 1] ** 2)))

    def facet_dofs(self, facets):
        """All degrees of freedom on the given facets (vertices and edge interiors)."""
        if self.order == 1:
            return np.unique(self.skmesh.facets[:, facets])
        return self.basis.get_dofs(facets=facets).all()

    def dof_locations(self, dofs):
        if self.order == 1:
            return self.mesh.points[dofs].T
        return self.basis.doflocs[:, dofs]

    def facet_basis(self, facets):
        return FacetBasis(self.skmesh, self.basis.elem, facets=facets,
                          intorder=2 * self.order + 2)

    def facets_of(self, segment_mask):
        return self.segment_facets[segment_mask]


def discretize(mesh, order, k_cell, intorder=None):
    """Build the basis of degree ``order`` on ``mesh``; ``k_cell`` is k per triangle."""
    if order not in ELEMENTS:
        raise ValueError(f"order must be 1, 2 or 3, got {order}")
    skm = straight = MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy())
    _fast_facets(skm)
    seg_facets = _segment_facets(skm, mesh.segments)
    if order >= 2 and any(t.circle is not None for t in mesh.tags):
        skm = _curved(skm, mesh, seg_facets)
        _fast_facets(skm)
    return Discretization(mesh, order, skm, seg_facets, np.asarray(k_cell, float), straight,
                          intorder)


def _fast_facets(skm):
    """Give a triangle mesh its facets and element-to-facet map.

    Same arrays as scikit-fem builds (unique sorted vertex pairs in lexicographic
    order), found through integer keys instead of a unique over columns, which is
    over ten times faster on millions of triangles.
    """
    t = skm.t[:3]
    n = int(t.max()) + 1
    e = np.hstack([t[[0, 1]], t[[1, 2]], t[[0, 2]]])
    keys = np.minimum(e[0], e[1]).astype(np.int64) * n + np.maximum(e[0], e[1])
    uniq, inv = np.unique(keys, return_inverse=True)
    skm._facets = np.ascontiguousarray(np.vstack([uniq // n, uniq % n]).astype(t.dtype))
    skm._t2f = inv.reshape(3, t.shape[1]).astype(t.dtype)


def _segment_facets(skm, segments):
    n = skm.p.shape[1]
    f = np.sort(skm.facets, axis=0)
    keys = f[0].astype(np.int64) * n + f[1]
    order = np.argsort(keys)
    s = np.sort(segments, axis=1)
    skeys = s[:, 0].astype(np.int64) * n + s[:, 1]
    pos = np.searchsorted(keys, skeys, sorter=order)
    idx = order[np.minimum(pos, len(order) - 1)]
    if not np.array_equal(keys[idx], skeys):
        raise RuntimeError("a constrained segment is not an edge of the mesh")
    return idx


def _curved(skm, mesh, seg_facets):
    m2 = MeshTri2.from_mesh(skm)
    doflocs = m2.doflocs.copy()
    nv = skm.p.shape[1]
    for k, tag in enumerate(mesh.tags):
        if tag.circle is None:
            continue
        fac = seg_facets[mesh.segment_tags == k]
        cx, cy, r = tag.circle
        mid = doflocs[:, nv + fac] - np.array([[cx], [cy]])
        doflocs[:, nv + fac] = np.array([[cx], [cy]]) + r * mid / np.linalg.norm(mid, axis=0)
    return MeshTri2(doflocs, m2.t, sort_t=False)


def cell_field(basis, values):
    """Broadcast per-cell values to the quadrature points of ``basis``."""
    nqp = basis.X.shape[1]
    return np.repeat(np.asarray(values, float)[:, None], nqp, axis=1)


def stiffness(disc):
    """The matrix of ``int k grad u . grad v`` (k constant per triangle)."""
    if disc.order == 1:
        skm = disc.skmesh
        return p1_stiffness_by_edges(disc.mesh.points, skm.t, skm.t2f, skm.facets, disc.k_cell)
    return asm(diffusion, disc.basis, k=cell_field(disc.basis, disc.k_cell))


def p1_stiffness(points, triangles, k):
    """P1 stiffness in closed form for any list of triangles (9 entries each)."""
    import scipy.sparse as sp

    P = points[triangles]
    e = P[:, [2, 0, 1]] - P[:, [1, 2, 0]]
    twice_area = np.abs(e[:, 2, 0] * e[:, 1, 1] - e[:, 2, 1] * e[:, 1, 0])
    local = (e[:, :, None, 0] * e[:, None, :, 0] + e[:, :, None, 1] * e[:, None, :, 1])
    local *= (np.asarray(k, float) / (2.0 * twice_area))[:, None, None]
    rows = np.repeat(triangles, 3, axis=1).ravel()
    cols = np.tile(triangles, (1, 3)).ravel()
    n = len(points)
    return sp.csr_matrix((local.ravel(), (rows, cols)), shape=(n, n))


def p1_stiffness_by_edges(points, t, t2f, facets, k):
    """P1 stiffness in closed form, assembled edge by edge.

    Per triangle, ``K_ij = k |T| grad phi_i . grad phi_j``; off-diagonal entries are
    summed straight onto the mesh edges (``t2f``) and diagonals onto vertices, so
    the sparse matrix is built from ``n + 2 E`` entries instead of ``9 T``. Equal to
    ``asm(diffusion, Basis(mesh, ElementTriP1()))`` to round-off (a test checks it);
    written out because at millions of triangles it is several times faster.

    Parameters
    ----------
    points : (n, 2) array
    t, t2f : (3, m) arrays
        Triangles and their edges in scikit-fem's convention (edges 01, 12, 02).
    facets : (2, E) array
    k : (m,) array
    """
    import scipy.sparse as sp

    P = points[t.T]
    e = P[:, [2, 0, 1]] - P[:, [1, 2, 0]]  # edge opposite each vertex
    twice_area = np.abs(e[:, 2, 0] * e[:, 1, 1] - e[:, 2, 1] * e[:, 1, 0])
    scale = np.asarray(k, float) / (2.0 * twice_area)

    def entry(i, j):
        return (e[:, i, 0] * e[:, j, 0] + e[:, i, 1] * e[:, j, 1]) * scale

    n, n_edges = len(points), facets.shape[1]
    off = np.bincount(t2f.ravel(), np.concatenate([entry(0, 1), entry(1, 2), entry(0, 2)]),
                      minlength=n_edges)
    diag = np.bincount(t.ravel(), np.concatenate([entry(0, 0), entry(1, 1), entry(2, 2)]),
                       minlength=n)
    rows = np.concatenate([facets[0], facets[1], np.arange(n)])
    cols = np.concatenate([facets[1], facets[0], np.arange(n)])
    return sp.csr_matrix((np.concatenate([off, off, diag]), (rows, cols)), shape=(n, n))


def source_vector(disc, source):
    if source is None:
        return np.zeros(disc.n_dofs)
    x = np.asarray(disc.basis.global_coordinates())
    return asm(weighted, disc.basis, g=source(x[0], x[1]))


def boundary_vector(fbasis, data):
    """``int g v ds`` with ``g = data(x, y, nx, ny)`` at the facet quadrature points."""
    x = np.asarray(fbasis.global_coordinates())
    n = np.asarray(fbasis.normals)
    return asm(weighted, fbasis, g=data(x[0], x[1], n[0], n[1]))


def boundary_matrix(fbasis, h):
    return asm(boundary_mass, fbasis, h=h)
