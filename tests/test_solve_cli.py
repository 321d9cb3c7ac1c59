"""``lapsolve solve``: the files and numbers it writes equal what the library returns."""

import json
import math

import meshio
import numpy as np
import pytest
from helpers import COAX_TOML, coax_capacitance, relative, write

import lapsolve
from lapsolve.cli import main

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948:2004), sec. 5.2


@pytest.fixture(scope="module")
def coax_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("coax")
    path = write(folder, "coax.toml", COAX_TOML)
    out = folder / "results"
    code = main(["solve", path, "--order", "2", "--out", str(out)])
    library = lapsolve.solve(lapsolve.load_problem(path), order=2)
    return code, path, out, library


def test_summary_equals_library(coax_run):
    code, path, out, library = coax_run
    assert code == 0
    data = json.loads((out / "summary.json").read_text())
    assert data["order"] == 2 and data["dofs"] == library.dofs
    assert data["elements"] == library.mesh.n_triangles
    assert data["fluxes"].keys() == library.fluxes.keys()
    for name, value in library.fluxes.items():
        assert data["fluxes"][name] == pytest.approx(value, rel=1e-12)
    for key in ("from_flux", "from_energy", "charge"):
        assert data["capacity"][key] == pytest.approx(library.capacity[key], rel=1e-12)
    assert data["energy"] == pytest.approx(library.energy, rel=1e-12)
    # and the number itself: C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer,
    # Fields and Waves in Communication Electronics, 3rd ed. 1994)
    assert relative(data["capacity"]["from_flux"], coax_capacitance(1.0, 2.0, 2.0)) < 1e-5
    assert data["capacity_unit"] == "F/m" and data["physics"] == "electrostatic"


def test_picture_is_png(coax_run):
    _, _, out, _ = coax_run
    picture = (out / "field.png").read_bytes()
    assert picture[:8] == PNG_SIGNATURE and len(picture) > 10_000


def test_vtu_rereads(coax_run):
    _, _, out, library = coax_run
    mesh = meshio.read(out / "solution.vtu")
    u = mesh.point_data["u"]
    assert len(u) == library.dofs  # P2: every degree of freedom is a point
    # u at each written point: ln(b/r)/ln(b/a) (Ramo, Whinnery & Van Duzer, as above);
    # P2 nodal error at this mesh is about 4e-5.
    r = np.hypot(mesh.points[:, 0], mesh.points[:, 1])
    assert np.max(np.abs(u - np.log(2.0 / r) / math.log(2.0))) < 1e-4
    assert set(mesh.cell_data) >= {"region", "flux", "boundary_part"}
    kinds = [block.type for block in mesh.cells]
    assert kinds == ["triangle6", "line"]
    parts = mesh.cell_data["boundary_part"][1]
    names = [p.name for p in library.problem.parts]
    assert set(parts.tolist()) == {names.index("inner"), names.index("shield")}
    assert np.all(mesh.cell_data["region"][0] == 0)
    # flux = -k grad u points outward (away from the inner conductor at 1 V)
    cells = mesh.cells[0].data[:, :3]
    centre = mesh.points[cells].mean(axis=1)[:, :2]
    flux = mesh.cell_data["flux"][0][:, :2]
    assert np.all(np.sum(flux * centre, axis=1) > 0)


def test_probe_matches_closed_form(tmp_path, capsys):
    path = write(tmp_path, "coax.toml", COAX_TOML)
    points = [(1.5, 0.0), (0.0, -1.25), (1.1, 1.1)]
    args = ["solve", path, "--json"] + [f"--probe={x},{y}" for x, y in points]
    assert main(args) == 0
    data = json.loads(capsys.readouterr().out)
    assert [(p["x"], p["y"]) for p in data["probes"]] == points
    for p in data["probes"]:
        r = math.hypot(p["x"], p["y"])
        # u = ln(b/r)/ln(b/a), E = -grad u = r_hat / (r ln(b/a)) (Ramo, Whinnery &
        # Van Duzer, Fields and Waves in Communication Electronics, 3rd ed. 1994).
        assert p["u"] == pytest.approx(math.log(2.0 / r) / math.log(2.0), abs=1e-4)
        field = np.array(p["field"])
        exact = np.array([p["x"], p["y"]]) / (r * r * math.log(2.0))
        assert np.linalg.norm(field - exact) < 5e-3 * np.linalg.norm(exact)


@pytest.mark.parametrize("order, cell", [(1, "triangle"), (3, "triangle")])
def test_other_orders_write_vertex_values(tmp_path, order, cell):
    path = write(tmp_path, "coax.toml", COAX_TOML.replace("max_size = 0.15", "max_size = 0.4"))
    out = tmp_path / "results"
    assert main(["solve", path, "--order", str(order), "--out", str(out), "--no-plot"]) == 0
    assert not (out / "field.png").exists()
    mesh = meshio.read(out / "solution.vtu")
    assert mesh.cells[0].type == cell
    library = lapsolve.solve(lapsolve.load_problem(path), order=order)
    assert np.allclose(mesh.point_data["u"], library.vertex_values(), rtol=0, atol=1e-12)
    data = json.loads((out / "summary.json").read_text())
    assert data["capacity"]["from_flux"] == pytest.approx(library.capacity["from_flux"],
                                                          rel=1e-12)


def test_terminal_summary(tmp_path, capsys):
    path = write(tmp_path, "coax.toml", COAX_TOML.replace("max_size = 0.15", "max_size = 0.4"))
    assert main(["solve", path]) == 0
    text = capsys.readouterr().out
    assert "capacitance per unit length F/m" in text
    assert "inner" in text and "shield" in text
    assert not (tmp_path / "results").exists()


def test_thermal_json_summary(tmp_path, capsys):
    from helpers import EXAMPLES

    assert main(["solve", str(EXAMPLES / "bracket_heat.toml"), "--order", "1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["physics"] == "thermal" and data["capacity"] is None
    # heat in at the flange equals heat out at the cooled face (no source)
    assert data["fluxes"]["flange"] == pytest.approx(-data["fluxes"]["cooled_face"], rel=1e-10)
