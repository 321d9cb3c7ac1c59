"""Effectivity of the orthogonality residual on exact cases.

For each case, degree and refinement level: the residual
``eta = || k grad u_h - J grad psi_h ||_{1/k}`` of :mod:`lapsolve.stream`, the
true energy error ``e_u = || grad(u - u_h) ||_k`` against the exact solution, the
error of the recovered flux ``e_sigma = || k grad u - J grad psi_h ||_{1/k}``, the
effectivity index ``eta / e_u`` and the Prager-Synge gap
``(eta^2 - e_u^2 - e_sigma^2) / eta^2`` (zero for an exactly equilibrated flux
with exact data: Prager & Synge, Quart. Appl. Math. 5 (1947) 241).

The errors are integrated with a rule of degree ``max(6, 2p + 2)``
(:func:`verification.norms.quadrature_degree`), as every other norm here.
"""

import time
from dataclasses import asdict, dataclass

import numpy as np

from lapsolve.solve import solve
from lapsolve.stream import basis_gradients, stream_function

from .norms import element_groups
from .rates import expected_orders


@dataclass
class EffectivityRow:
    case: str
    order: int
    level: int
    dofs: int
    h: float
    eta: float
    energy_error: float
    flux_error: float
    effectivity: float
    identity_gap: float
    guaranteed: bool
    seconds: float

    def to_dict(self):
        return asdict(self)


def energy_errors(solution, stream, case):
    """``(e_u, e_sigma)``: ``|| grad(u - u_h) ||_k`` and ``|| k grad u - J grad psi_h ||_{1/k}``.

    Quadrature of :func:`verification.norms.element_groups`: degree
    ``max(6, 2p + 2)``, graded towards the case's singular point (if any).
    """
    basis = solution.basis
    local_all = stream.local_values(basis.element_dofs)
    k_all = np.asarray(solution.disc.k_cell, float)
    point = case.singular_point if case.singular_exponent < 1 else None
    e_u = e_s = 0.0
    for elements, cb in element_groups(basis, point):
        x = np.asarray(cb.global_coordinates())
        ex, ey = case.grad(x[0], x[1])
        k = k_all[elements][:, None]
        uh = cb.interpolate(solution.u).grad
        gx, gy = basis_gradients(cb, local_all[:, elements])
        e_u += float(np.sum(cb.dx * k * ((ex - uh[0]) ** 2 + (ey - uh[1]) ** 2)))
        # k grad u - J grad psi_h, with J (a, b) = (-b, a)
        e_s += float(np.sum(cb.dx / k * ((k * ex + gy) ** 2 + (k * ey - gx) ** 2)))
    return float(np.sqrt(e_u)), float(np.sqrt(e_s))


def effectivity_rows(case, order, levels, size=None, progress=None):
    """One :class:`EffectivityRow` per uniform refinement level of ``case``."""
    problem = case.problem(size)
    rows = []
    for level in range(levels):
        t0 = time.perf_counter()
        solution = solve(problem, order=order, refine=level)
        stream = stream_function(solution)
        e_u, e_s = energy_errors(solution, stream, case)
        eta = stream.eta
        gap = (eta**2 - e_u**2 - e_s**2) / eta**2 if eta > 0 else float("nan")
        rows.append(EffectivityRow(case.name, order, level, solution.dofs, solution.mesh.h(),
                                   eta, e_u, e_s, eta / e_u if e_u > 0 else float("nan"), gap,
                                   stream.guaranteed, time.perf_counter() - t0))
        if progress:
            progress(rows[-1])
    return rows


def observed_order(rows, key="eta"):
    """Order in h of ``key`` between the last two levels (nan with fewer)."""
    if len(rows) < 2:
        return float("nan")
    a, b = rows[-2], rows[-1]
    return float(np.log(getattr(a, key) / getattr(b, key)) / np.log(a.h / b.h))


def expected_energy_order(case, order):
    """``min(p, lambda)``: the energy-norm order in h of uniform refinement."""
    return expected_orders(order, case.singular_exponent)["H1"]


def markdown_table(results, expected):
    """Markdown rows: case, P, effectivity per level, observed and expected order of eta.

    ``results`` and ``expected`` are keyed by ``(case name, degree)``.
    """
    levels = max(len(rows) for rows in results.values())
    head = ("| case | P | " + " | ".join(f"level {i}" for i in range(levels))
            + " | order of eta | expected | max gap |")
    lines = [head, "|" + "---|" * (levels + 5)]
    for key, rows in results.items():
        eff = [f"{r.effectivity:.3f}" for r in rows] + [""] * (levels - len(rows))
        gap = max(abs(r.identity_gap) for r in rows)
        lines.append(f"| {key[0]} | {key[1]} | " + " | ".join(eff)
                     + f" | {observed_order(rows):.2f} | {expected[key]:.2f} | {gap:.1e} |")
    return lines


def effectivity_png(results, dpi=120):
    """PNG bytes: effectivity index against DOFs, one panel per degree."""
    import io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    orders = sorted({key[1] for key in results})
    fig, axes = plt.subplots(1, len(orders), figsize=(5.5 * len(orders), 4.5), squeeze=False,
                             sharey=True)
    names = list(dict.fromkeys(key[0] for key in results))
    colours = plt.get_cmap("tab20")
    markers = "os^vD<>ph*"
    for ax, order in zip(axes[0], orders):
        for (name, p), rows in results.items():
            if p == order:
                i = names.index(name)
                ax.semilogx([r.dofs for r in rows], [r.effectivity for r in rows],
                            marker=markers[i % len(markers)], ms=4, lw=1,
                            color=colours(i % 20), label=name)
        ax.axhline(1.0, color="k", lw=0.8)
        ax.set_title(f"P{order}: effectivity of the orthogonality residual", fontsize=9)
        ax.set_xlabel("DOFs")
        ax.grid(True, which="both", alpha=0.3)
    axes[0][0].set_ylabel("eta / energy error")
    axes[0][-1].legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    plt.close(fig)
    return buf.getvalue()
