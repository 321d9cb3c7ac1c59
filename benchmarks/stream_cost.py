"""Cost of the stream function and its orthogonality residual against a single solve.

``lapsolve solve`` computes the stream function of every source-free problem
(``lapsolve.stream.stream_function``). For each case and element degree, on the
same uniformly refined mesh, this times

* solve: ``lapsolve.solve`` (assembly, conditions, linear solve, fluxes, energy);
* stream: the stream function after that solve (flux-data runs, cuts, the
  bordered least-squares solve, the residual integration),

and prints ``stream / solve``. Our target: at most 1.5 (the stream function
costs at most one and a half solves). Mesh generation and refinement are outside
both timings. Each configuration runs in its own subprocess; the timings repeat
``--repeat`` times and the medians are compared. The machine may be shared: the
load average is recorded beside every row, and the ratio is the figure to read.

Cases (catalogue): ``cylinder-in-field`` (a hole wholly of flux data: a cut with a
fixed jump, flux-data integration on the hole, Dirichlet data on the box) and
``slit`` (one jump unknown per DOF on the slit).

Usage: python3 benchmarks/stream_cost.py [--dofs 1e6] [--orders 1 2]
       [--cases cylinder-in-field slit] [--repeat 2] [--json FILE]
"""

import argparse
import json
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from common import mesh_for, spawn  # noqa: E402

CASES = ("cylinder-in-field", "slit")


def run_child(name, order, target, repeat):
    from lapsolve.solve import solve
    from lapsolve.stream import stream_function
    from verification.exact.catalogue import CASES as CATALOGUE

    problem = CATALOGUE[name].problem()
    mesh = mesh_for(problem, order, target)
    solve_times, stream_times = [], []
    for _ in range(repeat):
        t0 = time.perf_counter()
        solution = solve(problem, order=order, mesh=mesh)
        solve_times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        stream = stream_function(solution)
        stream_times.append(time.perf_counter() - t0)
    return {"case": name, "order": order, "dofs": solution.dofs,
            "solve_seconds": solve_times, "stream_seconds": stream_times,
            "ratio": statistics.median(stream_times) / statistics.median(solve_times),
            "solver_u": solution.solver.to_dict(), "solver_psi": stream.solver.to_dict(),
            "relative_residual": stream.relative, "stages": stream.timings}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dofs", type=float, default=1e6)
    ap.add_argument("--orders", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--cases", nargs="+", default=list(CASES), choices=CASES)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        name, order, target, repeat = args.child
        print(json.dumps(run_child(name, int(order), float(target), int(repeat))))
        return 0
    print(f"{'case':>17} {'P':>2} {'DOFs':>10} {'solve s':>8} {'stream s':>9} {'ratio':>6} "
          f"{'u: method it':>14} {'psi: method it':>15} {'eta/|u|':>8}  load (1 min)")
    rows = []
    for name in args.cases:
        for order in args.orders:
            row = spawn(__file__, name, order, args.dofs, args.repeat)
            rows.append(row)
            su, sp = row["solver_u"], row["solver_psi"]
            print(f"{name:>17} {order:>2} {row['dofs']:>10,} "
                  f"{statistics.median(row['solve_seconds']):>8.2f} "
                  f"{statistics.median(row['stream_seconds']):>9.2f} {row['ratio']:>6.2f} "
                  f"{su['method']:>10} {su['iterations']:>3} {sp['method']:>11} "
                  f"{sp['iterations']:>3} {row['relative_residual']:>8.1e}  "
                  f"{row['load_before'][0]:.2f} -> {row['load_after'][0]:.2f}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"rows": rows, "cpu_count": os.cpu_count(), "target": 1.5}, fh, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
