"""Lagrange P1/P2/P3 discretisation with scikit-fem.

For P2 and P3, edges on circles use quadratic (isoparametric) geometry: the edge
midpoint sits on the circle, so the boundary is represented to O(h^3).
"""

from dataclasses import dataclass

import numpy as np
from skfem import (Basis, BilinearForm, ElementTriP1, ElementTriP2, ElementTriP3, FacetBasis,
                   LinearForm, MeshTri, MeshTri2, asm)
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
    """A mesh, its scikit-fem twin and the finite-element basis on it."""

    mesh: object
    order: int
    skmesh: object
    basis: object
    segment_facets: np.ndarray
    k_cell: np.ndarray
    straight: object = None  # the straight-sided MeshTri (for point location)

    @property
    def curved(self):
        return isinstance(self.skmesh, MeshTri2)

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
    seg_facets = _segment_facets(skm, mesh.segments)
    if order >= 2 and any(t.circle is not None for t in mesh.tags):
        skm = _curved(skm, mesh, seg_facets)
    basis = Basis(skm, ELEMENTS[order](), intorder=intorder or 2 * order)
    return Discretization(mesh, order, skm, basis, seg_facets, np.asarray(k_cell, float),
                          straight)


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
    return asm(diffusion, disc.basis, k=cell_field(disc.basis, disc.k_cell))


def source_vector(disc, source):
    if source is None:
        return np.zeros(disc.basis.N)
    x = disc.basis.global_coordinates().value
    return asm(weighted, disc.basis, g=source(x[0], x[1]))


def boundary_vector(fbasis, data):
    """``int g v ds`` with ``g = data(x, y, nx, ny)`` at the facet quadrature points."""
    x = fbasis.global_coordinates().value
    n = fbasis.normals.value
    return asm(weighted, fbasis, g=data(x[0], x[1], n[0], n[1]))


def boundary_matrix(fbasis, h):
    return asm(boundary_mass, fbasis, h=h)
