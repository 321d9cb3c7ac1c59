"""Import a result set (any format meshio reads) onto a scikit-fem basis.

Supported element types and the scikit-fem element used for them:

==========  ======================  ==================================
meshio      element                 geometry
==========  ======================  ==================================
triangle    ElementTriP1            MeshTri
triangle6   ElementTriP2            MeshTri, or MeshTri2 when curved
quad        ElementQuad1            MeshQuad
quad8       ElementQuadS2           MeshQuad, or MeshQuad2 when curved
quad9       ElementQuad2            MeshQuad, or MeshQuad2 when curved
==========  ======================  ==================================

Node values become degrees of freedom by position, never by assumed numbering:
corner nodes are the vertex DOFs, the node on edge ``(a, b)`` of a cell is the DOF
of the mesh facet ``{a, b}`` and the centre node of a quad9 the cell's interior
DOF. Every DOF location of the basis is then checked against the file node it
came from. A higher-order node away from where the straight cell would put it
makes the geometry isoparametric (the file's nodes define the curved cell). For
quad8 the curved geometry needs a centre point; the serendipity map's own centre
``-1/4 sum(corners) + 1/2 sum(midpoints)`` is used, so the quadratic map agrees
with the serendipity one (serendipity functions are contained in Q2).
"""

import contextlib
import io
import logging
from dataclasses import dataclass, field
from pathlib import Path

import meshio
import numpy as np
from skfem import (
    Basis,
    ElementQuad1,
    ElementQuad2,
    ElementQuadS2,
    ElementTriP1,
    ElementTriP2,
    MeshQuad,
    MeshQuad2,
    MeshTri,
    MeshTri2,
)

from lapsolve.errors import InputError
from lapsolve.geometry import MAX_COORDINATE

log = logging.getLogger(__name__)

#: meshio type -> (scikit-fem element, degree, corners, local edges of the mid nodes).
ELEMENTS = {
    "triangle": (ElementTriP1, 1, 3, ()),
    "triangle6": (ElementTriP2, 2, 3, ((0, 1), (1, 2), (2, 0))),
    "quad": (ElementQuad1, 1, 4, ()),
    "quad8": (ElementQuadS2, 2, 4, ((0, 1), (1, 2), (2, 3), (3, 0))),
    "quad9": (ElementQuad2, 2, 4, ((0, 1), (1, 2), (2, 3), (3, 0))),
}
#: Cell types that carry no area and are ignored (boundary lines, points).
LOWER_DIMENSIONAL = {"vertex", "line", "line3", "line4"}
#: Relative size (of the bounding-box diagonal) below which two nodes coincide
#: and below which a cell's area counts as zero (common practice, no source).
COINCIDENT_REL = 1e-10
DEGENERATE_REL = 1e-12
#: How far a higher-order node may sit from the straight-cell position before the
#: cell counts as curved, relative to the cell size (common practice, no source).
CURVED_REL = 1e-9
_LISTED = 5


@dataclass
class ImportedMesh:
    """The 2D cells of a mesh file.

    Attributes
    ----------
    source : str
    cell_type : str
        meshio type of the 2D cells.
    points : ndarray (n, 2)
        Every node of the file, in file order.
    cells : ndarray (m, k)
        2D cells in the file's node order for that type.
    flipped : bool
        True when every cell was clockwise (corners are reversed for scikit-fem).
    inverted, degenerate : ndarray of int
        Cells with the minority orientation (or a non-convex quad), and cells of
        zero area.
    duplicates : ndarray (d, 2)
        Pairs of distinct used nodes at the same place.
    notes : list of str
    """

    source: str
    cell_type: str
    points: np.ndarray
    cells: np.ndarray
    flipped: bool = False
    inverted: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    degenerate: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    duplicates: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), int))
    notes: list = field(default_factory=list)

    @property
    def degree(self):
        return ELEMENTS[self.cell_type][1]

    @property
    def corners(self):
        """Corner nodes per cell, counter-clockwise."""
        c = self.cells[:, :ELEMENTS[self.cell_type][2]]
        return c[:, ::-1] if self.flipped else c

    @property
    def used(self):
        return np.unique(self.cells)

    def cell_areas(self):
        """Area of each straight-sided cell (shoelace over the corners)."""
        p = self.points[self.corners]
        x, y = p[..., 0], p[..., 1]
        return 0.5 * np.sum(x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y, axis=1)

    def area(self):
        return float(np.sum(np.abs(self.cell_areas())))

    def bbox(self):
        p = self.points[self.used]
        return p.min(axis=0), p.max(axis=0)

    def h(self):
        """Mean cell size ``sqrt(area / cells)``; it halves under uniform refinement."""
        return float(np.sqrt(self.area() / len(self.cells)))

    def h_max(self):
        p = self.points[self.corners]
        return float(np.max(np.linalg.norm(p - np.roll(p, -1, axis=1), axis=2)))

    def defects(self):
        """One sentence naming duplicated nodes, inverted and zero-area cells, or ''."""
        parts = []
        if len(self.duplicates):
            pairs = ", ".join(f"{a} and {b} at ({self.points[a, 0]:.6g}, "
                              f"{self.points[a, 1]:.6g})" for a, b in self.duplicates[:_LISTED])
            parts.append(f"{len(self.duplicates)} duplicated node pair(s): nodes {pairs}"
                         f"{_more(self.duplicates)}")
        if len(self.inverted):
            parts.append(f"{len(self.inverted)} inverted cell(s) (orientation opposite to the "
                         f"others, or a non-convex quad): {_listed(self.inverted)}")
        if len(self.degenerate):
            corners = np.sort(self.corners[self.degenerate], axis=1)
            collapsed = corners.shape[1] == 4 and np.any(corners[:, 1:] == corners[:, :-1])
            kind = "zero-area or collapsed (repeated corner)" if collapsed else "zero-area"
            parts.append(f"{len(self.degenerate)} {kind} cell(s): "
                         f"{_listed(self.degenerate)}")
        return "; ".join(parts)


def _listed(index):
    return "cells " + ", ".join(str(int(i)) for i in index[:_LISTED]) + _more(index)


def _more(items):
    return f" (and {len(items) - _LISTED} more)" if len(items) > _LISTED else ""


def read_meshio(path):
    """``meshio.read`` with every failure turned into an :class:`InputError`."""
    if not Path(path).is_file():
        raise InputError("file not found", source=str(path))
    captured = io.StringIO()
    try:
        # meshio tries several readers for some extensions, prints their errors and,
        # when none accepts the file, calls sys.exit.
        with contextlib.redirect_stdout(captured), contextlib.redirect_stderr(captured):
            return meshio.read(str(path))
    except SystemExit:  # meshio exits when no reader accepts the file
        raise InputError("unreadable mesh file: no reader accepts it (wrong extension, "
                         "truncated or corrupt)", source=str(path)) from None
    except FileNotFoundError:
        raise InputError("file not found", source=str(path)) from None
    except ValueError as exc:
        text = " ".join(str(exc).split())
        if "point_data" in text and "len(points)" in text:
            raise InputError(f"a point field does not match the mesh: {text} (node count "
                             "of the field differs from the number of nodes)",
                             source=str(path)) from None
        raise InputError(f"unreadable mesh file: {text}", source=str(path)) from None
    except Exception as exc:  # noqa: BLE001 - meshio raises many types for bad files
        text = " ".join(str(exc).split())[:200] or type(exc).__name__
        raise InputError(f"unreadable mesh file ({type(exc).__name__}: {text})",
                         source=str(path)) from None
    finally:
        if captured.getvalue().strip():
            log.debug("meshio said: %s", captured.getvalue().strip())


def mesh_from_meshio(raw, source):
    """The 2D cells of a meshio mesh as an :class:`ImportedMesh` (no checks of shape)."""
    types = [block.type for block in raw.cells if len(block.data)]
    two_d = sorted({t for t in types if t not in LOWER_DIMENSIONAL})
    unsupported = [t for t in two_d if t not in ELEMENTS]
    if unsupported:
        raise InputError(f"unsupported cell type(s) {', '.join(unsupported)}; supported: "
                         f"{', '.join(ELEMENTS)}", source=source)
    if not two_d:
        raise InputError("the file holds no 2D cells (triangles or quadrilaterals)",
                         source=source)
    if len(two_d) > 1:
        raise InputError(f"mixed 2D cell types {', '.join(two_d)}; use one element type "
                         "per result file", source=source)
    cell_type = two_d[0]
    cells = np.vstack([b.data for b in raw.cells if b.type == cell_type]).astype(np.int64)
    points = np.asarray(raw.points, float)
    if points.ndim != 2 or points.shape[1] < 2:
        raise InputError("points must have x and y coordinates", source=source)
    if points.shape[1] == 3 and np.any(np.abs(points[:, 2]) > 1e-12 * _diag(points[:, :2])):
        raise InputError("the mesh is not planar (z differs from 0)", source=source)
    points = points[:, :2].copy()
    if np.any(cells < 0) or np.any(cells >= len(points)):
        raise InputError("a cell refers to a node that does not exist", source=source)
    used = points[np.unique(cells)]
    if not np.all(np.isfinite(used)):
        bad = np.unique(cells)[np.flatnonzero(~np.all(np.isfinite(used), axis=1))[0]]
        raise InputError(f"node coordinates contain NaN or infinite values (first at node "
                         f"{int(bad)})", source=source)
    largest = float(np.max(np.abs(used))) if used.size else 0.0
    if largest > MAX_COORDINATE:
        raise InputError(f"node coordinates reach {largest:.3g}; they are limited to "
                         f"{MAX_COORDINATE:.0e} in absolute value", source=source)
    return ImportedMesh(str(source), cell_type, points, cells)


def _diag(points):
    if len(points) == 0:
        return 1.0
    with np.errstate(over="ignore", invalid="ignore"):  # huge coordinates: refused later
        return float(np.linalg.norm(points.max(axis=0) - points.min(axis=0))) or 1.0


def find_defects(mesh):
    """Fill ``flipped``, ``inverted``, ``degenerate`` and ``duplicates`` of ``mesh``."""
    from scipy.spatial import cKDTree

    scale = _diag(mesh.points[mesh.used])
    mesh.flipped = False
    area = mesh.cell_areas()
    corners = np.sort(mesh.corners, axis=1)
    collapsed = np.any(corners[:, 1:] == corners[:, :-1], axis=1)  # a corner repeated
    degenerate = (np.abs(area) <= DEGENERATE_REL * scale**2) | collapsed
    nondegenerate = ~degenerate
    positive = np.count_nonzero(area[nondegenerate] > 0)
    if positive < np.count_nonzero(nondegenerate) - positive:
        mesh.flipped = True
        mesh.notes.append("cells are clockwise in the file; corners were reversed")
        area = -area
    inverted = (area < 0) & nondegenerate
    if mesh.corners.shape[1] == 4:
        p = mesh.points[mesh.corners]
        e_in = p - np.roll(p, 1, axis=1)
        e_out = np.roll(p, -1, axis=1) - p
        turn = e_in[..., 0] * e_out[..., 1] - e_in[..., 1] * e_out[..., 0]
        inverted |= np.any(turn <= 0, axis=1) & nondegenerate
    used = mesh.used
    pairs = cKDTree(mesh.points[used]).query_pairs(COINCIDENT_REL * scale, output_type="ndarray")
    mesh.duplicates = np.sort(used[pairs], axis=1) if len(pairs) else np.zeros((0, 2), int)
    mesh.inverted = np.flatnonzero(inverted)
    mesh.degenerate = np.flatnonzero(degenerate)
    return mesh


def read_mesh(path, strict=True):
    """Read the 2D cells of a mesh file and check them.

    Parameters
    ----------
    path : path
    strict : bool
        Raise on duplicated nodes, inverted or zero-area cells (else only record them).

    Returns
    -------
    ImportedMesh
    """
    return _checked(find_defects(mesh_from_meshio(read_meshio(path), str(path))), strict)


def _checked(mesh, strict):
    if strict and mesh.defects():
        raise InputError(f"defective mesh: {mesh.defects()}", source=mesh.source)
    return mesh


def read_result(path, field):
    """Read a result file: its mesh (checked) and the values of point field ``field``.

    Returns
    -------
    mesh : ImportedMesh
    values : ndarray (n_points,)
    """
    raw = read_meshio(path)
    mesh = _checked(find_defects(mesh_from_meshio(raw, str(path))), True)
    return mesh, point_field(raw, field, str(path))


def point_field(raw, name, source):
    """The scalar point field ``name`` of a meshio mesh, validated."""
    if name not in raw.point_data:
        have = ", ".join(sorted(k for k in raw.point_data if not k.startswith("gmsh:")))
        hint = f"; the file has: {have}" if have else "; the file has no point fields"
        raise InputError(f"point field '{name}' not found{hint}", source=source, field=name)
    values = np.asarray(raw.point_data[name])
    if values.ndim == 2 and values.shape[1] == 1:
        values = values[:, 0]
    if values.ndim != 1:
        raise InputError(f"point field '{name}' is not scalar (shape {values.shape})",
                         source=source, field=name)
    if len(values) != len(raw.points):
        raise InputError(f"point field '{name}' has {len(values)} values but the mesh has "
                         f"{len(raw.points)} nodes", source=source, field=name)
    try:
        values = values.astype(float)
    except (TypeError, ValueError):
        raise InputError(f"point field '{name}' is not numeric", source=source,
                         field=name) from None
    bad = np.flatnonzero(~np.isfinite(values))
    if len(bad):
        raise InputError(f"point field '{name}' has {len(bad)} NaN or infinite value(s), "
                         f"first at node {int(bad[0])}", source=source, field=name)
    return values


@dataclass
class ImportedBasis:
    """A scikit-fem basis on an imported mesh and where each file node's value goes.

    ``dof_of_node[i]`` is the DOF of file node ``i`` (-1 for unused nodes).
    """

    basis: object
    dof_of_node: np.ndarray
    curved: bool

    def dofs(self, values):
        """The DOF vector of node values ``values`` (one per file node)."""
        used = self.dof_of_node >= 0
        u = np.zeros(self.basis.N)
        u[self.dof_of_node[used]] = np.asarray(values, float)[used]
        return u


def build_basis(mesh, intorder=None):
    """The scikit-fem basis for ``mesh``'s element type, with the node-to-DOF map.

    Raises
    ------
    InputError
        When two cells disagree on the node of a shared edge (non-conforming mesh).
    """
    element, degree, n_corner, edges = ELEMENTS[mesh.cell_type]
    used = np.unique(mesh.corners)
    vertex = np.full(len(mesh.points), -1, np.int64)
    vertex[used] = np.arange(len(used))
    t = vertex[mesh.corners].T
    straight_cls = MeshTri if n_corner == 3 else MeshQuad
    straight = straight_cls(mesh.points[used].T.copy(), t.copy(), sort_t=False)
    facet_nodes, center_nodes = _higher_order_nodes(mesh, straight, vertex, edges)
    basis = Basis(straight, element(), intorder=intorder)
    curved = False
    if degree > 1 and _off_straight(mesh, basis, straight, facet_nodes, center_nodes):
        curved = True
        basis = Basis(_curved_mesh(mesh, straight, facet_nodes, center_nodes), element(),
                      intorder=intorder)
    dof_of_node = np.full(len(mesh.points), -1, np.int64)
    dof_of_node[used] = basis.nodal_dofs[0]
    if len(facet_nodes):
        dof_of_node[facet_nodes] = basis.facet_dofs[0]
    if len(center_nodes):
        dof_of_node[center_nodes] = basis.interior_dofs[0]
    _check_locations(mesh, basis, dof_of_node)
    return ImportedBasis(basis, dof_of_node, curved)


def _higher_order_nodes(mesh, straight, vertex, edges):
    """File node of each facet (by its corner pair) and of each cell centre."""
    none = np.zeros(0, np.int64)
    if not edges:
        return none, none
    n = straight.p.shape[1]
    ends = np.sort(straight.facets, axis=0)
    fkeys = ends[0].astype(np.int64) * n + ends[1]
    order = np.argsort(fkeys)
    n_corner = ELEMENTS[mesh.cell_type][2]
    raw_corners = vertex[mesh.cells[:, :n_corner]]
    facet_nodes = np.full(straight.facets.shape[1], -1, np.int64)
    for j, (a, b) in enumerate(edges):
        lo = np.minimum(raw_corners[:, a], raw_corners[:, b]).astype(np.int64)
        hi = np.maximum(raw_corners[:, a], raw_corners[:, b])
        pos = order[np.searchsorted(fkeys, lo * n + hi, sorter=order)]
        node = mesh.cells[:, n_corner + j]
        clash = (facet_nodes[pos] >= 0) & (facet_nodes[pos] != node)
        if np.any(clash):
            c = int(np.flatnonzero(clash)[0])
            raise InputError(f"cells disagree on the middle node of an edge (cell {c}, node "
                             f"{int(node[c])} vs {int(facet_nodes[pos][c])}): the mesh is not "
                             "conforming", source=mesh.source)
        facet_nodes[pos] = node
    center_nodes = mesh.cells[:, 8].astype(np.int64) if mesh.cell_type == "quad9" else none
    return facet_nodes, center_nodes


def _off_straight(mesh, basis, straight, facet_nodes, center_nodes):
    size = mesh.h_max()
    where = basis.doflocs[:, basis.facet_dofs[0]].T
    off = np.max(np.linalg.norm(where - mesh.points[facet_nodes], axis=1))
    if len(center_nodes):
        where = basis.doflocs[:, basis.interior_dofs[0]].T
        off = max(off, np.max(np.linalg.norm(where - mesh.points[center_nodes], axis=1)))
    return off > CURVED_REL * size


def _curved_mesh(mesh, straight, facet_nodes, center_nodes):
    mids = mesh.points[facet_nodes].T
    if straight.t.shape[0] == 3:
        return MeshTri2(np.hstack([straight.p, mids]), straight.t, sort_t=False)
    if len(center_nodes):
        centers = mesh.points[center_nodes].T
    else:
        corner = straight.p[:, straight.t]  # (2, 4, m)
        mid = mids[:, straight.t2f]  # (2, 4, m)
        centers = -0.25 * corner.sum(axis=1) + 0.5 * mid.sum(axis=1)
    return MeshQuad2(np.hstack([straight.p, mids, centers]), straight.t, sort_t=False)


def _check_locations(mesh, basis, dof_of_node):
    used = dof_of_node >= 0
    where = basis.doflocs[:, dof_of_node[used]].T
    off = np.linalg.norm(where - mesh.points[used], axis=1)
    if np.max(off) > 1e-8 * mesh.h_max():
        raise RuntimeError(f"node-to-DOF map misplaces a node by {np.max(off):.3e}")


def check_domain(mesh, problem, rel_tol=0.1):
    """Raise when the mesh cannot be the domain of ``problem`` (bounding box and area).

    Parameters
    ----------
    mesh : ImportedMesh
    problem : lapsolve Problem
    rel_tol : float
        Allowed relative difference of the area, and of each bounding-box side
        relative to the box diagonal (coarse polygons of circles lose a few percent).
    """
    lo, hi = problem.outer.bbox()
    lo, hi = np.asarray(lo, float), np.asarray(hi, float)
    expected_area = problem.outer.area() - sum(h.area() for h in problem.holes)
    got_lo, got_hi = mesh.bbox()
    diag = float(np.linalg.norm(hi - lo))
    shift = max(np.max(np.abs(got_lo - lo)), np.max(np.abs(got_hi - hi)))
    area = mesh.area()
    if shift > rel_tol * diag or abs(area - expected_area) > rel_tol * expected_area:
        raise InputError(
            f"the mesh does not look like the domain of case '{problem.name}': bounding box "
            f"[{got_lo[0]:.4g}, {got_hi[0]:.4g}] x [{got_lo[1]:.4g}, {got_hi[1]:.4g}] and area "
            f"{area:.4g}, expected [{lo[0]:.4g}, {hi[0]:.4g}] x [{lo[1]:.4g}, {hi[1]:.4g}] and "
            f"area {expected_area:.4g}", source=mesh.source)
