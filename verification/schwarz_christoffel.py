"""Schwarz-Christoffel map from the upper half-plane onto a polygon.

The map is

    f(w) = f(w_k) + C * integral from w_k to w of  prod_j (t - w_j)**beta_j  dt,

with ``beta_j = alpha_j - 1`` where ``alpha_j * pi`` is the interior angle at
vertex ``j``. One vertex is the image of ``w = infinity``; its prevertex is
dropped from the product. Powers use the branch with ``arg`` in ``[0, pi]`` on
the closed upper half-plane.

Integrals run along straight (radial) paths that start at a prevertex, or come
in from infinity. Gauss-Jacobi rules absorb the power singularity at the
starting prevertex (or the decay at infinity); when other prevertices are
closer than the path length, the path is cut into pieces that double in length
away from the start, so that no other prevertex is nearer to a piece than its
own length (compound integration). A side between two prevertices takes one
Gauss-Jacobi rule with both end singularities when no other prevertex is closer
than its length; otherwise it is split at its midpoint and integrated from both
ends, each piece absorbing its own end singularity.

The parameter problem uses the unconstrained log-gap variables
``y_k = log(w_{k+1} - w_k)``; the vertex at infinity, one "origin" vertex at
``w = 0`` and the length of one gap (1) are fixed. Placing a crowded cluster of
prevertices around 0 and the other around infinity keeps floating point able to
tell them apart (see ``docs/modulus.md``). All side lengths (the two sides
through infinity included) are matched in the least-squares sense on a log
scale with ``scipy.optimize.least_squares``; the reported ``residual`` is the
largest relative side-length error, or the closure error of the mapped
polygon if larger.
"""

import logging
from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares
from scipy.special import roots_jacobi

from lapsolve.errors import GeometryError, InputError, SolverError

log = logging.getLogger(__name__)

#: A solved map whose side-length residual exceeds this is refused.
RESIDUAL_LIMIT = 1e-8
#: Gauss points per quadrature piece.
NODES = 16
#: Largest log-gap the parameter search may try (exp(650) ~ 1e282).
_LOG_GAP_LIMIT = 650.0
#: Points per group in the ODE stage of the inverse map.
_ODE_GROUP = 128
#: Entries of the (nodes x prevertices) work array handled per batch.
_BATCH = 400_000


# --------------------------------------------------------------------------
# polygon input


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
        raise GeometryError(f"edges {i[k]} and {j[k]} of the polygon cross")
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


def _point_segment_distance(p, a, b):
    d = b - a
    t = np.clip(((p - a) * d.conjugate()).real / np.maximum(abs(d) ** 2, 1e-300), 0.0, 1.0)
    return abs(p - (a + t * d))


def _segment_distance(p, q, a, b):
    """Distance between segments [p, q] and [a, b] (broadcast)."""
    d1, d2 = _cross(q - p, a - p), _cross(q - p, b - p)
    d3, d4 = _cross(b - a, p - a), _cross(b - a, q - a)
    crossing = (d1 * d2 < 0) & (d3 * d4 < 0)
    dist = np.minimum.reduce([
        _point_segment_distance(p, a, b), _point_segment_distance(q, a, b),
        _point_segment_distance(a, p, q), _point_segment_distance(b, p, q)])
    return np.where(crossing, 0.0, dist)


# --------------------------------------------------------------------------
# the integral


@lru_cache(maxsize=None)
def _jacobi_rule(exponent):
    """Gauss-Jacobi rule on [-1, 1] for the weight (1 + x)**exponent."""
    x, w = roots_jacobi(NODES, 0.0, float(exponent))
    return x, w


@lru_cache(maxsize=None)
def _jacobi_pair(right, left):
    """Gauss-Jacobi rule on [-1, 1] for the weight (1 - x)**right (1 + x)**left."""
    return roots_jacobi(NODES, float(right), float(left))


def _upper_log(x):
    """Logarithm with ``arg`` in ``[0, pi]`` on the closed upper half-plane."""
    imag = np.where(x.imag > 0, x.imag, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.hypot(x.real, imag)) + 1j * np.arctan2(imag, x.real)


def _to_upper(w):
    w = np.asarray(w, dtype=complex)
    return w.real + 1j * np.where(w.imag > 0, w.imag, 0.0)


def _anchored(w, anchor):
    """Split points into (offset, real anchor) arrays of one shape."""
    w = np.asarray(w, dtype=complex)
    if anchor is None:
        anchor = np.where(np.isfinite(w), 0.0, np.inf)
        return _to_upper(np.where(np.isfinite(w), w, 0.0)), anchor
    anchor = np.asarray(anchor, dtype=float)
    w, anchor = np.broadcast_arrays(w, anchor)
    return _to_upper(w), anchor.astype(float)


def _combine(m1, s1, m2, s2, sign=1.0):
    """(m1 e^s1) + sign (m2 e^s2) as (mantissa, log scale)."""
    s = np.maximum(s1, s2)
    s_safe = np.where(np.isfinite(s), s, 0.0)
    with np.errstate(invalid="ignore"):
        e1 = np.where(np.isfinite(s1), np.exp(s1 - s_safe), 0.0)
        e2 = np.where(np.isfinite(s2), np.exp(s2 - s_safe), 0.0)
    return m1 * e1 + sign * m2 * e2, s


@dataclass(frozen=True)
class SCIntegral:
    """A Schwarz-Christoffel integral with known values at its prevertices.

    ``f(w) = values[k] + constant * integral_{w_k}^{w} prod_j (t - w_j)**exponents[j] dt``
    for finite prevertices, and ``f(infinity) = value_at_infinity``.

    Attributes
    ----------
    prevertices : ndarray, shape (m,)
        Finite prevertices, strictly increasing.
    exponents : ndarray, shape (m,)
        ``alpha_j - 1`` for each finite prevertex.
    constant : complex
        The factor ``C``.
    values : ndarray of complex, shape (m,)
        ``f`` at the finite prevertices.
    value_at_infinity : complex
        ``f(infinity)``.
    """

    prevertices: np.ndarray
    exponents: np.ndarray
    constant: complex
    values: np.ndarray
    value_at_infinity: complex

    @cached_property
    def angle_at_infinity(self):
        """Interior angle / pi of the image of infinity (``-1 - sum(exponents)``)."""
        return -1.0 - float(np.sum(self.exponents))

    @cached_property
    def _radius(self):
        return float(np.max(np.abs(self.prevertices)))

    @cached_property
    def _spacing(self):
        w = self.prevertices
        gaps = np.diff(w)
        left = np.r_[np.inf, gaps]
        right = np.r_[gaps, np.inf]
        return np.minimum(left, right)

    @cached_property
    def _log_constant(self):
        return np.log(abs(self.constant)) + 1j * np.angle(self.constant)

    def derivative(self, w, anchor=None):
        """``f'(w)`` on the closed upper half-plane (vectorised).

        With ``anchor`` (real, broadcastable), the point is ``anchor + w``; an
        anchor equal to a prevertex keeps full relative accuracy of the offset.
        """
        delta, anchor = _anchored(w, anchor)
        shape = delta.shape
        diff = (anchor.ravel()[:, None] - self.prevertices[None, :]) + delta.ravel()[:, None]
        # einsum, not matmul: a BLAS call per small product costs more than the work.
        logs = np.einsum("ij,j->i", _upper_log(diff), self.exponents)
        return np.exp(logs + self._log_constant).reshape(shape)

    def forward(self, w, anchor=None):
        """``f(w)`` on the closed upper half-plane; ``inf`` maps to the vertex at infinity.

        With ``anchor`` (real, broadcastable), the point is ``anchor + w``.
        """
        delta, anchor = _anchored(w, anchor)
        shape = delta.shape
        delta, anchor = delta.ravel(), anchor.ravel()
        out = np.empty(delta.size, dtype=complex)
        at_inf = ~np.isfinite(delta) | ~np.isfinite(anchor)
        out[at_inf] = self.value_at_infinity
        fin = np.flatnonzero(~at_inf)
        point = anchor[fin] + delta[fin]
        far = np.abs(point) >= 2.0 * self._radius
        if np.any(far):
            mant, scale = self._from_infinity(_to_upper(point[far]))
            out[fin[far]] = self.value_at_infinity - mant * np.exp(scale + self._log_constant)
        near = ~far
        if np.any(near):
            rel = (anchor[fin[near]][:, None] - self.prevertices[None, :]
                   + delta[fin[near]][:, None])
            k = np.argmin(np.abs(rel), axis=1)
            mant, scale = self._radial(k, _to_upper(rel[np.arange(k.size), k]))
            with np.errstate(invalid="ignore"):
                val = mant * np.exp(scale + self._log_constant)
            out[fin[near]] = self.values[k] + np.where(np.isfinite(scale), val, 0.0)
        return out.reshape(shape)

    def side_integrals(self):
        """Integrals (without ``C``) along the real axis between consecutive prevertices.

        Returns
        -------
        mantissa, log_scale : ndarray, shape (m + 1,)
            Entry ``k < m - 1`` is the side ``w_k -> w_{k+1}``, entry ``m - 1`` the
            side ``w_{m-1} -> +inf`` and entry ``m`` the side ``-inf -> w_0``; the
            integral is ``mantissa * exp(log_scale)``.
        """
        w = self.prevertices
        m = w.size
        gap = np.diff(w)
        half = 0.5 * gap
        far = 2.0 * self._radius
        # A side with no other prevertex within its length takes one Gauss-Jacobi
        # rule with both end singularities; a crowded one is split at its midpoint.
        left_room = np.r_[np.inf, gap[:-1]]
        right_room = np.r_[gap[1:], np.inf]
        alone = (left_room >= gap) & (right_room >= gap)
        split = np.flatnonzero(~alone)
        k = np.r_[split, split + 1, m - 1, 0]
        offsets = np.r_[half[split], -half[split], far - w[-1], -far - w[0]].astype(complex)
        mant, scale = self._radial(k, offsets)
        ns = split.size
        inner_m = np.zeros(m - 1, dtype=complex)
        inner_s = np.zeros(m - 1)
        inner_m[split], inner_s[split] = _combine(mant[:ns], scale[:ns],
                                                  mant[ns:2 * ns], scale[ns:2 * ns], -1.0)
        whole = np.flatnonzero(alone)
        if whole.size:
            inner_m[whole], inner_s[whole] = self._whole_sides(whole)
        tail_m, tail_s = self._from_infinity(np.array([far, -far], dtype=complex))
        right_m, right_s = _combine(mant[-2], scale[-2], tail_m[0], tail_s[0])
        left_m, left_s = _combine(mant[-1], scale[-1], tail_m[1], tail_s[1])
        return (np.r_[inner_m, right_m, -left_m], np.r_[inner_s, right_s, left_s])

    def _whole_sides(self, sides):
        """Sides ``w_k -> w_{k+1}`` by one rule with weight (1-x)^b_{k+1} (1+x)^b_k."""
        w, beta = self.prevertices, self.exponents
        x = np.empty((sides.size, NODES))
        wt = np.empty((sides.size, NODES))
        for i, k in enumerate(sides):
            x[i], wt[i] = _jacobi_pair(beta[k + 1], beta[k])
        half = 0.5 * (w[sides + 1] - w[sides])
        diff = ((w[sides][:, None] - w[None, :])[:, None, :]
                + (half[:, None] * (1.0 + x))[:, :, None]).astype(complex)
        logs = _upper_log(diff)
        rows = np.arange(sides.size)[:, None]
        cols = np.arange(NODES)[None, :]
        logs[rows, cols, sides[:, None]] = 0.0
        logs[rows, cols, sides[:, None] + 1] = 1j * np.pi
        expo = (np.einsum("ijk,k->ij", logs, beta) + np.log(wt)
                + ((1.0 + beta[sides] + beta[sides + 1]) * np.log(half))[:, None])
        scale = np.max(expo.real, axis=1)
        return np.sum(np.exp(expo - scale[:, None]), axis=1), scale

    def segment(self, start, end, anchor):
        """``f(anchor + end) - f(anchor + start)`` along a straight segment.

        One Gauss-Legendre rule: only for segments whose length is at most half
        the distance from ``start`` to the nearest prevertex.
        """
        x, wt = _jacobi_rule(0.0)
        half = 0.5 * (end - start)
        base = (anchor[:, None] - self.prevertices[None, :]) + start[:, None]
        nodes = base[:, None, :] + (half[:, None] * (1.0 + x))[:, :, None]
        logs = np.einsum("ijk,k->ij", _upper_log(nodes), self.exponents)
        return half * np.einsum("ij,j->i", np.exp(logs + self._log_constant), wt)

    def _radial(self, k, delta):
        """Integral (without C) from prevertex ``k`` straight to ``w_k + delta``, batched."""
        k = np.asarray(k)
        per_point = NODES * self.prevertices.size * 8
        step = max(1, _BATCH // per_point)
        parts = [self._radial_batch(k[i:i + step], delta[i:i + step])
                 for i in range(0, k.size, step)]
        if not parts:
            return np.zeros(0, complex), np.zeros(0)
        return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])

    def _radial_batch(self, k, delta):
        w, beta = self.prevertices, self.exponents
        start = w[k]
        length = np.abs(delta)
        mant = np.zeros(k.size, dtype=complex)
        scale = np.full(k.size, -np.inf)
        ok = np.flatnonzero(length > 0)
        if ok.size == 0:
            return mant, scale
        k, start, length = k[ok], start[ok], length[ok]
        phase = delta[ok] / length
        arg = np.arctan2(np.where(phase.imag > 0, phase.imag, 0.0), phase.real)
        first_len = np.minimum(length, self._spacing[k])
        with np.errstate(divide="ignore", invalid="ignore"):
            doublings = np.ceil(np.log2(length / first_len) - 1e-12)
        # Doubling pieces reach any double-precision ratio in < 2100 steps.
        count = 1 + np.where(doublings > 0, np.minimum(doublings, 2100), 0).astype(int)
        point = np.repeat(np.arange(ok.size), count)
        first_piece = np.r_[0, np.cumsum(count)[:-1]]
        j = np.arange(point.size) - np.repeat(first_piece, count)
        h = first_len[point]
        s1 = np.minimum(h * 2.0 ** j, length[point])
        s0 = np.where(j == 0, 0.0, h * 2.0 ** (j - 1))
        is_first = j == 0
        kk = k[point]
        x = np.empty((point.size, NODES))
        wt = np.empty((point.size, NODES))
        x[:], wt[:] = _jacobi_rule(0.0)
        for expo in np.unique(beta[kk[is_first]]):
            rows = is_first & (beta[kk] == expo)
            x[rows], wt[rows] = _jacobi_rule(expo)
        half = 0.5 * (s1 - s0)
        s = s0[:, None] + half[:, None] * (1.0 + x)
        logw = np.log(wt) + np.log(half)[:, None]
        logw[is_first] += (beta[kk[is_first]] * np.log(half[is_first]))[:, None]
        diff = (start[point][:, None, None] - w[None, None, :]
                + s[:, :, None] * phase[point][:, None, None])
        logs = _upper_log(diff)
        own = 1j * arg[point][:, None] + np.where(is_first[:, None], 0.0, np.log(s))
        rows = np.arange(point.size)[:, None]
        cols = np.arange(NODES)[None, :]
        logs[rows, cols, kk[:, None]] = own
        expo = np.einsum("ijk,k->ij", logs, beta) + logw
        flat = expo.ravel()
        offsets = first_piece * NODES
        piece_scale = np.maximum.reduceat(flat.real, offsets)
        node_point = np.repeat(point, NODES)
        terms = np.exp(flat - piece_scale[node_point])
        total = (np.bincount(node_point, terms.real, ok.size)
                 + 1j * np.bincount(node_point, terms.imag, ok.size))
        mant[ok] = total * phase
        scale[ok] = piece_scale
        return mant, scale

    def _from_infinity(self, target):
        """Integral (without C) from ``target`` out to infinity; needs |target| >= 2 R."""
        x, wt = _jacobi_rule(self.angle_at_infinity - 1.0)
        tau = 0.5 * (1.0 + x)
        diff = target[:, None, None] - tau[None, :, None] * self.prevertices[None, None, :]
        expo = (np.einsum("ijk,k->ij", _upper_log(diff), self.exponents) + np.log(wt)[None, :]
                + self.angle_at_infinity * np.log(0.5))
        scale = np.max(expo.real, axis=1)
        mant = np.sum(np.exp(expo - scale[:, None]), axis=1) * target
        return mant, scale


# --------------------------------------------------------------------------
# the solved map


def _positions(log_gaps, origin):
    """Prevertices from gaps, anchored at ``w[origin] = 0`` (sums of one sign only)."""
    gaps = np.exp(np.clip(log_gaps, -_LOG_GAP_LIMIT, _LOG_GAP_LIMIT))
    w = np.zeros(gaps.size + 1)
    w[origin + 1:] = np.cumsum(gaps[origin:])
    w[:origin] = -np.cumsum(gaps[:origin][::-1])[::-1]
    return w


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
        Largest relative error of the mapped side lengths, or the closure error
        of the mapped polygon (relative to its perimeter), whichever is larger.
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
        return _solve(poly, infinity, origin, limit)

    def forward(self, w, anchor=None):
        """Image ``f(w)`` of points of the closed upper half-plane (``anchor + w`` if given)."""
        return self.integral.forward(w, anchor=anchor)

    def derivative(self, w, anchor=None):
        """``f'(w)`` (at ``anchor + w`` if given)."""
        return self.integral.derivative(w, anchor=anchor)

    @cached_property
    def _diameter(self):
        z = self.vertices
        return float(np.max(np.abs(z[:, None] - z[None, :])))

    @cached_property
    def _edge_of_side(self):
        n = self.vertices.size
        order = (self.infinity_index + 1 + np.arange(n - 1)) % n
        return np.r_[order, self.infinity_index]

    @cached_property
    def _starts(self):
        """Start points of the inverse map: anchor, offset, image, edge (-1 inside)."""
        integ = self.integral
        w = integ.prevertices
        m = w.size
        spacing = integ._spacing
        far = 2.0 * integ._radius
        anchors, offsets, edges = [], [], []

        def ladder(k, step, stop, sign, side):
            count = int(np.clip(np.ceil(np.log(stop / step) / np.log(4.0)), 0, 600))
            offs = step * 4.0 ** np.arange(count)
            offs = sign * np.r_[offs[offs < stop], stop]
            anchors.append(np.full(offs.size, w[k]))
            offsets.append(offs)
            edges.append(np.full(offs.size, self._edge_of_side[side]))

        for k in range(m - 1):
            half = 0.5 * (w[k + 1] - w[k])
            ladder(k, spacing[k] / 4, half, 1.0, k)
            ladder(k + 1, spacing[k + 1] / 4, half, -1.0, k)
        ladder(m - 1, spacing[m - 1] / 4, far - w[m - 1], 1.0, m - 1)
        ladder(0, spacing[0] / 4, far + w[0], -1.0, m)
        beyond = far * 4.0 ** np.arange(1, 4)
        anchors.append(np.zeros(6))
        offsets.append(np.r_[beyond, -beyond])
        edges.append(np.r_[np.full(3, self._edge_of_side[m - 1]),
                           np.full(3, self._edge_of_side[m])])
        a = np.concatenate(anchors)
        d = np.concatenate(offsets).astype(complex)
        edge = np.concatenate(edges)
        height = 0.5 * np.min(np.abs((a[:, None] - w[None, :]) + d[:, None]), axis=1)
        fan = np.exp(1j * np.pi * np.array([1, 3, 5]) / 6)
        arc = (far * 4.0 ** np.arange(1, 3))[:, None] * np.exp(1j * np.pi * np.arange(1, 4) / 4)
        in_anchor = np.r_[a, np.repeat(w, 3), np.zeros(arc.size)]
        in_offset = np.r_[d + 1j * height, (spacing[:, None] / 8 * fan[None, :]).ravel(),
                          arc.ravel()]
        return {
            "anchor": in_anchor, "offset": in_offset,
            "image": self.integral.forward(in_offset, anchor=in_anchor),
            "edge_anchor": a, "edge_offset": d,
            "edge_image": self.integral.forward(d, anchor=a), "edge": edge,
        }

    def inverse(self, points):
        """Preimages ``w`` of points inside the polygon or on its boundary.

        A start point whose image sees the target along a straight segment inside
        the polygon is picked; the ODE ``dw/dt = (z - z0) / f'(w)`` is integrated
        (``scipy.integrate.solve_ivp``, in the variable ``log(w - a)`` for a
        prevertex ``a`` near the target) and Newton's method polishes.

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
        :class:`SCIntegral` whose prevertices are among this map's.

        Returns
        -------
        anchor : ndarray of float, shape (N,)
        offset : ndarray of complex, shape (N,)
        """
        z = as_complex(points, "points")
        anchor = np.zeros(z.size)
        offset = np.zeros(z.size, dtype=complex)
        if z.size == 0:
            return anchor, offset
        verts = self.vertices
        a, b = verts, np.roll(verts, -1)
        tol = 1e-12 * self._diameter
        vdist = np.abs(z[:, None] - verts[None, :])
        nearest_vertex = np.argmin(vdist, axis=1)
        at_vertex = vdist[np.arange(z.size), nearest_vertex] <= tol
        anchor[at_vertex] = self.prevertices[nearest_vertex[at_vertex]]
        edist = _point_segment_distance(z[:, None], a[None, :], b[None, :])
        on_edge = ~at_vertex & (np.min(edist, axis=1) <= tol)
        inner = ~at_vertex & ~on_edge
        outside = inner & (winding_number(z, verts) == 0)
        if np.any(outside):
            p = z[np.flatnonzero(outside)[0]]
            raise InputError(f"point ({p.real:.6g}, {p.imag:.6g}) lies outside the polygon")
        starts = self._starts
        start_anchor = np.zeros(z.size)
        start_offset = np.zeros(z.size, dtype=complex)
        start_image = np.zeros(z.size, dtype=complex)
        if np.any(inner):
            idx = np.flatnonzero(inner)
            pick = self._visible_start(z[idx], starts["image"])
            start_anchor[idx] = starts["anchor"][pick]
            start_offset[idx] = starts["offset"][pick]
            start_image[idx] = starts["image"][pick]
            # Work relative to the prevertex of the nearest vertex: a point deep in a
            # sharp corner has its preimage crowded onto that prevertex.
            near = self.prevertices[nearest_vertex[idx]]
            anchor[idx] = np.where(np.isfinite(near), near, 0.0)
        if np.any(on_edge):
            idx = np.flatnonzero(on_edge)
            edge = np.argmin(edist[idx], axis=1)
            dist = np.abs(z[idx][:, None] - starts["edge_image"][None, :])
            dist = np.where(starts["edge"][None, :] == edge[:, None], dist, np.inf)
            pick = np.argmin(dist, axis=1)
            start_anchor[idx] = anchor[idx] = starts["edge_anchor"][pick]
            start_offset[idx] = starts["edge_offset"][pick]
            start_image[idx] = starts["edge_image"][pick]
        idx = np.flatnonzero(inner | on_edge)
        if idx.size:
            delta0 = (start_anchor[idx] - anchor[idx]) + start_offset[idx]
            anchor[idx], offset[idx] = self._solve_inverse(
                z[idx], anchor[idx], delta0, start_image[idx], on_edge[idx])
        return anchor, offset

    def _visible_start(self, z, zc, nearest=6):
        """Index of a start point joined to each target by a clear segment.

        Among the ``nearest`` closest start points the one whose segment keeps
        farthest from the boundary wins; failing that, the closest clear one.
        """
        verts = self.vertices
        a, b = verts[None, :], np.roll(verts, -1)[None, :]
        tol = 1e-14 * self._diameter
        order = np.argsort(np.abs(z[:, None] - zc[None, :]), axis=1)
        pick = np.full(z.size, -1)
        best = np.zeros(z.size)
        for rank in range(zc.size):
            left = np.flatnonzero(pick < 0) if rank >= nearest else np.arange(z.size)
            if left.size == 0:
                break
            cand = order[left, rank]
            gap = np.min(_segment_distance(zc[cand][:, None], z[left][:, None], a, b), axis=1)
            better = (gap > tol) & (gap > best[left])
            pick[left[better]] = cand[better]
            best[left[better]] = gap[better]
        if np.any(pick < 0):
            p = z[np.flatnonzero(pick < 0)[0]]
            raise SolverError(
                f"no start point for the inverse map sees ({p.real:.6g}, {p.imag:.6g})")
        return pick

    def _solve_inverse(self, z, anchor, delta0, z0, on_boundary):
        integ = self.integral
        n = z.size
        zeta0 = _log_offset(delta0)
        y = np.empty(2 * n)
        # Small groups: the step size of one group follows its hardest path only.
        for part in np.array_split(np.arange(n), max(1, n // _ODE_GROUP)):
            y[part], y[n + part] = _predict(integ, anchor[part], zeta0[part],
                                            z[part] - z0[part], on_boundary[part])
        zeta = y[:n] + 1j * np.clip(y[n:], 0.0, np.pi)
        zeta = np.where(on_boundary, zeta.real + 1j * np.where(zeta.imag > 0.5 * np.pi,
                                                                np.pi, 0.0), zeta)
        return self._newton(z, anchor, zeta, on_boundary)

    def _newton(self, z, anchor, zeta, on_boundary):
        """Newton's method in ``log(w - anchor)``.

        A corner of angle ``alpha*pi`` behaves like ``(w - anchor)**alpha``, which
        is tame in the logarithm for any alpha. After the first full evaluation,
        ``f`` is updated by integrating along each short Newton step; the result
        is confirmed by a full evaluation before it is accepted.
        """
        integ = self.integral
        w_all = integ.prevertices
        target = 1e-13 * self._diameter
        delta = _exp_offset(zeta, on_boundary)
        fz = integ.forward(delta, anchor=anchor)
        exact = np.ones(z.size, dtype=bool)
        for _ in range(80):
            bad = np.abs(fz - z) > target
            if not np.any(bad):
                if np.all(exact):
                    break
                idx = np.flatnonzero(~exact)
                fz[idx] = integ.forward(delta[idx], anchor=anchor[idx])
                exact[idx] = True
                continue
            act = np.flatnonzero(bad)
            old_delta = delta[act]
            step = (fz[act] - z[act]) / (old_delta * integ.derivative(old_delta,
                                                                    anchor=anchor[act]))
            step = np.where(np.abs(step) > 2.0, 2.0 * step / np.abs(step), step)
            old = zeta[act]
            new = old - step
            lo, hi = 0.1 * old.imag, np.pi - 0.1 * (np.pi - old.imag)
            new = np.where(on_boundary[act], new.real + 1j * old.imag,
                           new.real + 1j * np.clip(new.imag, lo, hi))
            new_delta = _exp_offset(new, on_boundary[act])
            rel = (anchor[act][:, None] - w_all[None, :]) + new_delta[:, None]
            j = np.argmin(np.abs(rel), axis=1)
            nearer = rel[np.arange(j.size), j]
            # Move the anchor to a prevertex much nearer than the current one.
            closer = np.abs(nearer) < 0.5 * np.abs(new_delta)
            room = np.min(np.abs((anchor[act][:, None] - w_all[None, :])
                                 + old_delta[:, None]), axis=1)
            short = ~closer & (np.abs(new_delta - old_delta) <= 0.5 * room)
            if np.any(short):
                sel = act[short]
                fz[sel] += integ.segment(old_delta[short], new_delta[short], anchor[sel])
                exact[sel] = False
            anchor[act[closer]] = w_all[j[closer]]
            new[closer] = _log_offset(nearer[closer])
            new_delta[closer] = nearer[closer]
            zeta[act], delta[act] = new, new_delta
            if np.any(~short):
                sel = act[~short]
                fz[sel] = integ.forward(delta[sel], anchor=anchor[sel])
                exact[sel] = True
        mismatch = np.abs(fz - z)
        worst = float(np.max(mismatch))
        if worst > 1e3 * target or not np.all(exact):
            raise SolverError(f"inverse map did not converge: mismatch {worst:.1e} at "
                              f"{int(np.sum(mismatch > target))} points")
        return anchor, delta


def _predict(integ, anchor, zeta0, dz, on_boundary):
    """Follow ``d(log delta)/dt = dz / (delta f'(anchor + delta))`` from t = 0 to 1."""
    n = zeta0.size

    def rhs(_t, y):
        delta = np.exp(y[:n] + 1j * np.clip(y[n:], 0.0, np.pi))
        v = dz / (delta * integ.derivative(delta, anchor=anchor))
        v = np.where(on_boundary, v.real + 0j, v)
        return np.r_[v.real, v.imag]

    with np.errstate(all="ignore"):  # a rejected trial step may overflow
        sol = solve_ivp(rhs, (0.0, 1.0), np.r_[zeta0.real, zeta0.imag], method="RK45",
                        rtol=1e-5, atol=1e-5)
    return sol.y[:n, -1], sol.y[n:, -1]


def _log_offset(delta):
    """log of an offset in the closed upper half-plane (arg in [0, pi])."""
    return np.log(np.abs(delta)) + 1j * np.arctan2(np.maximum(delta.imag, 0.0), delta.real)


def _exp_offset(zeta, on_boundary):
    """Inverse of ``_log_offset``; exactly real on the boundary."""
    delta = np.exp(zeta)
    return np.where(on_boundary, np.where(zeta.imag > 0.5 * np.pi, -1.0, 1.0)
                    * np.exp(zeta.real) + 0j, delta)


def _vertex_index(value, n, what):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise InputError(f"{what} must be a vertex index, got {value!r}")
    if not 0 <= value < n:
        raise InputError(f"{what} index {value} is out of range for {n} vertices")
    return int(value)


def _solve(poly, infinity, origin, limit):
    z, alpha = poly.vertices, poly.angles
    n = z.size
    order = (infinity + 1 + np.arange(n - 1)) % n
    full = np.r_[order, infinity]
    beta = alpha[order] - 1.0
    o = int(np.flatnonzero(order == origin)[0])
    fixed = o if o < n - 2 else o - 1
    sides = np.abs(np.roll(z[full], -1) - z[full])
    log_sides = np.log(sides)

    def integral_for(w, constant=1.0 + 0j):
        return SCIntegral(w, beta, constant, np.zeros(w.size, complex), 0j)

    def positions(y):
        return _positions(np.insert(y, fixed, 0.0), o)

    def residual(y):
        with np.errstate(all="ignore"):
            mant, scale = integral_for(positions(y)).side_integrals()
            r = np.log(np.abs(mant)) + scale - log_sides
        if not np.all(np.isfinite(r)):
            return np.full(r.size, 1e3)
        return r - r.mean()

    # Start: prevertices placed by boundary arc length on a circle, then moved
    # to the line with the vertex at infinity at the top of the circle.
    cum = np.cumsum(np.r_[sides[-1], sides[:-2]])
    theta = 2 * np.pi * cum / sides.sum()
    w_start = -1.0 / np.tan(theta / 2)
    gaps = np.log(np.diff(w_start))
    y0 = np.delete(gaps - gaps[fixed], fixed)
    if y0.size:
        fit = least_squares(residual, y0, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15,
                            max_nfev=400 * (y0.size + 1))
        y = fit.x
    else:
        y = y0
    w = positions(y)
    with np.errstate(all="ignore"):
        mant, scale = integral_for(w).side_integrals()
        r = np.log(np.abs(mant)) + scale - log_sides
    log_c = -r.mean()
    side_error = float(np.max(np.abs(np.expm1(r - r.mean()))))
    direction = np.angle(z[full[1]] - z[full[0]]) - np.angle(mant[0])
    constant = np.exp(log_c) * np.exp(1j * direction)
    mapped = mant * np.exp(scale + log_c + 1j * direction)
    with np.errstate(all="ignore"):
        closure = float(abs(np.sum(mapped)) / sides.sum())
        turning = np.angle(mapped / (np.roll(z[full], -1) - z[full]))
    direction_error = float(np.max(np.abs(turning)))
    res = max(side_error, closure, direction_error)
    if not np.all(np.isfinite(w)) or not np.all(np.isfinite(mapped)):
        res = np.inf
    if not np.isfinite(res) or res > limit:
        raise GeometryError(
            f"Schwarz-Christoffel parameter problem did not converge: side-length residual "
            f"{res:.1e} exceeds {limit:.0e} (prevertices crowd; see docs/modulus.md)")
    prevertices = np.full(n, np.inf)
    prevertices[order] = w
    integ = SCIntegral(w, beta, complex(constant), z[order].copy(), complex(z[infinity]))
    log.debug("SC map: %d vertices, residual %.2e", n, res)
    return SCMap(vertices=z, angles=alpha, prevertices=prevertices, constant=complex(constant),
                 residual=res, infinity_index=int(infinity), origin_index=int(origin),
                 reversed=poly.reversed, integral=integ)
