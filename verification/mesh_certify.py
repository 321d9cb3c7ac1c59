"""Certify a mesh: its quality, its fit to the true geometry, and the accuracy it delivers.

``certify_mesh(path, case)`` reads any mesh meshio reads, reports cell quality
(angles, aspect ratios, inverted or zero-area cells, duplicated nodes) and how far
its boundary nodes sit from the case's true boundary, then solves the exact case
on that very mesh with lapsolve and reports the error norms it delivers.

The mesh becomes a lapsolve :class:`~lapsolve.mesh.Mesh` by matching each boundary
edge to the loop edge (polygon side or circle) both of its end nodes lie closest
to, and each cell to the material region holding its centroid. Quadrilaterals are
split into two triangles; higher-order nodes are dropped (lapsolve places its own
quadratic nodes, on the circle where the edge is curved).
"""

import logging
import time
from dataclasses import asdict, dataclass, field

import numpy as np

from lapsolve.geometry import CircleLoop, distance_to_loop
from lapsolve.mesh import EdgeTag, Mesh

from .importer import ELEMENTS, check_domain, read_mesh

log = logging.getLogger(__name__)

MESH_CERTIFICATE_SCHEMA = "lapsolve.mesh-certificate/1"
#: Boundary nodes farther than this (relative to the domain's bounding-box
#: diagonal) from the true boundary are "off the geometry" (common practice, no source).
GEOMETRY_REL_TOL = 1e-6
#: Angles below this are reported as small (common practice, no source).
SMALL_ANGLE_DEG = 20.0
OK = "OK"
DEFECTIVE = "DEFECTIVE"


@dataclass
class MeshCertificate:
    """What a mesh delivers on an exact case (``lapsolve.mesh-certificate/1``)."""

    source: str
    case: str
    order: int
    status: str
    quality: dict
    boundary: dict
    solve: dict = field(default_factory=dict)
    norms: dict = field(default_factory=dict)
    quantities: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def to_dict(self):
        out = {"schema": MESH_CERTIFICATE_SCHEMA}
        out.update(asdict(self))
        return out


def corner_angles(points, corners):
    """Interior angle (degrees) at every corner of every cell, shape (m, k)."""
    p = points[corners]
    to_prev = np.roll(p, 1, axis=1) - p
    to_next = np.roll(p, -1, axis=1) - p
    cos = np.sum(to_prev * to_next, axis=2) / np.maximum(
        np.linalg.norm(to_prev, axis=2) * np.linalg.norm(to_next, axis=2), 1e-300)
    return np.degrees(np.arccos(np.clip(cos, -1, 1)))


def aspect_ratios(points, corners):
    """Triangles: circumradius / (2 inradius), 1 when equilateral. Quads: longest over
    shortest side, 1 for a square (common practice, no source)."""
    p = points[corners]
    edges = np.linalg.norm(np.roll(p, -1, axis=1) - p, axis=2)
    if corners.shape[1] == 4:
        return edges.max(axis=1) / np.maximum(edges.min(axis=1), 1e-300)
    a, b, c = edges.T
    s = 0.5 * (a + b + c)
    area = np.sqrt(np.maximum(s * (s - a) * (s - b) * (s - c), 0))
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = (a * b * c / (4 * area)) / (2 * area / s)
    return np.where(area > 0, ratio, np.inf)


def cell_quality(mesh):
    """Angles, aspect ratios and defects of an :class:`~verification.importer.ImportedMesh`."""
    angles = corner_angles(mesh.points, mesh.corners)
    aspect = aspect_ratios(mesh.points, mesh.corners)
    finite = aspect[np.isfinite(aspect)]
    return {
        "element": mesh.cell_type, "cells": int(len(mesh.cells)),
        "nodes": int(len(mesh.used)),
        "min_angle_deg": float(angles.min()), "max_angle_deg": float(angles.max()),
        "cells_with_angle_below_20_deg": int(np.sum(angles.min(axis=1) < SMALL_ANGLE_DEG)),
        "worst_aspect_ratio": float(aspect.max()),
        "mean_aspect_ratio": float(finite.mean()) if len(finite) else float("inf"),
        "h_max": mesh.h_max(), "h_mean": mesh.h(),
        "inverted_cells": mesh.inverted[:50].tolist(), "inverted_count": int(len(mesh.inverted)),
        "zero_area_cells": mesh.degenerate[:50].tolist(),
        "zero_area_count": int(len(mesh.degenerate)),
        "duplicated_node_pairs": mesh.duplicates[:50].tolist(),
        "duplicated_count": int(len(mesh.duplicates)),
    }


def boundary_edges(mesh):
    """Edges used by one cell only: corner pairs (b, 2) and their mid nodes (-1 if none)."""
    corners = mesh.corners
    k = corners.shape[1]
    local = [(i, (i + 1) % k) for i in range(k)]
    a = np.concatenate([corners[:, i] for i, _ in local])
    b = np.concatenate([corners[:, j] for _, j in local])
    n = len(mesh.points)
    keys = np.minimum(a, b).astype(np.int64) * n + np.maximum(a, b)
    uniq, first, count = np.unique(keys, return_index=True, return_counts=True)
    sel = first[count == 1]
    mids = np.full(len(sel), -1, np.int64)
    local_mid = ELEMENTS[mesh.cell_type][3]
    if local_mid:
        raw = mesh.cells[:, :k]
        mkeys = np.concatenate([np.minimum(raw[:, p], raw[:, q]).astype(np.int64) * n
                                + np.maximum(raw[:, p], raw[:, q]) for p, q in local_mid])
        mnodes = np.concatenate([mesh.cells[:, k + j] for j in range(len(local_mid))])
        order = np.argsort(mkeys)
        mids = mnodes[order[np.searchsorted(mkeys, keys[sel], sorter=order)]]
    return np.column_stack([a[sel], b[sel]]), mids


def boundary_offsets(mesh, problem, rel_tol=GEOMETRY_REL_TOL):
    """How far the mesh's boundary nodes lie from the case's true boundary."""
    edges, mids = boundary_edges(mesh)
    nodes = np.unique(np.concatenate([edges.ravel(), mids[mids >= 0]]))
    pts = mesh.points[nodes]
    dist = np.min([distance_to_loop(pts, lp) for lp in problem.loops()], axis=0)
    lo, hi = problem.outer.bbox()
    tol = rel_tol * float(np.linalg.norm(np.asarray(hi, float) - np.asarray(lo, float)))
    length = np.linalg.norm(mesh.points[edges[:, 0]] - mesh.points[edges[:, 1]], axis=1)
    worst = int(np.argmax(dist))
    return {"boundary_nodes": int(len(nodes)), "max_distance": float(dist.max()),
            "max_distance_over_h": float(dist.max() / np.median(length)),
            "off_geometry": int(np.sum(dist > tol)), "tolerance": tol,
            "worst_node": int(nodes[worst]),
            "worst_point": [float(v) for v in pts[worst]]}


def _segment_distance(points, a, b):
    ab = b - a
    t = np.clip(np.sum((points - a) * ab, axis=1) / max(float(np.dot(ab, ab)), 1e-300), 0, 1)
    return np.linalg.norm(points - (a + t[:, None] * ab), axis=1)


def _nearest_loop_edge(points_a, points_b, loops):
    """Per edge, the (loop index, edge index) both end points lie closest to."""
    best = np.full(len(points_a), np.inf)
    loop_of = np.zeros(len(points_a), int)
    edge_of = np.zeros(len(points_a), int)
    for li, loop in enumerate(loops):
        if isinstance(loop, CircleLoop):
            d = np.maximum(distance_to_loop(points_a, loop), distance_to_loop(points_b, loop))
            candidates = [(0, d)]
        else:
            v = loop.vertices
            candidates = [(e, np.maximum(_segment_distance(points_a, v[e], v[(e + 1) % len(v)]),
                                         _segment_distance(points_b, v[e], v[(e + 1) % len(v)])))
                          for e in range(len(v))]
        for e, d in candidates:
            better = d < best
            best[better], loop_of[better], edge_of[better] = d[better], li, e
    return loop_of, edge_of, best


def _circle(loop):
    return (*loop.center, loop.radius) if isinstance(loop, CircleLoop) else None


def to_lapsolve_mesh(mesh, problem):
    """A lapsolve :class:`Mesh` of the imported cells, tagged by the case's loops.

    Returns
    -------
    Mesh, list of str (notes)
    """
    notes = []
    corners = mesh.corners
    if corners.shape[1] == 4:
        corners = np.vstack([corners[:, [0, 1, 2]], corners[:, [0, 2, 3]]])
        notes.append("quadrilaterals split into two triangles each for the solve")
    if ELEMENTS[mesh.cell_type][1] > 1:
        notes.append("higher-order nodes dropped; lapsolve places its own (on circles "
                     "where the edge is curved)")
    used = np.unique(corners)
    index = np.full(len(mesh.points), -1, np.int64)
    index[used] = np.arange(len(used))
    points, triangles = mesh.points[used], index[corners]
    regions = np.zeros(len(triangles), int)
    centroids = points[triangles].mean(axis=1)
    for r, region in enumerate(problem.regions):
        regions[region.loop.contains(centroids)] = r + 1
    tags, segments, seg_tags = [], [], []
    loops = problem.loops()
    bnd, _ = boundary_edges(mesh)
    bnd = index[bnd]
    lp, ed, _ = _nearest_loop_edge(points[bnd[:, 0]], points[bnd[:, 1]], loops)
    _add_segments(bnd, [(loops[i].name, e, True, _circle(loops[i])) for i, e in zip(lp, ed)],
                  tags, segments, seg_tags)
    inner = _interfaces(triangles, regions)
    if len(inner):
        owner = np.maximum(regions[inner[:, 2]], regions[inner[:, 3]])
        region_loops = [problem.regions[o - 1].loop for o in owner]
        specs = []
        for (a, b, _, _), loop in zip(inner, region_loops):
            _, e, _ = _nearest_loop_edge(points[[a]], points[[b]], [loop])
            specs.append((loop.name, int(e[0]), False, _circle(loop)))
        _add_segments(inner[:, :2], specs, tags, segments, seg_tags)
    seg = np.array(segments, np.int64).reshape(-1, 2)
    return Mesh(points, triangles, regions, seg, np.array(seg_tags, int), tuple(tags)), notes


def _add_segments(edges, specs, tags, segments, seg_tags):
    known = {(t.loop, t.edge, t.boundary): i for i, t in enumerate(tags)}
    for edge, (loop, e, boundary, circle) in zip(edges, specs):
        key = (loop, int(e), boundary)
        if key not in known:
            known[key] = len(tags)
            tags.append(EdgeTag(loop, int(e), boundary, circle))
        segments.append((int(edge[0]), int(edge[1])))
        seg_tags.append(known[key])


def _interfaces(triangles, regions):
    """Interior edges between different regions: rows (a, b, cell1, cell2)."""
    if regions.max(initial=0) == 0:
        return np.zeros((0, 4), np.int64)
    n = int(triangles.max()) + 1
    a = triangles.ravel()
    b = np.roll(triangles, -1, axis=1).ravel()
    cell = np.repeat(np.arange(len(triangles)), 3)
    keys = np.minimum(a, b).astype(np.int64) * n + np.maximum(a, b)
    order = np.argsort(keys, kind="stable")
    k, c = keys[order], cell[order]
    pair = np.flatnonzero(k[1:] == k[:-1])
    cells1, cells2 = c[pair], c[pair + 1]
    differ = regions[cells1] != regions[cells2]
    lo, hi = k[pair][differ] // n, k[pair][differ] % n
    return np.column_stack([lo, hi, cells1[differ], cells2[differ]])


def certify_mesh(path, case, order=2, rel_tol=GEOMETRY_REL_TOL, domain_tol=0.1):
    """Quality, geometry fit and delivered accuracy of a mesh on an exact case.

    Parameters
    ----------
    path : path
        Any mesh file meshio reads (2D cells of one supported type).
    case : ExactCase
    order : {1, 2, 3}
        Degree lapsolve solves with on the mesh.
    rel_tol : float
        Distance (relative to the bounding-box diagonal) beyond which a boundary node
        is off the true geometry.
    domain_tol : float
        Relative tolerance of the wrong-case check (bounding box and area).

    Returns
    -------
    MeshCertificate
        ``status`` is ``DEFECTIVE`` (and nothing is solved) when the mesh has
        duplicated nodes, inverted or zero-area cells.
    """
    from lapsolve import solve

    from .norms import solution_norms

    mesh = read_mesh(path, strict=False)
    problem = case.problem()
    check_domain(mesh, problem, domain_tol)
    cert = MeshCertificate(str(path), case.name, int(order), OK, cell_quality(mesh),
                           boundary_offsets(mesh, problem, rel_tol), notes=list(mesh.notes))
    if mesh.defects():
        cert.status = DEFECTIVE
        cert.notes.append(f"not solved: {mesh.defects()}")
        return cert
    lmesh, notes = to_lapsolve_mesh(mesh, problem)
    cert.notes += notes
    t0 = time.perf_counter()
    solution = solve(problem, order=order, mesh=lmesh)
    norms = solution_norms(solution, case)
    cert.solve = {"dofs": solution.dofs, "triangles": int(lmesh.n_triangles),
                  "h_max": lmesh.h(), "seconds": time.perf_counter() - t0,
                  "solver": solution.solver.to_dict()}
    cert.norms = norms.to_dict()
    cert.quantities = _quantities(case, solution)
    return cert


def _quantities(case, solution):
    found = {"energy": solution.energy}
    if solution.capacity:
        found["capacitance"] = solution.capacity["from_energy"]
    out = []
    for ref in case.references:
        if ref.quantity in found:
            value = float(found[ref.quantity])
            out.append({"name": ref.quantity, "value": value, "reference": ref.value,
                        "rel_error": abs(value - ref.value) / abs(ref.value) if ref.value
                        else abs(value), "scope": ref.scope, "source": ref.source})
    return out
