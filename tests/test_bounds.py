"""Guaranteed two-sided capacitance bounds (lapsolve.bounds, ``lapsolve bounds``)."""

import json
import math

import numpy as np
import pytest
from helpers import coax, rectangle, write

import lapsolve
from lapsolve.bounds import capacity_bounds, level_bounds
from lapsolve.cli import main
from lapsolve.problem import EPSILON_0
from verification.modulus import quadrilateral_modulus

L_SHAPE = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]
U_SHAPE = [(0, 0), (3, 0), (3, 2), (2, 2), (2, 1), (1, 1), (1, 2), (0, 2)]

# (vertices, high edges, low edges, corners (c0, c1, c2, c3) for quadrilateral_modulus
# with the arc c1 -> c2 at potential 1 and c3 -> c0 at 0, singular exponent lambda)
QUADRILATERALS = {
    # re-entrant corner (1, 1) inside an insulated arc: Neumann-Neumann, lambda = pi/omega
    # = 2/3 (Grisvard, Elliptic Problems in Nonsmooth Domains, 1985)
    "L": (L_SHAPE, [1], [5], (0, 1, 2, 5), 2 / 3),
    # the re-entrant corner is where an electrode meets an insulated arc:
    # lambda = pi/(2 omega) = 1/3 (Grisvard 1985); the reflection in y = x swaps the
    # electrodes with the insulated arcs, so M = 1/M = 1 (common practice, no source)
    "L-symmetric": (L_SHAPE, [1, 2], [5], (0, 1, 3, 5), 1 / 3),
    # two re-entrant corners on an insulated arc, lambda = 2/3 (Grisvard 1985)
    "U": (U_SHAPE, [2], [6], (7, 2, 3, 6), 2 / 3),
}


def quadrilateral(vertices, high, low, size=0.4, k=1.0, v_high=1.0, v_low=0.0):
    return lapsolve.problem_from_dict({
        "coefficient": k,
        "outer": {"polygon": [list(map(float, v)) for v in vertices]},
        "boundary": {"high": {"edges": high, "type": "dirichlet", "value": v_high},
                     "low": {"edges": low, "type": "dirichlet", "value": v_low}},
        "mesh": {"max_size": size}})


def exact_capacitance(name):
    vertices, _, _, corners, _ = QUADRILATERALS[name]
    # Conformal modulus by Schwarz-Christoffel mapping (Driscoll & Trefethen,
    # Schwarz-Christoffel Mapping, 2002), C = 1/M for k = 1; verification.modulus
    # reports its residual, asserted small here.
    result = quadrilateral_modulus(vertices, corners)
    assert result.residual < 1e-10
    return 1.0 / result.modulus


def test_rectangle_bounds_are_exact():
    # Uniform flux in an L x H sheet between its short sides: C = k H / L (Ohm's law;
    # Purcell & Morin, Electricity and Magnetism, 3rd ed. 2013). u and psi are linear,
    # so both bounds equal it up to round-off, and the round-off allowance keeps it inside.
    width, height = 3.0, 1.25
    problem = quadrilateral(rectangle(width, height), [1], [3], size=0.5, k=2.0)
    exact = 2.0 * height / width
    for order in (1, 2):
        result = capacity_bounds(problem, order=order, levels=2, exact=exact)
        for lv in result.levels:
            assert lv.contains, (order, lv.lower, lv.upper)
            assert lv.relative_width < 1e-11
            assert lv.geometry["guaranteed"]


@pytest.mark.parametrize("name", sorted(QUADRILATERALS))
@pytest.mark.parametrize("order", [1, 2])
def test_polygon_interval_contains_modulus(name, order):
    vertices, high, low, _, _ = QUADRILATERALS[name]
    exact = exact_capacitance(name)
    result = capacity_bounds(quadrilateral(vertices, high, low), order=order, levels=3,
                             exact=exact)
    for lv in result.levels:
        assert lv.contains, (lv.level, lv.lower, exact, lv.upper)
        assert lv.geometry["guaranteed"]
        assert lv.effectivity >= 1.0
    widths = [lv.width for lv in result.levels]
    assert widths[-1] < widths[0]


@pytest.mark.parametrize("name", sorted(QUADRILATERALS))
@pytest.mark.parametrize("order", [1, 2])
def test_width_shrinks_at_energy_rate(name, order):
    # The width is the sum of the energy errors of u_h and psi_h, each O(h^(2 min(p, lambda)))
    # (Strang & Fix, An Analysis of the Finite Element Method, 1973; lambda from
    # Grisvard 1985). Measured: 1.31-1.36 for lambda = 2/3, 0.67-0.68 for lambda = 1/3.
    vertices, high, low, _, lam = QUADRILATERALS[name]
    result = capacity_bounds(quadrilateral(vertices, high, low), order=order, levels=4)
    expected = 2 * min(order, lam)
    observed = result.width_orders()[-1]
    assert abs(observed - expected) < 0.1, (observed, expected)


def test_coax_width_rates_are_smooth():
    # Smooth u = ln(b/r)/ln(b/a) and psi = theta/(2 pi): the width falls like h^(2p)
    # (Strang & Fix 1973); measured 1.99 (P1) and 3.95 (P2) at the finest pair.
    problem = lapsolve.problem_from_dict(coax(0.5, 2.0, 1.0, max_size=0.5))
    for order, expected in ((1, 2.0), (2, 4.0)):
        result = capacity_bounds(problem, order=order, levels=4 if order == 1 else 3)
        assert abs(result.width_orders()[-1] - expected) < 0.15 * expected


def test_coax_p1_contains_within_polygon_bracket():
    # The P1 mesh replaces the circles by inscribed polygons of n_a and n_b sides. By
    # monotonicity of condenser capacity in the conductors (Polya & Szego, Isoperimetric
    # Inequalities in Mathematical Physics, 1951) the polygonal annulus's capacitance lies
    # between those of the annuli with radii (a cos(pi/n_a), b) and (a, b cos(pi/n_b)),
    # which also bracket C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer, Fields and
    # Waves in Communication Electronics, 3rd ed. 1994). The computed interval holds the
    # polygon's value, so it must meet that bracket, and the true C' lies within the
    # bracket's width of it.
    a, b, eps_r = 0.5, 2.0, 2.0
    problem = lapsolve.problem_from_dict(coax(a, b, eps_r, max_size=0.4))
    eps = eps_r * EPSILON_0
    exact = 2 * math.pi * eps / math.log(b / a)
    result = capacity_bounds(problem, order=1, levels=3)
    for lv in result.levels:
        sides = _circle_sides(problem, lv.level)
        n_a, n_b = sides["inner"], sides["outer"]
        low = 2 * math.pi * eps / math.log(b / (a * math.cos(math.pi / n_a)))
        high = 2 * math.pi * eps / math.log(b * math.cos(math.pi / n_b) / a)
        assert max(lv.lower, low) <= min(lv.upper, high)
        slack = high - low
        assert lv.lower - slack <= exact <= lv.upper + slack
        assert lv.geometry["kind"] == "polygonal" and not lv.geometry["guaranteed"]


def _circle_sides(problem, level):
    from lapsolve.meshing import triangulate

    mesh = triangulate(problem).refined(level)
    counts = {}
    for k, tag in enumerate(mesh.tags):
        counts[tag.loop] = int(np.sum(mesh.segment_tags == k))
    return counts


def test_coax_p2_contains_within_geometric_tolerance():
    # Quadratic arcs move the boundary by at most the reported gap g; to first order
    # C'(a, b) = 2 pi / ln(b/a) moves by C'^2/(2 pi) (g/a + g/b) (derivative of the
    # closed form of Ramo, Whinnery & Van Duzer 1994); a factor 2 covers the
    # quadrature on curved elements (common practice, no source).
    a, b = 0.5, 2.0
    problem = lapsolve.problem_from_dict(coax(a, b, 1.0, max_size=0.4) | {"physics": "generic"})
    exact = 2 * math.pi / math.log(b / a)
    result = capacity_bounds(problem, order=2, levels=3)
    for lv in result.levels:
        gap = lv.geometry["boundary_gap"]
        assert lv.geometry["kind"] == "curved"
        tol = 2 * exact**2 / (2 * math.pi) * (gap / a + gap / b)
        assert lv.lower - tol <= exact <= lv.upper + tol, (lv.lower, exact, lv.upper, tol)


def test_reciprocal_identity():
    # The conjugate quadrilateral (insulated arcs as electrodes) has modulus 1/M, and
    # the Galerkin moduli of a quadrilateral and its conjugate multiply to a number
    # that tends to 1 (Hakula, Rasila & Vuorinen, ETNA 48, 2018). Here that product is
    # lower/upper.
    vertices, high, low, corners, _ = QUADRILATERALS["L"]
    m = quadrilateral_modulus(vertices, corners).modulus
    m_conj = quadrilateral_modulus(vertices, corners[1:] + corners[:1]).modulus
    assert m * m_conj == pytest.approx(1.0, abs=1e-9)
    result = capacity_bounds(quadrilateral(vertices, high, low), order=2, levels=3)
    gaps = [1 - lv.reciprocal_product for lv in result.levels]
    assert all(g > 0 for g in gaps)
    assert gaps[0] > gaps[1] > gaps[2]
    assert gaps[-1] < 2e-3
    # upper is the primal's Galerkin 1/M; lower is the conjugate's Galerkin modulus
    assert result.levels[-1].lower == pytest.approx(m_conj, rel=2e-3)


def test_loose_solve_keeps_the_guarantee():
    # Any admissible u_h and psi_h bound C (Dirichlet and Thomson principles; Polya &
    # Szego 1951): a loose iterative solve only widens the interval.
    vertices, high, low, _, _ = QUADRILATERALS["L"]
    exact = exact_capacitance("L")
    problem = quadrilateral(vertices, high, low, size=0.04)  # above AMG's direct coarse size
    tight = capacity_bounds(problem, order=1, levels=1, exact=exact).levels[0]
    loose = capacity_bounds(problem, order=1, levels=1, exact=exact, solver="amg",
                            rtol=1e-2).levels[0]
    assert loose.solver_u["relative_residual"] > 1e-6
    assert loose.contains and tight.contains
    assert loose.width > tight.width


def test_hypercircle_residual_bounds_the_energy_error():
    # Prager & Synge, Quart. Appl. Math. 5 (1947) 241: for an equilibrated flux the
    # residual ||k grad u_h - sigma_h||_{1/k} bounds ||grad(u - u_h)||_k; the best
    # scaling of sigma_h = s J grad psi_h gives eta^2 = dV^2 (C_h^up - C_h^low).
    # The true error follows from the energy identity ||grad(u - u_h)||_k^2 =
    # dV^2 (C_h^up - C) with C from the Schwarz-Christoffel modulus.
    vertices, high, low, _, _ = QUADRILATERALS["L"]
    k, v_high, v_low = 3.0, 5.0, 2.0
    dv = v_high - v_low
    exact = k * exact_capacitance("L")
    result = capacity_bounds(quadrilateral(vertices, high, low, k=k, v_high=v_high,
                                           v_low=v_low), order=2, levels=2, exact=exact)
    for lv in result.levels:
        identity = dv * math.sqrt(lv.upper_raw - lv.lower_raw)
        assert lv.eta == pytest.approx(identity, rel=1e-7)
        true_error = dv * math.sqrt(lv.upper_raw - exact)
        assert lv.eta >= true_error
        assert lv.eta / true_error < 2.0  # measured 1.37
        assert lv.contains


def test_scaling_with_coefficient_and_potentials():
    # C is linear in k and independent of the potentials (common practice, no source).
    vertices, high, low, _, _ = QUADRILATERALS["U"]
    base = capacity_bounds(quadrilateral(vertices, high, low), order=1, levels=1).levels[0]
    scaled = capacity_bounds(quadrilateral(vertices, high, low, k=2.5, v_high=-3.0,
                                           v_low=7.0), order=1, levels=1).levels[0]
    assert scaled.lower_raw == pytest.approx(2.5 * base.lower_raw, rel=1e-10)
    assert scaled.upper_raw == pytest.approx(2.5 * base.upper_raw, rel=1e-10)


def test_level_bounds_from_a_solution():
    vertices, high, low, _, _ = QUADRILATERALS["L"]
    solution = lapsolve.solve(quadrilateral(vertices, high, low), order=2)
    lv = level_bounds(solution)
    # the upper bound is the solver's own capacity from energy (2 W / dV^2)
    assert lv.upper_raw == pytest.approx(solution.capacity["from_energy"], rel=1e-12)
    assert lv.lower <= lv.lower_raw < lv.upper_raw <= lv.upper


L_TOML = """\
title = "L-shaped sheet"
[outer]
polygon = [[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]]
[boundary.a]
edges = [1]
type = "dirichlet"
value = 1.0
[boundary.b]
edges = [5]
type = "dirichlet"
value = 0.0
[mesh]
max_size = 0.4
"""


def test_cli_json_matches_library(tmp_path, capsys):
    path = write(tmp_path, "l.toml", L_TOML)
    exact = exact_capacitance("L")
    code = main(["bounds", path, "--order", "1", "--levels", "2", "--json",
                 "--exact", repr(exact)])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    result = capacity_bounds(lapsolve.load_problem(path), order=1, levels=2, exact=exact)
    assert [lv["lower"] for lv in data["levels"]] == [lv.lower for lv in result.levels]
    assert [lv["upper"] for lv in data["levels"]] == [lv.upper for lv in result.levels]
    assert all(lv["contains"] for lv in data["levels"])
    assert main(["bounds", path, "--order", "1", "--levels", "2"]) == 0
    table = capsys.readouterr().out
    assert "lower" in table and "quadrilateral" in table


REFUSED = {
    "touching": (L_TOML.replace("edges = [5]", "edges = [2]"), "touch"),
    "three potentials": (L_TOML + "[boundary.c]\nedges = [3]\ntype = \"dirichlet\"\n"
                         "value = 0.5\n", "3 distinct potential"),
    "source": ("source = 1.0\n" + L_TOML, "source"),
    "robin": (L_TOML + "[boundary.c]\nedges = [3]\ntype = \"robin\"\nh = 1.0\nu_ref = 0.0\n",
              "Robin"),
    "non-constant": (L_TOML.replace("value = 1.0", "value = \"x\""), "non-constant"),
    "three arcs": (L_TOML + "[boundary.c]\nedges = [3]\ntype = \"dirichlet\"\nvalue = 1.0\n",
                   "unsupported electrode layout"),
}


@pytest.mark.parametrize("name", sorted(REFUSED))
def test_cli_refuses(tmp_path, capsys, name):
    text, message = REFUSED[name]
    path = write(tmp_path, "bad.toml", text)
    assert main(["bounds", path, "--levels", "1"]) == 2
    err = capsys.readouterr().err
    assert message in err
    assert len(err.strip().splitlines()) == 1


def test_cli_refuses_bad_levels(tmp_path, capsys):
    path = write(tmp_path, "l.toml", L_TOML)
    assert main(["bounds", path, "--levels", "0"]) == 2
    assert "--levels" in capsys.readouterr().err
