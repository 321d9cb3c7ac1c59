"""A solved Schwarz-Christoffel map from the upper half-plane onto a polygon.

The map is

    f(w) = f(w_k) + C * integral from w_k to w of  prod_j (t - w_j)**beta_j  dt,

with ``beta_j = alpha_j - 1`` where ``alpha_j * pi`` is the interior angle at
vertex ``j``. One vertex is the image of ``w = infinity``; its prevertex is
dropped from the product. Powers use the branch with ``arg`` in ``[0, pi]`` on
the closed upper half-plane.
"""

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from lapsolve.errors import InputError

from .integral import SCIntegral
from .inverse import locate, start_points
from .parameters import RESIDUAL_LIMIT, solve_parameters
from .polygon import prepare_polygon


@dataclass(frozen=True)
class SCMap:
    """A solved Schwarz-Christoffel map from the upper half-plane onto a polygon.

    Build with :meth:`from_polygon`.

    Attributes
    ----------
    vertices : ndarray of complex, shape (n,)
        The polygon, counter-clockwise (reversed from the input if it was clockwise).
    angles : ndarray, shape (n,)
        Interior angles / pi.
    prevertices : ndarray, shape (n,)
        Prevertex of each vertex; ``inf`` for the vertex at infinity.
    constant : complex
        The factor ``C``.
    residual : float
        Largest of the relative errors of the mapped side lengths, the closure
        error of the mapped polygon (relative to its perimeter) and the errors of
        the mapped side directions (radians).
    infinity_index, origin_index : int
        Vertices (indices into ``vertices``) at ``w = inf`` and ``w = 0``.
    reversed : bool
        True when the input was clockwise.
    integral : SCIntegral
        The evaluator.
    """

    vertices: np.ndarray
    angles: np.ndarray
    prevertices: np.ndarray
    constant: complex
    residual: float
    infinity_index: int
    origin_index: int
    reversed: bool
    integral: SCIntegral

    @classmethod
    def from_polygon(cls, vertices, infinity=None, origin=None, limit=RESIDUAL_LIMIT):
        """Solve the parameter problem for a polygon.

        Parameters
        ----------
        vertices : array_like
            Shape (n, 2) real or (n,) complex; clockwise input is reversed.
        infinity : int, optional
            Index (into the input list) of the vertex mapped from ``w = inf``;
            default the last vertex.
        origin : int, optional
            Index of the vertex mapped from ``w = 0``; default the vertex
            halfway round from ``infinity``.
        limit : float
            Largest accepted side-length residual.

        Returns
        -------
        SCMap

        Raises
        ------
        GeometryError
            Invalid polygon, or a residual above ``limit`` (the message gives it).
        """
        poly = prepare_polygon(vertices)
        n = poly.vertices.size
        infinity = n - 1 if infinity is None else _vertex_index(infinity, n, "infinity")
        origin = (infinity + n // 2) % n if origin is None else _vertex_index(origin, n, "origin")
        if poly.reversed:
            infinity, origin = n - 1 - infinity, n - 1 - origin
        if origin == infinity:
            raise InputError("the origin and infinity vertices must differ")
        solved = solve_parameters(poly, infinity, origin, limit)
        return cls(vertices=poly.vertices, angles=poly.angles,
                   prevertices=solved.prevertices, constant=solved.constant,
                   residual=solved.residual, infinity_index=int(infinity),
                   origin_index=int(origin), reversed=poly.reversed,
                   integral=solved.integral)

    def forward(self, w, anchor=None):
        """Image ``f(w)`` of points of the closed upper half-plane (``anchor + w`` if given)."""
        return self.integral.forward(w, anchor=anchor)

    def derivative(self, w, anchor=None):
        """``f'(w)`` (at ``anchor + w`` if given)."""
        return self.integral.derivative(w, anchor=anchor)

    @cached_property
    def diameter(self):
        """Largest distance between two vertices."""
        z = self.vertices
        return float(np.max(np.abs(z[:, None] - z[None, :])))

    @cached_property
    def edge_of_side(self):
        """Edge index of each side of the integral (finite sides, then the two at infinity)."""
        n = self.vertices.size
        order = (self.infinity_index + 1 + np.arange(n - 1)) % n
        return np.r_[order, self.infinity_index]

    @cached_property
    def start_points(self):
        """Start points of the inverse map (see :func:`inverse.start_points`)."""
        return start_points(self)

    def inverse(self, points):
        """Preimages ``w`` of points inside the polygon or on its boundary.

        Parameters
        ----------
        points : array_like
            Shape (N, 2) real or (N,) complex.

        Returns
        -------
        ndarray of complex, shape (N,)
            Preimages; ``inf`` for points at the vertex mapped from infinity. On a
            slit, a boundary point is taken on the first of its two edges.

        Raises
        ------
        InputError
            A point outside the polygon.
        SolverError
            Newton's method did not reach the tolerance.
        """
        anchor, offset = self.locate(points)
        with np.errstate(invalid="ignore"):
            return np.where(np.isfinite(anchor), anchor + offset, np.inf + 0j)

    def locate(self, points):
        """Preimages as ``anchor + offset`` with ``anchor`` a prevertex near each point.

        Near a sharp corner the preimage crowds onto its prevertex; the offset
        keeps the relative accuracy that ``anchor + offset`` as one number loses.
        Pass both to ``forward``/``derivative`` of this map or of any
        :class:`SCIntegral` whose prevertices are among this map's
        (:func:`inverse.locate` gives the method).

        Returns
        -------
        anchor : ndarray of float, shape (N,)
        offset : ndarray of complex, shape (N,)
        """
        return locate(self, points)


def _vertex_index(value, n, what):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise InputError(f"{what} must be a vertex index, got {value!r}")
    if not 0 <= value < n:
        raise InputError(f"{what} index {value} is out of range for {n} vertices")
    return int(value)
