"""Benchmark export: meshes, boundary data and a manifest for an external solver.

``export_benchmark(cases, folder, levels, orders)`` writes, per case and level
(level ``k`` is the level-0 mesh refined ``k`` times, so ``h`` halves each time)::

    <folder>/manifest.json                        lapsolve.manifest/1
    <folder>/<case>/materials.json                coefficients per physical surface
    <folder>/<case>/P<order>/level<k>.msh         Gmsh MSH 4.1 with physical groups
    <folder>/<case>/P<order>/level<k>.vtu         the same mesh as VTU
    <folder>/<case>/P<order>/level<k>.boundary.json
    <folder>/<case>/P<order>/level<k>.dirichlet.csv
    <folder>/<case>/P<order>/level<k>.neumann.csv

``P1`` meshes have 3-node triangles; ``P2`` meshes 6-node triangles whose edge
midpoints on circles lie on the circle. Node numbers in the tables are 0-based
positions in the mesh file (MSH node tag minus one, VTU point index).

Neumann data follow ``g = k du/dn`` with ``n`` the outward normal, so that the weak
form reads ``int k grad u . grad v = int_N g v``. They are given at Gauss-Legendre
points of each edge (on the curved edge for P2) with weights that include the
arc-length factor, so ``sum(weight * g * phi)`` is the edge's load.
"""

import csv
import io
import json
import logging
import math
from dataclasses import dataclass
from pathlib import Path

import meshio
import numpy as np

from lapsolve.atomic import OutputSet
from lapsolve.errors import InputError
from lapsolve.meshing import triangulate

from .msh import Block, msh41_text, node_order
from .rates import expected_orders

log = logging.getLogger(__name__)

MANIFEST_SCHEMA = "lapsolve.manifest/1"
BOUNDARY_SCHEMA = "lapsolve.boundary/1"
MATERIALS_SCHEMA = "lapsolve.materials/1"

#: Where results go, relative to the results folder; ``ext`` is any meshio format.
RESULT_PATTERN = "{case}/P{order}/level{level}.{ext}"
QUANTITIES_PATTERN = "{case}/P{order}/quantities.json"
#: Element types accepted back per order.
ELEMENT_TYPES = {1: ("triangle", "quad"), 2: ("triangle6", "quad8", "quad9")}
#: Gauss-Legendre points per boundary edge in the Neumann tables.
GAUSS_POINTS = 4
MAX_LEVELS = 8
BACKGROUND = "background"
SURFACE_TAG0 = 101


class OutputTree:
    """:class:`~lapsolve.atomic.OutputSet` over sub-folders: all files or none."""

    def __init__(self, folder):
        self.folder = Path(folder)
        self._sets = {}

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False

    def _set(self, name):
        rel = Path(name)
        key = rel.parent
        if key not in self._sets:
            self._sets[key] = (OutputSet(self.folder / key), _missing_dirs(self.folder / key))
        return self._sets[key][0], rel.name

    def path(self, name):
        out, leaf = self._set(name)
        return out.path(leaf)

    def text(self, name, text):
        out, leaf = self._set(name)
        out.text(leaf, text)

    def commit(self, last=None):
        """Rename every file into place; ``last`` (a name) goes after all others."""
        final = []
        ordered = sorted(self._sets, key=lambda k: (k == Path(last).parent if last else False))
        for key in ordered:
            final += self._sets[key][0].commit()
        return final

    def discard(self):
        created = set()
        for out, missing in self._sets.values():
            out.discard()
            created.update(missing)
        for folder in sorted(created, key=lambda f: len(f.parts), reverse=True):
            try:
                folder.rmdir()
            except OSError:
                pass


def _missing_dirs(folder):
    missing = []
    folder = Path(folder)
    while not folder.exists():
        missing.append(folder)
        folder = folder.parent
    return missing


@dataclass(frozen=True)
class ExportMesh:
    """A mesh ready to write: nodes, 2D cells and boundary lines with their groups.

    ``lines`` hold ``(a, b)`` or ``(a, b, mid)``; ``line_tag`` is the index of the
    lapsolve edge tag each line came from, ``line_part`` the physical tag of its
    boundary part; ``cell_region`` the region id (0 = background).
    """

    points: np.ndarray
    cell_type: str
    cells: np.ndarray
    cell_region: np.ndarray
    line_type: str
    lines: np.ndarray
    line_tag: np.ndarray
    line_part: np.ndarray

    @property
    def corners(self):
        return self.cells[:, :3]


@dataclass(frozen=True)
class Groups:
    """Physical groups of a case: boundary parts (dim 1) and regions (dim 2)."""

    parts: dict      # part name -> tag (dim 1)
    surfaces: dict   # surface name -> tag (dim 2)
    region_names: tuple  # name per region id (0 = background)

    def names(self):
        out = {name: (tag, 1) for name, tag in self.parts.items()}
        out.update({name: (tag, 2) for name, tag in self.surfaces.items()})
        return out


def physical_groups(case, problem):
    """Physical group names and tags for a case's parts and material regions."""
    parts = {name: i + 1 for i, name in enumerate(case.conditions)}
    parts_named = set(parts)
    listed = problem.part_of_edge()
    if any((lp.name, e) not in listed for lp in problem.loops() for e in range(lp.n_edges)):
        unlisted = "insulated" if "insulated" not in parts_named else "insulated_unlisted"
        parts[unlisted] = len(parts) + 1
    names = [BACKGROUND] + [r.name for r in problem.regions]
    names = [n if n not in parts_named else f"{n}_region" for n in names]
    surfaces = {name: SURFACE_TAG0 + i for i, name in enumerate(names)}
    return Groups(parts, surfaces, tuple(names))


def linear_mesh(mesh, problem, groups):
    """The P1 export mesh of a lapsolve :class:`~lapsolve.mesh.Mesh`."""
    bnd = mesh.boundary_mask()
    lines = mesh.segments[bnd]
    tags = mesh.segment_tags[bnd]
    return _ordered(ExportMesh(mesh.points.copy(), "triangle", mesh.triangles.copy(),
                               mesh.regions.copy(), "line", lines, tags,
                               _line_parts(problem, mesh, tags, groups)))


def quadratic_mesh(mesh, problem, groups):
    """The P2 export mesh: 6-node triangles, midpoints of curved edges on the curve."""
    p, t = mesh.points, mesh.triangles
    n = len(p)
    pairs = [(0, 1), (1, 2), (2, 0)]
    keys = np.concatenate([_keys(t[:, i], t[:, j], n) for i, j in pairs])
    uniq, inv = np.unique(keys, return_inverse=True)
    lo, hi = uniq // n, uniq % n
    mid = 0.5 * (p[lo] + p[hi])
    seg_edge = np.searchsorted(uniq, _keys(mesh.segments[:, 0], mesh.segments[:, 1], n))
    for k, tag in enumerate(mesh.tags):
        if tag.circle is None:
            continue
        e = seg_edge[mesh.segment_tags == k]
        cx, cy, r = tag.circle
        d = mid[e] - (cx, cy)
        mid[e] = (cx, cy) + r * d / np.linalg.norm(d, axis=1)[:, None]
    m = len(t)
    cells = np.column_stack([t, n + inv[:m], n + inv[m:2 * m], n + inv[2 * m:]])
    bnd = mesh.boundary_mask()
    seg = mesh.segments[bnd]
    lines = np.column_stack([seg, n + seg_edge[bnd]])
    tags = mesh.segment_tags[bnd]
    return _ordered(ExportMesh(np.vstack([p, mid]), "triangle6", cells, mesh.regions.copy(),
                               "line3", lines, tags,
                               _line_parts(problem, mesh, tags, groups)))


def _keys(a, b, n):
    return np.minimum(a, b).astype(np.int64) * n + np.maximum(a, b)


def _line_parts(problem, mesh, tags, groups):
    table = problem.part_of_edge()
    names = [p.name for p in problem.parts]
    unlisted = list(groups.parts)[-1]
    per_tag = np.array([groups.parts[names[table[(tg.loop, tg.edge)]]]
                        if (tg.loop, tg.edge) in table else groups.parts[unlisted]
                        for tg in mesh.tags], int)
    return per_tag[tags]


def blocks(em, groups):
    """One MSH block per boundary edge tag (dim 1) and per region (dim 2)."""
    out = []
    for tag in np.unique(em.line_tag):
        sel = em.line_tag == tag
        out.append(Block(int(tag) + 1, em.line_type, em.lines[sel], int(em.line_part[sel][0])))
    for region in np.unique(em.cell_region):
        sel = em.cell_region == region
        name = groups.region_names[int(region)]
        out.append(Block(int(region) + 1, em.cell_type, em.cells[sel], groups.surfaces[name]))
    return out


def _ordered(em):
    """Renumber nodes so that they come grouped by MSH entity (file order = index)."""
    raw = [Block(0, em.line_type, em.lines[em.line_tag == tag], 0)
           for tag in np.unique(em.line_tag)]
    raw += [Block(0, em.cell_type, em.cells[em.cell_region == r], 0)
            for r in np.unique(em.cell_region)]
    perm, inverse = node_order(len(em.points), raw)
    return ExportMesh(em.points[perm], em.cell_type, inverse[em.cells], em.cell_region,
                      em.line_type, inverse[em.lines], em.line_tag, em.line_part)


def msh_text(em, groups):
    return msh41_text(em.points, blocks(em, groups), groups.names())


def vtu_mesh(em):
    """The export mesh as a meshio object, with physical tags as cell data."""
    pts = np.column_stack([em.points, np.zeros(len(em.points))])
    return meshio.Mesh(pts, [(em.cell_type, em.cells), (em.line_type, em.lines)],
                       cell_data={"physical": [em.cell_region + SURFACE_TAG0,
                                               em.line_part.astype(np.int64)]})


def outward_normals(em):
    """Unit outward normal of each boundary line's chord, shape (n_lines, 2)."""
    corners = em.corners
    n = len(em.points)
    keys = np.concatenate([_keys(corners[:, i], corners[:, j], n)
                           for i, j in ((0, 1), (1, 2), (2, 0))])
    owner = np.tile(np.arange(len(corners)), 3)
    order = np.argsort(keys)
    a, b = em.lines[:, 0], em.lines[:, 1]
    pos = order[np.searchsorted(keys, _keys(a, b, n), sorter=order)]
    cell = corners[owner[pos]]
    third = cell.sum(axis=1) - a - b
    d = em.points[b] - em.points[a]
    normal = np.column_stack([d[:, 1], -d[:, 0]]) / np.linalg.norm(d, axis=1)[:, None]
    inward = np.sum(normal * (em.points[third] - em.points[a]), axis=1) > 0
    normal[inward] *= -1
    return normal


def gauss_data(em, selected, count=GAUSS_POINTS):
    """Gauss points on the selected boundary lines (straight or quadratic).

    Returns
    -------
    dict of ndarray
        ``line, t, x, y, weight, nx, ny``, one entry per point; ``t`` runs from
        0 at the line's first node to 1 at its second; ``weight`` includes ds.
    """
    xi, w = np.polynomial.legendre.leggauss(count)
    t, w = 0.5 * (xi + 1), 0.5 * w
    lines = np.flatnonzero(selected)
    chord_n = outward_normals(em)[lines]
    a = em.points[em.lines[lines, 0]][:, None, :]
    b = em.points[em.lines[lines, 1]][:, None, :]
    tt = t[None, :, None]
    if em.lines.shape[1] == 3:
        m = em.points[em.lines[lines, 2]][:, None, :]
        x = a * (1 - tt) * (1 - 2 * tt) + m * 4 * tt * (1 - tt) + b * tt * (2 * tt - 1)
        dx = a * (4 * tt - 3) + m * (4 - 8 * tt) + b * (4 * tt - 1)
    else:
        x = a + tt * (b - a)
        dx = np.broadcast_to(b - a, x.shape)
    speed = np.linalg.norm(dx, axis=2)
    normal = np.stack([dx[..., 1], -dx[..., 0]], axis=2) / speed[..., None]
    flip = np.sum(normal * chord_n[:, None, :], axis=2) < 0
    normal[flip] *= -1
    return {"line": np.repeat(lines, count), "t": np.tile(t, len(lines)),
            "x": x[..., 0].ravel(), "y": x[..., 1].ravel(),
            "weight": (w[None, :] * speed).ravel(),
            "nx": normal[..., 0].ravel(), "ny": normal[..., 1].ravel()}


def formula_text(case, name, spec):
    """Formula of a part's data, or ``"tabulated only"`` when the case gives none.

    Analytic cases carry ``u`` as a real formula in ``x, y`` (``extras["u_xy"]``).
    """
    u_xy = case.extras.get("u_xy") if isinstance(case.extras, dict) else None
    if spec.kind == "insulated":
        return "0"
    if spec.kind == "dirichlet" and spec.electrode is not None:
        return repr(float(spec.electrode))
    if not u_xy:
        return "tabulated only"
    if spec.kind == "dirichlet":
        return str(u_xy)
    return f"k * (du/dx * nx + du/dy * ny) with u = {u_xy}"


def boundary_tables(case, em, groups):
    """Dirichlet node values and Neumann Gauss data of one export mesh.

    Returns
    -------
    table : dict
        JSON-ready (``lapsolve.boundary/1`` without file names).
    dirichlet_csv, neumann_csv : str
    """
    tag_name = {tag: name for name, tag in groups.parts.items()}
    part_of_line = np.array([tag_name[int(t)] for t in em.line_part], dtype=object)
    parts, d_rows, n_rows = {}, [], []
    seen = np.zeros(len(em.points), bool)
    for name, spec in case.conditions.items():
        sel = part_of_line == name
        parts[name] = {"kind": spec.kind, "physical_tag": groups.parts[name],
                       "electrode": spec.electrode, "lines": int(sel.sum()),
                       "formula": formula_text(case, name, spec)}
        if spec.kind == "dirichlet":
            nodes = np.unique(em.lines[sel])
            nodes = nodes[~seen[nodes]]
            seen[nodes] = True
            x, y = em.points[nodes].T
            if spec.electrode is not None:
                value = np.full(len(nodes), float(spec.electrode))
            else:
                value = np.asarray(case.u(x, y), float)
            d_rows.append((nodes, x, y, [name] * len(nodes), value))
        elif spec.kind == "neumann" and sel.any():
            g = gauss_data(em, sel)
            g["flux"] = np.asarray(case.flux_data()(g["x"], g["y"], g["nx"], g["ny"]), float)
            g["part"] = [name] * len(g["x"])
            n_rows.append(g)
    if len(groups.parts) > len(case.conditions):
        unlisted = list(groups.parts)[-1]
        parts[unlisted] = {"kind": "insulated", "physical_tag": groups.parts[unlisted],
                           "electrode": None, "lines": int(np.sum(part_of_line == unlisted)),
                           "formula": "0"}
    dirichlet = _dirichlet_columns(d_rows)
    neumann = _neumann_columns(n_rows, em)
    _check_finite(case, dirichlet["value"], neumann["flux"])
    table = {"schema": BOUNDARY_SCHEMA, "case": case.name, "parts": parts,
             "node_numbering": "0-based position in the mesh file (MSH node tag - 1, VTU "
                               "point index)",
             "flux_convention": "flux = k du/dn, n the outward unit normal; the load of "
                                "test function phi is sum(weight * flux * phi(t))",
             "gauss_points_per_edge": GAUSS_POINTS,
             "dirichlet": dirichlet, "neumann": neumann}
    return table, _csv(dirichlet, DIRICHLET_COLUMNS), _csv(neumann, NEUMANN_COLUMNS)


DIRICHLET_COLUMNS = ("node", "x", "y", "part", "value")
NEUMANN_COLUMNS = ("edge", "part", "node_a", "node_b", "node_mid", "t", "x", "y", "weight",
                   "nx", "ny", "flux")


def _dirichlet_columns(rows):
    if not rows:
        return {c: [] for c in DIRICHLET_COLUMNS}
    cols = [np.concatenate([r[i] for r in rows]) for i in range(5)]
    order = np.argsort(cols[0], kind="stable")
    return {"node": cols[0][order].astype(int).tolist(), "x": cols[1][order].tolist(),
            "y": cols[2][order].tolist(), "part": [str(v) for v in cols[3][order]],
            "value": cols[4][order].tolist()}


def _neumann_columns(rows, em):
    if not rows:
        return {c: [] for c in NEUMANN_COLUMNS}
    line = np.concatenate([r["line"] for r in rows])
    cols = {"edge": line.tolist(),
            "part": [p for r in rows for p in r["part"]],
            "node_a": em.lines[line, 0].tolist(), "node_b": em.lines[line, 1].tolist(),
            "node_mid": (em.lines[line, 2].tolist() if em.lines.shape[1] == 3
                         else [None] * len(line))}
    for key in ("t", "x", "y", "weight", "nx", "ny", "flux"):
        cols[key] = np.concatenate([r[key] for r in rows]).tolist()
    return cols


def _check_finite(case, *arrays):
    for values in arrays:
        if len(values) and not np.all(np.isfinite(values)):
            raise InputError("exact boundary data are NaN or infinite at some boundary "
                             "points (a singular point on a data-carrying boundary node?)",
                             field=f"case.{case.name}")


def _csv(columns, names):
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(names)
    count = len(columns[names[0]])
    for i in range(count):
        writer.writerow(["" if columns[c][i] is None else _cell(columns[c][i]) for c in names])
    return buf.getvalue()


def _cell(value):
    return repr(value) if isinstance(value, float) else value


def materials(case, problem, groups):
    """Coefficient per physical surface (``lapsolve.materials/1``)."""
    ks = [problem.coefficient] + [r.coefficient for r in problem.regions]
    return {"schema": MATERIALS_SCHEMA, "case": case.name,
            "equation": "-div(k grad u) = 0",
            "physics": problem.physics.kind, "scale": problem.physics.scale,
            "regions": [{"name": name, "physical_tag": groups.surfaces[name], "k": float(k)}
                        for name, k in zip(groups.region_names, ks)]}


def expected_for(order, lam):
    """Expected orders per norm; ``energy`` is the energy norm (same order as H1)."""
    e = expected_orders(order, lam)
    return {"L2": e["L2"], "H1": e["H1"], "energy": e["H1"], "qoi": e["qoi"]}


def _finite(value):
    return None if value is None or not math.isfinite(float(value)) else float(value)


def _case_entry(case, problem, groups, levels, orders, level_info):
    kinds = {spec.kind for spec in case.conditions.values()}
    return {
        "name": case.name,
        "description": case.description,
        "singular_exponent": _finite(case.singular_exponent),
        "singular_point": list(case.singular_point) if case.singular_point else None,
        "up_to_constant": "dirichlet" not in kinds,
        "materials": f"{case.name}/materials.json",
        "physical_groups": {name: {"tag": tag, "dim": dim}
                            for name, (tag, dim) in groups.names().items()},
        "orders": {str(p): {"element_types": list(ELEMENT_TYPES[p]),
                            "expected_orders": expected_for(p, case.singular_exponent)}
                   for p in orders},
        "levels": level_info,
        "references": [{"quantity": r.quantity, "value": r.value, "source": r.source,
                        "scope": r.scope} for r in case.references],
    }


def _check_request(cases, levels, orders):
    if not cases:
        raise InputError("give at least one case", field="cases")
    names = [c.name for c in cases]
    if len(set(names)) != len(names):
        raise InputError("a case is listed twice", field="cases")
    if not 1 <= int(levels) <= MAX_LEVELS:
        raise InputError(f"levels must be between 1 and {MAX_LEVELS}, got {levels}",
                         field="--levels")
    bad = [p for p in orders if p not in ELEMENT_TYPES]
    if bad or not orders:
        raise InputError(f"orders must be 1 and/or 2, got {list(orders)}", field="--order")


def export_benchmark(cases, folder, levels=3, orders=(1, 2), field="u", size=None):
    """Write a benchmark for an external solver; returns the manifest.

    Parameters
    ----------
    cases : list of ExactCase
    folder : path
    levels : int
        Number of levels (0 .. levels-1), each a uniform refinement of the previous.
    orders : sequence of {1, 2}
    field : str
        Name of the point field the solver must return.
    size : float or dict, optional
        Level-0 element size (or case name -> size); default the case's ``default_size``.

    Returns
    -------
    dict
        The manifest that was written.
    """
    orders = sorted(set(int(p) for p in orders))
    _check_request(cases, levels, orders)
    entries = []
    with OutputTree(folder) as out:
        for case in cases:
            own = size.get(case.name) if isinstance(size, dict) else size
            entries.append(_export_case(out, case, int(levels), orders, own))
        manifest = {"schema": MANIFEST_SCHEMA, "field": field,
                    "results": {"pattern": RESULT_PATTERN, "quantities": QUANTITIES_PATTERN,
                                "note": "ext is any format meshio reads (vtu, msh, xdmf, "
                                        "vtk, ...); quantities.json maps a quantity name to "
                                        "a list of values, one per level (null = none)"},
                    "levels": list(range(int(levels))), "orders": orders,
                    "cases": entries}
        out.text("manifest.json", json.dumps(manifest, indent=1))
        out.commit(last="manifest.json")
    return manifest


def _export_case(out, case, levels, orders, size):
    problem = case.problem(size)
    groups = physical_groups(case, problem)
    mesh = triangulate(problem)
    info = []
    for level in range(levels):
        if level:
            mesh = mesh.refined(1)
        row = {"level": level, "h": mesh.h(), "triangles": int(mesh.n_triangles), "files": {}}
        for p in orders:
            em = (linear_mesh if p == 1 else quadratic_mesh)(mesh, problem, groups)
            stem = f"{case.name}/P{p}/level{level}"
            out.text(f"{stem}.msh", msh_text(em, groups))
            meshio.write(out.path(f"{stem}.vtu"), vtu_mesh(em), file_format="vtu")
            table, dcsv, ncsv = boundary_tables(case, em, groups)
            table.update({"level": level, "order": p, "mesh": f"level{level}.msh"})
            out.text(f"{stem}.boundary.json", json.dumps(table))
            out.text(f"{stem}.dirichlet.csv", dcsv)
            out.text(f"{stem}.neumann.csv", ncsv)
            row["files"][f"P{p}"] = {"msh": f"{stem}.msh", "vtu": f"{stem}.vtu",
                                     "boundary": f"{stem}.boundary.json",
                                     "dirichlet_csv": f"{stem}.dirichlet.csv",
                                     "neumann_csv": f"{stem}.neumann.csv",
                                     "nodes": int(len(em.points)),
                                     "element_type": em.cell_type}
        info.append(row)
        log.info("exported %s level %d (%d triangles)", case.name, level, mesh.n_triangles)
    out.text(f"{case.name}/materials.json", json.dumps(materials(case, problem, groups),
                                                       indent=1))
    return _case_entry(case, problem, groups, levels, orders, info)
