"""Tests of user-defined exact cases: ``exact = "f(z)"`` in a problem file."""

import logging
import tomllib

import numpy as np
import pytest

from lapsolve import problem_from_dict
from lapsolve.errors import FormulaError, InputError
from lapsolve.solve import solve
from verification.exact.catalogue import CASES
from verification.exact.toml_export import case_toml
from verification.exact.user import case_from_problem, check_analytic
from verification.norms import solution_norms

SQUARE = {"outer": {"polygon": [[0, 0], [1, 0], [1, 1], [0, 1]]}}
BIG_SQUARE = {"outer": {"polygon": [[-1, -1], [1, -1], [1, 1], [-1, 1]]}}
LOWER_HALF = {"outer": {"polygon": [[-1, -1], [1, -1], [1, 0], [-1, 0]]}}
ANNULUS = {"outer": {"circle": {"center": [0, 0], "radius": 2}},
           "holes": [{"name": "core", "circle": {"center": [0, 0], "radius": 0.5}}]}
ALL_DIRICHLET = {"all": {"type": "dirichlet", "value": 123.0}}  # value ignored by exact files


def problem(exact, domain=SQUARE, boundary=ALL_DIRICHLET, **extra):
    data = dict(domain, exact=exact, boundary=boundary, mesh={"max_size": 0.1}, **extra)
    return problem_from_dict(data, origin="user.toml")


def test_exact_data_replace_the_file_values():
    case = case_from_problem(problem("exp(z)"))
    x, y = np.array([0.2, 0.9]), np.array([0.4, 0.1])
    np.testing.assert_allclose(case.u(x, y), np.exp(x) * np.cos(y), rtol=1e-15)
    np.testing.assert_allclose(case.grad(x, y), (np.exp(x) * np.cos(y), -np.exp(x) * np.sin(y)),
                               rtol=1e-14)
    solution = solve(case.problem(), order=2)
    # P2 at h = 0.1 on e^x cos y: L2 error ~ h^3 |u'''|, far below the 123 written in the file
    assert solution_norms(solution, case).L2 < 1e-4


def test_mixed_parts_use_exact_flux():
    boundary = {"bottom": {"edges": [0], "type": "dirichlet", "value": 0.0},
                "rest": {"edges": [1, 2, 3], "type": "neumann", "value": 0.0}}
    case = case_from_problem(problem("z**3/3 + sin(z)", boundary=boundary))
    assert case.conditions["rest"].kind == "neumann"
    coarse = solve(case.problem(), order=2)
    fine = solve(case.problem(), order=2, refine=1)
    e0, e1 = solution_norms(coarse, case).L2, solution_norms(fine, case).L2
    assert e0 / e1 > 7.0  # P2 L2 rate 3 for a smooth solution: 2^3 = 8 (Strang & Fix 1973)


def test_constant_dirichlet_parts_become_electrodes():
    # coaxial line: C' = 2 pi eps / ln(b/a), Ramo, Whinnery & Van Duzer, Fields and Waves
    # in Communication Electronics, 3rd ed. (1994)
    boundary = {"shield": {"type": "dirichlet", "value": 0.0},
                "core": {"loop": "core", "type": "dirichlet", "value": 0.0}}
    data = dict(ANNULUS, exact="(log(2) - log(z))/log(4)", boundary=boundary,
                mesh={"max_size": 0.25})
    case = case_from_problem(problem_from_dict(data, origin="coax.toml"))
    assert case.conditions["core"].electrode == pytest.approx(1.0, abs=1e-14)
    assert case.conditions["shield"].electrode == pytest.approx(0.0, abs=1e-14)
    solution = solve(case.problem(), order=2, refine=1)
    expected = 2 * np.pi / np.log(4.0)
    assert abs(solution.capacity["from_flux"] / expected - 1) < 1e-3


def test_unlisted_edges_get_exact_flux_with_a_note():
    boundary = {"bottom": {"edges": [0], "type": "dirichlet", "value": 0.0}}
    case = case_from_problem(problem("exp(z)", boundary=boundary))
    assert case.conditions["unlisted-outer"].kind == "neumann"
    assert case.conditions["unlisted-outer"].edges == (1, 2, 3)
    assert any("no condition" in w for w in case.extras["warnings"])


def test_insulated_part_that_is_not_insulated_is_noted():
    boundary = {"bottom": {"edges": [0], "type": "dirichlet", "value": 0.0},
                "walls": {"edges": [1, 2, 3], "type": "insulated"}}
    case = case_from_problem(problem("exp(z)", boundary=boundary))
    assert case.conditions["walls"].kind == "neumann"
    assert any("insulated" in w for w in case.extras["warnings"])
    # u = x is truly insulated on the top and bottom edges: no note
    boundary = {"sides": {"edges": [1, 3], "type": "dirichlet", "value": 0.0},
                "top_bottom": {"edges": [0, 2], "type": "insulated"}}
    assert case_from_problem(problem("z", boundary=boundary)).extras["warnings"] == []


@pytest.mark.parametrize("text", [
    "1/(z - 0.3 - 0.2*i)",          # simple pole
    "1/(z - 0.5 - 0.5*i)**2",       # double pole: no residue
    "log(z - 0.77 - 0.31*i)",       # logarithmic point
    "1e-8/(z - 0.5 - 0.5*i) + z",   # weak pole
    "tan(5*z)",                     # poles at +-pi/10 off the grid of samples
    "1/(z - 0.99 - 0.5*i)",         # pole 0.01 inside an edge
])
def test_pole_inside_the_domain_is_refused(text):
    domain = BIG_SQUARE if text.startswith("tan") else SQUARE
    with pytest.raises(InputError, match="not harmonic inside the domain"):
        case_from_problem(problem(text, domain=domain))


@pytest.mark.parametrize("text", ["1/(z - 1.07 - 1.07*i)", "1/(z - 1.001 - 0.5*i)",
                                  "exp(30*z)", "z**0.5"])
def test_singularity_outside_or_on_a_corner_is_accepted(text):
    case = case_from_problem(problem(text))
    assert case.extras["warnings"] == []


@pytest.mark.parametrize("text, domain", [("sqrt(z)", BIG_SQUARE), ("z**(2/3)", BIG_SQUARE),
                                          ("i*log(z)", ANNULUS)])
def test_branch_cut_inside_the_domain_is_refused(text, domain):
    boundary = ({"shield": {"type": "dirichlet", "value": 0},
                 "core": {"loop": "core", "type": "dirichlet", "value": 0}}
                if domain is ANNULUS else ALL_DIRICHLET)
    with pytest.raises(InputError, match="branch"):
        case_from_problem(problem(text, domain=domain, boundary=boundary))


def test_branch_cut_along_the_boundary_warns(caplog):
    # i log z on the lower half-square: u = -arg z jumps from -pi (on the edge y = +0,
    # the value numpy gives) to +pi (the domain side): the data on that edge are wrong
    with caplog.at_level(logging.WARNING, logger="verification.exact.user"):
        case = case_from_problem(problem("i*log(z)", domain=LOWER_HALF))
    assert any("u jumps" in w for w in case.extras["warnings"])
    assert "branch cut runs along the boundary" in caplog.text


def test_infinite_value_at_a_vertex_is_refused():
    with pytest.raises(InputError, match="vertex"):
        case_from_problem(problem("log(z)"))


@pytest.mark.parametrize("text, message", [
    ("conj(z)", "not analytic"),
    ("abs(z)", "not analytic"),
    ("__import__('os')", "not allowed"),
    ("z.real", "not allowed"),
    ("foo(z)", "unknown function"),
    ("x + y", "unknown"),
    ("exp(", "unclosed"),
])
def test_refused_formulas(text, message):
    with pytest.raises(FormulaError, match=message):
        case_from_problem(problem(text))


def test_unsupported_problems_are_refused():
    with pytest.raises(InputError, match="source"):
        case_from_problem(problem("z", source=1.0))
    with pytest.raises(InputError, match="robin"):
        case_from_problem(problem("z", boundary={"r": {"type": "robin", "h": 1.0,
                                                       "u_ref": 0.0}}))
    regions = [{"name": "r", "polygon": [[0.2, 0.2], [0.4, 0.2], [0.4, 0.4]],
                "coefficient": 3.0}]
    with pytest.raises(InputError, match="uniform coefficient"):
        case_from_problem(problem("z", regions=regions))
    with pytest.raises(InputError, match="exact"):
        case_from_problem(problem_from_dict(dict(SQUARE, boundary=ALL_DIRICHLET)))


# every analytic case but the slit, whose polygon the problem-file loader refuses
@pytest.mark.parametrize("name", [n for n, c in CASES.items()
                                  if "formula" in c.extras and n != "slit"])
def test_registry_formulas_pass_the_user_check(name):
    """Each registered f(z), read back as a user formula on its own domain, is accepted and
    gives the same u."""
    case = CASES[name]
    user = case_from_problem(problem_from_dict(tomllib.loads(case_toml(case)),
                                               origin=f"{name}.toml"))
    assert user.extras["warnings"] == []
    pts = np.array([[0.31, 0.27], [0.52, 0.93], [-0.45, 0.72]])
    pts = pts[case.problem().outer.contains(pts)]
    np.testing.assert_allclose(user.u(*pts.T), case.u(*pts.T), rtol=1e-12, atol=1e-13)
    for part, spec in case.conditions.items():
        if spec.electrode is not None:  # electrodes are found again from the exact u
            assert user.conditions[part].electrode == pytest.approx(spec.electrode, abs=1e-14)


def test_check_warns_for_the_slit_and_accepts_it():
    warnings = check_analytic(CASES["slit"].u, CASES["slit"].grad, CASES["slit"].problem())
    assert warnings and all("grad u jumps" in w for w in warnings)
