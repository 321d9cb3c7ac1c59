"""Equipotentials and field lines of a quadrilateral, traced through its two maps.

The canonical rectangle ``[0, M] x [0, 1]`` carries the potential ``Re(zeta) / M``:
its vertical lines are equipotentials, its horizontal lines field lines. A
point ``zeta`` of such a line goes back to the upper half-plane through the
inverse of the rectangle map ``g`` and on to the polygon through the forward
polygon map ``f``: ``z = f(g^{-1}(zeta))``. The inverse of ``g`` is the inverse
Schwarz-Christoffel map of a polygon with four (or five) vertices whatever the
polygon, and the anchors it returns are prevertices of ``f`` as well, so crowded
preimages keep their relative accuracy on the way to the polygon.
"""

from dataclasses import dataclass

import numpy as np

from .map import SCMap

#: Most lines drawn in one family.
MAX_LINES = 40
#: Lines across the short side of the rectangle when the long side allows it.
ACROSS = 10
#: Points per short side of the rectangle along a line, and most points on one line.
DENSITY = 60
MAX_POINTS = 150


@dataclass(frozen=True)
class QuadrilateralLines:
    """Traced curves of a quadrilateral.

    Attributes
    ----------
    spacing : (float, float)
        Steps between neighbouring equipotentials (along ``Re zeta``) and field
        lines (along ``Im zeta``) in the rectangle. When they are equal the
        curves cut the polygon into curvilinear squares.
    equipotentials : list of (float, ndarray of complex)
        ``(u, points)`` for each equipotential ``u = const``.
    field_lines : list of (float, ndarray of complex)
        ``(s, points)`` for each field line; ``s`` in ``(0, 1)`` is the fraction
        of the total flux passing between the arc ``c0 -> c1`` and the line.
    """

    spacing: tuple
    equipotentials: list
    field_lines: list


def rectangle_map(result):
    """The rectangle map ``g`` of a :class:`~verification.modulus.ModulusResult` as an SCMap.

    Its vertices are ``0, M, M + i, i`` (the images of ``c0 .. c3``) and its
    prevertices the polygon map's corner prevertices. When no corner is the
    image of ``w = inf``, the image of infinity is added as a fifth vertex with
    a straight angle on the side it lies on.
    """
    m = result.modulus
    pre = result.map.prevertices[list(result.ccw_corners)]
    vertices = np.array([0.0, m, m + 1j, 1j])
    angles = np.full(4, 0.5)
    if np.all(np.isfinite(pre)):
        after = int(np.argmax(pre)) + 1
        vertices = np.insert(vertices, after, result.rectangle.value_at_infinity)
        angles = np.insert(angles, after, 1.0)
        pre = np.insert(pre, after, np.inf)
    infinity = int(np.flatnonzero(~np.isfinite(pre))[0])
    return SCMap(vertices=vertices, angles=angles, prevertices=pre,
                 constant=result.rectangle.constant, residual=result.residual,
                 infinity_index=infinity, origin_index=(infinity + 2) % vertices.size,
                 reversed=False, integral=result.rectangle)


def line_spacing(modulus, max_lines=MAX_LINES, across=ACROSS):
    """Steps ``(du, ds)`` between equipotentials and field lines in the rectangle.

    Equal steps (curvilinear squares) with ``across`` intervals over the short
    side, fewer when the long side would need more than ``max_lines`` lines;
    beyond an aspect ratio of ``max_lines / 2`` the long side gets its own step.
    """
    short, long = min(modulus, 1.0), max(modulus, 1.0)
    intervals = int(np.clip(max_lines // (long / short), 2, across))
    step_short = short / intervals
    step_long = max(step_short, long / max_lines)
    if modulus >= 1.0:
        return step_long, step_short
    return step_short, step_long


def trace_lines(result, spacing=None, density=DENSITY, max_points=MAX_POINTS):
    """Equipotentials and field lines of a quadrilateral as point sequences.

    Parameters
    ----------
    result : ModulusResult
    spacing : (float, float), optional
        Steps between equipotentials and between field lines in the rectangle;
        default :func:`line_spacing`.
    density : int
        Points per short side of the rectangle along a line.
    max_points : int
        Most points on one line.

    Returns
    -------
    QuadrilateralLines
    """
    m = result.modulus
    du, ds = spacing or line_spacing(m)
    step = min(m, 1.0) / density

    def samples(length):
        return np.linspace(0.0, length, int(np.clip(np.ceil(length / step), 2, max_points)) + 1)

    levels_u = _levels(m, du)
    levels_s = _levels(1.0, ds)
    across, along = samples(1.0), samples(m)
    curves = [x + 1j * across for x in levels_u] + [along + 1j * y for y in levels_s]
    if not curves:
        return QuadrilateralLines((float(du), float(ds)), [], [])
    anchor, offset = rectangle_map(result).locate(np.concatenate(curves))
    z = result.map.forward(offset, anchor=anchor)
    pieces = np.split(z, np.cumsum([c.size for c in curves])[:-1])
    k = len(levels_u)
    return QuadrilateralLines(
        (float(du), float(ds)),
        [(float(x / m), p) for x, p in zip(levels_u, pieces[:k])],
        [(float(y), p) for y, p in zip(levels_s, pieces[k:])])


def _levels(length, spacing):
    """Interior levels ``spacing, 2 spacing, ...`` strictly inside ``(0, length)``."""
    count = int(np.floor(length / spacing + 1e-9))
    levels = spacing * np.arange(1, count + 1)
    return levels[levels < length * (1 - 1e-9)]
