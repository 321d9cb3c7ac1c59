"""The triangle mesh exchanged by every stage, its uniform refinement and quality.

``segments`` are the constrained edges (boundary edges and material interfaces);
``segment_tags`` index ``tags``, which say which loop and edge each came from, and
the circle to snap to when the loop is curved.
"""

from dataclasses import dataclass, replace

import numpy as np

from .errors import ResourceLimitError

#: Largest number of triangles a mesh may have (documented resource limit).
MAX_TRIANGLES = 20_000_000


@dataclass(frozen=True)
class EdgeTag:
    """Origin of a constrained edge: ``loop`` name and ``edge`` index."""

    loop: str
    edge: int
    boundary: bool
    circle: tuple = None  # (cx, cy, r) when the edge lies on a circle


@dataclass(frozen=True)
class Mesh:
    points: np.ndarray
    triangles: np.ndarray
    regions: np.ndarray
    segments: np.ndarray
    segment_tags: np.ndarray
    tags: tuple
    level: int = 0
    #: One entry per uniform refinement that produced this mesh: the parent vertex
    #: pairs ``(lo, hi)`` of the new midpoint vertices (geometric multigrid uses them).
    parents: tuple = ()

    @property
    def n_triangles(self):
        return len(self.triangles)

    def h(self):
        """Largest edge length."""
        return float(np.max(_edge_lengths(self.points, self.triangles)))

    def boundary_mask(self):
        """Per segment: True when it lies on the domain boundary."""
        is_bnd = np.array([t.boundary for t in self.tags], bool)
        return is_bnd[self.segment_tags]

    def refined(self, times=1):
        """Split every triangle into four; midpoints of curved edges go onto the curve.

        The size of the final mesh is checked against :data:`MAX_TRIANGLES` and the
        available memory before the first split.
        """
        times = int(times)
        if times > 0:
            from .resources import REFINE_BYTES_PER_TRIANGLE, check_memory

            what = f"{times} uniform refinement(s) of {self.n_triangles:,} triangles"
            final = check_size(self.n_triangles * 4.0**times, what)
            check_memory(final * REFINE_BYTES_PER_TRIANGLE, f"{what} ({final:,} triangles)",
                         "use fewer refinements")
        mesh = self
        for _ in range(times):
            mesh = _refine_once(mesh)
        return mesh

    def with_points(self, points):
        return replace(self, points=points)


def check_size(n_triangles, what="mesh", at_least=False):
    """Refuse a mesh of more than :data:`MAX_TRIANGLES` triangles.

    ``n_triangles`` may be a float estimate (also inf or NaN, from a zero size),
    or a lower bound (``at_least``); returns it as an int when it is within the limit.

    Raises
    ------
    ResourceLimitError
    """
    count = float(n_triangles)
    if not count <= MAX_TRIANGLES:  # also NaN and inf
        shown = f"{count:,.0f}" if count < 1e18 else ("more than 10^18" if count == count
                                                        else "an unbounded number of")
        raise ResourceLimitError(
            f"{what} would have {'at least ' if at_least and count < 1e18 else ''}{shown} "
            f"triangles; the limit is "
            f"{MAX_TRIANGLES:,} "
            "(a P2 solve on that many needs 60 GiB of memory or more); use fewer levels or "
            "a larger element size")
    return int(count)


def _edge_keys(a, b, n):
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    return lo.astype(np.int64) * n + hi


def _refine_once(mesh):
    check_size(4 * mesh.n_triangles, "the refined mesh")
    p, t = mesh.points, mesh.triangles
    n = len(p)
    keys = np.concatenate([_edge_keys(t[:, 0], t[:, 1], n),
                           _edge_keys(t[:, 1], t[:, 2], n),
                           _edge_keys(t[:, 2], t[:, 0], n)])
    uniq, inv = np.unique(keys, return_inverse=True)
    lo, hi = uniq // n, uniq % n
    mid = 0.5 * (p[lo] + p[hi])
    m = len(t)
    m01, m12, m20 = (n + inv[:m], n + inv[m:2 * m], n + inv[2 * m:])
    tri = np.vstack([
        np.column_stack([t[:, 0], m01, m20]),
        np.column_stack([t[:, 1], m12, m01]),
        np.column_stack([t[:, 2], m20, m12]),
        np.column_stack([m01, m12, m20]),
    ])
    seg = mesh.segments
    skeys = _edge_keys(seg[:, 0], seg[:, 1], n)
    smid = n + np.searchsorted(uniq, skeys)
    new_pts = np.vstack([p, mid])
    _snap(new_pts, smid, mesh.segment_tags, mesh.tags)
    segments = np.vstack([np.column_stack([seg[:, 0], smid]),
                          np.column_stack([smid, seg[:, 1]])])
    return Mesh(new_pts, tri, np.tile(mesh.regions, 4), segments,
                np.tile(mesh.segment_tags, 2), mesh.tags, mesh.level + 1,
                mesh.parents + ((lo, hi),))


def _snap(points, nodes, node_tags, tags):
    """Move ``points[nodes]`` radially onto the circle of their tag, in place."""
    for k, tag in enumerate(tags):
        if tag.circle is None:
            continue
        sel = nodes[node_tags == k]
        cx, cy, r = tag.circle
        d = points[sel] - (cx, cy)
        points[sel] = (cx, cy) + r * d / np.linalg.norm(d, axis=1)[:, None]


def snap_to_curves(mesh):
    """A mesh whose curved-segment nodes lie exactly on their circles."""
    pts = mesh.points.copy()
    for end in (0, 1):
        _snap(pts, mesh.segments[:, end], mesh.segment_tags, mesh.tags)
    return mesh.with_points(pts)


def _edge_lengths(p, t):
    return np.linalg.norm(p[t] - p[np.roll(t, -1, axis=1)], axis=2)


def quality(mesh):
    """Angles (degrees), worst aspect ratio and element count.

    Aspect ratio is circumradius / (2 inradius): 1 for an equilateral triangle.
    """
    p, t = mesh.points, mesh.triangles
    e = _edge_lengths(p, t)  # e[:, i] = |v_i v_{i+1}|
    a, b, c = e[:, 1], e[:, 2], e[:, 0]  # opposite to vertices 0, 1, 2
    cosines = np.column_stack([(b**2 + c**2 - a**2) / (2 * b * c),
                               (a**2 + c**2 - b**2) / (2 * a * c),
                               (a**2 + b**2 - c**2) / (2 * a * b)])
    angles = np.degrees(np.arccos(np.clip(cosines, -1, 1)))
    s = 0.5 * (a + b + c)
    area = np.sqrt(np.maximum(s * (s - a) * (s - b) * (s - c), 0))
    with np.errstate(divide="ignore", invalid="ignore"):
        aspect = (a * b * c / (4 * area)) / (2 * area / s)
    return {
        "elements": int(len(t)),
        "vertices": int(len(p)),
        "min_angle_deg": float(angles.min()),
        "max_angle_deg": float(angles.max()),
        "worst_aspect_ratio": float(np.max(aspect)),
        "h_max": float(e.max()),
        "h_min": float(e.min()),
    }
