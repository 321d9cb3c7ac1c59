"""Schwarz-Christoffel modulus and exact potential: accuracy and time per case.

For each polygonal quadrilateral this prints the modulus M, its reference value
where one is known (closed form or symmetry), the side-length residual, the time
to compute M (parameter problem included) and the time for the potential at 200
random interior points (first call on a fresh map, start points included), each
as wall-clock and CPU time (the CPU time is less sensitive to other jobs).

Targets: a 20-vertex polygon to 1e-10 in < 1 s; 200 potentials in < 1 s.
The load average (os.getloadavg) is recorded beside the figures.

Usage: python3 benchmarks/sc_modulus.py [--json PATH] [--points 200]
"""

import argparse
import json
import os
import sys
import time

import numpy as np

from lapsolve.atomic import write_text
from verification.modulus import quadrilateral_modulus
from verification.schwarz_christoffel import as_complex, winding_number


def _star(points, inner=0.6):
    k = np.arange(points)
    r = np.where(k % 2 == 0, 1.0, inner)
    theta = 2 * np.pi * k / points
    return np.column_stack([r * np.cos(theta), r * np.sin(theta)])


def _jagged(points, seed=7):
    rng = np.random.default_rng(seed)
    theta = 2 * np.pi * np.arange(points) / points
    r = 1.0 + 0.4 * rng.random(points)
    return np.column_stack([r * np.cos(theta), r * np.sin(theta)])


def cases():
    """(name, vertices, corners, reference M or None)."""
    return [
        ("rectangle 3x1", [(0, 0), (3, 0), (3, 1), (0, 1)], (0, 1, 2, 3), 3.0),
        ("rectangle 20x1", [(0, 0), (20, 0), (20, 1), (0, 1)], (0, 1, 2, 3), 20.0),
        ("rectangle 1x20", [(0, 0), (1, 0), (1, 20), (0, 20)], (0, 1, 2, 3), 0.05),
        ("L-shape (symmetric)", [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)],
         (0, 1, 3, 5), 1.0),
        ("diagonal slit", [(0.6, 0.6), (0, 0), (2, 0), (2, 2), (0, 2), (0, 0)],
         (0, 2, 3, 4), 1.0),
        ("jagged 20", _jagged(20), (0, 5, 10, 15), None),
        ("star 20 (symmetric)", _star(20), (0, 5, 10, 15), 1.0),
        ("star 50", _star(50), (0, 12, 26, 38), None),
        ("U channel 20:1", [(0, 0), (3, 0), (3, 10), (2, 10), (2, 1), (1, 1), (1, 10), (0, 10)],
         (3, 6, 7, 2), None),
    ]


def _inside(vertices, count, seed=0):
    z = as_complex(vertices)
    rng = np.random.default_rng(seed)
    lo = np.array([z.real.min(), z.imag.min()])
    hi = np.array([z.real.max(), z.imag.max()])
    found = []
    while sum(len(f) for f in found) < count:
        p = lo + (hi - lo) * rng.random((4 * count, 2))
        found.append(p[winding_number(p[:, 0] + 1j * p[:, 1], z) != 0])
    return np.concatenate(found)[:count]


def run_case(name, vertices, corners, reference, points):
    start, cpu = time.perf_counter(), time.process_time()
    result = quadrilateral_modulus(vertices, corners)
    t_modulus, c_modulus = time.perf_counter() - start, time.process_time() - cpu
    pts = _inside(vertices, points)
    start, cpu = time.perf_counter(), time.process_time()
    u = result.potential(pts)
    t_potential, c_potential = time.perf_counter() - start, time.process_time() - cpu
    return {
        "case": name,
        "vertices": int(len(vertices)),
        "modulus": result.modulus,
        "reference": reference,
        "relative_error": (None if reference is None
                           else abs(result.modulus / reference - 1.0)),
        "residual": result.residual,
        "time_modulus_s": t_modulus,
        "cpu_modulus_s": c_modulus,
        "points": int(points),
        "time_potential_s": t_potential,
        "cpu_potential_s": c_potential,
        "potential_range": [float(u.min()), float(u.max())],
    }


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--json", metavar="PATH", help="write the table as JSON")
    parser.add_argument("--points", type=int, default=200)
    args = parser.parse_args(argv)
    load_before = os.getloadavg()
    rows = [run_case(*case, args.points) for case in cases()]
    load_after = os.getloadavg()
    head = f"{'case':22s} {'n':>3s} {'M':>20s} {'rel.err':>9s} {'residual':>9s} " \
           f"{'t_M [s]':>8s} {'cpu_M':>6s} {'t_u [s]':>8s} {'cpu_u':>6s}"
    print(head)
    print("-" * len(head))
    for r in rows:
        err = "-" if r["relative_error"] is None else f"{r['relative_error']:.1e}"
        print(f"{r['case']:22s} {r['vertices']:3d} {r['modulus']:20.15g} {err:>9s} "
              f"{r['residual']:9.1e} {r['time_modulus_s']:8.3f} {r['cpu_modulus_s']:6.3f} "
              f"{r['time_potential_s']:8.3f} {r['cpu_potential_s']:6.3f}")
    print(f"load average (1, 5, 15 min): before {tuple(round(x, 2) for x in load_before)}, "
          f"after {tuple(round(x, 2) for x in load_after)}; {os.cpu_count()} CPUs")
    if args.json:
        write_text(args.json, json.dumps({
            "rows": rows, "load_before": load_before, "load_after": load_after,
            "cpus": os.cpu_count(), "python": sys.version.split()[0]}, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
