"""Picture of a quadrilateral: electrodes, equipotentials and field lines."""

import io

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from .lines import trace_lines

LOW, HIGH, INSULATED = "tab:blue", "tab:red", "0.25"
EQUIPOTENTIAL, FIELD_LINE = "tab:orange", "tab:green"


def arc_vertices(vertices, start, stop):
    """Vertices from index ``start`` to ``stop`` going forward round the polygon."""
    n = vertices.size
    return vertices[(start + np.arange((stop - start) % n + 1)) % n]


def quadrilateral_png(result, title=None, dpi=130, lines=None):
    """PNG bytes of the polygon with its electrodes, equipotentials and field lines.

    Parameters
    ----------
    result : ModulusResult
    title : str, optional
        First title line; the modulus follows on the second.
    dpi : int
    lines : QuadrilateralLines, optional
        Precomputed curves (:func:`~verification.sc.lines.trace_lines`).

    Returns
    -------
    bytes
    """
    lines = lines or trace_lines(result)
    z = result.map.vertices
    c0, c1, c2, c3 = result.ccw_corners
    fig = Figure(figsize=(7.5, 6))
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for _, curve in lines.field_lines:
        ax.plot(curve.real, curve.imag, color=FIELD_LINE, lw=0.8)
    for _, curve in lines.equipotentials:
        ax.plot(curve.real, curve.imag, color=EQUIPOTENTIAL, lw=0.8)
    arcs = [(c3, c0, LOW, 3.0, "electrode u = 0"), (c1, c2, HIGH, 3.0, "electrode u = 1"),
            (c0, c1, INSULATED, 1.2, "insulated"), (c2, c3, INSULATED, 1.2, None)]
    for start, stop, color, width, label in arcs:
        arc = arc_vertices(z, start, stop)
        ax.plot(arc.real, arc.imag, color=color, lw=width, label=label, solid_capstyle="round")
    corners = z[[c0, c1, c2, c3]]
    ax.plot(corners.real, corners.imag, "o", color="black", ms=4)
    for k, point in enumerate(corners):
        ax.annotate(f"c{k}", (point.real, point.imag), textcoords="offset points",
                    xytext=(4, 4), fontsize=9)
    ax.plot([], [], color=EQUIPOTENTIAL, lw=0.8, label="equipotentials")
    ax.plot([], [], color=FIELD_LINE, lw=0.8, label="field lines")
    du, ds = lines.spacing
    step = f"lines every {du / result.modulus:.3g} in u and {ds:.3g} of the flux"
    if np.isclose(du, ds):
        step += ": curvilinear squares"
    head = f"{title}\n" if title else ""
    ax.set_title(f"{head}M = {result.modulus:.10g}; {step}", fontsize=10)
    ax.set_aspect("equal")
    ax.set_xlabel("x")
    ax.set_ylabel("y")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=3, fontsize=8,
              frameon=False)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    return buf.getvalue()
