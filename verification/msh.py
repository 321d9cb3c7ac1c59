"""Gmsh MSH 4.1 (ASCII) text with physical groups, for exported benchmark meshes.

Each :class:`Block` of cells is one geometric entity with one physical group.
Nodes are classified on the lowest-dimensional entity that uses them (a boundary
node on its curve, an interior node on its surface). Readers such as meshio
number the nodes in the order they appear in the file, so the writer insists
that the classification is already sorted: apply :func:`node_order` to the mesh
first and the node tags, the file order and the 0-based indices all agree.

Layout follows the Gmsh reference manual, section "MSH file format" (version 4.1).
"""

import io
from dataclasses import dataclass

import numpy as np

#: meshio cell type -> (Gmsh element type number, nodes per element).
GMSH_TYPES = {
    "line": (1, 2),
    "triangle": (2, 3),
    "quad": (3, 4),
    "line3": (8, 3),
    "triangle6": (9, 6),
    "quad9": (10, 9),
    "quad8": (16, 8),
}

_DIM = {"line": 1, "line3": 1, "triangle": 2, "triangle6": 2, "quad": 2, "quad8": 2,
        "quad9": 2}


@dataclass(frozen=True)
class Block:
    """Cells of one geometric entity.

    Attributes
    ----------
    entity : int
        Entity tag, unique within its dimension.
    cell_type : str
        meshio cell type name (see :data:`GMSH_TYPES`); node order as in meshio.
    cells : ndarray (n, k)
        0-based node indices.
    physical : int
        Tag of the physical group the entity belongs to.
    """

    entity: int
    cell_type: str
    cells: np.ndarray
    physical: int

    @property
    def dim(self):
        return _DIM[self.cell_type]


def node_entities(n_points, blocks):
    """Per node, the index of the block it is classified on (-1 when unused).

    Lower-dimensional blocks win, then earlier blocks.
    """
    owner = np.full(n_points, -1, dtype=np.int64)
    ranked = sorted(range(len(blocks)), key=lambda i: (blocks[i].dim, i))
    for i in reversed(ranked):
        owner[np.asarray(blocks[i].cells).ravel()] = i
    return owner


def node_order(n_points, blocks):
    """A permutation that groups nodes by the entity they are classified on.

    ``new_points = points[perm]``; connectivity maps through ``inverse[cells]``.

    Returns
    -------
    perm, inverse : ndarray
    """
    owner = node_entities(n_points, blocks)
    if np.any(owner < 0):
        raise ValueError(f"{int(np.sum(owner < 0))} nodes are used by no block")
    perm = np.argsort(owner, kind="stable")
    inverse = np.empty_like(perm)
    inverse[perm] = np.arange(len(perm))
    return perm, inverse


def msh41_text(points, blocks, names):
    """The MSH 4.1 ASCII text of a mesh.

    Parameters
    ----------
    points : ndarray (n, 2) or (n, 3)
    blocks : list of Block
    names : dict
        Physical group name -> ``(tag, dim)``.

    Returns
    -------
    str
    """
    points = np.asarray(points, float)
    if points.shape[1] == 2:
        points = np.column_stack([points, np.zeros(len(points))])
    owner = node_entities(len(points), blocks)
    if np.any(owner < 0) or np.any(np.diff(owner) < 0):
        raise ValueError("nodes must be grouped by entity first (see node_order)")
    out = io.StringIO()
    out.write("$MeshFormat\n4.1 0 8\n$EndMeshFormat\n")
    _physical_names(out, names)
    _entities(out, points, blocks)
    _nodes(out, points, blocks, owner)
    _elements(out, blocks)
    return out.getvalue()


def _physical_names(out, names):
    rows = sorted((int(dim), int(tag), name) for name, (tag, dim) in names.items())
    out.write(f"$PhysicalNames\n{len(rows)}\n")
    for dim, tag, name in rows:
        out.write(f'{dim} {tag} "{name}"\n')
    out.write("$EndPhysicalNames\n")


def _entities(out, points, blocks):
    by_dim = {1: [], 2: []}
    for b in blocks:
        by_dim[b.dim].append(b)
    out.write(f"$Entities\n0 {len(by_dim[1])} {len(by_dim[2])} 0\n")
    for dim in (1, 2):
        for b in by_dim[dim]:
            p = points[np.unique(b.cells)]
            lo, hi = p.min(axis=0), p.max(axis=0)
            box = " ".join(_num(v) for v in (*lo, *hi))
            out.write(f"{b.entity} {box} 1 {b.physical} 0\n")
    out.write("$EndEntities\n")


def _nodes(out, points, blocks, owner):
    groups = [(i, np.flatnonzero(owner == i)) for i in range(len(blocks))]
    groups = [(i, nodes) for i, nodes in groups if len(nodes)]
    n = len(points)
    out.write(f"$Nodes\n{len(groups)} {n} 1 {n}\n")
    for i, nodes in groups:
        b = blocks[i]
        out.write(f"{b.dim} {b.entity} 0 {len(nodes)}\n")
        np.savetxt(out, nodes[:, None] + 1, fmt="%d")
        np.savetxt(out, points[nodes], fmt="%.17g")
    out.write("$EndNodes\n")


def _elements(out, blocks):
    total = sum(len(b.cells) for b in blocks)
    out.write(f"$Elements\n{len(blocks)} {total} 1 {total}\n")
    tag = 1
    for b in blocks:
        gmsh_type, k = GMSH_TYPES[b.cell_type]
        cells = np.asarray(b.cells, dtype=np.int64).reshape(-1, k)
        out.write(f"{b.dim} {b.entity} {gmsh_type} {len(cells)}\n")
        rows = np.column_stack([np.arange(tag, tag + len(cells)), cells + 1])
        np.savetxt(out, rows, fmt="%d")
        tag += len(cells)
    out.write("$EndElements\n")


def _num(value):
    return f"{float(value):.17g}"
