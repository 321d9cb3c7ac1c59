"""``lapsolve certify-mesh MESH --case NAME``: quality and delivered accuracy of a mesh."""

HELP = ("check a mesh: quality, fit to the true geometry, and the accuracy it delivers "
        "on an exact case (solved with lapsolve)")


def add_args(p):
    p.add_argument("mesh", help="mesh file (any format meshio reads: MSH, VTU, XDMF, ...)")
    p.add_argument("--case", required=True, help="the exact case whose domain it meshes")
    p.add_argument("--order", type=int, choices=(1, 2, 3), default=2,
                   help="element order of the solve (default 2)")
    p.add_argument("--geometry-tol", type=float, default=None, metavar="REL",
                   help="distance from the true boundary, relative to the domain size, "
                        "beyond which a boundary node is off the geometry (default 1e-6)")
    p.add_argument("--json", action="store_true", help="print the report as JSON")
    p.add_argument("--out", metavar="FILE", help="also write the JSON report to FILE")


def run(args):
    import json

    from lapsolve.atomic import write_text
    from lapsolve.errors import InputError
    from verification.exact.catalogue import get_case
    from verification.mesh_certify import DEFECTIVE, GEOMETRY_REL_TOL, certify_mesh

    tol = GEOMETRY_REL_TOL if args.geometry_tol is None else args.geometry_tol
    if not tol > 0:
        raise InputError("must be positive", field="--geometry-tol")
    cert = certify_mesh(args.mesh, get_case(args.case), order=args.order, rel_tol=tol)
    data = cert.to_dict()
    if args.out:
        write_text(args.out, json.dumps(data, indent=1))
    if args.json:
        print(json.dumps(data, indent=1))
    else:
        print(report_text(cert))
    return 1 if cert.status == DEFECTIVE else 0


def report_text(cert):
    q, b = cert.quality, cert.boundary
    lines = [f"{cert.source}: {q['cells']} {q['element']} cells, {q['nodes']} nodes "
             f"(case {cert.case})",
             f"  angles {q['min_angle_deg']:.1f}..{q['max_angle_deg']:.1f} deg "
             f"({q['cells_with_angle_below_20_deg']} cells below 20 deg); aspect ratio worst "
             f"{q['worst_aspect_ratio']:.3g}, mean {q['mean_aspect_ratio']:.3g}",
             f"  inverted cells {q['inverted_count']}, zero-area cells {q['zero_area_count']}, "
             f"duplicated node pairs {q['duplicated_count']}",
             f"  boundary: {b['boundary_nodes']} nodes, {b['off_geometry']} off the true "
             f"geometry (max distance {b['max_distance']:.3g} = {b['max_distance_over_h']:.3g} h)"]
    if cert.norms:
        n = cert.norms
        lines.append(f"  P{cert.order} solve ({cert.solve['dofs']} DOFs): L2 {n['L2']:.3e} "
                     f"(rel {n['L2_rel']:.2e}), H1 {n['H1']:.3e} (rel {n['H1_rel']:.2e}), "
                     f"max nodal {n['max_nodal']:.3e}")
    for item in cert.quantities:
        lines.append(f"  {item['name']} {item['value']:.10g} vs {item['reference']:.10g} "
                     f"(relative error {item['rel_error']:.2e}, {item['scope']})")
    lines += [f"  note: {note}" for note in cert.notes]
    lines.append(f"mesh: {cert.status}")
    return "\n".join(lines)
