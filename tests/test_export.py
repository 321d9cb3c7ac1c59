"""Benchmark export: MSH 4.1 with physical groups, VTU, boundary tables, manifest."""

import json
from dataclasses import replace

import meshio
import numpy as np
import pytest

from lapsolve.cli import main
from lapsolve.errors import InputError
from lapsolve.geometry import make_polygon
from lapsolve.problem import Problem
from verification.exact.case import ExactCase, PartSpec
from verification.exact.catalogue import get_case
from verification.export import MANIFEST_SCHEMA, export_benchmark

COAX = get_case("coax")


def _exp_case(name="square-exp", dirichlet_edges=(0, 2, 3), neumann_edges=(1,)):
    """u = Re e^z = e^x cos y on the unit square; v = Im e^z = e^x sin y."""
    def geometry(size):
        return Problem(name, make_polygon("outer", [(0, 0), (1, 0), (1, 1), (0, 1)]))

    return ExactCase(
        name=name, description="e^x cos y on the unit square (test case)",
        build_geometry=geometry,
        conditions={"dirichlet": PartSpec("outer", dirichlet_edges),
                    "neumann": PartSpec("outer", neumann_edges, kind="neumann")},
        u=lambda x, y: np.exp(x) * np.cos(y),
        v=lambda x, y: np.exp(x) * np.sin(y),
        grad=lambda x, y: (np.exp(x) * np.cos(y), -np.exp(x) * np.sin(y)),
        default_size=0.25)


EXP = _exp_case()


@pytest.fixture(scope="module")
def bench(tmp_path_factory):
    out = tmp_path_factory.mktemp("bench")
    manifest = export_benchmark([COAX, EXP], out, levels=2, orders=(1, 2))
    return out, manifest


def test_manifest_lists_cases_levels_orders_and_expected_rates(bench):
    out, manifest = bench
    on_disk = json.loads((out / "manifest.json").read_text())
    assert on_disk == manifest and manifest["schema"] == MANIFEST_SCHEMA
    coax = manifest["cases"][0]
    assert coax["name"] == "coax" and coax["singular_exponent"] is None
    # smooth solution: P1 converges at 1 (H1) and 2 (L2), P2 at 2 and 3
    # (Strang & Fix, An Analysis of the Finite Element Method, 1973, ch. 3)
    assert coax["orders"]["1"]["expected_orders"]["L2"] == 2.0
    assert coax["orders"]["2"]["expected_orders"]["H1"] == 2.0
    assert coax["orders"]["2"]["element_types"] == ["triangle6", "quad8", "quad9"]
    assert manifest["field"] == "u" and "{case}/P{order}/level{level}" in \
        manifest["results"]["pattern"]
    tri = [row["triangles"] for row in coax["levels"]]
    assert tri[1] == 4 * tri[0]  # uniform refinement splits each triangle in four
    assert coax["levels"][1]["h"] == pytest.approx(coax["levels"][0]["h"] / 2, rel=0.05)


@pytest.mark.parametrize("order, cell, line", [(1, "triangle", "line"),
                                               (2, "triangle6", "line3")])
def test_msh_rereads_with_physical_names_and_matches_vtu(bench, order, cell, line):
    out, _ = bench
    msh = meshio.read(out / "coax" / f"P{order}" / "level1.msh", file_format="gmsh")
    vtu = meshio.read(out / "coax" / f"P{order}" / "level1.vtu")
    names = {name: tuple(int(v) for v in val) for name, val in msh.field_data.items()}
    assert names == {"core": (1, 1), "shield": (2, 1), "background": (101, 2)}
    assert np.array_equal(msh.points, vtu.points)
    assert np.array_equal(msh.cells_dict[cell], vtu.cells_dict[cell])
    physical = dict(zip((b.type for b in msh.cells), msh.cell_data["gmsh:physical"]))
    assert set(physical[cell]) == {101}
    lines = {int(p[0]): len(b.data) for b, p in zip(msh.cells, msh.cell_data["gmsh:physical"])
             if b.type == line}
    assert set(lines) == {1, 2}
    r = np.hypot(*msh.points[:, :2].T)
    for tag, radius in ((1, 0.5), (2, 2.0)):
        on_part = np.concatenate([b.data.ravel() for b, p in
                                  zip(msh.cells, msh.cell_data["gmsh:physical"])
                                  if b.type == line and p[0] == tag])
        # every boundary node, mid-edge nodes of P2 included, lies on its circle
        assert np.max(np.abs(r[on_part] - radius)) < 1e-12


def test_dirichlet_table_holds_the_exact_values(bench):
    out, _ = bench
    msh = meshio.read(out / "square-exp" / "P2" / "level0.msh", file_format="gmsh")
    table = json.loads((out / "square-exp" / "P2" / "level0.boundary.json").read_text())
    d = table["dirichlet"]
    nodes = np.array(d["node"])
    x, y = msh.points[nodes, 0], msh.points[nodes, 1]
    assert np.allclose(d["x"], x) and np.allclose(d["y"], y)
    assert np.max(np.abs(np.array(d["value"]) - np.exp(x) * np.cos(y))) < 1e-14
    assert table["parts"]["dirichlet"]["formula"] == "tabulated only"
    csv_rows = (out / "square-exp" / "P2" / "level0.dirichlet.csv").read_text().splitlines()
    assert csv_rows[0] == "node,x,y,part,value" and len(csv_rows) == len(nodes) + 1


@pytest.mark.parametrize("order", [1, 2])
def test_neumann_gauss_data_integrate_the_flux_exactly(bench, order):
    out, _ = bench
    table = json.loads((out / "square-exp" / f"P{order}" / "level1.boundary.json").read_text())
    n = table["neumann"]
    assert set(n["part"]) == {"neumann"}
    x, nx = np.array(n["x"]), np.array(n["nx"])
    assert np.allclose(x, 1.0) and np.allclose(nx, 1.0)  # the right side, normal outward
    assert sum(n["weight"]) == pytest.approx(1.0, abs=1e-14)
    # Cauchy-Riemann: du/dn = dv/ds along the boundary, so the outward flux through the
    # side x = 1, 0 <= y <= 1 is v(1, 1) - v(1, 0) = e sin 1 (Ahlfors, Complex Analysis,
    # 3rd ed., 1979, ch. 4).
    total = float(np.dot(n["weight"], n["flux"]))
    assert total == pytest.approx(np.e * np.sin(1.0), rel=1e-12)
    coarse = json.loads((out / "square-exp" / f"P{order}" / "level0.boundary.json").read_text())
    per_edge = {}
    for edge, w in zip(n["edge"], n["weight"]):
        per_edge[edge] = per_edge.get(edge, 0.0) + w
    assert len(per_edge) == 2 * len(set(coarse["neumann"]["edge"]))  # each edge halved
    assert np.allclose(list(per_edge.values()), 1.0 / len(per_edge))  # weights sum to length


def test_neumann_data_on_a_circle_use_the_curved_edge(tmp_path):
    # coax with its core turned into a Neumann boundary: a curved Neumann edge
    case = replace(COAX, name="coax-flux",
                   conditions={"core": PartSpec("core", kind="neumann"),
                               "shield": PartSpec("shield", electrode=0.0)})
    export_benchmark([case], tmp_path, levels=1, orders=(2,))
    n = json.loads((tmp_path / "coax-flux" / "P2" / "level0.boundary.json").read_text())[
        "neumann"]
    x, y = np.array(n["x"]), np.array(n["y"])
    assert np.max(np.abs(np.hypot(x, y) - 0.5)) < 5e-5  # Gauss points on the quadratic arc
    # the outward normal of the annulus on the core points toward the centre
    assert np.all(np.array(n["nx"]) * x + np.array(n["ny"]) * y < 0)
    # total flux through the core: the charge 2 pi / ln 4 of the coax line
    # (Ramo, Whinnery & Van Duzer, Fields and Waves, 3rd ed., 1994)
    assert np.dot(n["weight"], n["flux"]) == pytest.approx(2 * np.pi / np.log(4), rel=1e-4)


def test_materials_name_each_physical_surface(bench):
    out, _ = bench
    mats = json.loads((out / "coax" / "materials.json").read_text())
    assert mats["regions"] == [{"name": "background", "physical_tag": 101, "k": 1.0}]


def test_failed_export_leaves_nothing_behind(tmp_path):
    bad = _exp_case("bad-data")
    bad = replace(bad, u=lambda x, y: np.full(np.shape(x), np.nan))
    target = tmp_path / "bench"
    with pytest.raises(InputError, match="NaN or infinite"):
        export_benchmark([EXP, bad], target, levels=1, orders=(1,))
    assert not target.exists()


def test_export_command(tmp_path, capsys):
    assert main(["export", "coax", "--levels", "2", "--order", "1", "--out",
                 str(tmp_path / "b")]) == 0
    assert "manifest.json" in capsys.readouterr().out
    assert (tmp_path / "b" / "coax" / "P1" / "level1.msh").is_file()
    assert main(["export", "no-such-case", "--out", str(tmp_path / "c")]) == 2
    assert main(["export", "coax", "--levels", "0", "--out", str(tmp_path / "c")]) == 2
    assert not (tmp_path / "c").exists()
