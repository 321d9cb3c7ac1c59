"""Pictures of a solved field: colour map, equipotentials and field lines.

Field lines are traced along -grad u, so they cross the equipotentials at right
angles; the two families are drawn in contrasting styles.
"""

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.tri as mtri  # noqa: E402
import numpy as np  # noqa: E402

#: Above this many triangles the picture uses vertex values only (no sub-sampling).
DETAIL_LIMIT = 200_000


def plot_triangulation(solution):
    """A matplotlib triangulation and the values of u on it."""
    if solution.order > 1 and solution.mesh.n_triangles < DETAIL_LIMIT:
        m, z = solution.basis.refinterp(solution.u, nrefs=2)
        return mtri.Triangulation(m.p[0], m.p[1], m.t.T), z
    mesh = solution.mesh
    return (mtri.Triangulation(mesh.points[:, 0], mesh.points[:, 1], mesh.triangles),
            solution.vertex_values())


def draw_field(ax, tri, z, lines_tri=None, lines_z=None, segments=None, points=None,
               n_levels=14, field_lines=True):
    """Colour map, equipotentials (solid black) and field lines (white) on ``ax``.

    ``lines_tri``/``lines_z`` is a valid (non-overlapping) triangulation used to trace
    the field lines along -grad u; it defaults to ``tri``. With ``field_lines=False``
    the caller draws them (as level lines of the stream function).
    """
    cf = ax.tricontourf(tri, z, levels=48, cmap="viridis")
    ax.tricontour(tri, z, levels=n_levels, colors="k", linewidths=0.8, linestyles="solid")
    if lines_tri is None:
        lines_tri, lines_z = tri, z
    interp = mtri.LinearTriInterpolator(lines_tri, lines_z)
    x0, x1 = tri.x.min(), tri.x.max()
    y0, y1 = tri.y.min(), tri.y.max()
    nx = 160
    ny = max(20, int(nx * (y1 - y0) / max(x1 - x0, 1e-300)))
    X, Y = np.meshgrid(np.linspace(x0, x1, nx), np.linspace(y0, y1, ny))
    gx, gy = interp.gradient(X, Y)
    if field_lines and np.ma.count(gx) > 0:
        ax.streamplot(X, Y, -np.ma.filled(gx, np.nan), -np.ma.filled(gy, np.nan),
                      color="white", linewidth=0.7, density=1.1, arrowsize=0.6,
                      broken_streamlines=False)
    if segments is not None:
        for a, b in segments:
            ax.plot([points[a, 0], points[b, 0]], [points[a, 1], points[b, 1]], "-",
                    color="0.15", linewidth=1.2)
    ax.set_aspect("equal")
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    return cf


def field_png(solution, conjugate=None, dpi=130):
    """PNG bytes of the solution picture.

    With a ``conjugate`` (stream function), field lines are its level lines, equal
    flux between neighbours; otherwise they are traced along -grad u.
    """
    tri, z = plot_triangulation(solution)
    fig, ax = plt.subplots(figsize=(7.5, 6))
    mesh = solution.mesh
    bnd = mesh.segments[mesh.boundary_mask()]
    for a, b in mesh.segments[~mesh.boundary_mask()]:  # material interfaces
        ax.plot(mesh.points[[a, b], 0], mesh.points[[a, b], 1], "--", color="0.85", lw=0.9)
    unit = solution.problem.physics.potential_unit
    straight = mtri.Triangulation(mesh.points[:, 0], mesh.points[:, 1], mesh.triangles)
    cf = draw_field(ax, tri, z, straight, solution.vertex_values(), bnd, mesh.points,
                    field_lines=conjugate is None)
    if conjugate is not None:
        from .conjugate import draw_stream_lines

        draw_stream_lines(ax, conjugate, n_lines=24)
        lines = "white: field lines (stream-function levels, equal flux between lines)"
    else:
        lines = "white: field lines (along -grad u)"
    cb = fig.colorbar(cf, ax=ax, shrink=0.85)
    cb.set_label(f"u [{unit}]" if unit else "u")
    ax.set_title(f"{solution.problem.name}: P{solution.order}, {solution.dofs:,} DOFs\n"
                 f"black: equipotentials\n{lines}", fontsize=9)
    ax.set_xlabel("x")
    ax.set_ylabel("y")
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    plt.close(fig)
    return buf.getvalue()
