"""The Schwarz-Christoffel parameter problem: prevertices from side lengths.

The unknowns are the unconstrained log-gaps ``y_k = log(w_{k+1} - w_k)``; the
vertex at infinity, one "origin" vertex at ``w = 0`` and the length of one gap
(1) are fixed. Placing a crowded cluster of prevertices around 0 and the other
around infinity keeps floating point able to tell them apart (see
``docs/modulus.md``). All side lengths (the two sides through infinity included)
are matched in the least-squares sense on a log scale with
``scipy.optimize.least_squares``; the reported ``residual`` is the largest
relative side-length error, the closure error of the mapped polygon or the
largest error of a mapped side direction, whichever is largest.
"""

import logging
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from lapsolve.errors import GeometryError

from .integral import SCIntegral

log = logging.getLogger(__name__)

#: A solved map whose side-length residual exceeds this is refused.
RESIDUAL_LIMIT = 1e-8
#: Largest log-gap the parameter search may try (exp(650) ~ 1e282).
_LOG_GAP_LIMIT = 650.0


@dataclass(frozen=True)
class Parameters:
    """A solved parameter problem.

    Attributes
    ----------
    prevertices : ndarray, shape (n,)
        Prevertex of each (counter-clockwise) vertex; ``inf`` at the vertex at infinity.
    constant : complex
        The factor ``C``.
    residual : float
        Accuracy estimate (module docstring).
    integral : SCIntegral
        The evaluator.
    """

    prevertices: np.ndarray
    constant: complex
    residual: float
    integral: SCIntegral


def _positions(log_gaps, origin):
    """Prevertices from gaps, anchored at ``w[origin] = 0`` (sums of one sign only)."""
    gaps = np.exp(np.clip(log_gaps, -_LOG_GAP_LIMIT, _LOG_GAP_LIMIT))
    w = np.zeros(gaps.size + 1)
    w[origin + 1:] = np.cumsum(gaps[origin:])
    w[:origin] = -np.cumsum(gaps[:origin][::-1])[::-1]
    return w



def solve_parameters(poly, infinity, origin, limit):
    """Solve the parameter problem of a checked polygon.

    Parameters
    ----------
    poly : Polygon
    infinity, origin : int
        Vertices (counter-clockwise indices) sent to ``w = inf`` and ``w = 0``.
    limit : float
        Largest accepted residual.

    Returns
    -------
    Parameters

    Raises
    ------
    GeometryError
        The residual exceeds ``limit`` (the message gives it).
    """
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
    return Parameters(prevertices, complex(constant), res, integ)
