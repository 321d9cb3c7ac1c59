"""Quality triangulation of a problem's domain with the ``triangle`` package."""

import logging

import numpy as np

from .errors import ResourceLimitError
from .geometry import CircleLoop, interior_point, run_triangle
from .mesh import EdgeTag, Mesh, check_size, snap_to_curves

log = logging.getLogger(__name__)

_MARKER_OFFSET = 2  # triangle reserves 0 (interior) and 1 (unmarked hull edges)

#: Most segments one circle may be split into (documented resource limit).
MAX_CIRCLE_SEGMENTS = 1_000_000


def _decimal(value):
    # triangle misreads exponent notation in its switch string ('a3e-04'):
    # always pass a plain decimal, with 12 significant digits however small
    # (a fixed number of decimals turns a tiny area into 'a0', which it refuses).
    return np.format_float_positional(value, precision=12, fractional=False, trim="-")


class _Controls:
    """Mesh controls plus an optional extra size field."""

    def __init__(self, controls, size_field):
        self.max_size = controls.max_size
        self.min_angle = controls.min_angle
        self.grading = controls.grading
        self.extra = size_field


def _pslg(problem, controls):
    """Vertices, segments, markers and tag table of the planar straight-line graph."""
    vertices, segments, markers, tags = [], [], [], []
    offset = 0
    known = {}
    unit = _unit(problem)
    loops = [(lp, True) for lp in problem.loops()]
    loops += [(r.loop, False) for r in problem.regions]
    for loop, on_boundary in loops:
        size = _loop_size(loop, controls)
        if size is not None:
            _check_circle_segments(loop, size)
        pts, edge_of_seg = loop.discretized(size)
        n = len(pts)
        circle = ((*loop.center, loop.radius) if isinstance(loop, CircleLoop) else None)
        ids = np.arange(n) + offset
        seg = np.column_stack([ids, np.roll(ids, -1)])
        tag_index = {}
        for e in np.unique(edge_of_seg):
            tag_index[int(e)] = len(tags)
            tags.append(EdgeTag(loop.name, int(e), on_boundary, circle))
        seg_markers = np.array([tag_index[int(e)] for e in edge_of_seg]) + _MARKER_OFFSET
        if not on_boundary:
            # region edges lying on an existing edge are dropped: it is there already
            keep = [_segment_key(pts[i], pts[(i + 1) % n], unit) not in known for i in range(n)]
            seg, seg_markers = seg[keep], seg_markers[keep]
        else:
            for i in range(n):
                known[_segment_key(pts[i], pts[(i + 1) % n], unit)] = True
        vertices.append(pts)
        segments.append(seg)
        markers.append(seg_markers)
        offset += n
    return np.vstack(vertices), np.vstack(segments), np.concatenate(markers), tuple(tags)


def _unit(problem):
    """A power of two near the domain's size: coincidence is judged relative to it."""
    lo, hi = problem.outer.bbox()
    extent = float(np.max(np.asarray(hi, float) - np.asarray(lo, float)))
    return 2.0 ** round(np.log2(extent)) if extent > 0 else 1.0


def _segment_key(a, b, unit=1.0):
    a, b = tuple(np.round(a / unit, 12)), tuple(np.round(b / unit, 12))
    return (a, b) if a <= b else (b, a)


def triangulate(problem, size=None, size_field=None):
    """Mesh the domain of ``problem`` with the controls in ``problem.mesh``.

    Parameters
    ----------
    problem : Problem
    size : float, optional
        Override of ``problem.mesh.max_size``.
    size_field : callable, optional
        ``(points (n, 2)) -> sizes (n,)``, an extra local size limit (graded
        meshes toward singular corners); combined with the file's grading by min.

    Returns
    -------
    Mesh
    """
    controls = problem.mesh
    field = "mesh.max_size" if not size or size == controls.max_size else None
    size = size or controls.max_size
    if size != controls.max_size:
        problem = problem.with_mesh(max_size=size)
        controls = problem.mesh
    area = np.sqrt(3) / 4 * size**2
    domain_area = problem.outer.area() - sum(h.area() for h in problem.holes)
    try:
        check_mesh_estimate(domain_area, area)
    except ResourceLimitError as exc:
        if exc.source is not None:
            raise
        raise ResourceLimitError(exc.message, source=problem.origin, field=field) from None
    controls = _Controls(controls, size_field)
    verts, segs, markers, tags = _pslg(problem, controls)
    verts, segs = _merge_duplicates(verts, segs, _unit(problem))
    data = {"vertices": verts, "segments": segs, "segment_markers": markers}
    holes = [interior_point(h) for h in problem.holes]
    if holes:
        data["holes"] = np.array(holes)
    if problem.regions:
        data["regions"] = np.array([[*interior_point(r.loop), i + 1, 0]
                                    for i, r in enumerate(problem.regions)])
    quality_switch = f"q{_decimal(controls.min_angle)}"
    out = run_triangle(data, f"p{quality_switch}a{_decimal(area)}AQ")
    if controls.grading or size_field is not None:
        # a bare 'a' makes triangle honour the per-triangle areas passed with 'r'
        out = _graded(out, controls, f"rp{quality_switch}aQ")
    mesh = _to_mesh(out, tags)
    log.debug("triangulated %d triangles", mesh.n_triangles)
    return snap_to_curves(mesh)


def check_mesh_estimate(domain_area, triangle_area, what="the requested mesh"):
    """Element cap and memory check of a mesh before the mesher runs.

    A quality mesh with maximum triangle area ``a`` has about ``2.5 A / a``
    triangles on a domain of area ``A`` (measured, common practice, no source).
    """
    from .resources import MESH_BYTES_PER_TRIANGLE, check_memory

    with np.errstate(all="ignore"):
        estimate = 2.5 * np.float64(domain_area) / np.float64(triangle_area)
    count = check_size(estimate, what)
    check_memory(count * MESH_BYTES_PER_TRIANGLE, f"{what} (about {count:,} triangles)",
                 "use a larger element size")
    return count


def _loop_size(loop, controls):
    """Segment length for a curved loop: the size field's minimum along it."""
    if not isinstance(loop, CircleLoop):
        return None
    angle = np.linspace(0, 2 * np.pi, 256, endpoint=False)
    pts = np.column_stack([loop.center[0] + loop.radius * np.cos(angle),
                           loop.center[1] + loop.radius * np.sin(angle)])
    return float(np.min(_size_field(pts, controls)))


def _check_circle_segments(loop, size):
    with np.errstate(all="ignore"):
        count = 2 * np.pi * loop.radius / size
    if not count <= MAX_CIRCLE_SEGMENTS:
        shown = f"{count:,.0f}" if np.isfinite(count) else "unboundedly many"
        raise ResourceLimitError(f"circle '{loop.name}' would be split into {shown} boundary "
                                 f"segments; the limit is {MAX_CIRCLE_SEGMENTS:,} (the local "
                                 "element size along it is too small)")


def _merge_duplicates(verts, segs, unit=1.0):
    """Region loops may reuse vertices of the outer loop: merge coincident points."""
    rounded = np.round(verts / unit, 12)
    _, first, inverse = np.unique(rounded, axis=0, return_index=True, return_inverse=True)
    order = np.sort(first)
    remap = np.empty(len(first), int)
    remap[np.argsort(first)] = np.arange(len(first))
    new_index = remap[inverse.ravel()]
    return verts[order], new_index[segs]


def _size_field(points, controls):
    h = np.full(len(points), controls.max_size)
    for g in controls.grading:
        d = np.hypot(points[:, 0] - g.point[0], points[:, 1] - g.point[1])
        h = np.minimum(h, g.size + g.growth * d)
    if controls.extra is not None:
        h = np.minimum(h, np.asarray(controls.extra(points), float))
    return h


def _graded(out, controls, ropts):
    """Refine until every triangle meets the local size field (a few passes)."""
    for _ in range(12):
        p, t = out["vertices"], out["triangles"]
        cent = p[t].mean(axis=1)
        target = np.sqrt(3) / 4 * _size_field(cent, controls) ** 2
        a = p[t]
        area = 0.5 * np.abs((a[:, 1, 0] - a[:, 0, 0]) * (a[:, 2, 1] - a[:, 0, 1])
                            - (a[:, 2, 0] - a[:, 0, 0]) * (a[:, 1, 1] - a[:, 0, 1]))
        if np.all(area <= 1.2 * target):
            break
        with np.errstate(all="ignore"):
            estimate = float(np.sum(np.maximum(area / target, 1))) * 1.5
        from .resources import MESH_BYTES_PER_TRIANGLE, check_memory

        count = check_size(estimate, "the graded mesh")
        check_memory(count * MESH_BYTES_PER_TRIANGLE,
                     f"the graded mesh (about {count:,} triangles)", "use larger grading sizes")
        out = run_triangle({**out, "triangle_max_area": target}, ropts)
    return out


def _to_mesh(out, tags):
    t = out["triangles"].astype(np.int64)
    p = out["vertices"]
    regions = (out["triangle_attributes"].ravel().astype(int)
               if "triangle_attributes" in out else np.zeros(len(t), int))
    seg = out["segments"].astype(np.int64)
    markers = out["segment_markers"].ravel().astype(int) - _MARKER_OFFSET
    keep = markers >= 0
    return Mesh(p, _ccw(p, t), regions, seg[keep], markers[keep], tags)


def _ccw(p, t):
    a = p[t]
    cross = ((a[:, 1, 0] - a[:, 0, 0]) * (a[:, 2, 1] - a[:, 0, 1])
             - (a[:, 2, 0] - a[:, 0, 0]) * (a[:, 1, 1] - a[:, 0, 1]))
    t = t.copy()
    flip = cross < 0
    t[flip] = t[flip][:, [0, 2, 1]]
    return t
