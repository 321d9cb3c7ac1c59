"""Helpers shared by the benchmark scripts (one configuration per subprocess)."""

import json
import os
import subprocess
import sys

import numpy as np


def mesh_for(problem, order, target):
    """The coarse mesh refined until the DOF count is nearest ``target``."""
    from lapsolve.meshing import triangulate

    mesh = triangulate(problem)
    best, gap = mesh, np.inf
    while True:
        nv, nt = len(mesh.points), mesh.n_triangles
        ne = nv + nt - 1 + (len(problem.holes))  # Euler: V - E + T = 1 - holes
        dofs = nv if order == 1 else nv + ne if order == 2 else nv + 2 * ne + nt
        g = abs(np.log(dofs / target))
        if g < gap:
            best, gap = mesh, g
        if dofs > target:
            return best
        mesh = mesh.refined(1)


def spawn(script, *args):
    """Run ``script --child args...`` in a fresh interpreter; its last stdout line is
    a JSON row, returned with the load average before and after."""
    cmd = [sys.executable, script, "--child", *map(str, args)]
    load = os.getloadavg()
    res = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if res.returncode != 0:
        raise RuntimeError(f"{' '.join(map(str, args))} failed:\n{res.stderr[-2000:]}")
    out = json.loads(res.stdout.strip().splitlines()[-1])
    out["load_before"], out["load_after"] = list(load), list(os.getloadavg())
    return out
