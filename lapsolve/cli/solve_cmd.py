"""``lapsolve solve PROBLEM.toml``: solve a problem file and write results."""

import json

import numpy as np

from ..errors import InputError

HELP = "solve a problem file; write solution.vtu, summary.json and field.png"


def add_args(p):
    p.add_argument("problem", help="problem file (TOML, see docs/problem-format.md)")
    p.add_argument("--order", type=int, choices=(1, 2, 3), default=2,
                   help="polynomial degree of the Lagrange elements (default 2)")
    p.add_argument("--refine", type=int, default=0, metavar="N",
                   help="uniform refinements after meshing (each halves h)")
    p.add_argument("--solver", choices=("auto", "direct", "amg", "gmg"), default="auto",
                   help="linear solver: direct; amg (smoothed-aggregation AMG-CG); gmg "
                        "(geometric multigrid CG, refined meshes); auto (default): gmg above "
                        "50,000 unknowns on refined meshes, else direct up to 150,000, else amg")
    p.add_argument("--probe", action="append", default=[], metavar="X,Y",
                   help="report u and the field at a point (repeatable)")
    p.add_argument("--out", metavar="DIR", help="folder for the result files")
    p.add_argument("--no-plot", action="store_true", help="skip field.png")
    p.add_argument("--no-stream", action="store_true",
                   help="skip the stream function (psi, its field lines, the orthogonality "
                        "residual and, for two-terminal problems, the capacity bounds)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")


def parse_point(text, field="--probe"):
    try:
        x, y = (float(v) for v in text.split(","))
    except ValueError:
        raise InputError(f"expected X,Y with two numbers, got '{text}'", field=field) from None
    if not (np.isfinite(x) and np.isfinite(y)):
        raise InputError(f"point must be finite, got '{text}'", field=field)
    return x, y


def check_request(problem, order, refine, mesh=None):
    """Element cap and memory of the requested solve, before the work it guards.

    Without ``mesh`` (before meshing) only the element cap is checked, on a lower
    bound of the level-0 mesh: no triangle is larger than ``mesh.max_area``, so
    there are at least ``area / max_area`` of them. With ``mesh`` (before refining
    and solving) its exact size is used for the cap and the memory estimate.
    Raises :class:`~lapsolve.errors.ResourceLimitError`.
    """
    from ..mesh import check_size
    from ..resources import check_solve

    if mesh is None:
        domain = problem.outer.area() - sum(h.area() for h in problem.holes)
        with np.errstate(all="ignore"):
            base = float(np.floor(np.float64(domain) / problem.mesh.max_area))
        if refine:
            check_size(base * 4.0**refine, f"--refine {refine} of a level-0 mesh of at least "
                                           f"{base:,.0f} triangles", at_least=True)
        return
    what = f"--refine {refine} of the level-0 mesh of {mesh.n_triangles:,} triangles" \
        if refine else "no refinement"
    check_solve(mesh.n_triangles * 4.0**refine, order, what)


def run(args):
    from .. import load_problem, solve
    from ..meshing import triangulate
    from ..output import summary, write_results
    from .summary_text import format_summary

    if args.refine < 0 or args.refine > 8:
        raise InputError("must be between 0 and 8", field="--refine")
    probes = np.array([parse_point(t) for t in args.probe]) if args.probe else None
    problem = load_problem(args.problem)
    check_request(problem, args.order, args.refine)
    mesh = triangulate(problem)
    check_request(problem, args.order, args.refine, mesh)
    solution = solve(problem, order=args.order, mesh=mesh, refine=args.refine,
                     solver=args.solver)
    if args.out:
        data = write_results(solution, args.out, probes, picture=not args.no_plot,
                             stream_function=not args.no_stream)
    else:
        data = summary(solution, probes)
    if args.json:
        print(json.dumps(data, indent=2, default=float))
    else:
        print(format_summary(data, solution.problem.physics, args.out))
    return 0
