"""The stream-function (conjugate) problem: layouts, cuts, material regions, drawing."""

import math
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from helpers import coax, rectangle, two_layer  # noqa: E402

import lapsolve  # noqa: E402
from lapsolve.bounds import capacity_bounds  # noqa: E402
from lapsolve.conjugate import (  # noqa: E402
    classify,
    cut_triangulation,
    draw_stream_lines,
    solve_conjugate,
    stream_function_vertex_values,
    two_terminal,
)
from lapsolve.errors import InputError  # noqa: E402
from lapsolve.problem import EPSILON_0  # noqa: E402

BUSBAR = Path(lapsolve.__file__).parent / "data" / "busbar_duct.toml"


def sheet(vertices, high, low, size=0.3, k=1.0, holes=(), regions=()):
    return lapsolve.problem_from_dict({
        "coefficient": k,
        "outer": {"polygon": [list(map(float, v)) for v in vertices]},
        "holes": list(holes), "regions": list(regions),
        "boundary": {"high": {"edges": high, "type": "dirichlet", "value": 1.0},
                     "low": {"edges": low, "type": "dirichlet", "value": 0.0}},
        "mesh": {"max_size": size}})


def test_rectangle_stream_function_is_linear():
    # u = x/L has the harmonic conjugate y/L (Cauchy-Riemann equations; Ahlfors,
    # Complex Analysis, 3rd ed. 1979); with unit flux, psi = y/H (or 1 - y/H), which P1
    # reproduces exactly.
    width, height = 2.0, 0.75
    problem = sheet(rectangle(width, height), [1], [3])
    conj = solve_conjugate(lapsolve.solve(problem, order=1))
    psi = stream_function_vertex_values(conj)
    y = conj.mesh.points[:, 1] / height
    assert min(np.max(np.abs(psi - y)), np.max(np.abs(psi - (1 - y)))) < 1e-12
    assert conj.topology.kind == "quadrilateral"
    assert conj.cuts == []


def test_coax_stream_function_is_the_angle():
    # u = ln(b/r)/ln(b/a) has the conjugate -theta/ln(b/a) (Ahlfors 1979): with unit flux,
    # psi = +-theta/(2 pi) + const, multivalued with period 1 around the core.
    problem = lapsolve.problem_from_dict(coax(0.5, 2.0, 1.0, max_size=0.25))
    conj = solve_conjugate(lapsolve.solve(problem, order=2))
    assert conj.topology.kind == "loops"
    (cut,) = conj.cuts
    assert abs(cut.jump) == pytest.approx(1.0, abs=1e-14)
    points, _, values = cut_triangulation(conj)
    theta = np.arctan2(points[:, 1], points[:, 0]) / (2 * math.pi)
    errors = []
    for sign in (1, -1):
        d = values - sign * theta
        d = d - d[0]
        d = d - np.round(d)  # compare modulo the period
        errors.append(np.max(np.abs(d)))
    assert min(errors) < 5e-4  # measured 4.4e-5


def test_cut_path_is_a_chordless_edge_path():
    problem = lapsolve.problem_from_dict(coax(0.5, 2.0, 1.0, max_size=0.3))
    conj = solve_conjugate(lapsolve.solve(problem, order=1))
    mesh = conj.mesh
    (cut,) = conj.cuts
    path = cut.path
    radius = np.hypot(*mesh.points[path].T)
    assert {round(radius[0], 12), round(radius[-1], 12)} == {0.5, 2.0}
    assert np.all((radius[1:-1] > 0.5 + 1e-9) & (radius[1:-1] < 2.0 - 1e-9))
    t = mesh.triangles
    edges = {tuple(sorted(e)) for tri in t for e in ((tri[0], tri[1]), (tri[1], tri[2]),
                                                     (tri[2], tri[0]))}
    steps = {tuple(sorted(e)) for e in zip(path[:-1], path[1:])}
    assert steps <= edges
    on_path = set(path.tolist())
    chords = [e for e in edges if e[0] in on_path and e[1] in on_path and e not in steps]
    assert chords == []
    # every strip triangle touches the path; the plus side has the path on its right
    assert np.all(np.isin(t[cut.strip], path).any(axis=1))


@pytest.mark.parametrize("order", [1, 2])
def test_series_and_parallel_layers_are_exact(order):
    # Series layers between plates: C = eps W / (d1/eps1 + d2/eps2); layers side by side:
    # C = (k1 H1 + k2 H2) / L (series and parallel capacitors; Purcell & Morin,
    # Electricity and Magnetism, 3rd ed. 2013). u and psi are piecewise linear, so both
    # bounds equal C up to round-off: psi carries 1/k.
    series = lapsolve.problem_from_dict(two_layer(width=2.0, d1=0.3, d2=0.7, eps1=4.0,
                                                  eps2=1.5, max_size=0.25))
    exact = EPSILON_0 * 2.0 / (0.3 / 4.0 + 0.7 / 1.5)
    lv = capacity_bounds(series, order=order, levels=1, exact=exact).levels[0]
    assert lv.lower == pytest.approx(exact, rel=1e-10)
    assert lv.upper == pytest.approx(exact, rel=1e-10)
    assert lv.contains
    side = sheet([[0, 0], [2, 0], [2, 0.4], [2, 1], [0, 1], [0, 0.4]], [1, 2], [4, 5], size=0.25,
                 k=1.5, regions=[{"name": "lower", "polygon": rectangle(2.0, 0.4),
                                  "coefficient": 6.0}])
    exact = (6.0 * 0.4 + 1.5 * 0.6) / 2.0
    lv = capacity_bounds(side, order=order, levels=1, exact=exact).levels[0]
    assert lv.contains and lv.relative_width < 1e-10


def test_insulated_hole_carries_a_free_constant():
    # A sheet with an insulated hole: psi is constant on the hole (free value); the
    # exact C is unknown, but every level's interval holds it, so they all intersect
    # (Dirichlet and Thomson principles; Polya & Szego 1951).
    hole = {"name": "slot", "polygon": [[0.8, 0.3], [1.2, 0.3], [1.2, 0.7], [0.8, 0.7]]}
    problem = sheet(rectangle(2.0, 1.0), [1], [3], size=0.25, holes=[hole])
    solution = lapsolve.solve(problem, order=2)
    conj = solve_conjugate(solution)
    assert conj.topology.free_loops == ("slot",)
    from lapsolve.conjugate import _loop_dofs

    on_hole = conj.psi[_loop_dofs(solution.disc, solution.mesh, "slot")]
    assert np.ptp(on_hole) == 0.0
    assert 0.0 < on_hole[0] < 1.0
    result = capacity_bounds(problem, order=2, levels=3)
    assert max(lv.lower for lv in result.levels) <= min(lv.upper for lv in result.levels)
    assert result.levels[-1].width < 0.2 * result.levels[0].width


def test_several_loops_share_the_flux():
    # Busbar at 1000 V, grounded duct and rod: the stream function's jump across the
    # rod's cut is the share of the flux that ends on the rod. The primal solution's
    # residual flux into the rod (a different computation) must agree as both converge
    # (Gauss's law: the periods of psi are the charges; common practice, no source).
    problem = lapsolve.load_problem(BUSBAR)
    solution = lapsolve.solve(problem, order=1)
    conj = solve_conjugate(solution)
    assert conj.topology.kind == "loops"
    jumps = {cut.loop: cut.jump for cut in conj.cuts}
    assert set(jumps) == {"busbar", "rod"}
    assert abs(jumps["busbar"]) == pytest.approx(1.0, abs=1e-12)
    share = solution.fluxes["rod"] / (solution.fluxes["duct"] + solution.fluxes["rod"])
    assert 0.0 < share < 0.5
    assert abs(jumps["rod"]) == pytest.approx(share, abs=5e-3)
    result = capacity_bounds(problem, order=1, levels=2)
    first, second = result.levels
    assert first.lower <= second.lower <= second.upper <= first.upper * (1 + 1e-12)


REFUSALS = [
    ("source", {"source": 1.0}, "source"),
    ("robin", {"boundary": {"low": {"edges": [3], "type": "robin", "h": 2.0, "u_ref": 0.0}}},
     "Robin"),
    ("flux", {"boundary": {"low": {"edges": [3], "type": "neumann", "value": 1.0}}},
     "nonzero flux"),
    ("one potential", {"boundary": {"low": {"edges": [3], "type": "dirichlet", "value": 1.0}}},
     "1 distinct"),
    ("touching", {"boundary": {"low": {"edges": [2], "type": "dirichlet", "value": 0.0}}},
     "touch"),
]


@pytest.mark.parametrize("name,change,message", REFUSALS, ids=[r[0] for r in REFUSALS])
def test_refusals(name, change, message):
    data = {"outer": {"polygon": rectangle(2.0, 1.0)},
            "boundary": {"high": {"edges": [1], "type": "dirichlet", "value": 1.0},
                         "low": {"edges": [3], "type": "dirichlet", "value": 0.0}},
            "mesh": {"max_size": 0.5}}
    for key, value in change.items():
        data[key] = data[key] | value if isinstance(value, dict) else value
    problem = lapsolve.problem_from_dict(data)
    with pytest.raises(InputError, match=message):
        classify(problem, two_terminal(problem))


def test_zero_flux_neumann_counts_as_insulated():
    data = {"outer": {"polygon": rectangle(2.0, 1.0)},
            "boundary": {"high": {"edges": [1], "type": "dirichlet", "value": 1.0},
                         "low": {"edges": [3], "type": "dirichlet", "value": 0.0},
                         "wall": {"edges": [0], "type": "neumann", "value": 0.0}},
            "mesh": {"max_size": 0.5}}
    problem = lapsolve.problem_from_dict(data)
    assert classify(problem, two_terminal(problem)).kind == "quadrilateral"


def test_unsupported_layout_names_the_loops():
    problem = lapsolve.problem_from_dict({
        "outer": {"polygon": rectangle(4.0, 4.0)},
        "holes": [{"name": "wire", "circle": {"center": [2.0, 2.0], "radius": 0.5}}],
        "boundary": {"wire": {"loop": "wire", "type": "dirichlet", "value": 1.0},
                     "low": {"edges": [3], "type": "dirichlet", "value": 0.0}},
        "mesh": {"max_size": 0.5}})
    with pytest.raises(InputError, match="unsupported electrode layout.*outer, wire"):
        classify(problem, two_terminal(problem))


def test_drawing_and_vertex_values():
    problem = lapsolve.problem_from_dict(coax(0.5, 2.0, 1.0, max_size=0.3))
    solution = lapsolve.solve(problem, order=2)
    conj = solve_conjugate(solution)
    assert stream_function_vertex_values(conj).shape == (len(solution.mesh.points),)
    assert stream_function_vertex_values(conj, all_dofs=True).shape == solution.u.shape
    fig, ax = plt.subplots()
    try:
        lines = draw_stream_lines(ax, conj, n_lines=12)
        drawn = [lv for lv, segs in zip(lines.levels, lines.allsegs) if len(segs)]
        # one period of psi spans 12 lines; the cut-open field covers at least that
        assert len(drawn) >= 12
    finally:
        plt.close(fig)
