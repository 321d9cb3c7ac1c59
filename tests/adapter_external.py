"""A stand-in for an external Laplace solver, driven only by the exported benchmark.

It reads a level's Gmsh mesh, its boundary table and the case's materials file,
assembles ``int k grad u . grad v`` with scikit-fem directly (not through
``lapsolve.solve``), imposes the tabulated Dirichlet node values, builds the
Neumann load from the tabulated Gauss points, solves and writes
``<results>/<case>/P<order>/level<k>.vtu`` with the point field ``u`` plus a
``quantities.json`` (energy, and capacitance when the boundary is two electrodes
plus insulated parts).

Node values are matched to degrees of freedom by position (a k-d tree), a route
independent of the importer's edge-key map, so a round trip checks both.

Flaws for the demo (``flaws``, any of):

- ``"neumann-lumped"``: each edge's Neumann load goes entirely to its first node
  instead of being shared by the shape functions (a wrong boundary integral).
- ``"straight-p2"``: quadratic elements keep their boundary mid-edge nodes on the
  chord; the result is written on that straight mesh.
"""

import json
from pathlib import Path

import meshio
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.spatial import cKDTree
from skfem import Basis, BilinearForm, ElementTriP1, ElementTriP2, MeshTri, MeshTri2, asm, condense
from skfem.helpers import dot, grad

from lapsolve.atomic import write_text

FLAWS = ("neumann-lumped", "straight-p2")


@BilinearForm
def _diffusion(u, v, w):
    return w.k * dot(grad(u), grad(v))


def _read_mesh(path):
    raw = meshio.read(path, file_format="gmsh")
    names = {int(tag): name for name, (tag, dim) in raw.field_data.items() if int(dim) == 2}
    cell_type = next(b.type for b in raw.cells if b.type in ("triangle", "triangle6"))
    blocks = [(b.data, raw.cell_data["gmsh:physical"][j]) for j, b in enumerate(raw.cells)
              if b.type == cell_type]
    cells = np.vstack([c for c, _ in blocks])
    physical = np.concatenate([p for _, p in blocks])
    return raw.points[:, :2].copy(), cell_type, cells, [names[int(t)] for t in physical]


def _match(targets, points):
    """Index into ``points`` of each target location (exact positions expected)."""
    dist, index = cKDTree(points).query(targets)
    if np.max(dist) > 1e-9 * np.ptp(points, axis=0).max():
        raise RuntimeError("a degree of freedom has no node at its place")
    return index


def _basis(points, cell_type, cells, straight_p2):
    corners = cells[:, :3]
    used = np.unique(corners)
    vertex = np.full(len(points), -1)
    vertex[used] = np.arange(len(used))
    mesh = MeshTri(points[used].T.copy(), vertex[corners].T.copy())
    if cell_type == "triangle":
        return Basis(mesh, ElementTriP1(), intorder=4), points
    mids = np.unique(cells[:, 3:])
    if straight_p2:
        basis = Basis(mesh, ElementTriP2(), intorder=6)
        moved = points.copy()
        for j, (a, b) in enumerate(((0, 1), (1, 2), (2, 0))):
            moved[cells[:, 3 + j]] = 0.5 * (points[cells[:, a]] + points[cells[:, b]])
        return basis, moved
    quadratic = MeshTri2.from_mesh(mesh)
    doflocs = quadratic.doflocs.copy()
    nv = mesh.p.shape[1]
    nearest = mids[cKDTree(points[mids]).query(doflocs[:, nv:].T)[1]]
    doflocs[:, nv:] = points[nearest].T
    curved = MeshTri2(doflocs, quadratic.t, sort_t=False)
    return Basis(curved, ElementTriP2(), intorder=6), points


def solve_level(msh_path, boundary_path, materials_path, flaws=()):
    """Solve one exported level.

    Returns
    -------
    mesh : meshio.Mesh
        The mesh as read (nodes moved for ``straight-p2``) with point field ``u``.
    quantities : dict
        ``energy`` and, when the boundary is two electrodes (and insulated parts),
        ``capacitance = u K u / dV^2``.
    """
    points, cell_type, cells, region = _read_mesh(msh_path)
    table = json.loads(Path(boundary_path).read_text())
    k_of = {r["name"]: r["k"] for r in json.loads(Path(materials_path).read_text())["regions"]}
    basis, out_points = _basis(points, cell_type, cells, "straight-p2" in flaws)
    node_of_dof = _match(basis.doflocs.T, out_points)
    dof_of_node = np.full(len(points), -1)
    dof_of_node[node_of_dof] = np.arange(basis.N)
    k = np.array([k_of[name] for name in region], float)
    K = asm(_diffusion, basis, k=np.repeat(k[:, None], basis.X.shape[1], axis=1))
    load = _neumann_load(table["neumann"], dof_of_node, basis.N, cell_type,
                         "neumann-lumped" in flaws)
    u = _solve(K, load, table["dirichlet"], dof_of_node)
    quantities = {"energy": 0.5 * float(u @ (K @ u))}
    parts = table["parts"].values()
    levels = {p["electrode"] for p in parts if p["electrode"] is not None}
    two_electrodes = all(p["electrode"] is not None or p["kind"] == "insulated" for p in parts)
    if len(levels) == 2 and two_electrodes:
        quantities["capacitance"] = float(u @ (K @ u)) / (max(levels) - min(levels)) ** 2
    result = meshio.Mesh(np.column_stack([out_points, np.zeros(len(points))]),
                         [(cell_type, cells.astype(np.int32))],
                         point_data={"u": u[dof_of_node]})
    return result, quantities


def _neumann_load(rows, dof_of_node, n, cell_type, lumped):
    load = np.zeros(n)
    if not rows["flux"]:
        return load
    t = np.asarray(rows["t"])
    gw = np.asarray(rows["flux"]) * np.asarray(rows["weight"])
    a, b = np.asarray(rows["node_a"]), np.asarray(rows["node_b"])
    if lumped:
        np.add.at(load, dof_of_node[a], gw)
        return load
    if cell_type == "triangle":
        shapes = {"a": (a, 1 - t), "b": (b, t)}
    else:
        m = np.asarray(rows["node_mid"])
        shapes = {"a": (a, (1 - t) * (1 - 2 * t)), "b": (b, t * (2 * t - 1)),
                  "m": (m, 4 * t * (1 - t))}
    for nodes, phi in shapes.values():
        np.add.at(load, dof_of_node[nodes], gw * phi)
    return load


def _solve(K, load, dirichlet, dof_of_node):
    if dirichlet["node"]:
        D = dof_of_node[np.asarray(dirichlet["node"])]
        x = np.zeros(K.shape[0])
        x[D] = dirichlet["value"]
        A, b, _, interior = condense(K, load, x=x, D=D)
        x[interior] = spla.spsolve(A.tocsc(), b)
        return x
    ones = sp.csr_matrix(np.ones((1, K.shape[0])))
    aug = sp.bmat([[K, ones.T], [ones, None]], format="csc")
    return spla.spsolve(aug, np.append(load, 0.0))[:-1]


def run_benchmark(bench, results, flaws=(), cases=None, orders=None, levels=None):
    """Solve every (or the selected) case, order and level of an exported benchmark.

    Returns
    -------
    list of Path
        The result files written.
    """
    bench, results = Path(bench), Path(results)
    manifest = json.loads((bench / "manifest.json").read_text())
    written = []
    for entry in manifest["cases"]:
        if cases is not None and entry["name"] not in cases:
            continue
        for order in entry["orders"]:
            if orders is not None and int(order) not in orders:
                continue
            quantities = {}
            for row in entry["levels"]:
                if levels is not None and row["level"] not in levels:
                    continue
                files = row["files"][f"P{order}"]
                mesh, q = solve_level(bench / files["msh"], bench / files["boundary"],
                                      bench / entry["materials"], flaws)
                target = results / entry["name"] / f"P{order}" / f"level{row['level']}.vtu"
                target.parent.mkdir(parents=True, exist_ok=True)
                with _atomic(target) as tmp:
                    meshio.write(tmp, mesh, file_format="vtu", compression="lzma")
                written.append(target)
                for name, value in q.items():
                    quantities.setdefault(name, {})[row["level"]] = value
            count = max((k for q in quantities.values() for k in q), default=-1) + 1
            listed = {name: [q.get(k) for k in range(count)] for name, q in quantities.items()}
            folder = results / entry["name"] / f"P{order}"
            write_text(folder / "quantities.json", json.dumps(listed, indent=1))
    return written


def _atomic(path):
    from lapsolve.atomic import atomic_path

    return atomic_path(path)
