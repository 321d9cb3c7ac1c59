"""Importing result files: element types, DOF placement, observed orders, bad input."""

import math

import meshio
import numpy as np
import pytest

from lapsolve.errors import InputError
from verification.certify import certify_slot
from verification.exact.catalogue import get_case
from verification.export import expected_for
from verification.importer import build_basis, check_domain, read_mesh, read_result
from verification.norms import error_norms

COAX = get_case("coax")
A, B = 0.5, 2.0  # radii of the coax case


def polar_lattice(nr, nt, step):
    """Nodes of an annulus lattice with ``step`` sub-nodes per cell side (1 or 2)."""
    r = np.linspace(A, B, step * nr + 1)
    t = np.linspace(0, 2 * np.pi, step * nt, endpoint=False)
    rr, tt = np.meshgrid(r, t, indexing="ij")
    pts = np.column_stack([(rr * np.cos(tt)).ravel(), (rr * np.sin(tt)).ravel()])
    index = np.arange(len(pts)).reshape(len(r), len(t))

    def node(i, j):
        return index[i, j % (step * nt)]

    return pts, node


def polar_quads(nr, nt, cell_type):
    """Quadrilaterals of the annulus A < r < B; mid nodes on the circles (isoparametric)."""
    step = 1 if cell_type == "quad" else 2
    pts, node = polar_lattice(nr, nt, step)
    i, j = np.meshgrid(np.arange(nr), np.arange(nt), indexing="ij")
    i, j = step * i.ravel(), step * j.ravel()
    corners = [node(i, j), node(i + step, j), node(i + step, j + step), node(i, j + step)]
    if cell_type == "quad":
        return pts, np.column_stack(corners)
    mids = [node(i + 1, j), node(i + 2, j + 1), node(i + 1, j + 2), node(i, j + 1)]
    cols = corners + mids + ([node(i + 1, j + 1)] if cell_type == "quad9" else [])
    return pts, np.column_stack(cols)


def write_result(path, points, cell_type, cells, values, name="u"):
    mesh = meshio.Mesh(np.column_stack([points, np.zeros(len(points))]), [(cell_type, cells)],
                       point_data={name: values})
    meshio.write(path, mesh)
    return path


def _perturbation(x, y):
    return np.sin(3 * x) * np.cos(2 * y) + 0.5


# Interpolation error of Lagrange-type elements: ||u - I u||_L2 = O(h^(p+1)),
# |u - I u|_H1 = O(h^p) (Ciarlet, The Finite Element Method for Elliptic Problems,
# 1978, Thm. 3.1.6); for serendipity quad8 on non-affine cells the rates hold when the
# cells tend to parallelograms, as under uniform refinement (Arnold, Boffi & Falk,
# Approximation by quadrilateral finite elements, Math. Comp. 71 (2002) 909-922).
# A perturbation c h^k phi with smooth phi adds an O(h^k) error in L2, so the
# observed L2 order becomes k when k is below p + 1.
ORDER_TABLE = [
    # cell type, degree, perturbation order k (None: pure interpolant), expected L2, H1
    ("quad", 1, None, 2.0, 1.0),
    ("quad", 1, 1.0, 1.0, None),
    ("quad8", 2, None, 3.0, 2.0),
    ("quad8", 2, 2.0, 2.0, None),
    ("quad9", 2, None, 3.0, 2.0),
]


@pytest.mark.parametrize("cell_type, degree, k, want_l2, want_h1", ORDER_TABLE)
def test_quad_results_show_the_order_of_their_error(tmp_path, cell_type, degree, k, want_l2,
                                                    want_h1):
    folder = tmp_path / "coax" / f"P{degree}"
    folder.mkdir(parents=True)
    for level, nr in enumerate((3, 6, 12)):
        pts, cells = polar_quads(nr, 5 * nr, cell_type)
        h = 1.5 / nr
        values = COAX.u(*pts.T)
        if k is not None:
            values = values + h**k * _perturbation(*pts.T)
        write_result(folder / f"level{level}.vtu", pts, cell_type, cells, values)
    slot = certify_slot(COAX, degree, expected_for(degree, math.inf), (0, 1, 2), tmp_path, "u")
    l2, h1 = slot.verdicts["L2"], slot.verdicts["H1"]
    assert slot.levels[-1].element == cell_type
    assert abs(l2.fitted - want_l2) < 0.15, f"{cell_type}: L2 order {l2.fitted:.3f}"
    if want_h1 is not None:
        assert abs(h1.fitted - want_h1) < 0.15, f"{cell_type}: H1 order {h1.fitted:.3f}"
        assert slot.status == "PASS", [v.reason for v in slot.verdicts.values()]
    else:
        assert slot.status == "FAIL"


def test_quad8_with_curved_mid_nodes_uses_isoparametric_geometry(tmp_path):
    pts, cells = polar_quads(3, 15, "quad8")
    path = write_result(tmp_path / "q.vtu", pts, "quad8", cells, COAX.u(*pts.T))
    mesh, values = read_result(path, "u")
    imported = build_basis(mesh)
    assert imported.curved
    # every DOF sits exactly on its file node (mid nodes on the circles)
    where = imported.basis.doflocs[:, imported.dof_of_node[mesh.used]].T
    assert np.max(np.abs(where - mesh.points[mesh.used])) < 1e-12


def _triangle6(path):
    raw = meshio.read(path)
    return raw.points[:, :2], raw.cells_dict["triangle6"]


def _norms(points, cell_type, cells, tmp_path, name):
    path = write_result(tmp_path / name, points, cell_type, cells, COAX.u(*points.T))
    mesh, values = read_result(path, "u")
    imported = build_basis(mesh)
    return mesh, error_norms(imported.basis, imported.dofs(values), COAX.u, COAX.grad)


@pytest.fixture(scope="module")
def coax_p2(tmp_path_factory):
    from verification.export import export_benchmark

    out = tmp_path_factory.mktemp("bench")
    export_benchmark([COAX], out, levels=1, orders=(2,))
    return _triangle6(out / "coax" / "P2" / "level0.vtu")


def test_node_numbering_does_not_matter(tmp_path, coax_p2):
    points, cells = coax_p2
    _, ref = _norms(points, "triangle6", cells, tmp_path, "a.vtu")
    perm = np.random.default_rng(3).permutation(len(points))
    inverse = np.argsort(perm)
    _, shuffled = _norms(points[perm], "triangle6", inverse[cells], tmp_path, "b.vtu")
    assert shuffled.L2 == pytest.approx(ref.L2, rel=1e-10)
    assert shuffled.H1 == pytest.approx(ref.H1, rel=1e-10)


def test_clockwise_cells_are_reoriented(tmp_path, coax_p2):
    points, cells = coax_p2
    _, ref = _norms(points, "triangle6", cells, tmp_path, "a.vtu")
    clockwise = cells[:, [0, 2, 1, 5, 4, 3]]
    mesh, flipped = _norms(points, "triangle6", clockwise, tmp_path, "b.vtu")
    assert mesh.flipped and flipped.L2 == pytest.approx(ref.L2, rel=1e-10)


def test_curved_p2_interpolant_beats_straight_one(tmp_path, coax_p2):
    points, cells = coax_p2
    _, curved = _norms(points, "triangle6", cells, tmp_path, "a.vtu")
    straight = points.copy()
    for j, (a, b) in enumerate(((0, 1), (1, 2), (2, 0))):
        straight[cells[:, 3 + j]] = 0.5 * (points[cells[:, a]] + points[cells[:, b]])
    _, flat = _norms(straight, "triangle6", cells, tmp_path, "b.vtu")
    # straight edges cut off O(h^2) of the annulus: u is interpolated on a different
    # domain, and the curved geometry must not be worse than the straight one
    assert curved.L2 < flat.L2


# ---- bad input: each with a clear message --------------------------------------------

SQUARE = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)


def test_missing_field_lists_the_fields_there(tmp_path):
    path = write_result(tmp_path / "a.vtu", SQUARE, "triangle", np.array([[0, 1, 2], [0, 2, 3]]),
                        np.zeros(4), name="phi")
    with pytest.raises(InputError, match="point field 'u' not found.*phi"):
        read_result(path, "u")


def test_nan_values_are_refused(tmp_path):
    path = write_result(tmp_path / "a.vtu", SQUARE, "triangle", np.array([[0, 1, 2], [0, 2, 3]]),
                        np.array([0.0, np.nan, 1.0, np.inf]))
    with pytest.raises(InputError, match="2 NaN or infinite value.*node 1"):
        read_result(path, "u")


VTU_THREE_VALUES_FOUR_NODES = """<?xml version="1.0"?>
<VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian">
<UnstructuredGrid><Piece NumberOfPoints="4" NumberOfCells="2">
<Points><DataArray type="Float64" NumberOfComponents="3" format="ascii">
0 0 0 1 0 0 1 1 0 0 1 0</DataArray></Points>
<Cells><DataArray type="Int64" Name="connectivity" format="ascii">0 1 2 0 2 3</DataArray>
<DataArray type="Int64" Name="offsets" format="ascii">3 6</DataArray>
<DataArray type="Int64" Name="types" format="ascii">5 5</DataArray></Cells>
<PointData><DataArray type="Float64" Name="u" format="ascii">0 1 2</DataArray></PointData>
</Piece></UnstructuredGrid></VTKFile>
"""


def test_node_count_mismatch_is_refused(tmp_path):
    path = tmp_path / "a.vtu"
    path.write_text(VTU_THREE_VALUES_FOUR_NODES)
    with pytest.raises(InputError, match="does not match the mesh.*node count"):
        read_result(path, "u")


def test_unsupported_cell_type_is_named(tmp_path):
    path = tmp_path / "a.vtu"
    pts = np.column_stack([SQUARE, np.zeros(4)])
    meshio.write(path, meshio.Mesh(np.vstack([pts, [[0.5, 0.5, 1.0]]]),
                                   [("tetra", np.array([[0, 1, 2, 4]]))],
                                   point_data={"u": np.zeros(5)}))
    with pytest.raises(InputError, match="unsupported cell type.*tetra"):
        read_result(path, "u")


def test_mixed_element_types_are_refused(tmp_path):
    path = tmp_path / "a.vtu"
    pts = np.vstack([SQUARE, [[2, 0], [2, 1]]])
    meshio.write(path, meshio.Mesh(np.column_stack([pts, np.zeros(6)]),
                                   [("triangle", np.array([[0, 1, 2], [0, 2, 3]])),
                                    ("quad", np.array([[1, 4, 5, 2]]))],
                                   point_data={"u": np.zeros(6)}))
    with pytest.raises(InputError, match="mixed 2D cell types quad, triangle"):
        read_result(path, "u")


def test_unreadable_and_missing_files(tmp_path):
    bad = tmp_path / "garbage.vtu"
    bad.write_bytes(b"\x00\x01 not a mesh")
    with pytest.raises(InputError, match="unreadable mesh file"):
        read_result(bad, "u")
    with pytest.raises(InputError, match="file not found"):
        read_result(tmp_path / "absent.vtu", "u")


def test_duplicated_nodes_are_named(tmp_path):
    pts = np.vstack([SQUARE, SQUARE[[2]]])  # node 4 repeats node 2: a crack
    cells = np.array([[0, 1, 2], [0, 4, 3]])
    path = write_result(tmp_path / "a.vtu", pts, "triangle", cells, np.zeros(5))
    with pytest.raises(InputError, match="duplicated node pair.*nodes 2 and 4"):
        read_result(path, "u")


def test_inverted_and_zero_area_cells_are_named(tmp_path):
    pts = np.array([[0, 0], [1, 0], [1, 1], [0, 1], [2, 0], [2, 1], [3, 0], [3, 1], [4, 0]],
                   float)
    cells = np.array([[0, 1, 2], [0, 2, 3], [1, 4, 5], [4, 6, 7], [1, 2, 5],
                      [0, 4, 8]])  # cell 4 clockwise, cell 5 on a line
    path = write_result(tmp_path / "a.vtu", pts, "triangle", cells, np.zeros(len(pts)))
    with pytest.raises(InputError) as info:
        read_result(path, "u")
    assert "1 inverted cell(s)" in str(info.value) and "cells 4" in str(info.value)
    assert "1 zero-area cell(s): cells 5" in str(info.value)
    mesh = read_mesh(path, strict=False)
    assert list(mesh.inverted) == [4] and list(mesh.degenerate) == [5]


def test_mesh_of_the_wrong_case_is_refused(tmp_path):
    pts, cells = polar_quads(3, 15, "quad")
    path = write_result(tmp_path / "a.vtu", pts, "quad", cells, np.zeros(len(pts)))
    mesh = read_mesh(path)
    check_domain(mesh, COAX.problem())  # the annulus itself passes
    with pytest.raises(InputError, match="does not look like the domain of case 'lshape'"):
        check_domain(mesh, get_case("lshape").problem())
