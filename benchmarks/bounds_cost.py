"""Cost of guaranteed capacitance bounds against a single solve, at about 1e6 DOFs.

For each case and element degree, on the same uniformly refined mesh, this times

* solve: ``lapsolve.solve`` (assembly, conditions, linear solve, fluxes, energy);
* bounds: the same solve, then the stream-function problem and the bound
  integration (``lapsolve.bounds.level_bounds``),

and prints ``bounds / solve`` (target: at most 2.5). Mesh generation and
refinement are outside both timings. Each configuration runs in its own
subprocess; the two timings alternate ``--repeat`` times and the medians are
compared. The machine may be shared: the load average is recorded beside every
row, and the ratio (not the seconds) is the figure to read.

Cases: ``lshape`` (quadrilateral layout: an L-shaped sheet, electrodes on two
ends) and ``coax`` (whole-loop electrodes: a cut and a pinned stream function).

Usage: python3 benchmarks/bounds_cost.py [--dofs 1e6] [--orders 1 2]
       [--cases lshape coax] [--repeat 2] [--json FILE]
"""

import argparse
import json
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from common import mesh_for, spawn  # noqa: E402


def _problem(case):
    from lapsolve import problem_from_dict

    if case == "lshape":
        data = {"title": "lshape",
                "outer": {"polygon": [[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]]},
                "boundary": {"a": {"edges": [1], "type": "dirichlet", "value": 1.0},
                             "b": {"edges": [5], "type": "dirichlet", "value": 0.0}},
                "mesh": {"max_size": 0.075}}
    else:
        data = {"title": "coax",
                "outer": {"circle": {"center": [0, 0], "radius": 2.0}},
                "holes": [{"name": "core", "circle": {"center": [0, 0], "radius": 0.5}}],
                "boundary": {"core": {"loop": "core", "type": "dirichlet", "value": 1.0},
                             "shield": {"loop": "outer", "type": "dirichlet", "value": 0.0}},
                "mesh": {"max_size": 0.15}}
    return problem_from_dict(data)


def run_child(case, order, target, repeat):
    from lapsolve.bounds import level_bounds
    from lapsolve.solve import solve

    problem = _problem(case)
    mesh = mesh_for(problem, order, target)
    solve_times, bound_times, detail = [], [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        solve(problem, order=order, mesh=mesh)
        solve_times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        solution = solve(problem, order=order, mesh=mesh)
        result = level_bounds(solution)
        bound_times.append(time.perf_counter() - t0)
        detail = result
    return {"case": case, "order": order, "dofs": detail.dofs,
            "solve_seconds": solve_times, "bounds_seconds": bound_times,
            "ratio": statistics.median(bound_times) / statistics.median(solve_times),
            "lower": detail.lower, "upper": detail.upper,
            "relative_width": detail.relative_width,
            "solver_u": detail.solver_u, "solver_psi": detail.solver_psi,
            "stages": detail.seconds}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dofs", type=float, default=1e6)
    ap.add_argument("--orders", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--cases", nargs="+", default=["lshape", "coax"],
                    choices=["lshape", "coax"])
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        case, order, target, repeat = args.child
        print(json.dumps(run_child(case, int(order), float(target), int(repeat))))
        return 0
    print(f"{'case':>7} {'P':>2} {'DOFs':>10} {'solve s':>8} {'bounds s':>9} {'ratio':>6} "
          f"{'u: method it':>14} {'psi: method it':>15} {'rel.width':>9}  load (1 min)")
    rows = []
    for case in args.cases:
        for order in args.orders:
            row = spawn(__file__, case, order, args.dofs, args.repeat)
            rows.append(row)
            su, sp = row["solver_u"], row["solver_psi"]
            print(f"{case:>7} {order:>2} {row['dofs']:>10,} "
                  f"{statistics.median(row['solve_seconds']):>8.2f} "
                  f"{statistics.median(row['bounds_seconds']):>9.2f} {row['ratio']:>6.2f} "
                  f"{su['method']:>10} {su['iterations']:>3} {sp['method']:>11} "
                  f"{sp['iterations']:>3} {row['relative_width']:>9.2e}  "
                  f"{row['load_before'][0]:.2f} -> {row['load_after'][0]:.2f}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"rows": rows, "cpu_count": os.cpu_count(), "target": 2.5}, fh, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
