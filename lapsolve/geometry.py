"""Boundary loops (polygons and circles) and the checks that make a valid domain.

A loop is a closed curve: a polygon of straight edges ``i -> i+1`` or a circle,
which counts as a single edge (index 0). Polygons are stored counter-clockwise.
"""

import contextlib
import logging
import os
import sys
import tempfile
from dataclasses import dataclass

import numpy as np

from .errors import GeometryError, ResourceLimitError

#: Largest number of vertices accepted in one polygon (documented resource limit).
MAX_POLYGON_VERTICES = 5000
#: Largest accepted absolute value of a coordinate or radius: squares and products
#: of coordinates then stay far from overflow (documented limit).
MAX_COORDINATE = 1e12
#: Smallest accepted size of a loop (its bounding box's larger side); with
#: MAX_COORDINATE it keeps the mesher's geometric predicates (products of up to
#: four coordinate differences) clear of underflow and overflow.
MIN_EXTENT = 1e-12
#: Smallest accepted size of a loop relative to its largest coordinate: below it
#: double precision leaves fewer than about 7 digits to describe the shape.
MIN_RELATIVE_EXTENT = 1e-9
#: Smallest accepted size of a hole or region relative to the outer boundary.
MIN_RELATIVE_FEATURE = 1e-8
#: Pairwise checks of n edges work on blocks of at most this many pairs, so that
#: their memory stays bounded for the largest polygons.
_BLOCK = 1 << 20

log = logging.getLogger(__name__)


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
    """Signed area (positive when counter-clockwise), shoelace formula.

    Coordinates are taken relative to the bounding box's corner first: far from the
    origin the products cancel catastrophically, and the corner (unlike a mean) is
    the same whatever the vertex order, so both orientations give the same area.
    """
    v = vertices - vertices.min(axis=0)
    x, y = v[:, 0], v[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def points_in_polygon(points, vertices):
    """Even-odd rule; points exactly on an edge may fall either way."""
    points = np.atleast_2d(points)
    x0, y0 = vertices[:, 0][None, :], vertices[:, 1][None, :]
    x1, y1 = np.roll(vertices[:, 0], -1)[None, :], np.roll(vertices[:, 1], -1)[None, :]
    inside = np.zeros(len(points), bool)
    for rows in _blocks(len(points), len(vertices)):
        x, y = points[rows, 0][:, None], points[rows, 1][:, None]
        crosses = (y0 > y) != (y1 > y)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            xint = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
        inside[rows] = np.count_nonzero(crosses & (x < xint), axis=1) % 2 == 1
    return inside


def distance_to_polygon(points, vertices):
    """Distance from each point to the polygon's boundary."""
    points = np.atleast_2d(points)
    a = vertices[None, :, :]
    ab = np.roll(vertices, -1, axis=0)[None, :, :] - a
    length2 = np.maximum(np.sum(ab * ab, axis=2), 1e-300)
    out = np.empty(len(points))
    for rows in _blocks(len(points), len(vertices)):
        p = points[rows, None, :]
        t = np.clip(np.sum((p - a) * ab, axis=2) / length2, 0, 1)
        closest = a + t[..., None] * ab
        out[rows] = np.min(np.linalg.norm(p - closest, axis=2), axis=1)
    return out


def segments_intersect(a0, a1, b0, b1, eps=0.0):
    """Pairwise proper-or-touching intersection test for segment arrays.

    Returns a boolean matrix ``(len(a0), len(b0))``. Only pairs whose bounding
    boxes overlap are tested, block by block, so memory stays bounded.
    """
    a0, a1 = np.asarray(a0, float), np.asarray(a1, float)
    b0, b1 = np.asarray(b0, float), np.asarray(b1, float)
    hit = np.zeros((len(a0), len(b0)), bool)
    alo, ahi = np.minimum(a0, a1), np.maximum(a0, a1)
    blo, bhi = np.minimum(b0, b1), np.maximum(b0, b1)
    for rows in _blocks(len(a0), len(b0)):
        near = ((alo[rows, None, 0] <= bhi[None, :, 0]) & (blo[None, :, 0] <= ahi[rows, None, 0])
                & (alo[rows, None, 1] <= bhi[None, :, 1])
                & (blo[None, :, 1] <= ahi[rows, None, 1]))
        i, j = np.nonzero(near)
        i += rows.start
        hit[i, j] = _proper_crossings(a0[i], a1[i], b0[j], b1[j], eps)
    return hit


def _blocks(n_rows, n_cols):
    step = max(1, _BLOCK // max(n_cols, 1))
    return [slice(start, min(start + step, n_rows)) for start in range(0, n_rows, step)]


def _proper_crossings(a0, a1, b0, b1, eps):
    """Element-wise proper crossing of segments ``a0-a1`` and ``b0-b1``."""
    def orient(p, q, r):
        return ((q[..., 0] - p[..., 0]) * (r[..., 1] - p[..., 1])
                - (q[..., 1] - p[..., 1]) * (r[..., 0] - p[..., 0]))

    d1 = orient(b0, b1, a0)
    d2 = orient(b0, b1, a1)
    d3 = orient(a0, a1, b0)
    d4 = orient(a0, a1, b1)
    scale = eps * (np.abs(d1) + np.abs(d2) + np.abs(d3) + np.abs(d4) + 1e-300)
    return (((d1 > scale) & (d2 < -scale) | (d1 < -scale) & (d2 > scale))
            & ((d3 > scale) & (d4 < -scale) | (d3 < -scale) & (d4 > scale)))


def _coordinates(vertices, source, field):
    """Vertices as an (n, 2) float array; lists must hold [x, y] pairs of numbers."""
    shape_error = GeometryError("polygon vertices must be a list of [x, y] number pairs",
                                source, field)
    if isinstance(vertices, (list, tuple)):
        if len(vertices) > MAX_POLYGON_VERTICES + 1:  # before converting anything
            raise ResourceLimitError(f"polygon has {len(vertices)} vertices; the limit is "
                                     f"{MAX_POLYGON_VERTICES}", source, field)
        for pair in vertices:
            if not isinstance(pair, (list, tuple, np.ndarray)) or len(pair) != 2 or not all(
                    isinstance(c, (int, float, np.integer, np.floating))
                    and not isinstance(c, (bool, np.bool_)) for c in pair):
                raise shape_error
    try:
        v = np.asarray(vertices, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise shape_error from None
    if v.ndim != 2 or v.shape[1] != 2:
        raise shape_error
    return v


def check_coordinates(values, what, source=None, field=None):
    """Refuse NaN, infinite and too large coordinates (:data:`MAX_COORDINATE`)."""
    values = np.asarray(values, float)
    if not np.all(np.isfinite(values)):
        raise GeometryError(f"{what} contain NaN or infinite values", source, field)
    largest = float(np.max(np.abs(values))) if values.size else 0.0
    if largest > MAX_COORDINATE:
        raise GeometryError(f"{what} reach {largest:.3g}; coordinates and radii are limited to "
                            f"{MAX_COORDINATE:.0e} in absolute value (use other units)",
                            source, field)
    return largest


def check_extent(extent, largest, what, source=None, field=None):
    """Refuse a shape too small to be described in double precision where it lies."""
    if 0 < extent < MIN_EXTENT:
        raise GeometryError(f"{what} is {extent:.3g} across; shapes must be at least "
                            f"{MIN_EXTENT:.0e} across (use other units)", source, field)
    if extent > 0 and not extent > MIN_RELATIVE_EXTENT * largest:
        raise GeometryError(f"{what} is {extent:.3g} across but lies {largest:.3g} from the "
                            f"origin; a shape must be at least {MIN_RELATIVE_EXTENT:.0e} of its "
                            "distance from the origin (shift the coordinates)", source, field)


def make_polygon(name, vertices, source=None, field=None):
    """Validate raw vertices and return a counter-clockwise :class:`PolygonLoop`."""
    v = _coordinates(vertices, source, field)
    if len(v) > 1 and np.array_equal(v[0], v[-1]):
        v = v[:-1]  # a closing vertex that repeats the first is accepted
    if len(v) < 3:
        raise GeometryError(f"a polygon needs at least 3 distinct vertices, got {len(v)}",
                            source, field)
    if len(v) > MAX_POLYGON_VERTICES:
        raise ResourceLimitError(f"polygon has {len(v)} vertices; the limit is "
                                 f"{MAX_POLYGON_VERTICES}", source, field)
    largest = check_coordinates(v, "polygon vertices", source, field)
    check_extent(float(np.max(np.ptp(v, axis=0))), largest, "the polygon", source, field)
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
    except (TypeError, ValueError, OverflowError):
        raise GeometryError("a circle needs center = [x, y] and a number radius",
                            source, field) from None
    if len(c) != 2 or not np.all(np.isfinite(c)) or not np.isfinite(r):
        raise GeometryError("circle center must be [x, y] with finite numbers", source, field)
    if r <= 0:
        raise GeometryError(f"circle radius must be positive, got {r}", source, field)
    largest = check_coordinates([*c, r], "circle center and radius", source, field)
    check_extent(2 * r, largest, "the circle", source, field)
    return CircleLoop(name, c, r)


def check_feature_size(loop, outer, source=None, field=None):
    """Refuse a hole or region far smaller than the domain (:data:`MIN_RELATIVE_FEATURE`)."""
    size, domain = _scale(loop), _scale(outer)
    if size < MIN_RELATIVE_FEATURE * domain:
        raise GeometryError(f"'{loop.name}' is {size:.3g} across, less than "
                            f"{MIN_RELATIVE_FEATURE:.0e} of the domain ({domain:.3g}); the "
                            "mesher cannot resolve both scales in double precision",
                            source, field)


def _check_crossings(v, source, field):
    n = len(v)
    a0, a1 = v, np.roll(v, -1, axis=0)
    hit = segments_intersect(a0, a1, a0, a1, eps=1e-12)
    same = np.eye(n, dtype=bool)
    hit &= ~(same | np.roll(same, 1, axis=1) | np.roll(same, -1, axis=1))
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
    """Mask (vertex, edge) of vertices within ``rel`` times the size of an edge."""
    size = float(np.max(np.ptp(v, axis=0)))
    tol = rel * size
    b = np.roll(v, -1, axis=0)
    lo, hi = np.minimum(v, b) - tol, np.maximum(v, b) + tol
    near = np.zeros((len(v), len(v)), bool)
    for rows in _blocks(len(v), len(v)):
        p = v[rows, None, :]
        close = np.all((p >= lo[None]) & (p <= hi[None]), axis=2)
        i, j = np.nonzero(close)
        i += rows.start
        ab = b[j] - v[j]
        t = np.sum((v[i] - v[j]) * ab, axis=1) / np.sum(ab * ab, axis=1)
        closest = v[j] + np.clip(t, 0, 1)[:, None] * ab
        near[i, j] = np.linalg.norm(v[i] - closest, axis=1) <= tol
    return near


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
    v = loop.vertices
    n = len(v)
    seg = np.column_stack([np.arange(n), (np.arange(n) + 1) % n])
    out = run_triangle({"vertices": v, "segments": seg}, "pQ")
    tri = out["triangles"]
    p = out["vertices"][tri]
    area = 0.5 * np.abs((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                        - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    return p[int(np.argmax(area))].mean(axis=0)


@contextlib.contextmanager
def _captured_c_stdout(sink):
    """Collect what C code prints on file descriptor 1 into ``sink`` (a list).

    triangle prints its errors ("Ran out of precision ...") with printf; they
    belong in the log and in the error message, not on the user's terminal.
    """
    try:
        sys.stdout.flush()
        saved = os.dup(1)
    except (OSError, ValueError, AttributeError):
        yield  # no usable descriptor 1 (embedded interpreters): leave it alone
        return
    with tempfile.TemporaryFile() as tmp:
        os.dup2(tmp.fileno(), 1)
        try:
            yield
        finally:
            _flush_c_stdio()
            os.dup2(saved, 1)
            os.close(saved)
            tmp.seek(0)
            text = tmp.read().decode("utf-8", "replace").strip()
            if text:
                log.debug("triangle printed: %s", text)
                sink.append(text)


def _flush_c_stdio():
    with contextlib.suppress(Exception):
        import ctypes

        ctypes.CDLL(None).fflush(None)


def run_triangle(data, switches):
    """``triangle.triangulate`` with its failures turned into a :class:`GeometryError`."""
    import triangle

    printed = []
    try:
        with _captured_c_stdout(printed):
            return triangle.triangulate(data, switches)
    except (RuntimeError, ValueError, MemoryError) as exc:
        said = " ".join(" ".join(printed).split())[:240]
        detail = f" (the mesher said: {said})" if said else f" ({exc})"
        if isinstance(exc, MemoryError):
            raise ResourceLimitError(f"the mesher ran out of memory{detail}") from None
        raise GeometryError("the mesher could not triangulate the domain: features too "
                            "small or too thin for double precision relative to the "
                            f"domain, or a size field too fine{detail}") from None


def _as_polygon(loop):
    if isinstance(loop, CircleLoop):
        return loop.discretized(2 * np.pi * loop.radius / 64)[0]
    return loop.vertices


def _scale(loop):
    lo, hi = loop.bbox()
    return float(np.max(hi - lo))
