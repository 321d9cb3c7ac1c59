"""Observed convergence orders and the pass/fail verdict for one error sequence.

An error sequence is a list of mesh sizes ``h`` and errors ``err`` measured in
one norm, one entry per refinement level. Everything here works on plain
sequences and returns plain data; nothing here knows about meshes or solvers.

Orders
------
The pairwise order between levels ``i`` and ``i + 1`` is
``log(err[i] / err[i+1]) / log(h[i] / h[i+1])``. For rates with respect to the
number of unknowns ``N`` pass ``h = N**(-1/dim)`` (see :func:`h_equivalent`);
:func:`dof_orders` gives the slope of ``-log err`` against ``log N`` instead,
and in 2D ``order_h = 2 * order_N``.

Verdict rule (:func:`judge`)
----------------------------
Levels are given coarse to fine (``h`` strictly decreasing).

1. *Plateau.* A level whose error is exactly zero, or at most
   ``plateau_factor`` (default 10) times the round-off floor, starts the
   plateau; it and every finer level are ``plateau_levels`` and are left out
   of every rate. Levels before it are ``used_levels``.
2. If every error is exactly zero: PASS, "exact to round-off" (patch test).
3. If fewer than two levels remain before the plateau: PASS (round-off
   plateau) when a plateau was found and every plateau error is at most
   ``atol`` (default 1e-8, absolute); INCONCLUSIVE otherwise.
4. If the pairwise orders over the used levels change sign two or more times
   (the error rises and falls), no single order fits: INCONCLUSIVE.
5. The observed order is the last pairwise order over the used levels; the
   fitted order is the least-squares slope over the asymptotic levels (see
   :func:`asymptotic_levels`) and is reported alongside.
   PASS when ``observed >= expected - tol``, FAIL otherwise. An observed order
   above ``expected + 0.5`` is still PASS (super-convergence is not a
   failure) but sets ``superconvergent`` and is named in the reason.

Every verdict carries a one-sentence ``reason``.
"""

from __future__ import annotations

import logging
import math
from dataclasses import asdict, dataclass, field

import numpy as np

from lapsolve.errors import InputError

logger = logging.getLogger(__name__)

PASS = "PASS"
FAIL = "FAIL"
INCONCLUSIVE = "INCONCLUSIVE"

#: An observed order this far above the expected one is flagged super-convergent.
SUPERCONVERGENCE_MARGIN = 0.5
#: Errors within this factor of the round-off floor count as plateau
#: (common practice, no source).
PLATEAU_FACTOR = 10.0
#: Plateau errors at most this large (absolute) let a too-short sequence pass
#: (common practice, no source).
PLATEAU_ATOL = 1e-8


@dataclass(frozen=True)
class Verdict:
    """Outcome of checking one error sequence against an expected order.

    Attributes
    ----------
    status : str
        ``"PASS"``, ``"FAIL"`` or ``"INCONCLUSIVE"``.
    observed : float
        Last pairwise order over the used levels (NaN when there is none).
    expected : float
        The a-priori order the sequence was judged against.
    pairwise : list of float
        Pairwise orders between all consecutive levels (length ``n - 1``).
    fitted : float
        Least-squares slope over the asymptotic used levels (NaN when fewer than two).
    used_levels : list of int
        Levels before the plateau, the only ones rates are taken from.
    plateau_levels : list of int
        Levels at or below the round-off floor (or with zero error).
    reason : str
        One sentence explaining the status.
    norm : str
        Name of the norm, e.g. ``"H1"``.
    tol : float
        Tolerance on the order.
    superconvergent : bool
        True when ``observed > expected + 0.5``.
    fitted_levels : list of int
        Levels the fitted slope was taken over.
    """

    status: str
    observed: float
    expected: float
    pairwise: list[float]
    fitted: float
    used_levels: list[int]
    plateau_levels: list[int]
    reason: str
    norm: str = "L2"
    tol: float = 0.1
    superconvergent: bool = False
    fitted_levels: list[int] = field(default_factory=list)

    @property
    def passed(self) -> bool:
        """True when the status is PASS."""
        return self.status == PASS

    def to_dict(self) -> dict:
        """Plain JSON-ready dict; non-finite numbers become ``None``."""
        data = asdict(self)
        for key in ("observed", "expected", "fitted", "tol"):
            data[key] = _finite_or_none(data[key])
        data["pairwise"] = [_finite_or_none(v) for v in data["pairwise"]]
        return data


def _finite_or_none(value):
    value = float(value)
    return value if math.isfinite(value) else None


def _as_array(values, name: str) -> np.ndarray:
    try:
        array = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be a sequence of numbers ({exc})", field=name) from None
    if array.ndim != 1 or array.size == 0:
        raise InputError(f"{name} must be a non-empty 1-D sequence", field=name)
    if not np.all(np.isfinite(array)):
        raise InputError(f"{name} must contain finite numbers only", field=name)
    return array


def _sizes_and_errors(h, err, *, decreasing: bool) -> tuple[np.ndarray, np.ndarray]:
    h = _as_array(h, "h")
    err = _as_array(err, "err")
    if h.shape != err.shape:
        raise InputError(f"h has {h.size} levels but err has {err.size}", field="err")
    if np.any(h <= 0):
        raise InputError("mesh sizes h must be positive", field="h")
    if np.any(err < 0):
        raise InputError("errors must be non-negative", field="err")
    if decreasing and np.any(np.diff(h) >= 0):
        raise InputError("levels must run coarse to fine (h strictly decreasing)", field="h")
    return h, err


def pairwise_orders(h, err) -> np.ndarray:
    """Pairwise orders ``log(e_i / e_{i+1}) / log(h_i / h_{i+1})``.

    Parameters
    ----------
    h : sequence of float
        Mesh sizes, one per level (any order, no two equal). For DOF-based
        rates pass ``h = N**(-1/dim)``.
    err : sequence of float
        Errors, one per level, non-negative.

    Returns
    -------
    ndarray
        ``len(h) - 1`` orders; a zero error gives an infinite or NaN entry.
    """
    h, err = _sizes_and_errors(h, err, decreasing=False)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(err[:-1] / err[1:]) / np.log(h[:-1] / h[1:])


def h_equivalent(dofs, dim: int = 2) -> np.ndarray:
    """Mesh size equivalent to a number of unknowns, ``h = N**(-1/dim)``."""
    dofs = _as_array(dofs, "dofs")
    if dim not in (1, 2, 3):
        raise InputError(f"dim must be 1, 2 or 3, not {dim!r}", field="dim")
    if np.any(dofs <= 0):
        raise InputError("numbers of unknowns must be positive", field="dofs")
    return dofs ** (-1.0 / dim)


def dof_orders(dofs, err, dim: int = 2) -> np.ndarray:
    """Pairwise orders with respect to the number of unknowns ``N``.

    The order is the slope of ``-log err`` against ``log N``. Since
    ``h ~ N**(-1/dim)`` on quasi-uniform meshes, ``order_h = dim * order_N``;
    in 2D ``order_h = 2 * order_N``, so P1 in H1 (order 1 in ``h``) shows
    order 1/2 in ``N``. On graded meshes only this DOF-based order is
    meaningful.

    Parameters
    ----------
    dofs : sequence of float
        Numbers of unknowns, one per level.
    err : sequence of float
        Errors, one per level.
    dim : int
        Space dimension used to convert ``N`` to an equivalent mesh size.

    Returns
    -------
    ndarray
        ``len(dofs) - 1`` orders with respect to ``N``.
    """
    return pairwise_orders(h_equivalent(dofs, dim), err) / dim


def asymptotic_levels(h, err, settle: float = 0.1, minimum: int = 3) -> list[int]:
    """Levels judged to be in the asymptotic range.

    Rule: the last ``minimum`` levels (all levels when there are fewer),
    extended towards coarser levels while the pairwise order of the next
    coarser pair lies within ``settle`` of the last pairwise order.

    Parameters
    ----------
    h, err : sequence of float
        Mesh sizes and errors, coarse to fine, errors positive.
    settle : float
        How close a pairwise order must be to the last one to count as settled.
    minimum : int
        Number of finest levels always included (at least 2).

    Returns
    -------
    list of int
        Level indices, ascending.
    """
    h, err = _sizes_and_errors(h, err, decreasing=True)
    count = h.size
    minimum = max(int(minimum), 2)
    if count <= minimum:
        return list(range(count))
    rates = pairwise_orders(h, err)
    start = count - minimum
    while start > 0 and abs(rates[start - 1] - rates[-1]) <= settle:
        start -= 1
    return list(range(start, count))


def fitted_order(h, err, levels=None) -> float:
    """Least-squares slope of ``log err`` against ``log h``.

    Parameters
    ----------
    h, err : sequence of float
        Mesh sizes and errors, coarse to fine.
    levels : slice or sequence of int, optional
        Levels to fit over; by default those chosen by :func:`asymptotic_levels`.

    Returns
    -------
    float
        The fitted order.

    Raises
    ------
    InputError
        Fewer than two levels, or a zero error among them.
    """
    h, err = _sizes_and_errors(h, err, decreasing=levels is None)
    if levels is None:
        index = np.asarray(asymptotic_levels(h, err), dtype=int)
    elif isinstance(levels, slice):
        index = np.arange(h.size)[levels]
    else:
        index = np.asarray(levels, dtype=int)
    if index.size < 2:
        raise InputError("a fitted order needs at least two levels", field="levels")
    if np.any(err[index] <= 0):
        raise InputError("a fitted order needs positive errors", field="err")
    x = np.log(h[index])
    y = np.log(err[index])
    x = x - x.mean()
    return float(np.dot(x, y - y.mean()) / np.dot(x, x))


def expected_orders(p: int, lam: float = math.inf, graded: bool = False) -> dict[str, float]:
    """A-priori convergence orders in ``h`` for Lagrange elements of degree ``p``.

    With ``lam`` the leading singular exponent of the solution
    (``u ~ r**lam`` near a corner; ``lam = inf`` for a smooth solution):

    - ``"H1"``: ``min(p, lam)``
    - ``"L2"``: ``min(p, lam) + min(1, lam)``, i.e. ``min(p + 1, 2 * lam)`` when
      ``lam <= 1`` or ``lam >= p``, and the sharper ``lam + 1`` for ``1 < lam < p``
      (a convex corner with ``p >= 2``, where ``2 * lam`` would overshoot)
    - ``"energy"`` and ``"qoi"`` (quantities of interest): ``2 * min(p, lam)``

    With ``graded=True`` (meshes graded towards the singular corner) the
    orders are with respect to ``h = N**(-1/2)``: grading restores the
    smooth-case orders, so the H1 error falls as ``N**(-p/2)``.

    Parameters
    ----------
    p : int
        Element degree, at least 1.
    lam : float
        Singular exponent, positive; ``math.inf`` for smooth solutions.
    graded : bool
        Orders for optimally graded meshes, expressed in ``N**(-1/2)``.

    Returns
    -------
    dict
        Keys ``"H1"``, ``"L2"``, ``"energy"``, ``"qoi"``.
    """
    # Strang & Fix, An Analysis of the Finite Element Method (1973), ch. 3 and 8:
    # H1 order min(p, lam), L2 one more by duality, energy and functionals twice H1.
    # Grisvard, Elliptic Problems in Nonsmooth Domains (1985): corner singularities
    # r**lam with lam = pi/omega limit the Sobolev regularity to H^(1+lam-).
    # Graded meshes: Babuska, Kellogg & Pitkaranta, Numer. Math. 33 (1979) 447-471
    # (H1 error N**(-p/2)); the L2 and functional orders under grading are from memory.
    if isinstance(p, bool) or not isinstance(p, (int, float, np.integer)) \
            or not float(p).is_integer() or p < 1:
        raise InputError(f"element degree must be an integer >= 1, not {p!r}", field="p")
    lam = float(lam)
    if not lam > 0:
        raise InputError(f"singular exponent must be positive, not {lam!r}", field="lam")
    p = int(p)
    if graded:
        lam = math.inf
    h1 = float(min(p, lam))
    # Aubin-Nitsche duality: the dual problem gains min(1, lam) orders
    l2 = h1 + min(1.0, lam)
    return {"H1": h1, "L2": float(l2), "energy": 2 * h1, "qoi": 2 * h1}


def roundoff_floor(n_dofs, h_min, scale, eps: float = float(np.finfo(float).eps),
                   constant: float = 1.0):
    """Estimate of the smallest attainable error, ``eps * cond * scale``.

    A backward-stable solve loses about ``eps * cond(A)`` in relative accuracy
    (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., 2002,
    ch. 7). For a stiffness matrix of shape-regular elements in 2D,
    ``cond(A) <= C * h_min**-2`` (Bank & Scott, SIAM J. Numer. Anal. 26 (1989)
    1383-1394, from memory); ``N`` guards the case of few very small elements
    being outnumbered. Here ``cond = constant * max(h_min**-2, n_dofs)`` with
    ``h_min`` measured on a domain of diameter about 1. The estimate is a bound;
    real round-off usually sits below it.

    Parameters
    ----------
    n_dofs : float or array_like
        Number of unknowns per level.
    h_min : float or array_like
        Smallest element size per level.
    scale : float
        Size of the solution in the measured norm (e.g. its max or L2 norm).
    eps : float
        Machine epsilon.
    constant : float
        The constant ``C`` in the condition estimate.

    Returns
    -------
    float or ndarray
        The floor, per level when arrays are given.
    """
    n_dofs = np.asarray(n_dofs, dtype=float)
    h_min = np.asarray(h_min, dtype=float)
    if np.any(h_min <= 0) or np.any(n_dofs <= 0):
        raise InputError("n_dofs and h_min must be positive", field="h_min")
    floor = eps * constant * np.maximum(h_min**-2.0, n_dofs) * abs(float(scale))
    return float(floor) if floor.ndim == 0 else floor


def plateau_level(err, floor, factor: float = PLATEAU_FACTOR) -> int | None:
    """First level (coarse to fine) whose error has reached round-off.

    A level has reached it when its error is exactly zero or at most
    ``factor * floor``. Every finer level is then treated as plateau too.

    Parameters
    ----------
    err : sequence of float
        Errors, coarse to fine.
    floor : float, sequence of float or None
        Round-off floor, one value or one per level (see :func:`roundoff_floor`);
        ``None`` flags only exact zeros.
    factor : float
        How close to the floor counts as reached.

    Returns
    -------
    int or None
        Index of the first plateau level, or ``None``.
    """
    err = _as_array(err, "err")
    if floor is None:
        limit = np.zeros_like(err)
    else:
        limit = factor * np.broadcast_to(np.asarray(floor, dtype=float), err.shape)
    reached = np.flatnonzero((err == 0) | (err <= limit))
    return int(reached[0]) if reached.size else None


def _case_text(degree, lam) -> str:
    parts = []
    if degree is not None:
        parts.append(f"P{degree}")
    if lam is not None:
        parts.append("λ = ∞" if math.isinf(lam) else f"λ = {lam:.4g}")
    return " for " + " with ".join(parts) if parts else ""


def _sign_changes(rates: np.ndarray) -> int:
    signs = np.sign(rates[np.isfinite(rates) & (rates != 0)])
    return int(np.count_nonzero(signs[1:] != signs[:-1]))


def judge(h, err, expected: float, tol: float = 0.1, floor=None, norm_name: str = "L2", *,
          degree: int | None = None, lam: float | None = None,
          plateau_factor: float = PLATEAU_FACTOR, atol: float = PLATEAU_ATOL) -> Verdict:
    """Judge an error sequence against an expected order (rule in the module docstring).

    Parameters
    ----------
    h : sequence of float
        Mesh sizes, coarse to fine (strictly decreasing).
    err : sequence of float
        Errors in one norm, one per level.
    expected : float
        Expected order in ``h`` (see :func:`expected_orders`).
    tol : float
        Allowed shortfall of the observed order.
    floor : float or sequence of float, optional
        Round-off floor (see :func:`roundoff_floor`); ``None`` flags only zeros.
    norm_name : str
        Name of the norm, used in the reason.
    degree, lam : optional
        Element degree and singular exponent, quoted in the reason.
    plateau_factor : float
        Errors within this factor of the floor are plateau.
    atol : float
        Absolute error below which a plateau-only sequence passes.

    Returns
    -------
    Verdict
    """
    h, err = _sizes_and_errors(h, err, decreasing=True)
    expected = float(expected)
    if not math.isfinite(expected) or not tol >= 0:
        raise InputError("expected order must be finite and tol non-negative", field="expected")
    target = f"expected {expected:.2f} ± {tol:.2f}{_case_text(degree, lam)}"
    pairwise = pairwise_orders(h, err) if h.size > 1 else np.array([])
    start = plateau_level(err, floor, plateau_factor)
    start = h.size if start is None else start
    base = {"expected": expected, "pairwise": [float(v) for v in pairwise],
            "used_levels": list(range(start)), "plateau_levels": list(range(start, h.size)),
            "norm": norm_name, "tol": float(tol)}
    if np.all(err == 0):
        reason = f"{norm_name} error is zero on every level: exact to round-off."
        return Verdict(PASS, math.nan, fitted=math.nan, reason=reason, **base)
    if start < 2:
        return _too_short(err, start, atol, target, base)
    return _rated(h[:start], err[:start], pairwise[: start - 1], target, base)


def _too_short(err, start, atol, target, base) -> Verdict:
    """Verdict when fewer than two levels come before the plateau."""
    norm_name = base["norm"]
    if start < err.size and float(err[start:].max()) <= atol:
        reason = (f"round-off plateau: {norm_name} error reached round-off by level {start} "
                  f"(at most {err[start:].max():.2e}), too early to measure an order.")
        return Verdict(PASS, math.nan, fitted=math.nan, reason=reason, **base)
    where = (f"before the round-off plateau at level {start}" if start < err.size
             else "in the sequence")
    reason = (f"only {start} level{'' if start == 1 else 's'} {where}, but measuring the "
              f"{norm_name} order needs two; {target}.")
    return Verdict(INCONCLUSIVE, math.nan, fitted=math.nan, reason=reason, **base)


def _rated(h, err, rates, target, base) -> Verdict:
    """Verdict from the pairwise orders over the used levels ``h``, ``err``."""
    norm_name, expected, tol = base["norm"], base["expected"], base["tol"]
    fit_levels = asymptotic_levels(h, err)
    fitted = fitted_order(h, err, levels=fit_levels)
    observed = float(rates[-1])
    base = {**base, "fitted": fitted, "fitted_levels": fit_levels}
    span = f"levels {h.size - 2}→{h.size - 1}"
    if _sign_changes(rates) >= 2:
        listed = ", ".join(f"{v:.2f}" for v in rates)
        reason = (f"{norm_name} error rose and fell under refinement (pairwise orders {listed}), "
                  f"so no single order fits; {target}.")
        return Verdict(INCONCLUSIVE, observed, reason=reason, **base)
    if observed >= expected - tol:
        superconvergent = observed > expected + SUPERCONVERGENCE_MARGIN
        reason = (f"{norm_name} error fell at order {observed:.2f} over the last refinement "
                  f"({span}, fitted {fitted:.2f}), {target}")
        reason += ("; above the expected order by more than 0.5 (super-convergence, not a "
                   "failure)." if superconvergent else ".")
        return Verdict(PASS, observed, reason=reason, superconvergent=superconvergent, **base)
    if observed <= 0:
        reason = (f"{norm_name} error did not fall over the last refinement (order "
                  f"{observed:.2f}, {span}), {target}; wrong boundary data, a mis-assembled "
                  "term, or unflagged round-off (give a floor) can stall the error.")
    else:
        reason = (f"{norm_name} error fell at order {observed:.2f} over the last refinement "
                  f"({span}, fitted {fitted:.2f}), {target}; the solution may be missing a "
                  "boundary or source term, or the mesh is not in the asymptotic range.")
    logger.debug("rate check failed: %s", reason)
    return Verdict(FAIL, observed, reason=reason, **base)
