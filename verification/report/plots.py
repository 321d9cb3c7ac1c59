"""Pictures for study reports: convergence plots (SVG), field and error maps (PNG).

Convergence plots are log-log with a slope triangle of the expected order
drawn beside the finest point. The field picture shows u_h in colour, its
equipotentials (level curves of u_h) and field lines as level curves of the
case's exact conjugate v (they cross the equipotentials at right angles). The
error map is the root-mean-square of |u_h - u| over each cell, by quadrature.
"""

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.tri as mtri  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.colors import LogNorm  # noqa: E402
from matplotlib.ticker import NullFormatter  # noqa: E402

#: Pictures use vertex values only above this many cells (keeps reports small and fast).
DETAIL_LIMIT = 40_000
MARKERS = "osD^v<>"


def _svg(fig):
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight")
    plt.close(fig)
    text = buf.getvalue()
    return text[text.find("<svg"):]  # drop the XML prolog: the SVG is inlined in HTML


def _png(fig, dpi=110):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    plt.close(fig)
    return buf.getvalue()


def slope_triangle(ax, x_fine, y_fine, ratio, order, color, label):
    """A slope triangle of ``order`` under the last segment of a log-log error line.

    The hypotenuse runs from ``x_fine * ratio`` to ``x_fine`` (one refinement step),
    shifted below the data by a factor 0.5 so it does not hide the points.
    """
    y = 0.5 * y_fine
    x0, y0 = x_fine * ratio, y * abs(ratio) ** (order if ratio > 1 else -order)
    ax.plot([x0, x_fine, x0, x0], [y0, y, y, y0], color=color, lw=0.8, alpha=0.8)
    ax.annotate(label, (x0, np.sqrt(y * y0)), color=color, fontsize=7, ha="right",
                va="center", xytext=(-2, 0), textcoords="offset points")


def convergence_svg(studies, x="h", checks=("L2", "H1")):
    """Errors of several studies against ``h`` (``x="h"``) or DOFs (``x="dofs"``).

    Parameters
    ----------
    studies : list of Study
    x : {"h", "dofs"}
    checks : tuple of str
        Which checks to draw (those a study lacks are skipped).

    Returns
    -------
    str
        An ``<svg>`` element.
    """
    fig, ax = plt.subplots(figsize=(5.6, 4.2))
    colors = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    k = 0
    for study in studies:
        if len(study.levels) < 1:
            continue
        xs = (np.array([lv.dofs for lv in study.levels], float) if x == "dofs"
              else np.array([lv.h for lv in study.levels]))
        for check in checks:
            if check not in study.expected:
                continue
            err = study.series(check)
            if np.all(err <= 0):
                continue
            color = colors[k % len(colors)]
            label = f"{study.case} P{study.order} {check}"
            ax.loglog(xs, err, marker=MARKERS[k % len(MARKERS)], color=color, lw=1.2,
                      ms=4, label=label)
            order = study.expected[check].order
            if x == "dofs":  # err ~ N**(-order/2): one refinement step is N / 4
                slope_triangle(ax, xs[-1], err[-1], 0.25, order / 2.0, color,
                               f"{order / 2:.3g}")
            else:  # err ~ h**order: one refinement step is 2 h
                slope_triangle(ax, xs[-1], err[-1], 2.0, order, color, f"{order:.3g}")
            k += 1
    if x == "dofs":
        ax.set_xlabel("degrees of freedom N")
    else:
        ax.set_xlabel("h (largest edge)")
        ax.invert_xaxis()
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_ylabel("error")
    ax.grid(True, which="both", alpha=0.25)
    ax.set_title("triangles: expected order" + (" in N" if x == "dofs" else " in h"),
                 fontsize=9)
    if k:
        ax.legend(fontsize=7, loc="best")
    return _svg(fig)


def _sample(solution):
    """A triangulation of the solution for drawing, and u_h on it."""
    basis = solution.basis
    skm = basis.mesh
    if getattr(solution, "order", 1) > 1 and skm.t.shape[1] < DETAIL_LIMIT:
        m, z = basis.refinterp(solution.u, nrefs=1)
        return mtri.Triangulation(m.p[0], m.p[1], m.t.T), z
    nodal = basis.nodal_dofs[0]
    p = skm.p
    return mtri.Triangulation(p[0], p[1], skm.t[:3].T), solution.u[nodal]


def _mask_cuts(tri, values):
    """Hide triangles where a multivalued conjugate jumps (its branch cut)."""
    spread = np.ptp(values[tri.triangles], axis=1)
    finite = np.isfinite(values)
    scale = np.ptp(values[finite]) if finite.any() else 1.0
    bad = (spread > 0.25 * scale) | ~np.all(finite[tri.triangles], axis=1)
    tri.set_mask(bad)
    return tri


def field_png(solution, case, n_levels=16):
    """PNG bytes: u_h, its equipotentials and the field lines (level curves of exact v)."""
    tri, z = _sample(solution)
    fig, ax = plt.subplots(figsize=(6.2, 5.0))
    cf = ax.tricontourf(tri, z, levels=40, cmap="viridis")
    ax.tricontour(tri, z, levels=n_levels, colors="k", linewidths=0.7, linestyles="solid")
    with np.errstate(all="ignore"):
        v = np.asarray(case.v(tri.x, tri.y), float)
    if np.any(np.isfinite(v)):
        lines = _mask_cuts(mtri.Triangulation(tri.x, tri.y, tri.triangles), v)
        finite = v[np.isfinite(v)]
        levels = np.linspace(finite.min(), finite.max(), n_levels + 2)[1:-1]
        ax.tricontour(lines, np.nan_to_num(v), levels=levels, colors="white",
                      linewidths=0.7, linestyles="solid")
    fig.colorbar(cf, ax=ax, shrink=0.85, label="u_h")
    ax.set_aspect("equal")
    ax.set_title(f"{case.name}, P{getattr(solution, 'order', '?')}, finest level\n"
                 "black: equipotentials of u_h   white: field lines (level curves of exact v)",
                 fontsize=8)
    return _png(fig)


def cell_errors(solution, case):
    """Root-mean-square of ``|u_h - u|`` over each cell, with the quadrature of the norms."""
    from skfem import CellBasis

    from ..norms import quadrature_degree

    basis = CellBasis(solution.basis.mesh, solution.basis.elem,
                      intorder=quadrature_degree(solution.basis.elem.maxdeg))
    x = np.asarray(basis.global_coordinates())
    diff = np.asarray(basis.interpolate(solution.u)) - case.u(x[0], x[1])
    pure_neumann = all(s.kind != "dirichlet" for s in case.conditions.values())
    if pure_neumann:
        diff = diff - np.average(diff, weights=np.broadcast_to(basis.dx, diff.shape))
    return np.sqrt(np.sum(diff**2 * basis.dx, axis=1) / np.sum(basis.dx, axis=1))


def error_png(solution, case):
    """PNG bytes: the per-cell error map on a log colour scale."""
    skm = solution.basis.mesh
    err = cell_errors(solution, case)
    tri = mtri.Triangulation(skm.p[0], skm.p[1], skm.t[:3].T)
    positive = err[err > 0]
    lo = float(positive.min()) if positive.size else 1e-16
    hi = float(err.max()) if err.max() > 0 else 1.0
    fig, ax = plt.subplots(figsize=(6.2, 5.0))
    pc = ax.tripcolor(tri, facecolors=np.maximum(err, lo),
                      norm=LogNorm(vmin=max(lo, hi * 1e-8), vmax=hi), cmap="magma")
    fig.colorbar(pc, ax=ax, shrink=0.85, label="RMS |u_h - u| per cell")
    ax.set_aspect("equal")
    ax.set_title(f"{case.name}, P{getattr(solution, 'order', '?')}: error per cell, finest level",
                 fontsize=8)
    return _png(fig)
