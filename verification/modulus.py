"""Conformal modulus of a polygonal quadrilateral, its capacitance and exact potential.

Convention: the quadrilateral ``Q(c0, c1, c2, c3)`` maps conformally onto the
rectangle ``[0, M] x [0, 1]`` with ``c0 -> 0``, ``c1 -> M``, ``c2 -> M + i`` and
``c3 -> i``. The arc ``c3 -> c0`` is the electrode at potential 0, the arc
``c1 -> c2`` the electrode at potential 1; the arcs ``c0 -> c1`` and ``c2 -> c3``
are insulated. A rectangle ``L x H`` with corners listed from the origin
counter-clockwise has ``M = L / H``.

The polygon is mapped from the upper half-plane (``SCMap``); the four corner
prevertices then give ``M`` through the cross-ratio and complete elliptic
integrals, and the rectangle itself is a second Schwarz-Christoffel integral
with four right angles at the corner prevertices. :func:`reciprocal_check`
maps the conjugate quadrilateral independently as an outside error estimate.
"""

import logging
from dataclasses import dataclass, field

import numpy as np
from scipy.special import ellipk, ellipkm1

from lapsolve.errors import GeometryError, InputError
from verification.schwarz_christoffel import (
    RESIDUAL_LIMIT,
    SCIntegral,
    SCMap,
    as_complex,
    prepare_polygon,
)

log = logging.getLogger(__name__)


def _complete_k(m, m1):
    """K at parameter ``m`` given both ``m`` and ``m1 = 1 - m`` computed accurately."""
    return np.where(m <= 0.5, ellipk(np.minimum(m, 0.5)), ellipkm1(np.minimum(m1, 0.5)))


def cross_ratios(prevertices):
    """Cross-ratios ``(rho, sigma)`` of four points in cyclic order on the real line.

    ``rho = (b-a)(d-c) / ((c-a)(d-b))`` and ``sigma = (c-b)(d-a) / ((c-a)(d-b))``,
    with ``rho + sigma = 1``; each is computed directly so the smaller keeps its
    relative accuracy. One point may be ``inf`` (its factors cancel).
    """
    a, b, c, d = (float(p) for p in prevertices)

    def gap(p, q):
        return 1.0 if np.isinf(p) or np.isinf(q) else abs(q - p)

    den = gap(a, c) * gap(b, d)
    return gap(a, b) * gap(c, d) / den, gap(b, c) * gap(a, d) / den


def uhp_modulus(prevertices):
    """Modulus of the upper half-plane as a quadrilateral with corners at ``prevertices``.

    ``M = K(rho) / K(sigma)`` (parameter convention, ``m = k**2``), which for the
    symmetric corners ``(-1/k, -1, 1, 1/k)`` is ``K'(k) / (2 K(k))``.

    Parameters
    ----------
    prevertices : sequence of 4 floats
        Corner prevertices ``(c0, c1, c2, c3)`` in increasing cyclic order on
        the extended real line; one may be ``inf``.
    """
    rho, sigma = cross_ratios(prevertices)
    return float(_complete_k(rho, sigma) / _complete_k(sigma, rho))


@dataclass(frozen=True)
class ModulusResult:
    """Modulus of a polygonal quadrilateral and what follows from it.

    Attributes
    ----------
    modulus : float
        Conformal modulus ``M``.
    capacitance : float
        Capacitance per unit length ``eps / M``.
    resistance : float
        Resistance ``rho_s * M`` of a sheet with sheet resistance ``rho_s``.
    residual : float
        Accuracy estimate: the larger of the side-length residual of the
        Schwarz-Christoffel map and the mismatch of the rectangle map's sides.
    corners : tuple of int
        The corner indices as given.
    ccw_corners : tuple of int
        The corners as indices into ``map.vertices`` (counter-clockwise), in the
        order ``(c0, c1, c2, c3)`` of the convention.
    eps, rho_s : float
        Permittivity and sheet resistance used.
    map : SCMap
        The polygon map (vertices counter-clockwise).
    rectangle : SCIntegral
        Map from the upper half-plane onto ``[0, M] x [0, 1]``.
    """

    modulus: float
    capacitance: float
    resistance: float
    residual: float
    corners: tuple
    ccw_corners: tuple
    eps: float
    rho_s: float
    map: SCMap
    rectangle: SCIntegral
    _located: dict = field(default_factory=dict, repr=False, compare=False)

    def locate(self, points):
        """Preimages ``anchor + offset`` of points under the polygon map (cached).

        The last two point sets are kept: norms ask for ``u`` and ``grad u`` at
        the same quadrature points, and the inverse map is the costly part.
        """
        z = as_complex(points, "points")
        key = z.tobytes()
        found = self._located.get(key)
        if found is None:
            found = self.map.locate(z)
            if len(self._located) >= 2:
                self._located.pop(next(iter(self._located)))
            self._located[key] = found
        return found

    def complex_potential(self, points):
        """``h = g(w(z)) / M``: real part the potential, imaginary part its conjugate.

        ``Im h`` runs from 0 on the insulated arc ``c0 -> c1`` to ``1 / M`` on
        the arc ``c2 -> c3``; its level lines are the field lines.
        """
        anchor, offset = self.locate(points)
        return self.rectangle.forward(offset, anchor=anchor) / self.modulus

    def potential(self, points):
        """Potential (0 on arc c3->c0, 1 on arc c1->c2) at points of the closed polygon.

        Parameters
        ----------
        points : array_like
            Shape (N, 2) or (N,) complex.

        Returns
        -------
        ndarray, shape (N,)
        """
        return self.complex_potential(points).real

    def gradient(self, points):
        """Gradient of the potential, shape (N, 2); reliable at interior points.

        ``u = Re h`` with ``h = R(w(z)) / M``, so ``u_x - i u_y = R'(w) / (M f'(w))``.
        At a vertex the gradient is 0, infinite or undefined.
        """
        anchor, offset = self.locate(points)
        with np.errstate(divide="ignore", invalid="ignore"):
            dh = (self.rectangle.derivative(offset, anchor=anchor)
                  / (self.modulus * self.map.derivative(offset, anchor=anchor)))
        return np.column_stack([dh.real, -dh.imag])


def quadrilateral_modulus(vertices, corners, eps=1.0, rho_s=1.0, limit=RESIDUAL_LIMIT,
                          normalisation=None):
    """Conformal modulus of a polygon with four marked corners.

    Parameters
    ----------
    vertices : array_like
        Shape (n, 2) real or (n,) complex; a simply connected polygon (holes are
        refused by the caller). Clockwise input is accepted.
    corners : sequence of 4 int
        Vertex indices ``(c0, c1, c2, c3)`` in the order of the vertex list.
    eps : float
        Permittivity for the capacitance.
    rho_s : float
        Sheet resistance for the resistance.
    limit : float
        Largest accepted side-length residual of the map.
    normalisation : (int, int), optional
        Vertex indices (in the input list) sent to ``w = inf`` and ``w = 0``.
        Default: ``(c0, c1)`` when the insulated arcs are longer than the
        electrodes, else ``(c1, c2)``; the other choice is tried if the first fails.

    Returns
    -------
    ModulusResult

    Raises
    ------
    GeometryError
        Invalid polygon, or a map that does not reach ``limit``.
    InputError
        Bad corners or non-positive material constants.
    """
    poly = prepare_polygon(vertices)
    n = poly.vertices.size
    ccw = _ccw_corners(corners, n, poly.reversed)
    for name, value in (("eps", eps), ("rho_s", rho_s)):
        try:
            ok = bool(np.isfinite(float(value)) and float(value) > 0)
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise InputError(f"{name} must be a positive number, got {value!r}")
    z = poly.vertices
    c0, c1, c2, c3 = ccw
    # Put the electrode-0 end at infinity and the electrode-1 end at 0 for a long
    # quadrilateral; swap the roles for a wide one (see docs/modulus.md).
    normal = (c0, c1) if _arc_ratio(z, ccw) >= 1.0 else (c1, c2)
    tries = [normal, (c1, c2) if normal == (c0, c1) else (c0, c1)]
    if normalisation is not None:
        pair = [_vertex_index(i, n) for i in normalisation]
        if poly.reversed:
            pair = [n - 1 - i for i in pair]
        tries = [tuple(pair)]
    failure = None
    for infinity, origin in tries:
        try:
            sc = SCMap.from_polygon(z, infinity=infinity, origin=origin, limit=limit)
            break
        except GeometryError as exc:
            failure = exc
            log.info("normalisation (inf=%d, 0=%d) failed: %s", infinity, origin, exc)
    else:
        raise failure
    pre = sc.prevertices[list(ccw)]
    modulus = uhp_modulus(pre)
    rectangle, mismatch = _rectangle_map(pre, modulus)
    residual = max(sc.residual, mismatch)
    if residual > limit:
        raise GeometryError(
            f"modulus not accurate: residual {residual:.1e} exceeds {limit:.0e}")
    return ModulusResult(modulus=modulus, capacitance=eps / modulus, resistance=rho_s * modulus,
                         residual=residual, corners=tuple(int(c) for c in corners),
                         ccw_corners=tuple(int(c) for c in ccw), eps=eps, rho_s=rho_s, map=sc,
                         rectangle=rectangle)


def _vertex_index(value, n):
    """Check one vertex index."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not 0 <= value < n:
        raise InputError(f"vertex index {value!r} is not in 0..{n - 1}")
    return int(value)


def _ccw_corners(corners, n, flipped):
    try:
        cs = [c for c in corners]
    except TypeError:
        raise InputError("corners must be four vertex indices") from None
    if len(cs) != 4 or any(isinstance(c, bool) or not isinstance(c, (int, np.integer))
                           for c in cs):
        raise InputError(f"corners must be four vertex indices, got {corners!r}")
    cs = [int(c) for c in cs]
    if any(not 0 <= c < n for c in cs):
        raise InputError(f"corner index out of range for {n} vertices: {cs}")
    if len(set(cs)) != 4:
        raise InputError(f"corners must be four distinct vertices, got {cs}")
    steps = sum((cs[(i + 1) % 4] - cs[i]) % n for i in range(4))
    if steps != n:
        raise InputError(f"corners {cs} are not in the order of the boundary")
    if flipped:
        return tuple(n - 1 - c for c in cs[::-1])
    return tuple(cs)


def _arc_ratio(z, corners):
    """Length of the insulated arcs over that of the electrodes (a rough M)."""
    n = z.size
    sides = np.abs(np.roll(z, -1) - z)

    def arc(i, j):
        return sides[(i + np.arange((j - i) % n)) % n].sum()

    c0, c1, c2, c3 = corners
    return (arc(c0, c1) + arc(c2, c3)) / (arc(c1, c2) + arc(c3, c0))


def _rectangle_map(pre, modulus):
    """Map of the upper half-plane onto [0, M] x [0, 1] with the corners at ``pre``.

    Returns the integral and the largest relative mismatch of its sides.
    """
    images = np.array([0.0, modulus, modulus + 1j, 1j])
    finite = np.isfinite(pre)
    order = np.argsort(np.where(finite, pre, np.inf))[: int(finite.sum())]
    w = pre[order]
    exps = np.full(w.size, -0.5)
    trial = SCIntegral(w, exps, 1.0 + 0j, np.zeros(w.size, complex), 0j)
    mant, scale = trial.side_integrals()
    sides = mant * np.exp(scale)
    vals = images[order]
    constant = (vals[1] - vals[0]) / sides[0]
    if finite.all():
        at_inf = vals[-1] + constant * sides[w.size - 1]
    else:
        at_inf = images[int(np.flatnonzero(~finite)[0])]
    ring = np.r_[vals, at_inf]
    expected = np.roll(ring, -1) - ring
    mismatch = float(np.max(np.abs(constant * sides - expected) / np.abs(expected)))
    integ = SCIntegral(w, exps, complex(constant), vals.astype(complex), complex(at_inf))
    if not np.isfinite(mismatch):
        raise GeometryError("rectangle map failed: non-finite side integrals")
    return integ, mismatch



@dataclass(frozen=True)
class ReciprocalCheck:
    """The reciprocal identity ``M(c0, c1, c2, c3) * M(c1, c2, c3, c0) = 1`` as an error estimate.

    Attributes
    ----------
    conjugate : float or None
        Modulus of the conjugate quadrilateral, from a map normalised at other
        vertices; ``None`` when that map failed.
    error : float or None
        ``|M * conjugate - 1|``.
    note : str
        Why the check is missing, or empty.
    """

    conjugate: float = None
    error: float = None
    note: str = ""


def reciprocal_check(result, vertices, limit=RESIDUAL_LIMIT):
    """Check ``result`` with an independent map of the conjugate quadrilateral.

    The conjugate ``Q(c1, c2, c3, c0)`` has modulus ``1 / M`` (Hakula, Rasila &
    Vuorinen, ETNA 48, 2018). Its map sends the two corners opposite to the
    first map's vertex at infinity to ``inf`` and ``0``, so the two
    computations share no prevertex placement; their product's distance from 1
    estimates the error of ``M`` from outside the first map's own residual.

    Parameters
    ----------
    result : ModulusResult
    vertices : array_like
        The polygon ``result`` was computed for, as given then.
    limit : float
        Largest accepted residual of the conjugate map.

    Returns
    -------
    ReciprocalCheck
    """
    c0, c1, c2, c3 = result.corners
    ccw = result.ccw_corners
    n = result.map.vertices.size
    infinity = result.map.infinity_index
    pair = None
    if infinity in ccw:
        k = ccw.index(infinity)
        pair = tuple(n - 1 - i if result.map.reversed else i
                     for i in (ccw[(k + 2) % 4], ccw[(k + 3) % 4]))
    try:
        other = quadrilateral_modulus(vertices, (c1, c2, c3, c0), limit=limit,
                                      normalisation=pair)
    except GeometryError as exc:
        return ReciprocalCheck(note=f"conjugate map failed: {exc}")
    product = result.modulus * other.modulus
    return ReciprocalCheck(conjugate=other.modulus, error=abs(product - 1.0))
