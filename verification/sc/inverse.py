"""Inverse of a Schwarz-Christoffel map: start points, ODE predictor, Newton corrector."""

import numpy as np
from scipy.integrate import solve_ivp

from lapsolve.errors import InputError, SolverError

from .polygon import as_complex, point_segment_distance, segment_distance, winding_number

#: Points per group in the ODE stage of the inverse map.
_ODE_GROUP = 128


def start_points(sc):
    """Start points of the inverse map of ``sc``.

    Points on the real axis near every side (a ladder of offsets growing by 4 from
    each prevertex) and points above them, near every prevertex and far out.

    Returns
    -------
    dict
        ``anchor``, ``offset``, ``image`` of the interior start points and
        ``edge_anchor``, ``edge_offset``, ``edge_image``, ``edge`` of the boundary ones.
    """
    integ = sc.integral
    w = integ.prevertices
    m = w.size
    spacing = integ.spacing
    far = 2.0 * integ.radius
    anchors, offsets, edges = [], [], []

    def ladder(k, step, stop, sign, side):
        count = int(np.clip(np.ceil(np.log(stop / step) / np.log(4.0)), 0, 600))
        offs = step * 4.0 ** np.arange(count)
        offs = sign * np.r_[offs[offs < stop], stop]
        anchors.append(np.full(offs.size, w[k]))
        offsets.append(offs)
        edges.append(np.full(offs.size, sc.edge_of_side[side]))

    for k in range(m - 1):
        half = 0.5 * (w[k + 1] - w[k])
        ladder(k, spacing[k] / 4, half, 1.0, k)
        ladder(k + 1, spacing[k + 1] / 4, half, -1.0, k)
    ladder(m - 1, spacing[m - 1] / 4, far - w[m - 1], 1.0, m - 1)
    ladder(0, spacing[0] / 4, far + w[0], -1.0, m)
    beyond = far * 4.0 ** np.arange(1, 4)
    anchors.append(np.zeros(6))
    offsets.append(np.r_[beyond, -beyond])
    edges.append(np.r_[np.full(3, sc.edge_of_side[m - 1]),
                       np.full(3, sc.edge_of_side[m])])
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
        "image": integ.forward(in_offset, anchor=in_anchor),
        "edge_anchor": a, "edge_offset": d,
        "edge_image": integ.forward(d, anchor=a), "edge": edge,
    }


def locate(sc, points):
    """Preimages as ``anchor + offset`` with ``anchor`` a prevertex near each point.

    Near a sharp corner the preimage crowds onto its prevertex; the offset
    keeps the relative accuracy that ``anchor + offset`` as one number loses.
    Pass both to ``forward``/``derivative`` of this map or of any
    :class:`SCIntegral` whose prevertices are among this map's.

    A start point whose image sees the target along a straight segment inside
    the polygon is picked; the ODE ``dw/dt = (z - z0) / f'(w)`` is integrated
    (``scipy.integrate.solve_ivp``, in the variable ``log(w - a)`` for a
    prevertex ``a`` near the target) and Newton's method polishes.

    Parameters
    ----------
    sc : SCMap
    points : array_like
        Shape (N, 2) real or (N,) complex, inside the polygon or on its boundary.

    Returns
    -------
    anchor : ndarray of float, shape (N,)
    offset : ndarray of complex, shape (N,)

    Raises
    ------
    InputError
        A point outside the polygon.
    SolverError
        Newton's method did not reach the tolerance.
    """
    z = as_complex(points, "points")
    anchor = np.zeros(z.size)
    offset = np.zeros(z.size, dtype=complex)
    if z.size == 0:
        return anchor, offset
    verts = sc.vertices
    a, b = verts, np.roll(verts, -1)
    tol = 1e-12 * sc.diameter
    vdist = np.abs(z[:, None] - verts[None, :])
    nearest_vertex = np.argmin(vdist, axis=1)
    at_vertex = vdist[np.arange(z.size), nearest_vertex] <= tol
    anchor[at_vertex] = sc.prevertices[nearest_vertex[at_vertex]]
    edist = point_segment_distance(z[:, None], a[None, :], b[None, :])
    on_edge = ~at_vertex & (np.min(edist, axis=1) <= tol)
    inner = ~at_vertex & ~on_edge
    outside = inner & (winding_number(z, verts) == 0)
    if np.any(outside):
        p = z[np.flatnonzero(outside)[0]]
        raise InputError(f"point ({p.real:.6g}, {p.imag:.6g}) lies outside the polygon")
    starts = sc.start_points
    start_anchor = np.zeros(z.size)
    start_offset = np.zeros(z.size, dtype=complex)
    start_image = np.zeros(z.size, dtype=complex)
    if np.any(inner):
        idx = np.flatnonzero(inner)
        pick = _visible_start(sc, z[idx], starts["image"])
        start_anchor[idx] = starts["anchor"][pick]
        start_offset[idx] = starts["offset"][pick]
        start_image[idx] = starts["image"][pick]
        # Work relative to the prevertex of the nearest vertex: a point deep in a
        # sharp corner has its preimage crowded onto that prevertex.
        near = sc.prevertices[nearest_vertex[idx]]
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
        anchor[idx], offset[idx] = _solve_inverse(
            sc, z[idx], anchor[idx], delta0, start_image[idx], on_edge[idx])
    return anchor, offset


def _visible_start(sc, z, zc, nearest=6):
    """Index of a start point joined to each target by a clear segment.

    Among the ``nearest`` closest start points the one whose segment keeps
    farthest from the boundary wins; failing that, the closest clear one.
    """
    verts = sc.vertices
    a, b = verts[None, :], np.roll(verts, -1)[None, :]
    tol = 1e-14 * sc.diameter
    order = np.argsort(np.abs(z[:, None] - zc[None, :]), axis=1)
    pick = np.full(z.size, -1)
    best = np.zeros(z.size)
    for rank in range(zc.size):
        left = np.flatnonzero(pick < 0) if rank >= nearest else np.arange(z.size)
        if left.size == 0:
            break
        cand = order[left, rank]
        gap = np.min(segment_distance(zc[cand][:, None], z[left][:, None], a, b), axis=1)
        better = (gap > tol) & (gap > best[left])
        pick[left[better]] = cand[better]
        best[left[better]] = gap[better]
    if np.any(pick < 0):
        p = z[np.flatnonzero(pick < 0)[0]]
        raise SolverError(
            f"no start point for the inverse map sees ({p.real:.6g}, {p.imag:.6g})")
    return pick


def _solve_inverse(sc, z, anchor, delta0, z0, on_boundary):
    integ = sc.integral
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
    return _newton(sc, z, anchor, zeta, on_boundary)


def _newton(sc, z, anchor, zeta, on_boundary):
    """Newton's method in ``log(w - anchor)``.

    A corner of angle ``alpha*pi`` behaves like ``(w - anchor)**alpha``, which
    is tame in the logarithm for any alpha. After the first full evaluation,
    ``f`` is updated by integrating along each short Newton step; the result
    is confirmed by a full evaluation before it is accepted.
    """
    integ = sc.integral
    w_all = integ.prevertices
    target = 1e-13 * sc.diameter
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
