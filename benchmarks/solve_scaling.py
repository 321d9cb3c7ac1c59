"""Scaling of the solve pipeline against a plain scikit-fem script and a bare AMG solve.

For P1 and P2 at about 1e4, 1e5, 1e6 and 4e6 DOFs, on the same mesh, this prints:

* ours: ``lapsolve.solve`` end to end (mesh, refinement, assembly, conditions, AMG-CG,
  residual fluxes, energy), time per stage and peak memory (max RSS of its own process);
* plain: a plain scikit-fem script doing the same job (``MeshTri.refined``, ``Basis``,
  ``asm(laplace)``, ``get_dofs``, ``condense``, the same AMG-CG);
* bare: the AMG setup and solve alone on the plain script's condensed matrix.

Targets (at 1e6 and 4e6 DOFs): ours <= 0.5 x plain, ours <= 1.5 x bare, P1 memory <= 1.5 KB/DOF.
Each configuration runs in its own subprocess so peak memory is its own. Ratios are measured
in one run; the load average is recorded beside them.

Usage: python3 benchmarks/solve_scaling.py [--sizes 1e4 1e5 1e6 4e6] [--orders 1 2] [--json F]
"""

import argparse
import json
import os
import resource
import subprocess
import sys
import time

import numpy as np

RTOL = 1e-10
COARSE = 0.05  # coarse mesh size on the unit square (about 1e3 triangles)


def _problem(size=COARSE):
    from lapsolve.geometry import make_polygon
    from lapsolve.problem import BoundaryPart, Condition, MeshControls, Problem, constant

    square = make_polygon("outer", [[0, 0], [1, 0], [1, 1], [0, 1]])
    parts = (BoundaryPart("low", "outer", (3,), Condition("dirichlet", constant(0.0))),
             BoundaryPart("high", "outer", (1,), Condition("dirichlet", constant(1.0))))
    return Problem("plate", square, parts=parts, mesh=MeshControls(size))


def _dofs_after(mesh, levels, order):
    # vertices and edges after uniform refinement: V' = V + E, E' = 2E + 3T, T' = 4T
    v, t = len(mesh.points), mesh.n_triangles
    e = v + t - 1
    for _ in range(levels):
        v, e, t = v + e, 2 * e + 3 * t, 4 * t
    return v if order == 1 else v + e


def plan(target, order):
    """Coarse mesh size and refinement levels whose DOF count is closest to ``target``."""
    from lapsolve.meshing import triangulate

    levels = max(0, int(np.floor(np.log(target / 3000.0) / np.log(4.0))))
    lo, hi = 0.005, 0.5
    for _ in range(30):  # bisection on the coarse size (DOFs fall as the size grows)
        mid = np.sqrt(lo * hi)
        if _dofs_after(triangulate(_problem(mid)), levels, order) > target:
            lo = mid
        else:
            hi = mid
        if hi / lo < 1.02:
            break
    return float(np.sqrt(lo * hi)), levels


def _peak_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def run_ours(order, levels, size):
    from lapsolve.meshing import triangulate
    from lapsolve.solve import solve

    problem = _problem(size)
    t0 = time.perf_counter()
    mesh = triangulate(problem)
    sol = solve(problem, order=order, mesh=mesh, refine=levels, solver="auto", rtol=RTOL)
    total = time.perf_counter() - t0
    return {"dofs": sol.dofs, "seconds": total, "stages": sol.timings,
            "iterations": sol.solver.iterations, "method": sol.solver.method,
            "peak_mb": _peak_mb(),
            "capacity": sol.capacity["from_energy"]}


def run_plain(order, levels, size):
    import pyamg
    import scipy.sparse.linalg as spla
    from skfem import Basis, ElementTriP1, ElementTriP2, MeshTri, asm, condense
    from skfem.models.poisson import laplace

    from lapsolve.meshing import triangulate

    coarse = triangulate(_problem(size))
    st = {}
    t0 = time.perf_counter()
    m = MeshTri(coarse.points.T.copy(), coarse.triangles.T.copy()).refined(levels)
    st["refine"] = time.perf_counter() - t0
    t = time.perf_counter()
    basis = Basis(m, ElementTriP1() if order == 1 else ElementTriP2())
    st["basis"] = time.perf_counter() - t
    t = time.perf_counter()
    A = asm(laplace, basis)
    st["assemble"] = time.perf_counter() - t
    t = time.perf_counter()
    left = basis.get_dofs(lambda x: np.isclose(x[0], 0.0))
    right = basis.get_dofs(lambda x: np.isclose(x[0], 1.0))
    st["get_dofs"] = time.perf_counter() - t
    t = time.perf_counter()
    x = np.zeros(basis.N)
    x[right.all()] = 1.0
    D = np.concatenate([left.all(), right.all()])
    Ac, bc, _, _ = condense(A, np.zeros(basis.N), x=x, D=D)
    st["condense"] = time.perf_counter() - t
    t = time.perf_counter()
    ml = pyamg.smoothed_aggregation_solver(Ac.tocsr(), symmetry="symmetric", max_coarse=500)
    M = ml.aspreconditioner(cycle="V")
    st["amg_setup"] = time.perf_counter() - t
    t = time.perf_counter()
    count = [0]

    def tick(_):
        count[0] += 1

    xi, info = spla.cg(Ac, bc, rtol=RTOL, M=M, callback=tick)
    st["amg_solve"] = time.perf_counter() - t
    total = sum(st.values())
    return {"dofs": int(basis.N), "seconds": total, "stages": st, "iterations": count[0],
            "bare_seconds": st["amg_setup"] + st["amg_solve"], "peak_mb": _peak_mb()}


def _child(kind, order, levels, size):
    out = (run_ours if kind == "ours" else run_plain)(order, levels, size)
    print(json.dumps(out))


def _spawn(kind, order, levels, size):
    cmd = [sys.executable, __file__, "--child", kind, str(order), str(levels), repr(size)]
    # one BLAS thread for both sides: on a loaded 2-core machine a second one only spins
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}
    res = subprocess.run(cmd, capture_output=True, text=True, check=False, env=env)
    if res.returncode != 0:
        raise RuntimeError(f"{kind} P{order} level {levels} failed:\n{res.stderr[-2000:]}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="+", default=[1e4, 1e5, 1e6, 4e6])
    ap.add_argument("--orders", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        _child(args.child[0], int(args.child[1]), int(args.child[2]), float(args.child[3]))
        return 0
    rows = []
    head = (f"{'P':>2} {'DOFs':>10} {'ours s':>8} {'plain s':>8} {'bare s':>7} "
            f"{'ours/plain':>10} {'ours/bare':>9} {'KB/DOF':>7} {'it':>4}  load  ours stages")
    print(head)
    for order in args.orders:
        for size in args.sizes:
            coarse, levels = plan(size, order)
            load0 = os.getloadavg()[0]
            ours = _spawn("ours", order, levels, coarse)
            plain = _spawn("plain", order, levels, coarse)
            row = {"order": order, "levels": levels, "coarse_size": coarse,
                   "dofs": ours["dofs"], "ours": ours,
                   "plain": plain, "ratio_plain": ours["seconds"] / plain["seconds"],
                   "ratio_bare": ours["seconds"] / plain["bare_seconds"],
                   "kb_per_dof": ours["peak_mb"] * 1024 / ours["dofs"],
                   "load_before": load0, "load_after": os.getloadavg()[0]}
            rows.append(row)
            stages = " ".join(f"{k}={v:.2f}" for k, v in ours["stages"].items())
            print(f"{order:>2} {ours['dofs']:>10,} {ours['seconds']:>8.2f} "
                  f"{plain['seconds']:>8.2f} {plain['bare_seconds']:>7.2f} "
                  f"{row['ratio_plain']:>10.2f} {row['ratio_bare']:>9.2f} "
                  f"{row['kb_per_dof']:>7.2f} {ours['iterations']:>4} {load0:5.2f}  {stages}",
                  flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"rows": rows, "rtol": RTOL, "cpu_count": os.cpu_count()}, fh, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
