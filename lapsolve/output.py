"""Result files of a solve: ``solution.vtu``, ``summary.json``, ``field.png``.

All files of one run are written through :class:`~lapsolve.atomic.OutputSet`:
they appear together, complete, or not at all.
"""

import json

import meshio
import numpy as np

from .atomic import OutputSet
from .errors import InputError, LapsolveError

SUMMARY_SCHEMA = "lapsolve.summary/1"


def cell_flux(solution):
    """Mean of ``-k grad u`` over each triangle, shape (n_triangles, 2)."""
    grad = solution.basis.interpolate(solution.u).grad  # (2, nel, nqp)
    g = grad.mean(axis=2).T
    return -solution.disc.k_cell[:, None] * g


def vtu_mesh(solution, conjugate=None):
    """A meshio mesh with u (and the stream function psi), region ids, flux, part tags.

    P2 is written as 6-node triangles carrying every degree of freedom; P1 and P3
    as 3-node triangles with vertex values.
    """
    from .solve import segment_parts

    mesh = solution.mesh
    if solution.order == 2:
        points = solution.basis.doflocs.T
        tri = ("triangle6", solution.basis.element_dofs.T)
        u = solution.u
    else:
        points = mesh.points
        tri = ("triangle", mesh.triangles)
        u = solution.vertex_values()
    point_data = {"u": np.asarray(u, float)}
    if conjugate is not None:
        from .conjugate import stream_function_vertex_values

        point_data["psi"] = stream_function_vertex_values(conjugate,
                                                          all_dofs=solution.order == 2)
    bnd = mesh.boundary_mask()
    lines = mesh.segments[bnd]
    parts = segment_parts(solution.problem, mesh)[bnd]
    flux = cell_flux(solution)
    pts3 = np.column_stack([points, np.zeros(len(points))])
    n_tri, n_line = len(tri[1]), len(lines)
    return meshio.Mesh(
        pts3, [tri, ("line", lines)],
        point_data=point_data,
        cell_data={
            "region": [mesh.regions.astype(np.int32), np.full(n_line, -1, np.int32)],
            "flux": [np.column_stack([flux, np.zeros(n_tri)]), np.zeros((n_line, 3))],
            "boundary_part": [np.full(n_tri, -1, np.int32), parts.astype(np.int32)],
        },
    )


def summary(solution, probes=None):
    """Plain-data summary of a solve (the content of ``summary.json``)."""
    from .mesh import quality

    phys = solution.problem.physics
    out = {
        "schema": SUMMARY_SCHEMA,
        "problem": solution.problem.name,
        "origin": solution.problem.origin,
        "physics": phys.kind,
        "order": solution.order,
        "dofs": solution.dofs,
        "elements": solution.mesh.n_triangles,
        "curved_boundary_elements": bool(solution.disc.curved),
        "solver": solution.solver.to_dict(),
        "flux_unit": phys.flux_unit,
        "fluxes": solution.fluxes,
        "flux_balance": {"sum_of_part_fluxes": sum(solution.fluxes.values())},
        "energy": solution.energy,
        "capacity": solution.capacity,
        "capacity_label": phys.capacity_label,
        "capacity_unit": phys.capacity_unit,
        "mesh_quality": quality(solution.mesh),
        "seconds": solution.timings,
        "notes": solution.notes,
    }
    if probes is not None and len(probes):
        u, g = solution.evaluate(probes)
        k = solution.disc.k_cell  # flux needs the local coefficient; report the field
        del k
        out["probes"] = [{"x": float(p[0]), "y": float(p[1]), "u": float(v),
                          "field": [float(-gi[0]), float(-gi[1])]}
                         for p, v, gi in zip(probes, u, g)]
    return out


def write_results(solution, folder, probes=None, picture=True, stream_function=True):
    """Write ``solution.vtu``, ``summary.json`` and ``field.png`` into ``folder``.

    The stream function (the conjugate harmonic) is solved too, written as ``psi``
    beside ``u`` and drawn as the field lines; the summary reports its
    orthogonality residual ``|| k grad u_h - J grad psi_h ||``, an estimate of the
    energy error. For two-terminal problems its energy also gives guaranteed
    capacity bounds (see docs/bounds.md). Problems with a source have no stream
    function: their field lines are traced along -grad u.

    Returns
    -------
    dict
        The summary that was written.
    """
    import time

    data = summary(solution, probes)
    conj = None
    if stream_function:
        from .bounds import level_bounds
        from .conjugate import conjugate_if_two_terminal
        from .stream import energy_norm, residual_notes
        from .stream import stream_function as general_stream

        t0 = time.perf_counter()
        conj = conjugate_if_two_terminal(solution)
        lb = None
        if conj is not None:
            try:
                lb = level_bounds(solution, conj)
            except InputError:  # e.g. potentials a denormal apart: picture, no bounds
                lb = None
        if lb is not None:
            data["capacity_bounds"] = {"lower": lb.lower, "upper": lb.upper,
                                       "relative_width": lb.relative_width,
                                       "guaranteed": lb.geometry["guaranteed"],
                                       "hypercircle_residual": lb.eta}
        if conj is None:
            try:
                conj = general_stream(solution)
                data["orthogonality"] = conj.summary()
            except LapsolveError as err:  # no stream function here: say why, keep the rest
                data["orthogonality"] = {"skipped": str(err)}
        elif lb is not None:
            # the unit-flux stream function, scaled optimally: same residual as the
            # general least-squares stream function (docs/bounds.md)
            energy = energy_norm(solution)
            approx = residual_notes(solution)
            data["orthogonality"] = {"eta": lb.eta, "relative": lb.eta / energy,
                                     "guaranteed": not approx, "approximations": approx,
                                     "cuts": len(conj.cuts),
                                     "solver_relative_residual":
                                         conj.solver.relative_residual}
        data["seconds"]["stream_function"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    with OutputSet(folder) as out:
        meshio.write(out.path("solution.vtu"), vtu_mesh(solution, conj), file_format="vtu",
                     compression=None)
        if picture:
            from .plotting import field_png

            out.bytes("field.png", field_png(solution, conj))
        data["seconds"]["write"] = time.perf_counter() - t0
        out.text("summary.json", json.dumps(data, indent=2, default=_jsonable))
        out.commit()
    return data


def _jsonable(obj):
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(type(obj).__name__)
