"""Polygon input for Schwarz-Christoffel maps: checks, orientation and interior angles."""

import logging
from dataclasses import dataclass

import numpy as np

from lapsolve.errors import GeometryError, InputError

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class Polygon:
    """A checked polygon, counter-clockwise.

    Attributes
    ----------
    vertices : ndarray of complex, shape (n,)
        Vertices in counter-clockwise order.
    angles : ndarray of float, shape (n,)
        Interior angles divided by pi, in ``(0, 2]`` (2 at the tip of a slit).
    reversed : bool
        True when the input was clockwise and has been reversed.
    """

    vertices: np.ndarray
    angles: np.ndarray
    reversed: bool


def as_complex(points, what="vertices"):
    """Return ``points`` (shape (n, 2) real or (n,) complex) as complex (n,)."""
    arr = np.asarray(points)
    if np.iscomplexobj(arr):
        z = arr.astype(complex).ravel()
    else:
        arr = np.asarray(arr, dtype=float)
        if arr.ndim == 1 and arr.size == 2:
            arr = arr.reshape(1, 2)
        if arr.ndim != 2 or arr.shape[1] != 2:
            raise InputError(f"{what} must have shape (n, 2), got {arr.shape}")
        z = arr[:, 0] + 1j * arr[:, 1]
    if not np.all(np.isfinite(z)):
        raise InputError(f"{what} contain a non-finite number")
    return z


def _cross(a, b):
    return a.real * b.imag - a.imag * b.real


def prepare_polygon(vertices):
    """Check a polygon and return it counter-clockwise with its interior angles.

    Parameters
    ----------
    vertices : array_like
        Shape (n, 2) real or (n,) complex. The closing vertex is not repeated.

    Returns
    -------
    Polygon

    Raises
    ------
    GeometryError
        Fewer than 3 vertices, repeated consecutive vertices, zero area, crossing
        edges, or turning angles that do not add up to one full turn.
    """
    z = as_complex(vertices)
    n = z.size
    if n < 3:
        raise GeometryError(f"a polygon needs at least 3 vertices, got {n}")
    scale = np.max(np.abs(z - z.mean()))
    edges = np.roll(z, -1) - z
    short = np.flatnonzero(np.abs(edges) <= 1e-14 * scale)
    if short.size:
        i = int(short[0])
        raise GeometryError(f"consecutive vertices {i} and {(i + 1) % n} coincide")
    area = 0.5 * np.sum(_cross(z, np.roll(z, -1)))
    if abs(area) <= 1e-14 * scale**2:
        raise GeometryError("the polygon has zero area")
    _check_edges(z, scale)
    flipped = area < 0
    if flipped:
        log.info("polygon given clockwise; vertices reversed to counter-clockwise")
        z = z[::-1].copy()
        edges = np.roll(z, -1) - z
    incoming = np.roll(edges, 1)
    turn = np.angle(edges / incoming)
    tip = (np.abs(_cross(incoming, edges)) <= 1e-13 * np.abs(incoming) * np.abs(edges)) & (
        (incoming.real * edges.real + incoming.imag * edges.imag) < 0)
    # A boundary that doubles back is the tip of a slit: interior angle 2*pi.
    turn = np.where(tip, -np.pi, turn)
    total = turn.sum() / (2 * np.pi)
    if abs(total - 1.0) > 1e-9:
        raise GeometryError(
            f"the boundary turns {total:.6g} times instead of once: the polygon is not simple")
    return Polygon(vertices=z, angles=1.0 - turn / np.pi, reversed=bool(flipped))


def _check_edges(z, scale):
    """Refuse crossing or same-direction overlapping edges (slits are allowed)."""
    n = z.size
    a, b = z, np.roll(z, -1)
    i, j = np.triu_indices(n, k=2)
    keep = ~((i == 0) & (j == n - 1))
    i, j = i[keep], j[keep]
    if i.size == 0:
        return
    tol = 1e-12 * scale * scale
    da, db = b[i] - a[i], b[j] - a[j]
    o1, o2 = _cross(da, a[j] - a[i]), _cross(da, b[j] - a[i])
    o3, o4 = _cross(db, a[i] - a[j]), _cross(db, b[i] - a[j])
    proper = (o1 * o2 < 0) & (o3 * o4 < 0) & (np.minimum.reduce(
        [abs(o1), abs(o2), abs(o3), abs(o4)]) > tol)
    if np.any(proper):
        k = int(np.flatnonzero(proper)[0])
        raise GeometryError(f"the polygon is not simple: edges {i[k]} and {j[k]} cross")
    collinear = np.maximum.reduce([abs(o1), abs(o2), abs(o3), abs(o4)]) <= tol
    for k in np.flatnonzero(collinear):
        p, q = i[k], j[k]
        unit = (b[p] - a[p]) / abs(b[p] - a[p])
        s = ((np.array([a[q], b[q]]) - a[p]) / unit).real
        overlap = min(abs(b[p] - a[p]), s.max()) - max(0.0, s.min())
        if overlap <= 1e-12 * scale:
            continue
        same = (unit.conjugate() * (b[q] - a[q])).real > 0
        probe = a[p] + unit * (max(0.0, s.min()) + 0.5 * overlap) + 1e-7 * scale * 1j * unit
        if same or winding_number(np.array([probe]), z)[0] == 0:
            raise GeometryError(f"edges {p} and {q} of the polygon overlap")


def winding_number(points, z):
    """Winding number of the closed polygon ``z`` around each of ``points``."""
    a = z[None, :]
    b = np.roll(z, -1)[None, :]
    p = points[:, None]
    up = (a.imag <= p.imag) & (b.imag > p.imag)
    down = (a.imag > p.imag) & (b.imag <= p.imag)
    side = _cross(b - a, p - a)
    return np.sum(up & (side > 0), axis=1) - np.sum(down & (side < 0), axis=1)


def point_segment_distance(p, a, b):
    d = b - a
    t = np.clip(((p - a) * d.conjugate()).real / np.maximum(abs(d) ** 2, 1e-300), 0.0, 1.0)
    return abs(p - (a + t * d))


def segment_distance(p, q, a, b):
    """Distance between segments [p, q] and [a, b] (broadcast)."""
    d1, d2 = _cross(q - p, a - p), _cross(q - p, b - p)
    d3, d4 = _cross(b - a, p - a), _cross(b - a, q - a)
    crossing = (d1 * d2 < 0) & (d3 * d4 < 0)
    dist = np.minimum.reduce([
        point_segment_distance(p, a, b), point_segment_distance(q, a, b),
        point_segment_distance(a, p, q), point_segment_distance(b, p, q)])
    return np.where(crossing, 0.0, dist)



def doubled_edges(z):
    """Pairs of edges that run along the same segment in opposite directions (slits).

    Parameters
    ----------
    z : ndarray of complex, shape (n,)
        A polygon accepted by :func:`prepare_polygon`.

    Returns
    -------
    list of (int, int)
        Edge pairs ``(i, j)``, ``i < j``; edge ``k`` joins vertices ``k`` and ``k + 1``.
    """
    n = z.size
    a, b = z, np.roll(z, -1)
    i, j = np.triu_indices(n, k=1)
    scale = np.max(np.abs(z - z.mean()))
    tol = 1e-12 * scale * scale
    da, db = b[i] - a[i], b[j] - a[j]
    collinear = np.maximum(abs(_cross(da, a[j] - a[i])), abs(_cross(da, b[j] - a[i]))) <= tol
    opposite = (da.conjugate() * db).real < 0
    pairs = []
    for p, q in zip(i[collinear & opposite], j[collinear & opposite]):
        unit = (b[p] - a[p]) / abs(b[p] - a[p])
        s = ((np.array([a[q], b[q]]) - a[p]) / unit).real
        if min(abs(b[p] - a[p]), s.max()) - max(0.0, s.min()) > 1e-12 * scale:
            pairs.append((int(p), int(q)))
    return pairs
