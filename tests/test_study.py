"""Convergence studies: expected orders met, the verdict machinery, grading, GCI, Ctrl-C.

The cases here are defined locally (not taken from the catalogue) so the checks of
the study machinery do not depend on the catalogue. Expected orders: Strang & Fix,
An Analysis of the Finite Element Method (1973): H1 min(p, λ), L2 min(p+1, 2λ),
functionals 2 min(p, λ); λ = π/ω at a corner of angle ω (Grisvard, Elliptic
Problems in Nonsmooth Domains, 1985): L-shape ω = 3π/2, λ = 2/3; slit ω = 2π,
λ = 1/2. Graded meshes restore H1 ~ N^(-p/2) (Babuška, Kellogg & Pitkäranta,
Numer. Math. 33 (1979) 447-471).
"""

import math

import numpy as np
import pytest

from lapsolve.errors import Interrupted
from lapsolve.geometry import PolygonLoop, make_polygon
from lapsolve.problem import Problem
from lapsolve.solve import solve
from verification import rates
from verification.exact.case import ExactCase, PartSpec, Reference
from verification.grading import Grading, default_mu
from verification.study import (
    StudyInterrupted,
    expectations,
    run_quantity_study,
    run_studies,
    run_study,
)

SQUARE = [(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0)]


def _square(size):
    return Problem("square", make_polygon("outer", SQUARE))


# u = Re(-i e^z) = e^x sin y: harmonic as the real part of an analytic function
# (Cauchy-Riemann); v = Im(-i e^z) = -e^x cos y.
SMOOTH = ExactCase(
    "test-smooth", "e^x sin y on the unit square", _square, {"outer": PartSpec("outer")},
    u=lambda x, y: np.exp(x) * np.sin(y), v=lambda x, y: -np.exp(x) * np.cos(y),
    grad=lambda x, y: (np.exp(x) * np.sin(y), np.exp(x) * np.cos(y)), default_size=0.25)

# Same u with the top edge (edge 2) carrying Neumann data k du/dn = e^x cos(1).
SMOOTH_MIXED = ExactCase(
    "test-mixed", "e^x sin y, Neumann on top", _square,
    {"sides": PartSpec("outer", (0, 1, 3)), "top": PartSpec("outer", (2,), kind="neumann")},
    u=SMOOTH.u, v=SMOOTH.v, grad=SMOOTH.grad, default_size=0.25)

# u = Re(z^3) = x^3 - 3 x y^2: a harmonic cubic, reproduced exactly by P3.
CUBIC = ExactCase(
    "test-cubic", "x^3 - 3xy^2", _square, {"outer": PartSpec("outer")},
    u=lambda x, y: x**3 - 3 * x * y**2, v=lambda x, y: 3 * x**2 * y - y**3,
    grad=lambda x, y: (3 * x**2 - 3 * y**2, -6 * x * y), default_size=0.5)


def corner_case(name, vertices, omega, slit=False):
    """u = r^λ sin(λθ), λ = π/ω, θ in [0, ω) measured from the positive x-axis."""
    lam = math.pi / omega

    def theta(x, y):
        return np.mod(np.arctan2(y, x), 2 * np.pi)

    def u(x, y):
        return np.hypot(x, y) ** lam * np.sin(lam * theta(x, y))

    def v(x, y):
        return -np.hypot(x, y) ** lam * np.cos(lam * theta(x, y))

    def grad(x, y):
        r, t = np.hypot(x, y), theta(x, y)
        with np.errstate(divide="ignore", invalid="ignore"):
            c = lam * r ** (lam - 1)
        # d/dz of z^λ gives grad u = λ r^(λ-1) (sin((λ-1)θ), cos((λ-1)θ))
        return c * np.sin((lam - 1) * t), c * np.cos((lam - 1) * t)

    def geometry(size):
        loop = (PolygonLoop("outer", np.array(vertices, float)) if slit
                else make_polygon("outer", vertices))
        return Problem(name, loop)

    return ExactCase(name, name, geometry, {"outer": PartSpec("outer")}, u, v, grad,
                     singular_exponent=lam, singular_point=(0.0, 0.0), smooth=False,
                     default_size=0.25)


LSHAPE = corner_case("test-lshape", [(0, 0), (1, 0), (1, 1), (-1, 1), (-1, -1), (0, -1)],
                     1.5 * math.pi)
# The slit [0, 1] x {0}: the polygon runs along it twice (the mesher merges the copies);
# u = 0 on both sides.
SLIT = corner_case("test-slit", [(0, 0), (1, 0), (1, 1), (-1, 1), (-1, -1), (1, -1), (1, 0)],
                   2 * math.pi, slit=True)

CASES = {c.name: c for c in (SMOOTH, LSHAPE, SLIT)}

# case, degree, graded, levels, size, {check: expected order (in h, or in N^(-1/2) if graded)}
RATE_TABLE = [
    ("test-smooth", 1, False, 4, 0.25, {"L2": 2.0, "H1": 1.0}),
    ("test-smooth", 2, False, 4, 0.25, {"L2": 3.0, "H1": 2.0}),
    ("test-smooth", 3, False, 3, 0.25, {"L2": 4.0, "H1": 3.0}),
    ("test-lshape", 1, False, 4, 0.25, {"L2": 4 / 3, "H1": 2 / 3}),
    ("test-lshape", 2, False, 4, 0.25, {"L2": 4 / 3, "H1": 2 / 3}),
    ("test-slit", 1, False, 4, 0.25, {"L2": 1.0, "H1": 0.5}),
    ("test-slit", 2, False, 4, 0.25, {"L2": 1.0, "H1": 0.5}),
    ("test-lshape", 1, True, 4, 0.25, {"L2": 2.0, "H1": 1.0}),
    ("test-lshape", 2, True, 3, 0.4, {"L2": 3.0, "H1": 2.0}),
    ("test-slit", 1, True, 4, 0.25, {"L2": 2.0, "H1": 1.0}),
    ("test-slit", 2, True, 3, 0.4, {"L2": 3.0, "H1": 2.0}),
]


@pytest.mark.parametrize("name, order, graded, levels, size, orders", RATE_TABLE)
def test_expected_orders_are_met(name, order, graded, levels, size, orders):
    study = run_study(CASES[name], order, levels, size, graded=graded, keep_finest=False)
    for check, expected in orders.items():
        verdict = study.checks[check]
        assert verdict.expected == pytest.approx(expected), (check, verdict.expected)
        assert verdict.status == rates.PASS, (
            f"{name} P{order} {'graded' if graded else 'uniform'} {check}: observed "
            f"{verdict.observed:.3f} (pairwise {np.round(verdict.pairwise, 3)}), expected "
            f"{expected:.3f}: {verdict.reason}")
        assert verdict.observed >= expected - 0.1, (check, verdict.observed, expected)


@pytest.mark.parametrize("name, order, graded, size, h1_in_dofs", [
    ("test-lshape", 1, False, 0.25, 1 / 3),   # λ/2, Grisvard 1985
    ("test-slit", 1, False, 0.25, 1 / 4),     # λ/2
    ("test-lshape", 1, True, 0.25, 1 / 2),    # p/2, Babuška-Kellogg-Pitkäranta 1979
    ("test-slit", 2, True, 0.4, 1.0),          # p/2
])
def test_h1_order_in_dofs(name, order, graded, size, h1_in_dofs):
    study = run_study(CASES[name], order, 4 if order == 1 else 3, size, graded=graded,
                      keep_finest=False)
    observed = study.dof_orders()["H1"][-1]
    message = f"{name} P{order}: H1 order in N {observed:.3f}, expected {h1_in_dofs:.3f}"
    if graded:  # coarse graded P2 meshes converge faster before the asymptotic range
        assert h1_in_dofs - 0.05 <= observed <= h1_in_dofs + 0.25, message
    else:
        assert observed == pytest.approx(h1_in_dofs, abs=0.03), message


def _perturbed(c):
    """A solver that adds c h sin(pi x) sin(pi y) to every degree of freedom."""
    def solver(problem, order, mesh):
        solution = solve(problem, order, mesh)
        x = solution.basis.doflocs
        solution.u = solution.u + c * mesh.h() * np.sin(np.pi * x[0]) * np.sin(np.pi * x[1])
        return solution

    return solver


def test_degraded_solver_fails_through_the_same_path():
    study = run_study(SMOOTH, 2, 4, 0.25, solver=_perturbed(0.05), keep_finest=False)
    assert study.status == rates.FAIL
    assert study.solver_name.endswith("solver")
    for check in ("L2", "H1"):
        v = study.checks[check]
        # the perturbation is O(h) in both norms, far below the P2 orders 3 and 2
        assert v.status == rates.FAIL, (check, v.observed)
        assert v.observed == pytest.approx(1.0, abs=0.15), (check, v.observed)
        assert "fell at order" in v.reason and v.reason.endswith(".")
    problems = dict(study.problems())
    assert set(problems) == {"L2", "H1"}


def test_dropped_neumann_term_fails():
    def no_neumann(problem, order, mesh):
        from dataclasses import replace

        from lapsolve.problem import Condition

        parts = tuple(replace(p, condition=Condition("insulated"))
                      if p.condition.kind == "neumann" else p for p in problem.parts)
        return solve(replace(problem, parts=parts), order, mesh)

    good = run_study(SMOOTH_MIXED, 1, 3, 0.25, keep_finest=False)
    bad = run_study(SMOOTH_MIXED, 1, 3, 0.25, solver=no_neumann, keep_finest=False)
    assert good.status == rates.PASS, good.problems()
    assert bad.status == rates.FAIL
    assert bad.checks["L2"].observed < 0.3, bad.checks["L2"].pairwise
    assert "did not fall" in bad.checks["L2"].reason or "fell at order" in bad.checks["L2"].reason


def test_a_solver_returning_nan_fails_with_a_reason():
    def broken(problem, order, mesh):
        solution = solve(problem, order, mesh)
        solution.u = solution.u * np.nan
        return solution

    study = run_study(SMOOTH, 1, 2, 0.5, solver=broken, keep_finest=False)
    assert study.status == rates.FAIL
    assert "NaN or infinite at level 0" in study.checks["L2"].reason


def test_p3_roundoff_plateau_is_not_a_failure():
    study = run_study(CUBIC, 3, 3, 0.5, keep_finest=False)
    errors = study.series("L2")
    assert np.all(errors < 1e-11), errors  # P3 reproduces a cubic exactly
    assert study.status == rates.PASS, study.problems()
    assert study.checks["L2"].plateau_levels, study.checks["L2"]
    # without the floor the same round-off noise is read as orders
    raw = rates.judge(study.axis(), errors, 4.0)
    assert raw.status != rates.PASS or raw.plateau_levels == []


def test_the_solver_is_passed_in():
    calls = []

    def counting(problem, order, mesh):
        calls.append((order, mesh.n_triangles))
        return solve(problem, order, mesh)

    study = run_study(SMOOTH, 1, 3, 0.25, solver=counting, keep_finest=False)
    assert [c[0] for c in calls] == [1, 1, 1]
    # uniform refinement: each level has four times the triangles of the previous one
    assert calls[1][1] == 4 * calls[0][1] and calls[2][1] == 4 * calls[1][1]
    assert [lv.elements for lv in study.levels] == [c[1] for c in calls]
    assert study.levels[1].h == pytest.approx(study.levels[0].h / 2, rel=1e-12)


def test_ctrl_c_keeps_finished_levels():
    calls = []

    def interrupting(problem, order, mesh):
        calls.append(order)
        if len(calls) == 5:  # the second level of the second degree
            raise KeyboardInterrupt
        return solve(problem, order, mesh)

    with pytest.raises(StudyInterrupted) as info:
        run_studies(SMOOTH, [1, 2], 3, 0.25, solver=interrupting, keep_finest=False)
    exc = info.value
    assert isinstance(exc, Interrupted) and exc.exit_code == 130
    first, second = exc.partial
    assert len(first.levels) == 3 and not first.incomplete
    assert first.status == rates.PASS, first.problems()
    assert len(second.levels) == 1 and second.incomplete
    assert second.status == rates.INCONCLUSIVE and not second.checks
    assert second.to_dict()["incomplete"] is True


def test_expectations_refinements():
    wedge = corner_case("w", [(0, 0), (1, 0), (1, 1), (-1, 1), (-1, 0.0)], math.pi * 0.75)
    exp = expectations(wedge, 2, False, wedge.problem(0.3), ())
    # λ = 4/3 between 1 and p = 2: L2 order λ + 1 (sharper than min(p+1, 2λ) = 8/3)
    assert exp["L2"].order == pytest.approx(7 / 3)
    assert exp["H1"].order == pytest.approx(4 / 3)
    with_energy = ExactCase("e", "", _square, {"outer": PartSpec("outer")}, SMOOTH.u,
                            SMOOTH.v, SMOOTH.grad, references=(Reference("energy", 1.0, "x"),))
    # P3 with interpolated (non-constant) Dirichlet data: functionals capped at p + 1 = 4
    exp = expectations(with_energy, 3, False, with_energy.problem(0.3), ("energy",))
    assert exp["energy"].order == 4.0 and "capped" in exp["energy"].basis
    exp = expectations(with_energy, 2, False, with_energy.problem(0.3), ("energy",))
    assert exp["energy"].order == 4.0 and "capped" not in exp["energy"].basis


def test_grading_size_field_follows_the_rule():
    # h(r) = H (r/R)^(1-mu), cut off at r0 = R (H/R)^(1/mu) (Babuska, Kellogg & Pitkaranta 1979)
    g = Grading((0.0, 0.0), mu=0.5, radius=1.0)
    field = g.size_field(0.1)
    r = np.array([2.0, 1.0, 0.25, 0.01, 0.0])
    sizes = field(np.column_stack([r, np.zeros_like(r)]))
    assert sizes[0] == pytest.approx(0.1) and sizes[1] == pytest.approx(0.1)
    assert sizes[2] == pytest.approx(0.1 * 0.25**0.5)
    assert sizes[3] == pytest.approx(0.1 * 0.01**0.5)  # r0 = 0.01: the cut-off itself
    assert sizes[4] == pytest.approx(0.1 * 0.01**0.5)
    assert default_mu(2 / 3, 1) == pytest.approx(0.5) and default_mu(np.inf, 2) == 1.0


def test_gci_brackets_the_coax_capacitance():
    from lapsolve.geometry import make_circle
    from verification.exact.case import ExactCase as _Case  # noqa: F401  (contract only)

    problem = ExactCase(
        "coax", "", lambda s: Problem("coax", make_circle("shield", (0, 0), 2.0),
                                      holes=(make_circle("core", (0, 0), 0.5),)),
        {"core": PartSpec("core", electrode=1.0), "shield": PartSpec("shield", electrode=0.0)},
        u=None, v=None, grad=None).problem(0.4)
    q = run_quantity_study(problem, "capacitance", 3, order=1, keep_finest=False)
    # C' = 2 pi / ln(b/a) per unit permittivity; Ramo, Whinnery & Van Duzer, Fields and Waves
    # in Communication Electronics, 3rd ed. (1994)
    exact = 2 * np.pi / np.log(4.0)
    fine = q.levels[-1]["value"]
    f = q.gci["finest"]
    assert f["p"] == pytest.approx(2.0, abs=0.15)  # P1 with straight edges: order 2
    assert abs(q.extrapolated - exact) < 0.2 * abs(fine - exact)
    assert f["gci_fine21"] >= abs(fine - exact) / exact  # the GCI covers the true error
