"""``lapsolve modulus``: the numbers it prints equal the library's; bad input exits 2."""

import json
import re

import pytest
from helpers import EXAMPLES, relative

import lapsolve
from lapsolve.cli import main
from lapsolve.problem import EPSILON_0
from verification.exact.quadrilateral import polygon_of
from verification.modulus import quadrilateral_modulus

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948:2004), sec. 5.2
NOTCHED = EXAMPLES / "notched_plate.toml"
CORNERS = ["0", "1", "2", "7"]
RECTANGLE_3X1 = "0,0 3,0 3,1 0,1"


def run(capsys, *argv):
    code = main(["modulus", *map(str, argv)])
    out, err = capsys.readouterr()
    return code, out, err


def test_text_report_equals_library(capsys):
    code, out, _ = run(capsys, NOTCHED, "--corners", *CORNERS)
    assert code == 0
    problem = lapsolve.load_problem(NOTCHED)
    result = quadrilateral_modulus(polygon_of(problem), (0, 1, 2, 7))
    assert f"conformal modulus M = {result.modulus:.15g}" in out
    assert f"k / M = {45.0 / result.modulus:.12g} W/(m K)" in out
    assert "accuracy estimate" in out and "electrode at u = 0" in out


def test_json_report(capsys):
    code, out, _ = run(capsys, NOTCHED, "--corners", *CORNERS, "--json")
    assert code == 0
    data = json.loads(out)
    result = quadrilateral_modulus(polygon_of(lapsolve.load_problem(NOTCHED)), (0, 1, 2, 7))
    assert data["schema"] == "lapsolve.modulus/1"
    assert data["modulus"] == pytest.approx(result.modulus, rel=1e-14)
    assert data["capacity"]["unit"] == "W/(m K)"
    assert data["capacity"]["value"] == pytest.approx(45.0 / result.modulus, rel=1e-14)
    assert data["resistance"]["value"] == pytest.approx(result.modulus / 45.0, rel=1e-14)
    assert data["arcs"]["electrode-low"]["edges"] == [7]
    assert data["arcs"]["insulated-c2-c3"]["edges"] == [2, 3, 4, 5, 6]
    acc = data["accuracy"]
    assert acc["estimate"] < 1e-12 and acc["reciprocal_error"] < 1e-12


def test_example_agrees_with_finite_elements():
    # The example's own boundary conditions are the modulus electrodes (20 and 120 degC):
    # P3 finite elements on its graded mesh give the conductance k / M to 1e-4 (measured
    # 3.5e-5; common practice, no source, for an engineering-grade example mesh).
    problem = lapsolve.load_problem(NOTCHED)
    exact = 45.0 / quadrilateral_modulus(polygon_of(problem), (0, 1, 2, 7)).modulus
    solution = lapsolve.solve(problem, order=3)
    assert relative(solution.capacity["from_energy"], exact) < 1e-4
    assert relative(-solution.fluxes["hot_wall"], 100.0 * exact) < 1e-4


def test_electrostatic_polygon_on_the_command_line(capsys):
    # A rectangle 3 x 1 between its short sides: M = 3 (Papamichael & Stylianopoulos,
    # Numerical Conformal Mapping, 2010), C' = eps0 eps_r / M.
    code, out, _ = run(capsys, "--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, 3,
                       "--physics", "electrostatic", "--coefficient", 2.5, "--json")
    assert code == 0
    data = json.loads(out)
    assert data["modulus"] == pytest.approx(3.0, rel=1e-12)
    assert data["capacity"]["unit"] == "F/m"
    assert data["capacity"]["value"] == pytest.approx(EPSILON_0 * 2.5 / 3.0, rel=1e-12)
    assert data["resistance"] is None and data["sheet_resistance"] is None


def test_sheet_resistance(capsys):
    # A film of sheet resistance R_s, length L and width W has R = R_s L / W (Sze & Ng,
    # Physics of Semiconductor Devices, 3rd ed. 2007, from memory): 3 squares of 50 ohm.
    code, out, _ = run(capsys, "--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, 3,
                       "--sheet-resistance", 50, "--json")
    assert code == 0
    assert json.loads(out)["sheet_resistance"]["value"] == pytest.approx(150.0, rel=1e-12)


def test_clockwise_polygon_keeps_the_convention(capsys):
    # Listed clockwise, corners read in list order: c0 = (3, 0), c1 = (0, 0), so the
    # electrodes are still 3 apart (M = 3, as above).
    code, out, _ = run(capsys, "--polygon", "0,1 3,1 3,0 0,0", "--corners", 2, 3, 0, 1,
                       "--json")
    assert code == 0
    assert json.loads(out)["modulus"] == pytest.approx(3.0, rel=1e-12)


def test_plot_and_out_folder(capsys, tmp_path):
    picture = tmp_path / "lines.png"
    out = tmp_path / "result"
    code, text, _ = run(capsys, "--polygon", "0,0 2,0 2,1 1,1 1,2 0,2", "--corners", 0, 1, 2,
                        4, "--plot", picture, "--out", out)
    assert code == 0 and f"wrote {picture}" in text
    assert picture.read_bytes().startswith(PNG_SIGNATURE)
    assert sorted(p.name for p in out.iterdir()) == ["modulus.json", "modulus.png"]
    data = json.loads((out / "modulus.json").read_text())
    assert data["modulus"] == pytest.approx(
        quadrilateral_modulus([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)],
                              (0, 1, 2, 4)).modulus, rel=1e-14)
    assert (out / "modulus.png").read_bytes().startswith(PNG_SIGNATURE)
    assert not list(tmp_path.glob(".*"))  # no temporary files left behind


HOLE_TOML = """
[outer]
polygon = [[0, 0], [4, 0], [4, 2], [0, 2]]
[[holes]]
name = "pin"
circle = {center = [2, 1], radius = 0.3}
"""
CIRCLE_TOML = """
[outer]
circle = {center = [0, 0], radius = 1}
"""
REGION_TOML = """
[outer]
polygon = [[0, 0], [4, 0], [4, 2], [0, 2]]
[[regions]]
name = "insert"
polygon = [[1, 0.5], [2, 0.5], [2, 1.5], [1, 1.5]]
coefficient = 3.0
"""


@pytest.mark.parametrize("argv, words", [
    (["--polygon", "0,0 2,2 2,0 0,1", "--corners", 0, 1, 2, 3], "not simple"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 2, 1, 3], "order of the boundary"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 1, 1, 3], "distinct"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2], "four"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, 9], "out of range"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, "x"], "integers"),
    (["--polygon", "0,0 2;0 2,1", "--corners", 0, 1, 2, 3], "X,Y"),
    # M = 300 needs prevertex gaps near exp(-300 pi): the residual is reported.
    (["--polygon", "0,0 300,0 300,1 0,1", "--corners", 0, 1, 2, 3],
     r"did not converge: side-length residual \d\.\de[+-]\d+"),
    (["{hole}", "--corners", 0, 1, 2, 3], "simply connected"),
    (["{circle}", "--corners", 0, 1, 2, 3], "circle"),
    (["{region}", "--corners", 0, 1, 2, 3], "uniform material"),
    (["--corners", 0, 1, 2, 3], "problem file or --polygon"),
    (["{hole}", "--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, 3], "problem file or --polygon"),
    ([NOTCHED, "--corners", *CORNERS, "--physics", "thermal"], "--polygon"),
    (["--polygon", RECTANGLE_3X1, "--corners", 0, 1, 2, 3, "--coefficient", -1], "positive"),
])
def test_bad_input_exits_2_with_one_line(capsys, tmp_path, argv, words):
    files = {"{hole}": HOLE_TOML, "{circle}": CIRCLE_TOML, "{region}": REGION_TOML}
    for key, text in files.items():
        (tmp_path / f"{key[1:-1]}.toml").write_text(text)
    argv = [str(tmp_path / f"{a[1:-1]}.toml") if a in files else a for a in argv]
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("lapsolve: error:")
    assert re.search(words, err), err
    assert out == ""
