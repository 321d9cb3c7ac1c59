"""Boundary loops (polygons and circles) and the checks that make a valid domain.

A loop is a closed curve: a polygon of straight edges ``i -> i+1`` or a circle,
which counts as a single edge (index 0). Polygons are stored counter-clockwise.
"""

from dataclasses import dataclass

import numpy as np

from .errors import GeometryError

#: Largest number of vertices accepted in one polygon (documented resource limit).
MAX_POLYGON_VERTICES = 5000


@dataclass(frozen=True)
class PolygonLoop:
    """A closed polygon, vertices counter-clockwise, last vertex not repeated.

    ``edge_ids[j]`` is the user's number of the stored edge ``j -> j+1``: a polygon
    given clockwise is stored reversed, but its edges keep the numbers of the input
    order (edge ``i`` joins input vertices ``i`` and ``i+1``). ``None`` means ``j``.
    """

    name: str
    vertices: np.ndarray
    edge_ids: tuple = None

    @property
    def n_edges(self):
        return len(self.vertices)

    def edge_labels(self):
        """User edge number of each stored edge."""
        if self.edge_ids is None:
            return np.arange(len(self.vertices))
        return np.asarray(self.edge_ids, int)

    def edge_points(self, edge):
        """End points of edge ``edge``, in counter-clockwise order."""
        j = int(np.flatnonzero(self.edge_labels() == edge)[0])
        return self.vertices[j], self.vertices[(j + 1) % len(self.vertices)]

    def discretized(self, size=None):
        """Vertices and, per segment, the edge number it belongs to."""
        return self.vertices, self.edge_labels()

    def area(self):
        return polygon_area(self.vertices)

    def bbox(self):
        return self.vertices.min(axis=0), self.vertices.max(axis=0)

    def contains(self, points):
        return points_in_polygon(points, self.vertices)


@dataclass(frozen=True)
class CircleLoop:
    """A circle; meshing places boundary nodes on the true curve."""

    name: str
    center: tuple
    radius: float

    n_edges = 1

    def segment_count(self, size):
        return max(16, int(np.ceil(2 * np.pi * self.radius / size)))

    def discretized(self, size):
        n = self.segment_count(size)
        angle = 2 * np.pi * np.arange(n) / n
        pts = np.column_stack([self.center[0] + self.radius * np.cos(angle),
                               self.center[1] + self.radius * np.sin(angle)])
        return pts, np.zeros(n, dtype=int)

    def area(self):
        return np.pi * self.radius**2

    def bbox(self):
        c = np.asarray(self.center, float)
        return c - self.radius, c + self.radius

    def contains(self, points):
        points = np.atleast_2d(points)
        d = np.hypot(points[:, 0] - self.center[0], points[:, 1] - self.center[1])
        return d < self.radius


def polygon_area(vertices):
    """Signed area (positive when counter-clockwise), shoelace formula."""
    x, y = vertices[:, 0], vertices[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def points_in_polygon(points, vertices):
    """Even-odd rule; points exactly on an edge may fall either way."""
    points = np.atleast_2d(points)
    x, y = points[:, 0][:, None], points[:, 1][:, None]
    x0, y0 = vertices[:, 0][None, :], vertices[:, 1][None, :]
    x1, y1 = np.roll(vertices[:, 0], -1)[None, :], np.roll(vertices[:, 1], -1)[None, :]
    crosses = (y0 > y) != (y1 > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        xint = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
    return np.count_nonzero(crosses & (x < xint), axis=1) % 2 == 1


def distance_to_polygon(points, vertices):
    """Distance from each point to the polygon's boundary."""
    points = np.atleast_2d(points)
    a = vertices[None, :, :]
    b = np.roll(vertices, -1, axis=0)[None, :, :]
    p = points[:, None, :]
    ab = b - a
    t = np.clip(np.sum((p - a) * ab, axis=2) / np.maximum(np.sum(ab * ab, axis=2), 1e-300), 0, 1)
    closest = a + t[..., None] * ab
    return np.min(np.linalg.norm(p - closest, axis=2), axis=1)


def segments_intersect(a0, a1, b0, b1, eps=0.0):
    """Pairwise proper-or-touching intersection test for segment arrays.

    Returns a boolean matrix ``(len(a0), len(b0))``.
    """
    def orient(p, q, r):
        return ((q[..., 0] - p[..., 0]) * (r[..., 1] - p[..., 1])
                - (q[..., 1] - p[..., 1]) * (r[..., 0] - p[..., 0]))

    A0, A1 = a0[:, None, :], a1[:, None, :]
    B0, B1 = b0[None, :, :], b1[None, :, :]
    d1 = orient(B0, B1, A0)
    d2 = orient(B0, B1, A1)
    d3 = orient(A0, A1, B0)
    d4 = orient(A0, A1, B1)
    scale = eps * (np.abs(d1) + np.abs(d2) + np.abs(d3) + np.abs(d4) + 1e-300)
    proper = ((d1 > scale) & (d2 < -scale) | (d1 < -scale) & (d2 > scale)) & \
             ((d3 > scale) & (d4 < -scale) | (d3 < -scale) & (d4 > scale))
    return proper


def make_polygon(name, vertices, source=None, field=None):
    """Validate raw vertices and return a counter-clockwise :class:`PolygonLoop`."""
    try:
        v = np.asarray(vertices, dtype=float)
    except (TypeError, ValueError):
        raise GeometryError("polygon vertices must be a list of [x, y] number pairs",
                            source, field) from None
    if v.ndim != 2 or v.shape[1] != 2:
        raise GeometryError("polygon vertices must be a list of [x, y] number pairs",
                            source, field)
    if len(v) > 1 and np.array_equal(v[0], v[-1]):
        v = v[:-1]  # a closing vertex that repeats the first is accepted
    if len(v) < 3:
        raise GeometryError(f"a polygon needs at least 3 distinct vertices, got {len(v)}",
                            source, field)
    if len(v) > MAX_POLYGON_VERTICES:
        raise GeometryError(f"polygon has {len(v)} vertices; the limit is "
                            f"{MAX_POLYGON_VERTICES}", source, field)
    if not np.all(np.isfinite(v)):
        raise GeometryError("polygon vertices contain NaN or infinite values", source, field)
    nxt = np.roll(v, -1, axis=0)
    seg = np.linalg.norm(nxt - v, axis=1)
    size = float(np.max(np.ptp(v, axis=0)))
    if size == 0 or np.any(seg <= 1e-12 * size):
        i = int(np.argmin(seg))
        raise GeometryError(f"polygon has repeated consecutive vertices at index {i}",
                            source, field)
    area = polygon_area(v)
    if abs(area) <= 1e-12 * size**2:
        _check_crossings(v, source, field)  # a symmetric figure-eight also has zero area
        raise GeometryError("polygon has zero area", source, field)
    _check_simple(v, source, field)
    if area < 0:
        # stored edge j (reversed vertices j -> j+1) is input edge n-2-j
        labels = (len(v) - 2 - np.arange(len(v))) % len(v)
        return PolygonLoop(name, v[::-1].copy(), tuple(int(i) for i in labels))
    return PolygonLoop(name, v)


def make_circle(name, center, radius, source=None, field=None):
    try:
        c = tuple(float(t) for t in center)
        r = float(radius)
    except (TypeError, ValueError):
        raise GeometryError("a circle needs center = [x, y] and a number radius",
                            source, field) from None
    if len(c) != 2 or not np.all(np.isfinite(c)) or not np.isfinite(r):
        raise GeometryError("circle center must be [x, y] with finite numbers", source, field)
    if r <= 0:
        raise GeometryError(f"circle radius must be positive, got {r}", source, field)
    return CircleLoop(name, c, r)


def _check_crossings(v, source, field):
    n = len(v)
    a0, a1 = v, np.roll(v, -1, axis=0)
    hit = segments_intersect(a0, a1, a0, a1, eps=1e-12)
    idx = np.arange(n)
    adjacent = (np.abs(idx[:, None] - idx[None, :]) <= 1) | \
               (np.abs(idx[:, None] - idx[None, :]) == n - 1)
    hit &= ~adjacent
    if np.any(hit):
        i, j = np.argwhere(hit)[0]
        raise GeometryError(f"polygon is self-intersecting: edge {i} crosses edge {j}",
                            source, field)


def _check_simple(v, source, field):
    n = len(v)
    _check_crossings(v, source, field)
    # Collinear overlaps and vertices touching non-adjacent edges also break simplicity.
    touch = _vertex_on_edges(v) & ~adjacent_vertex_edge(n)
    if np.any(touch):
        i, j = np.argwhere(touch)[0]
        raise GeometryError(f"polygon is not simple: vertex {i} lies on edge {j}",
                            source, field)
    # Fold-back of adjacent edges (a spike of zero width) is also invalid.
    d_prev = v - np.roll(v, 1, axis=0)
    d_next = np.roll(v, -1, axis=0) - v
    cross = d_prev[:, 0] * d_next[:, 1] - d_prev[:, 1] * d_next[:, 0]
    dot = np.sum(d_prev * d_next, axis=1)
    scale = np.linalg.norm(d_prev, axis=1) * np.linalg.norm(d_next, axis=1)
    fold = (np.abs(cross) <= 1e-12 * scale) & (dot < 0)
    if np.any(fold):
        raise GeometryError(f"polygon folds back on itself at vertex {int(np.argmax(fold))}",
                            source, field)


def adjacent_vertex_edge(n):
    """Mask of (vertex, edge) pairs where the vertex is an endpoint of the edge."""
    idx = np.arange(n)
    return (idx[:, None] == idx[None, :]) | (idx[:, None] == (idx[None, :] + 1) % n)


def _vertex_on_edges(v, rel=1e-10):
    a = v[None, :, :]
    b = np.roll(v, -1, axis=0)[None, :, :]
    p = v[:, None, :]
    ab = b - a
    t = np.sum((p - a) * ab, axis=2) / np.sum(ab * ab, axis=2)
    closest = a + np.clip(t, 0, 1)[..., None] * ab
    dist = np.linalg.norm(p - closest, axis=2)
    size = float(np.max(np.ptp(v, axis=0)))
    return dist <= rel * size


def loop_inside(inner, outer, allow_touch=False):
    """True when loop ``inner`` lies inside loop ``outer``.

    With ``allow_touch`` the inner loop may share boundary with the outer one
    (material regions along the outer boundary).
    """
    pts = sample_loop(inner)
    inside = outer.contains(pts)
    if allow_touch:
        inside |= distance_to_loop(pts, outer) <= 1e-9 * _scale(outer)
        return bool(np.all(inside))
    return bool(np.all(inside)) and not loops_cross(inner, outer)


def loops_overlap(a, b):
    """True when the interiors of two loops intersect."""
    if loops_cross(a, b):
        return True
    pa, pb = sample_loop(a, interior=True), sample_loop(b, interior=True)
    return bool(np.any(b.contains(pa)) or np.any(a.contains(pb)))


def loops_cross(a, b):
    pa, pb = _as_polygon(a), _as_polygon(b)
    return bool(np.any(segments_intersect(pa, np.roll(pa, -1, axis=0),
                                          pb, np.roll(pb, -1, axis=0), eps=1e-12)))


def distance_to_loop(points, loop):
    if isinstance(loop, CircleLoop):
        d = np.hypot(points[:, 0] - loop.center[0], points[:, 1] - loop.center[1])
        return np.abs(d - loop.radius)
    return distance_to_polygon(points, loop.vertices)


def sample_loop(loop, interior=False):
    """Points on the loop: vertices and edge midpoints; or a few points inside."""
    if interior:
        return np.atleast_2d(interior_point(loop))
    v = _as_polygon(loop)
    return np.vstack([v, 0.5 * (v + np.roll(v, -1, axis=0))])


def interior_point(loop):
    """A point strictly inside the loop (for hole and region seeds)."""
    if isinstance(loop, CircleLoop):
        return np.asarray(loop.center, float)
    import triangle as tr

    v = loop.vertices
    n = len(v)
    seg = np.column_stack([np.arange(n), (np.arange(n) + 1) % n])
    out = tr.triangulate({"vertices": v, "segments": seg}, "pQ")
    tri = out["triangles"]
    p = out["vertices"][tri]
    area = 0.5 * np.abs((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                        - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    return p[int(np.argmax(area))].mean(axis=0)


def _as_polygon(loop):
    if isinstance(loop, CircleLoop):
        return loop.discretized(2 * np.pi * loop.radius / 64)[0]
    return loop.vertices


def _scale(loop):
    lo, hi = loop.bbox()
    return float(np.max(hi - lo))
