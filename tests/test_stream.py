"""The general stream function and its orthogonality residual (lapsolve.stream).

References:
- Prager & Synge, "Approximations in elasticity based on the concept of function
  space", Quart. Appl. Math. 5 (1947) 241: for an equilibrated flux sigma_h and a
  potential u_h meeting the Dirichlet data,
  ||grad(u - u_h)||^2 + ||sigma - sigma_h||^2 = ||k grad u_h - sigma_h||^2.
- Cauchy-Riemann: the stream function of a harmonic u = Re f (k = 1) is -Im f
  (any complex-analysis text, e.g. Ahlfors, Complex Analysis, 3rd ed. 1979, ch. 2).
- Coaxial line: flux per unit length 2 pi k dV / ln(b/a) (Ramo, Whinnery & Van
  Duzer, Fields and Waves in Communication Electronics, 3rd ed. 1994).
- Exact solutions of the catalogue (closed forms checked against mpmath in
  tests/test_exact_cases.py).
"""

import json
from dataclasses import replace

import numpy as np
import pytest

import lapsolve
from lapsolve.bounds import level_bounds
from lapsolve.cli import main
from lapsolve.conjugate import solve_conjugate
from lapsolve.errors import InputError
from lapsolve.problem import Condition
from lapsolve.solve import solve
from lapsolve.stream import stream_function
from verification.estimator import effectivity_rows, energy_errors
from verification.exact.cases.coax import A, B
from verification.exact.catalogue import CASES
from verification.norms import graded_rule


def test_graded_rule_integrates_a_corner_singularity():
    # int over the reference triangle of r**(-2/3), r the distance to vertex 0:
    # in polar coordinates int_0^{pi/2} int_0^{R(t)} r**(1/3) dr dt with
    # R(t) = 1/(cos t + sin t); the inner integral is (3/4) R**(4/3).
    from scipy.integrate import quad

    exact = quad(lambda t: 0.75 * (np.cos(t) + np.sin(t)) ** (-4 / 3), 0, np.pi / 2)[0]
    X, W = graded_rule(0, 6)
    got = np.sum(W * np.hypot(X[0], X[1]) ** (-2 / 3))
    assert got == pytest.approx(exact, rel=3e-5)  # measured 1.5e-5 at degree 6
    X, W = graded_rule(0, 6, levels=0)  # one plain rule: measured 9e-4 off
    assert abs(np.sum(W * np.hypot(X[0], X[1]) ** (-2 / 3)) / exact - 1) > 5e-4
    X, W = graded_rule(0, 10)
    got = np.sum(W * np.hypot(X[0], X[1]) ** (-2 / 3))
    assert got == pytest.approx(exact, rel=1e-6)  # measured 3e-7 at degree 10
    assert np.sum(W) == pytest.approx(0.5, rel=1e-14)
    # towards vertex 2 = (0, 1)
    # a slit tip: |grad u|^2 ~ 1/r; int_0^{pi/2} R(t) dt
    exact_tip = quad(lambda t: 1.0 / (np.cos(t) + np.sin(t)), 0, np.pi / 2)[0]
    got = np.sum(W * np.hypot(X[0], X[1]) ** -1.0)
    assert got == pytest.approx(exact_tip, rel=1e-6)  # measured 2.3e-7
    # towards vertex 2 = (0, 1), a 45-degree corner facing the edge y = 0
    exact = quad(lambda t: 0.75 * (-np.sin(t)) ** (-4 / 3), -np.pi / 2, -np.pi / 4)[0]
    X, W = graded_rule(2, 10)
    got = np.sum(W * np.hypot(X[0], X[1] - 1) ** (-2 / 3))
    assert got == pytest.approx(exact, rel=1e-6)


@pytest.mark.parametrize("name", ["coax", "coax-eccentric", "sc-lhexagon"])
@pytest.mark.parametrize("order", [1, 2])
def test_two_terminal_residual_equals_the_hypercircle_residual_of_the_bounds(name, order):
    # On a two-terminal problem the least-squares stream function is a multiple of
    # the unit-flux conjugate of lapsolve.conjugate, so both residuals agree
    # (the minimum over the scale; docs/bounds.md).
    solution = solve(CASES[name].problem(), order=order, refine=1)
    general = stream_function(solution)
    bounds = level_bounds(solution, solve_conjugate(solution))
    assert general.eta == pytest.approx(bounds.eta, rel=1e-9)


@pytest.mark.parametrize("order", [1, 2])
def test_prager_synge_identity_holds_on_a_guaranteed_case(order):
    # sc-lhexagon: polygon, constant Dirichlet data, insulated arcs; exact u from a
    # Schwarz-Christoffel map. The identity is exact; the tolerance covers the
    # map's accuracy and the graded quadrature at the re-entrant corner.
    rows = effectivity_rows(CASES["sc-lhexagon"], order, 2)
    for row in rows:
        assert row.guaranteed
        assert abs(row.identity_gap) < 1e-4
        assert row.effectivity > 1.0
        assert row.energy_error ** 2 + row.flux_error ** 2 == pytest.approx(row.eta ** 2,
                                                                             rel=1e-4)


@pytest.mark.parametrize("name", ["smooth-mixed", "coax", "cylinder-in-field",
                                  "dielectric-cylinder", "slit"])
def test_identity_gap_shrinks_with_the_data_approximation(name):
    # Interpolated Dirichlet data, quadrature of flux data and meshed circles
    # perturb the identity at higher order than the error itself.
    rows = effectivity_rows(CASES[name], 2, 3)
    assert abs(rows[-1].identity_gap) < 1e-2
    assert abs(rows[-1].identity_gap) <= abs(rows[0].identity_gap) * 1.01


@pytest.mark.parametrize("name", ["smooth-square", "smooth-neumann", "two-wire",
                                  "wire-over-ground", "lshape", "dn-corner", "wedge-225",
                                  "near-singular"])
@pytest.mark.parametrize("order", [1, 2])
def test_effectivity_is_near_one_and_eta_converges_at_the_energy_rate(name, order):
    # The residual estimates the energy error from above (Prager-Synge) within a
    # factor 2 (margin: common practice, no source; measured 1.3-1.6, docs/bounds.md)
    # and converges like it, at min(p, lambda) in h (Babuska & Aziz 1972, from memory).
    from verification.estimator import expected_energy_order, observed_order

    case = CASES[name]
    rows = effectivity_rows(case, order, 3)
    for row in rows[1:]:
        assert 1.0 < row.effectivity < 2.0
    expected = expected_energy_order(case, order)
    assert observed_order(rows) == pytest.approx(expected, abs=0.12)
    assert observed_order(rows, "energy_error") == pytest.approx(expected, abs=0.12)


def test_stream_function_converges_to_the_harmonic_conjugate():
    # k = 1: J grad psi_h -> grad u, i.e. psi_h -> -Im f up to a constant, at rate p.
    case = CASES["smooth-nonconvex"]
    for order in (1, 2):
        rows = effectivity_rows(case, order, 3)
        ratios = [a.flux_error / b.flux_error for a, b in zip(rows, rows[1:])]
        assert np.log2(ratios[-1]) == pytest.approx(order, abs=0.1)
        solution = solve(case.problem(), order=order, refine=2)
        psi = stream_function(solution)
        nodes = solution.mesh.points
        v = case.v(nodes[:, 0], nodes[:, 1])
        dev = psi.psi[: len(nodes)] + v
        assert np.ptp(dev) < (0.05 if order == 1 else 2e-3) * np.ptp(v)


def test_coax_cut_jump_is_the_flux_through_the_core():
    # the period of psi around the core is its flux, 2 pi / ln(b/a) for dV = 1 (k = 1)
    flux = 2 * np.pi / np.log(B / A)
    solution = solve(CASES["coax"].problem(), order=2, refine=2)
    psi = stream_function(solution)
    (cut,) = psi.cuts
    assert abs(cut.jump) == pytest.approx(flux, rel=1e-4)


def test_a_hole_wholly_of_flux_data_gets_its_flux_as_fixed_period():
    # the coax with the core's exact flux density as a Neumann condition: the cut's
    # jump is fixed by the data to the core flux, 2 pi / ln(b/a)
    case = CASES["coax"]
    base = case.problem()
    parts = tuple(replace(p, condition=Condition("neumann", case.flux_data()))
                  if p.name == "core" else p for p in base.parts)
    solution = solve(replace(base, parts=parts), order=2, refine=1)
    psi = stream_function(solution)
    (cut,) = psi.cuts
    assert cut.fixed
    assert abs(cut.jump) == pytest.approx(2 * np.pi / np.log(B / A), rel=1e-3)
    e_u, _ = energy_errors(solution, psi, case)
    assert 1.0 < psi.eta / e_u < 2.0


def test_slit_jump_follows_the_conjugate_across_the_slit():
    # slit case u = Re sqrt(-z): above the slit Im sqrt(-z) = -sqrt(x), below +sqrt(x);
    # psi = -Im f jumps by 2 sqrt(x) from below to above (the plus side, left of the
    # path from the tip outwards)
    case = CASES["slit"]
    solution = solve(case.problem(), order=2, refine=2)
    psi = stream_function(solution)
    (slit,) = [c for c in psi.cuts if c.loop == "slit"]
    x = solution.disc.dof_locations(slit.dofs)
    assert np.allclose(x[1], 0.0) and np.all(x[0] > 0)
    exact = case.v(x[0], x[1] - 1e-13) - case.v(x[0], x[1] + 1e-13)
    assert np.allclose(exact, 2 * np.sqrt(x[0]), rtol=1e-9)
    # the flux error concentrates at the tip (0.04 there), so beyond it the jump's
    # error is an offset that the rest of the slit carries along: 0.2 % of the
    # largest jump (measured 0.0041 to 0.0056 for x > 0.2 on this mesh)
    error = slit.jump - exact
    assert np.max(np.abs(error[x[0] > 0.2])) < 1e-2
    assert np.ptp(error[x[0] > 0.5]) < 1e-3


def test_material_regions_carry_the_reciprocal_coefficient():
    # dielectric cylinder (k = 4 inside): psi continuous across the interface, the
    # residual weighted by 1/k; without the 1/k weighting the identity would fail
    rows = effectivity_rows(CASES["dielectric-cylinder"], 2, 2)
    assert abs(rows[-1].identity_gap) < 2e-3
    assert 1.0 < rows[-1].effectivity < 2.0


def test_problems_without_a_stream_function_are_refused():
    with_source = lapsolve.problem_from_dict({
        "outer": {"polygon": [[0, 0], [1, 0], [1, 1], [0, 1]]}, "source": "1",
        "boundary": {"all": {"edges": [0, 1, 2, 3], "type": "dirichlet", "value": 0}},
        "mesh": {"max_size": 0.3}})
    with pytest.raises(InputError, match="source"):
        stream_function(solve(with_source))
    insulated_ring = lapsolve.problem_from_dict({
        "outer": {"polygon": [[0, 0], [4, 0], [4, 4], [0, 4]]},
        "holes": [{"name": "hole", "polygon": [[1, 1], [1, 3], [3, 3], [3, 1]]}],
        "boundary": {"box": {"loop": "outer", "type": "neumann", "value": "x - 2"},
                     "hole": {"loop": "hole", "type": "neumann", "value": "0"}},
        "mesh": {"max_size": 0.5}})
    with pytest.raises(InputError):
        stream_function(solve(insulated_ring))


def test_solve_writes_psi_and_the_residual_for_any_source_free_problem(tmp_path):
    import meshio

    problem = CASES["cylinder-in-field"].problem()
    solution = solve(problem, order=2)
    data = lapsolve.write_results(solution, tmp_path / "out")
    block = data["orthogonality"]
    assert block["cuts"] == 1 and block["guaranteed"] is False
    assert 0 < block["relative"] < 0.05
    mesh = meshio.read(tmp_path / "out" / "solution.vtu")
    assert np.all(np.isfinite(mesh.point_data["psi"]))
    saved = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert saved["orthogonality"]["eta"] == pytest.approx(block["eta"])


def test_effectivity_command(tmp_path, capsys):
    out = tmp_path / "eff.json"
    assert main(["effectivity", "coax", "--order", "1", "--levels", "2", "--quiet",
                 "--json", str(out), "--plot", str(tmp_path / "eff.png")]) == 0
    rows = json.loads(out.read_text())["rows"]
    assert [r["level"] for r in rows] == [0, 1]
    assert all(1.0 < r["effectivity"] < 2.0 for r in rows)
    assert (tmp_path / "eff.png").read_bytes()[:4] == b"\x89PNG"
    assert "| coax | 1 |" in capsys.readouterr().out
    assert main(["effectivity", "no-such-case"]) == 2
    assert "unknown case" in capsys.readouterr().err
    assert main(["effectivity", "coax", "--levels", "9"]) == 2


@pytest.mark.parametrize("name", ["cylinder-in-field", "slit", "two-wire", "smooth-mixed"])
@pytest.mark.parametrize("order", [1, 2])
def test_multigrid_stream_solve_matches_the_direct_one(name, order):
    # the multigrid hierarchy carries run constants, hole jumps and slit values as
    # unknowns of their own; whatever the preconditioner, CG must reach the same
    # minimiser (algebraic agreement, no outside reference needed for this check)
    solution = solve(CASES[name].problem(), order=order, refine=2)
    direct = stream_function(solution, solver="direct")
    gmg = stream_function(solution, solver="gmg", rtol=1e-12)
    assert gmg.solver.method == "gmg" and gmg.solver.converged
    # measured 10-18 iterations; a slit whose plus-side values were not coarsened
    # took 49 at 185k DOFs and grew with the mesh
    assert gmg.solver.iterations < 25
    assert gmg.eta == pytest.approx(direct.eta, rel=1e-8)
    scale = np.ptp(direct.local_values())
    assert np.max(np.abs(gmg.local_values() - direct.local_values())) < 1e-8 * scale


def test_solve_can_skip_the_stream_function(tmp_path, capsys):
    import meshio
    from helpers import EXAMPLES

    example = str(EXAMPLES / "offset_cable.toml")
    assert main(["solve", example, "--out", str(tmp_path / "a"), "--no-plot",
                 "--no-stream"]) == 0
    data = json.loads((tmp_path / "a" / "summary.json").read_text())
    assert "orthogonality" not in data and "capacity_bounds" not in data
    assert "psi" not in meshio.read(tmp_path / "a" / "solution.vtu").point_data
    assert main(["solve", example, "--out", str(tmp_path / "b"), "--no-plot"]) == 0
    data = json.loads((tmp_path / "b" / "summary.json").read_text())
    assert data["orthogonality"]["eta"] > 0 and "capacity_bounds" in data
    assert "residual  ||k grad u - J grad psi||" in capsys.readouterr().out
