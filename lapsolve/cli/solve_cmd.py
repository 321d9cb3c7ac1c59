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
                        "(geometric multigrid CG, refined meshes); auto (default): direct up "
                        "to 150,000 unknowns, else gmg where the mesh was refined, else amg")
    p.add_argument("--probe", action="append", default=[], metavar="X,Y",
                   help="report u and the field at a point (repeatable)")
    p.add_argument("--out", metavar="DIR", help="folder for the result files")
    p.add_argument("--no-plot", action="store_true", help="skip field.png")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")


def parse_point(text, field="--probe"):
    try:
        x, y = (float(v) for v in text.split(","))
    except ValueError:
        raise InputError(f"expected X,Y with two numbers, got '{text}'", field=field) from None
    if not (np.isfinite(x) and np.isfinite(y)):
        raise InputError(f"point must be finite, got '{text}'", field=field)
    return x, y


def run(args):
    from .. import load_problem, solve
    from ..output import summary, write_results
    from .summary_text import format_summary

    if args.refine < 0 or args.refine > 8:
        raise InputError("must be between 0 and 8", field="--refine")
    probes = np.array([parse_point(t) for t in args.probe]) if args.probe else None
    problem = load_problem(args.problem)
    solution = solve(problem, order=args.order, refine=args.refine, solver=args.solver)
    if args.out:
        data = write_results(solution, args.out, probes, picture=not args.no_plot)
    else:
        data = summary(solution, probes)
    if args.json:
        print(json.dumps(data, indent=2, default=float))
    else:
        print(format_summary(data, solution.problem.physics, args.out))
    return 0
