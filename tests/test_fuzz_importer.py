"""Fuzzing the result importer with corrupted meshio meshes and damaged files.

Each example is a small structured mesh of the unit square (triangle, triangle6,
quad, quad8 or quad9 cells) with a point field ``u``, spoiled by up to two
corruptions: NaN or infinite values, fields of the wrong length or shape, missing
fields, NaN or huge coordinates, duplicated nodes, inverted or zero-area cells,
cells naming nodes that do not exist, unsupported or mixed cell types, non-planar
points, no 2D cells, misplaced mid-edge nodes; the file itself may be truncated or
have bytes flipped. It is written in a format meshio reads and imported as
``lapsolve certify`` does (read, check, basis, error norms against the exact
solution of the square case). Every outcome is a result or a typed
:class:`~lapsolve.errors.LapsolveError`; the defects the importer must detect are
named in its message.
"""

import tempfile
from pathlib import Path

import meshio
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from test_fuzz_polygons import FUZZ, outcome

from lapsolve.cli import main
from lapsolve.errors import InputError
from verification.exact.catalogue import get_case
from verification.importer import build_basis, check_domain, read_result
from verification.norms import error_norms

SQUARE_CASE = get_case("smooth-square")
SQUARE = SQUARE_CASE.problem()
FORMATS = {"vtu": ("vtu", {"binary": False}), "vtu-binary": ("vtu", {}),
           "vtk": ("vtk", {"binary": False}), "msh": ("gmsh22", {"binary": False})}
EXTENSIONS = {"vtu": ".vtu", "vtu-binary": ".vtu", "vtk": ".vtk", "msh": ".msh"}


def square_mesh(cell_type, n):
    """Points (m, 2) and cells of an n x n structured mesh of the unit square."""
    step = 2 if cell_type in ("triangle6", "quad8", "quad9") else 1
    m = step * n + 1
    x, y = np.meshgrid(np.linspace(0, 1, m), np.linspace(0, 1, m), indexing="ij")
    points = np.column_stack([x.ravel(), y.ravel()])
    index = np.arange(m * m).reshape(m, m)
    i, j = np.meshgrid(step * np.arange(n), step * np.arange(n), indexing="ij")
    i, j = i.ravel(), j.ravel()

    def node(di, dj):
        return index[i + di, j + dj]

    s = step
    h = 1  # the middle of a cell side of two steps
    if cell_type == "triangle":
        cells = np.vstack([np.column_stack([node(0, 0), node(1, 0), node(1, 1)]),
                           np.column_stack([node(0, 0), node(1, 1), node(0, 1)])])
    elif cell_type == "triangle6":
        cells = np.vstack([
            np.column_stack([node(0, 0), node(s, 0), node(s, s), node(h, 0), node(s, h),
                             node(h, h)]),
            np.column_stack([node(0, 0), node(s, s), node(0, s), node(h, h), node(h, s),
                             node(0, h)])])
    elif cell_type == "quad":
        cells = np.column_stack([node(0, 0), node(1, 0), node(1, 1), node(0, 1)])
    else:
        cols = [node(0, 0), node(s, 0), node(s, s), node(0, s),
                node(h, 0), node(s, h), node(h, s), node(0, h)]
        if cell_type == "quad9":
            cols.append(node(h, h))
        cells = np.column_stack(cols)
    return points, cells.astype(np.int64)


CORRUPTIONS = ("nan-value", "inf-value", "short-field", "long-field", "vector-field",
               "no-field", "nan-coordinate", "unused-nan-coordinate", "huge-coordinate",
               "duplicate-node", "invert-cell", "zero-area-cell", "missing-node",
               "negative-node", "unsupported-type", "mixed-types", "z-not-zero",
               "no-2d-cells", "shuffle-nodes", "move-mid-node", "clockwise", "int-field",
               "truncate-file", "flip-bytes")


def spoiled(cell_type, n, corruptions, choose):
    """A square mesh with ``corruptions`` applied; ``choose(name, strategy)`` picks
    each detail (hypothesis' draw when fuzzing, fixed values in the named tests).

    Returns ``(points, blocks, field, file_edits)``.
    """
    points, cells = square_mesh(cell_type, n)
    field = {"u": points[:, 0] + 2 * points[:, 1]}
    extra_blocks, file_edits = [], []
    corners = 3 if cell_type.startswith("triangle") else 4

    def grow(v, value):  # a field that followed the points keeps following them
        return np.append(v, value) if v.ndim == 1 and len(v) == len(points) - 1 else v

    def valid():  # every cell names existing nodes (earlier corruptions may break it)
        return len(cells) and cells.min() >= 0 and cells.max() < len(points)

    for kind in corruptions:
        c = choose("cell", st.integers(0, len(cells) - 1)) if len(cells) else 0
        if kind in ("nan-value", "inf-value") and "u" in field and len(field["u"]):
            field["u"] = field["u"].astype(float).copy()
            field["u"][choose("node", st.integers(0, len(field["u"]) - 1))] = (
                np.nan if kind == "nan-value" else -np.inf)
        elif kind == "short-field" and "u" in field:
            field["u"] = field["u"][:-choose("count", st.integers(1, 3))]
        elif kind == "long-field" and "u" in field:
            field["u"] = np.append(field["u"], np.zeros(choose("count", st.integers(1, 3))))
        elif kind == "vector-field" and "u" in field:
            field["u"] = np.column_stack([field["u"]] * 3)
        elif kind == "no-field":
            field = {"phi": field.pop("u", np.zeros(len(points)))}
        elif kind == "int-field":
            field["u"] = np.arange(len(points), dtype=np.int32)
        elif kind in ("nan-coordinate", "huge-coordinate") and valid():
            points = points.copy()
            points[cells[c, 0], choose("axis", st.integers(0, 1))] = (
                np.nan if kind == "nan-coordinate"
                else choose("huge", st.sampled_from([1e300, -1e308])))
        elif kind == "unused-nan-coordinate":
            points = np.vstack([points, [np.nan, np.inf, 0.0][:points.shape[1]]])
            field = {k: grow(v, 0.0) for k, v in field.items() if v.ndim == 1}
        elif kind == "duplicate-node" and valid():
            points = np.vstack([points, points[cells[c, 0]]])
            cells = cells.copy()
            cells[c, 0] = len(points) - 1
            field = {k: grow(v, v[0]) for k, v in field.items() if v.ndim == 1}
        elif kind == "invert-cell" and len(cells):
            cells = cells.copy()
            cells[c, :corners] = cells[c, :corners][::-1]
        elif kind == "zero-area-cell" and len(cells):
            cells = cells.copy()
            cells[c, 1] = cells[c, 0]
        elif kind == "missing-node" and len(cells):
            cells = cells.copy()
            cells[c, -1] = len(points) + choose("offset", st.integers(0, 5))
        elif kind == "negative-node" and len(cells):
            cells = cells.copy()
            cells[c, 0] = -1
        elif kind == "unsupported-type":
            extra_blocks.append(choose("unsupported", st.sampled_from([
                ("tetra", np.array([[0, 1, 2, 3]])), ("polygon", np.array([[0, 1, 2, 3, 4]])),
                ("hexahedron", np.arange(8)[None, :]), ("triangle7", np.arange(7)[None, :])])))
        elif kind == "mixed-types":
            other = "quad" if corners == 3 else "triangle"
            extra_blocks.append((other, np.arange(4 if other == "quad" else 3)[None, :]))
        elif kind == "z-not-zero" and valid():
            points = np.column_stack([points[:, :2], np.zeros(len(points))])
            points[cells[c, 0], 2] = 0.5
        elif kind == "no-2d-cells":
            cells = np.zeros((0, cells.shape[1]), np.int64)
            extra_blocks.append(("line", np.array([[0, 1]])))
        elif kind == "shuffle-nodes" and valid():  # valid: numbering never matters
            perm = np.array(choose("perm", st.permutations(range(len(points)))))
            points, cells = points[perm], np.argsort(perm)[cells]
            field = {k: v[perm] if len(v) == len(perm) else v for k, v in field.items()}
        elif kind == "move-mid-node" and cells.shape[1] > corners and valid():
            points = points.copy()
            node = cells[c, -1]
            points[node, :2] += choose("shift", st.sampled_from(
                [points[cells[c, 0], :2] - points[node, :2], np.array([0.01, 0.02]),
                 np.array([5.0, 5.0])]))
        elif kind == "clockwise":  # valid: every cell reversed
            cells = np.column_stack([cells[:, :corners][:, ::-1], cells[:, corners:]])
        elif kind in ("truncate-file", "flip-bytes"):
            file_edits.append((kind, choose("where", st.floats(0, 1)),
                               choose("byte", st.integers(0, 255))))
    blocks = ([(cell_type, cells)] if len(cells) else []) + extra_blocks
    return points, blocks, field, file_edits


@st.composite
def corrupted_meshes(draw):
    """(file format, points, cell blocks, point fields, file edits, corruptions)."""
    cell_type = draw(st.sampled_from(["triangle", "triangle6", "quad", "quad8", "quad9"]))
    corruptions = draw(st.lists(st.sampled_from(CORRUPTIONS), max_size=2, unique=True))
    points, blocks, field, edits = spoiled(cell_type, draw(st.integers(1, 3)), corruptions,
                                           lambda name, strategy: draw(strategy))
    return draw(st.sampled_from(sorted(FORMATS))), points, blocks, field, edits, corruptions


def write_mesh(path, fmt, points, blocks, field):
    """Write with meshio; the field is attached after construction, so wrong lengths
    reach the file (meshio checks them only when reading)."""
    if points.shape[1] == 2:
        points = np.column_stack([points, np.zeros(len(points))])
    mesh = meshio.Mesh(points, blocks)
    mesh.point_data.update(field)
    file_format, options = FORMATS[fmt]
    meshio.write(path, mesh, file_format=file_format, **options)


def edit_file(path, edits):
    data = bytearray(Path(path).read_bytes())
    for kind, where, byte in edits:
        i = int(where * (len(data) - 1)) if data else 0
        if kind == "truncate-file":
            del data[i:]
        elif data:
            data[i] = byte
    Path(path).write_bytes(bytes(data))


def import_like_certify(path):
    """Read, check the domain, build the basis, measure the error (as certify does)."""
    mesh, values = read_result(path, "u")
    check_domain(mesh, SQUARE)
    imported = build_basis(mesh)
    norms = error_norms(imported.basis, imported.dofs(values), SQUARE_CASE.u, SQUARE_CASE.grad)
    assert np.isfinite(norms.L2) and np.isfinite(norms.H1)
    return norms


def importer_target(example):
    fmt, points, blocks, field, edits, _ = example
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / f"level0{EXTENSIONS[fmt]}"
        try:
            write_mesh(path, fmt, points, blocks, field)
        except Exception:  # noqa: BLE001 - meshio cannot write some corruptions
            return "unwritable"
        edit_file(path, edits)
        return outcome(import_like_certify, path)


FUZZ_TARGETS = {"importer": (corrupted_meshes(), importer_target)}


# --------------------------------------------------------------------------- tests
@FUZZ
@given(corrupted_meshes())
def test_corrupted_results_import_or_raise_a_typed_error(example):
    assert importer_target(example) in ("ok", "InputError", "unwritable")


# One defect at a time: the message must name it (the node or cell where it can).
NAMED = [
    ("nan-value", "triangle", "NaN or infinite value"),
    ("inf-value", "quad", "NaN or infinite value"),
    ("short-field", "triangle6", "node count"),
    ("long-field", "quad9", "node count"),
    ("vector-field", "triangle", "not scalar"),
    ("no-field", "quad8", "point field 'u' not found"),
    ("nan-coordinate", "triangle", "node coordinates contain NaN or infinite values"),
    ("duplicate-node", "triangle", "duplicated node pair"),
    ("duplicate-node", "quad", "duplicated node pair"),
    ("invert-cell", "triangle", "1 inverted cell(s)"),
    ("invert-cell", "quad9", "1 inverted cell(s)"),
    ("zero-area-cell", "triangle", "1 zero-area cell(s)"),
    ("zero-area-cell", "quad", "1 zero-area or collapsed (repeated corner) cell(s): cells 1"),
    ("missing-node", "triangle6", "refers to a node that does not exist"),
    ("negative-node", "quad", "refers to a node that does not exist"),
    ("unsupported-type", "triangle", "unsupported cell type"),
    ("mixed-types", "triangle", "mixed 2D cell types"),
    ("z-not-zero", "quad", "not planar"),
    ("no-2d-cells", "triangle", "no 2D cells"),
]


FIXED = {"cell": 1, "node": 1, "count": 1, "axis": 0, "huge": 1e300, "offset": 0,
         "unsupported": ("tetra", np.array([[0, 1, 2, 3]])), "where": 0.5, "byte": 0}


def _one_defect(kind, cell_type):
    """A 2 x 2 square mesh with the one defect ``kind`` (fixed details)."""
    points, blocks, field, edits = spoiled(cell_type, 2, [kind],
                                           lambda name, strategy: FIXED[name])
    return "vtu", points, blocks, field, edits, [kind]


@pytest.mark.parametrize("kind, cell_type, words", NAMED,
                         ids=[f"{k}-{c}" for k, c, _ in NAMED])
def test_each_defect_is_named(tmp_path, kind, cell_type, words):
    _, points, blocks, field, _, _ = _one_defect(kind, cell_type)
    path = tmp_path / "level0.vtu"
    write_mesh(path, "vtu", points, blocks, field)
    with pytest.raises(InputError) as info:
        import_like_certify(path)
    assert words in str(info.value), str(info.value)
    assert "\n" not in str(info.value)


def test_exact_meshes_import_and_reproduce_a_linear_field(tmp_path):
    # Lagrange interpolation reproduces polynomials of the element's degree, so the
    # imported field x + 2y has zero error (Ciarlet 1978, Thm. 3.1.6); the square
    # case's u differs, so compare with the field itself.
    for cell_type in ("triangle", "triangle6", "quad", "quad8", "quad9"):
        points, cells = square_mesh(cell_type, 2)
        path = tmp_path / f"{cell_type}.vtu"
        write_mesh(path, "vtu", points, [(cell_type, cells)], {"u": points[:, 0]
                                                                + 2 * points[:, 1]})
        mesh, values = read_result(path, "u")
        imported = build_basis(mesh)
        norms = error_norms(imported.basis, imported.dofs(values),
                            lambda x, y: x + 2 * y,
                            lambda x, y: (np.ones_like(x), 2 * np.ones_like(y)))
        assert norms.L2 < 1e-13 and norms.H1 < 1e-12, (cell_type, norms)


@pytest.mark.parametrize("kind", ["nan-value", "duplicate-node", "unsupported-type",
                                  "truncate-file"])
def test_certify_mesh_cli_shows_one_line_and_exits_2(tmp_path, capsys, kind):
    example = _one_defect(kind, "triangle")
    fmt, points, blocks, field, edits, _ = example
    path = tmp_path / "mesh.vtu"
    write_mesh(path, "vtu", points, blocks, field)
    if kind == "truncate-file":
        edit_file(path, [("truncate-file", 0.5, 0)])
    capsys.readouterr()  # meshio's own notes while writing the test file
    code = main(["certify-mesh", str(path), "--case", "smooth-square", "--order", "1"])
    captured = capsys.readouterr()
    if kind in ("nan-value",):  # certify-mesh reads the mesh only: the field is not used
        assert code == 0, captured.err
        return
    if kind == "duplicate-node":  # a defective mesh is a verdict, not an input error
        assert code == 1 and "DEFECTIVE" in captured.out
        return
    assert code == 2
    assert captured.err.count("\n") == 1 and captured.err.startswith("lapsolve: error: ")
    assert "Traceback" not in captured.err and str(path) in captured.err
