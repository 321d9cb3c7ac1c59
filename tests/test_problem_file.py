"""Reading problem files: defaults, units, orientation and edge numbering."""

import math

import numpy as np
import pytest
import scipy.constants
from helpers import COAX_TOML, EXAMPLES, SQUARE_TOML, rectangle, solved, write

import lapsolve
from lapsolve.geometry import CircleLoop, PolygonLoop
from lapsolve.problem import PHYSICS


def test_defaults(tmp_path):
    text = "[outer]\npolygon = [[0, 0], [3, 0], [3, 4], [0, 4]]\n"
    problem = lapsolve.load_problem(write(tmp_path, "plain.toml", text))
    assert problem.name == "plain"  # the file name without suffix
    assert problem.physics is PHYSICS["generic"] and problem.coefficient == 1.0
    assert problem.source is None and problem.parts == () and problem.holes == ()
    assert problem.description == "" and problem.origin.endswith("plain.toml")
    # default element size: a twentieth of the bounding-box diagonal (5 here)
    assert problem.mesh.max_size == pytest.approx(0.25)
    assert problem.mesh.min_angle == 28.0 and problem.mesh.grading == ()


def test_electrostatic_scales_by_vacuum_permittivity():
    problem = lapsolve.problem_from_dict({"physics": "electrostatic", "coefficient": 2.5,
                                          "outer": {"polygon": rectangle(1, 1)}})
    # epsilon_0, CODATA 2022 (Mohr, Tiesinga, Newell & Taylor, CODATA Recommended Values
    # of the Fundamental Physical Constants: 2022), as tabulated in scipy.constants.
    assert problem.coefficients()[0] == pytest.approx(2.5 * scipy.constants.epsilon_0,
                                                      rel=1e-10)
    thermal = lapsolve.problem_from_dict({"physics": "thermal", "coefficient": 2.5,
                                          "outer": {"polygon": rectangle(1, 1)}})
    assert thermal.coefficients()[0] == 2.5


def test_max_area_equals_equilateral_size():
    # An equilateral triangle of side s has area sqrt(3)/4 s^2 (Coxeter, Introduction
    # to Geometry, 2nd ed. 1969).
    problem = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)},
                                          "mesh": {"max_area": 0.01}})
    assert math.sqrt(3) / 4 * problem.mesh.max_size ** 2 == pytest.approx(0.01, rel=1e-12)
    assert problem.mesh.max_area == pytest.approx(0.01, rel=1e-12)


def test_closing_vertex_may_be_repeated():
    a = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(2, 1)}})
    b = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(2, 1) + [[0, 0]]}})
    assert np.array_equal(a.outer.vertices, b.outer.vertices)
    assert a.outer.n_edges == 4


def test_clockwise_polygon_keeps_its_edge_numbers():
    # Edge i joins input vertices i and i+1 whatever the orientation. Given clockwise,
    # edge 0 is the left side x = 0: fixing u = 1 there and u = 0 on edge 2 (x = 1)
    # gives u = 1 - x (a linear solution, exact with P1; common practice, no source).
    data = {"outer": {"polygon": [[0, 0], [0, 1], [1, 1], [1, 0]]},
            "boundary": {"left": {"edges": [0], "type": "dirichlet", "value": 1.0},
                         "right": {"edges": [2], "type": "dirichlet", "value": 0.0}},
            "mesh": {"max_size": 0.3}}
    solution = solved(data)
    x = solution.mesh.points[:, 0]
    assert np.max(np.abs(solution.vertex_values() - (1 - x))) < 1e-12
    outer = solution.problem.outer
    assert np.array_equal(np.sort(np.vstack(outer.edge_points(0))[:, 1]), [0, 1])
    assert np.all(np.vstack(outer.edge_points(0))[:, 0] == 0)
    assert outer.area() > 0  # stored counter-clockwise


def test_loops_parts_and_regions():
    problem = lapsolve.load_problem(EXAMPLES / "busbar_duct.toml")
    assert isinstance(problem.outer, PolygonLoop)
    assert [h.name for h in problem.holes] == ["busbar", "rod"]
    assert isinstance(problem.holes[1], CircleLoop) and problem.holes[1].radius == 0.01
    assert [(r.name, r.coefficient) for r in problem.regions] == [("support", 4.5)]
    assert problem.physics.kind == "electrostatic"
    parts = {p.name: p for p in problem.parts}
    assert parts["busbar"].loop == "busbar" and parts["busbar"].edges is None
    assert parts["busbar"].condition.constant_value == 1000.0
    assert problem.mesh.min_angle == 30.0 and len(problem.mesh.grading) == 2
    assert problem.mesh.grading[0].point == (0.10, 0.09)
    assert problem.mesh.grading[0].size == 0.001 and problem.mesh.grading[0].growth == 0.25
    # every edge of every loop has at most one part; unlisted ones are insulated
    table = problem.part_of_edge()
    assert table[("outer", 0)] == list(parts).index("duct")
    assert ("rod", 0) in table and len(table) == 4 + 4 + 1


def test_condition_kinds_and_formulas(tmp_path):
    text = SQUARE_TOML + """
[boundary.top]
edges = [2]
type = "neumann"
value = "2*x + y"

[boundary.bottom]
edges = [0]
type = "robin"
h = 5.0
u_ref = 20
"""
    problem = lapsolve.load_problem(write(tmp_path, "kinds.toml", text))
    parts = {p.name: p.condition for p in problem.parts}
    assert parts["left"].kind == "dirichlet" and parts["left"].constant_value == 1.0
    top = parts["top"]
    assert top.kind == "neumann" and top.constant_value is None
    assert top.value(np.array([1.5]), np.array([1.0]))[0] == 4.0
    assert parts["bottom"].kind == "robin" and parts["bottom"].h == 5.0
    assert parts["bottom"].u_ref(np.zeros(2), np.zeros(2)).tolist() == [20.0, 20.0]


def test_constant_formula_is_a_constant():
    problem = lapsolve.problem_from_dict({
        "outer": {"polygon": rectangle(1, 1)},
        "boundary": {"a": {"edges": [0], "type": "dirichlet", "value": "2*pi"}}})
    assert problem.parts[0].condition.constant_value == pytest.approx(2 * math.pi)


def test_zero_source_is_no_source():
    problem = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)},
                                          "source": 0})
    assert problem.source is None
    problem = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)},
                                          "source": "x*y"})
    assert problem.source(np.array([2.0]), np.array([3.0]))[0] == 6.0


def test_examples_and_packaged_copy_agree():
    packaged = EXAMPLES.parent / "lapsolve" / "data" / "busbar_duct.toml"
    assert packaged.read_text() == (EXAMPLES / "busbar_duct.toml").read_text()


def test_coax_text_fixture_matches_dict_fixture(tmp_path):
    from helpers import coax

    a = lapsolve.load_problem(write(tmp_path, "coax.toml", COAX_TOML))
    b = lapsolve.problem_from_dict(coax())
    assert a.outer == b.outer and a.holes == b.holes and a.mesh == b.mesh
    assert a.coefficients().tolist() == b.coefficients().tolist()
