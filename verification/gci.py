"""Grid Convergence Index (GCI) by the three-grid procedure.

The procedure follows Celik, Ghia, Roache, Freitas, Coleman & Raad, "Procedure
for estimation and reporting of uncertainty due to discretization in CFD
applications", J. Fluids Eng. 130 (2008) 078001, built on Roache, "Perspective:
a method for uniform reporting of grid refinement studies", J. Fluids Eng. 116
(1994) 405-413.

Conventions
-----------
Levels run **fine to coarse**: index 1 is the finest grid, as in the paper.
Sizes are either representative cell sizes ``h`` (strictly increasing) or cell
counts ``N`` (strictly decreasing, ``size_kind="cells"``), converted by
``h = (measure / N)**(1/dim)``; the measure cancels in every ratio.

With ``eps21 = phi2 - phi1``, ``eps32 = phi3 - phi2``, ``s = sign(eps32/eps21)``
and ``r21 = h2/h1``, ``r32 = h3/h2``, the apparent order solves

    p = |ln|eps32/eps21| + q(p)| / ln r21,   q(p) = ln((r21**p - s) / (r32**p - s))

by fixed-point iteration from ``q = 0``. Relative errors and GCIs are returned
as fractions (0.022 means 2.2 %).
"""

from __future__ import annotations

import logging
import math
from dataclasses import asdict, dataclass

import numpy as np

from lapsolve.errors import InputError

logger = logging.getLogger(__name__)

#: Safety factor recommended for three-grid studies (Roache 1994).
SAFETY_THREE_GRID = 1.25
_MAX_ITERATIONS = 500
_ITERATION_TOL = 1e-14


@dataclass(frozen=True)
class GCIResult:
    """Outcome of a three-grid study (grid 1 finest).

    Attributes
    ----------
    h : tuple of float
        Representative sizes ``(h1, h2, h3)``, fine to coarse.
    phi : tuple of float
        The quantity on each grid, fine to coarse.
    r21, r32 : float
        Refinement ratios ``h2/h1`` and ``h3/h2``.
    p : float
        Apparent order (NaN when not meaningful).
    phi_ext21, phi_ext32 : float
        Richardson-extrapolated values from grids 1-2 and 2-3.
    e_a21, e_a32 : float
        Approximate relative errors ``|(phi1 - phi2)/phi1|`` and ``|(phi2 - phi3)/phi2|``.
    e_ext21, e_ext32 : float
        Extrapolated relative errors ``|(phi_ext21 - phi1)/phi_ext21|`` and likewise for 32.
    gci_fine21, gci_fine32 : float
        Fine-grid convergence indices ``safety * e_a / (r**p - 1)``.
    oscillatory : bool
        True when ``eps32/eps21 < 0``.
    diverging : bool
        True when the signed order (without the outer absolute value) is negative.
    converged : bool
        Whether the fixed-point iteration for ``p`` converged.
    iterations : int
        Fixed-point iterations used.
    safety : float
        Safety factor used.
    note : str
        Empty, or why the numbers need care.
    """

    h: tuple[float, float, float]
    phi: tuple[float, float, float]
    r21: float
    r32: float
    p: float
    phi_ext21: float
    phi_ext32: float
    e_a21: float
    e_a32: float
    e_ext21: float
    e_ext32: float
    gci_fine21: float
    gci_fine32: float
    oscillatory: bool
    diverging: bool
    converged: bool
    iterations: int
    safety: float
    note: str

    def to_dict(self) -> dict:
        """Plain JSON-ready dict; non-finite numbers become ``None``."""
        data = asdict(self)
        for key, value in data.items():
            if isinstance(value, float):
                data[key] = _finite_or_none(value)
            elif isinstance(value, tuple):
                data[key] = [_finite_or_none(v) for v in value]
        return data


@dataclass(frozen=True)
class GCIStudy:
    """GCI over more than three grids.

    Attributes
    ----------
    finest : GCIResult
        The three finest grids, the reported result.
    triples : list of GCIResult
        Every consecutive triple, finest first.
    """

    finest: GCIResult
    triples: list[GCIResult]

    def to_dict(self) -> dict:
        """Plain JSON-ready dict."""
        return {"finest": self.finest.to_dict(), "triples": [t.to_dict() for t in self.triples]}


def _finite_or_none(value):
    value = float(value)
    return value if math.isfinite(value) else None


def representative_size(n_cells, dim: int = 2, measure: float = 1.0) -> np.ndarray:
    """Representative cell size ``h = (measure / N)**(1/dim)`` (Celik et al. 2008, eq. 1)."""
    n_cells = np.asarray(n_cells, dtype=float)
    if dim not in (1, 2, 3):
        raise InputError(f"dim must be 1, 2 or 3, not {dim!r}", field="dim")
    if np.any(~np.isfinite(n_cells)) or np.any(n_cells <= 0):
        raise InputError("cell counts must be positive", field="n_cells")
    return (measure / n_cells) ** (1.0 / dim)


def richardson(phi_fine: float, phi_coarse: float, r: float, p: float) -> float:
    """Richardson extrapolation ``(r**p * phi_fine - phi_coarse) / (r**p - 1)``.

    Parameters
    ----------
    phi_fine, phi_coarse : float
        The quantity on the finer and the coarser grid.
    r : float
        Refinement ratio ``h_coarse / h_fine`` (> 1).
    p : float
        Order of the leading error term (> 0).
    """
    if not (r > 1 and p > 0 and math.isfinite(r) and math.isfinite(p)):
        raise InputError(f"need r > 1 and p > 0 (got r={r!r}, p={p!r})", field="r")
    factor = r**p
    return (factor * phi_fine - phi_coarse) / (factor - 1.0)


def _sizes(sizes, size_kind: str, dim: int) -> np.ndarray:
    if size_kind == "cells":
        h = representative_size(sizes, dim)
    elif size_kind == "h":
        h = np.asarray(sizes, dtype=float)
        if np.any(~np.isfinite(h)) or np.any(h <= 0):
            raise InputError("sizes h must be positive and finite", field="sizes")
    else:
        raise InputError(f"size_kind must be 'h' or 'cells', not {size_kind!r}",
                         field="size_kind")
    if h.ndim != 1:
        raise InputError("sizes must be a 1-D sequence", field="sizes")
    if np.any(np.diff(h) <= 0):
        raise InputError("grids must run fine to coarse (h increasing, cell counts "
                         "decreasing)", field="sizes")
    return h


def _apparent_order(r21, r32, eps21, eps32):
    """Fixed-point iteration for p; returns (p, signed, converged, iterations)."""
    ratio = eps32 / eps21
    sign = math.copysign(1.0, ratio)
    log_ratio = math.log(abs(ratio))
    order, q = abs(log_ratio) / math.log(r21), 0.0
    for iteration in range(1, _MAX_ITERATIONS + 1):
        if not order > 0 or not math.isfinite(order):
            return order, log_ratio + q, False, iteration
        q = math.log((r21**order - sign) / (r32**order - sign))
        updated = abs(log_ratio + q) / math.log(r21)
        if abs(updated - order) <= _ITERATION_TOL * max(1.0, updated):
            return updated, log_ratio + q, True, iteration
        order = updated
    return order, log_ratio + q, False, _MAX_ITERATIONS


def _relative(numerator, denominator):
    return abs(numerator / denominator) if denominator != 0 else math.nan


def gci_three_grid(sizes, phi, dim: int = 2, safety: float = SAFETY_THREE_GRID, *,
                   size_kind: str = "h") -> GCIResult:
    """Three-grid GCI study (conventions in the module docstring).

    Parameters
    ----------
    sizes : sequence of 3 floats
        Sizes ``h`` fine to coarse, or cell counts with ``size_kind="cells"``.
    phi : sequence of 3 floats
        The quantity on each grid, fine to coarse.
    dim : int
        Space dimension, used to turn cell counts into sizes.
    safety : float
        Safety factor ``Fs``.
    size_kind : {"h", "cells"}
        What ``sizes`` holds.

    Returns
    -------
    GCIResult
    """
    h = _sizes(sizes, size_kind, dim)
    phi = np.asarray(phi, dtype=float)
    if h.size != 3 or phi.shape != (3,) or not np.all(np.isfinite(phi)):
        raise InputError("a three-grid study needs exactly three sizes and three finite values",
                         field="phi")
    phi1, phi2, phi3 = (float(v) for v in phi)
    r21, r32 = float(h[1] / h[0]), float(h[2] / h[1])
    eps21, eps32 = phi2 - phi1, phi3 - phi2
    e_a21, e_a32 = _relative(phi1 - phi2, phi1), _relative(phi2 - phi3, phi2)
    oscillatory = eps21 * eps32 < 0
    notes = []
    nan = math.nan
    order, signed, converged, iterations = nan, nan, False, 0
    if eps21 == 0 or eps32 == 0:
        notes.append("two grids give the same value (eps21 or eps32 is zero), so the apparent "
                     "order is not meaningful")
    else:
        order, signed, converged, iterations = _apparent_order(r21, r32, eps21, eps32)
        if not converged:
            notes.append(f"the fixed-point iteration for p did not converge in {iterations} "
                         "steps")
            order = nan
    if oscillatory:
        notes.append("convergence is oscillatory (eps32/eps21 < 0); p and the GCI are less "
                     "reliable")
    diverging = bool(signed < 0)
    if diverging:
        notes.append("the differences do not shrink with refinement (diverging); the absolute "
                     "value in the order formula hides this")
    if math.isnan(order):
        ext21 = ext32 = gci21 = gci32 = nan
    else:
        ext21, ext32 = richardson(phi1, phi2, r21, order), richardson(phi2, phi3, r32, order)
        gci21 = safety * e_a21 / (r21**order - 1.0)
        gci32 = safety * e_a32 / (r32**order - 1.0)
    if phi1 == 0 or phi2 == 0:
        notes.append("a value is zero, so relative errors are undefined")
    note = "; ".join(notes)
    if note:
        logger.debug("GCI study: %s", note)
    return GCIResult(
        h=tuple(float(v) for v in h), phi=(phi1, phi2, phi3), r21=r21, r32=r32, p=order,
        phi_ext21=ext21, phi_ext32=ext32, e_a21=e_a21, e_a32=e_a32,
        e_ext21=_relative(ext21 - phi1, ext21), e_ext32=_relative(ext32 - phi2, ext32),
        gci_fine21=gci21, gci_fine32=gci32, oscillatory=bool(oscillatory), diverging=diverging,
        converged=converged, iterations=iterations, safety=float(safety),
        note=note[:1].upper() + note[1:] + "." if note else "",
    )


def gci_multi_grid(sizes, phi, dim: int = 2, safety: float = SAFETY_THREE_GRID, *,
                   size_kind: str = "h") -> GCIStudy:
    """GCI over three or more grids: the three finest, and every consecutive triple.

    Parameters are those of :func:`gci_three_grid`, with any number (>= 3) of grids,
    fine to coarse.
    """
    h = _sizes(sizes, size_kind, dim)
    phi = np.asarray(phi, dtype=float)
    if h.size < 3 or phi.shape != h.shape:
        raise InputError("need at least three grids and one value per grid", field="phi")
    triples = [gci_three_grid(h[i:i + 3], phi[i:i + 3], dim, safety)
               for i in range(h.size - 2)]
    return GCIStudy(finest=triples[0], triples=triples)
