"""The Schwarz-Christoffel integral with compound Gauss-Jacobi quadrature.

Integrals run along straight (radial) paths that start at a prevertex, or come
in from infinity. Gauss-Jacobi rules absorb the power singularity at the
starting prevertex (or the decay at infinity); when other prevertices are
closer than the path length, the path is cut into pieces that double in length
away from the start, so that no other prevertex is nearer to a piece than its
own length (compound integration). A side between two prevertices takes one
Gauss-Jacobi rule with both end singularities when no other prevertex is closer
than its length; otherwise it is split at its midpoint and integrated from both
ends, each piece absorbing its own end singularity. Magnitudes are carried as
``mantissa * exp(log_scale)`` so that crowded prevertices cause no overflow.
"""

from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np
from scipy.special import roots_jacobi

#: Gauss points per quadrature piece.
NODES = 16
#: Entries of the (nodes x prevertices) work array handled per batch.
_BATCH = 400_000


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
    def radius(self):
        """Largest modulus of a finite prevertex."""
        return float(np.max(np.abs(self.prevertices)))

    @cached_property
    def spacing(self):
        """Distance from each prevertex to its nearest neighbour."""
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
        far = np.abs(point) >= 2.0 * self.radius
        if np.any(far):
            mant, scale = self._from_infinity(_to_upper(point[far]))
            out[fin[far]] = self.value_at_infinity - mant * np.exp(scale + self._log_constant)
        near = ~far
        if np.any(near):
            rel = (anchor[fin[near]][:, None] - self.prevertices[None, :]
                   + delta[fin[near]][:, None])
            k = self._start_prevertex(rel)
            mant, scale = self._radial(k, _to_upper(rel[np.arange(k.size), k]))
            with np.errstate(invalid="ignore"):
                val = mant * np.exp(scale + self._log_constant)
            out[fin[near]] = self.values[k] + np.where(np.isfinite(scale), val, 0.0)
        return out.reshape(shape)

    def _start_prevertex(self, rel):
        """The prevertex each radial path starts from: the nearest one.

        Far from a cluster of prevertices, ``anchor - w_j + delta`` rounds to the
        same length for several of them; the first of those would start a path
        that runs along the real axis through the others. Among prevertices
        tied within rounding (all on one side of the point, since they are much
        closer to each other than to it) the one on the point's side wins.
        """
        dist = np.abs(rel)
        rows = np.arange(rel.shape[0])
        k = np.argmin(dist, axis=1)
        tied = dist <= dist[rows, k][:, None] * (1.0 + 1e-9)
        last = rel.shape[1] - 1 - np.argmax(tied[:, ::-1], axis=1)
        first = np.argmax(tied, axis=1)
        return np.where(rel[rows, k].real > 0, last, first)

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
        far = 2.0 * self.radius
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
        first_len = np.minimum(length, self.spacing[k])
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
