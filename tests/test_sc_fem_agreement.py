"""Schwarz-Christoffel references against our own finite elements on the same polygons.

P3 elements on meshes graded toward every singular corner (power-law grading,
Babuska, Kellogg & Pitkaranta, Numer. Math. 33 (1979) 447-471) make the energy
error, and with it the capacitance from the energy, fall like H**6 in the global
size H (2p for p = 3: Strang & Fix, An Analysis of the Finite Element Method,
1973, ch. 3). Richardson extrapolation (Richardson, Phil. Trans. R. Soc. A 210
(1911) 307-357) of the two finest levels with r = 2, p = 6 must then meet the
modulus computed by the map.
"""

import numpy as np
import pytest

from lapsolve.meshing import triangulate
from lapsolve.solve import solve
from verification.exact.quadrilateral import (
    LOW,
    graded_size_field,
    quadrilateral_case,
)
from verification.gci import richardson
from verification.norms import solution_norms
from verification.qoi import measure_qoi

# Hexagonal L: u = 0 on the top of the arm and the left side, u = 1 on the right end;
# the re-entrant corner (1, 1) is inside an insulated arc (lambda = 2/3).
L_HEXAGON = ([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)], (0, 1, 2, 4))
# Square [0, 2]^2 with a slit from (0, 1) to (0.8, 1) inside the u = 0 electrode
# (lambda = 1/2 at its tip), u = 1 on the right side.
SLIT_SQUARE = ([(0, 0), (2, 0), (2, 2), (0, 2), (0, 1), (0.8, 1), (0, 1)], (0, 1, 2, 3))
POLYGONS = {"L-hexagon": L_HEXAGON, "slit-square": SLIT_SQUARE}


def capacitances(case, sizes, order=3):
    """Capacitance from the energy on graded meshes of global sizes ``sizes``."""
    values = []
    for size in sizes:
        problem = case.problem(size)
        mesh = triangulate(problem, size=size, size_field=graded_size_field(case, size, order))
        values.append(solve(problem, order=order, mesh=mesh).capacity["from_energy"])
    return np.array(values)


@pytest.fixture(scope="module", params=sorted(POLYGONS))
def case(request):
    vertices, corners = POLYGONS[request.param]
    return quadrilateral_case(vertices, corners, request.param)


def test_slit_polygon_meshes_with_the_slit_in_the_electrode(case):
    # The lapsolve validator refuses a polygon that runs along a slit twice; the case
    # builds the loop directly, and both slit sides belong to the u = 0 electrode.
    if case.extras["slits"]:
        assert case.extras["slits"] == [(4, 5)]
        assert {4, 5} <= set(case.conditions[LOW].edges)


def test_graded_p3_richardson_meets_the_modulus(case):
    reference = case.references[0].value
    values = capacitances(case, (0.8, 0.4, 0.2))
    errors = np.abs(values / reference - 1.0)
    # Measured: L-hexagon 9.0e-7, 4.8e-9, 2.6e-11; slit-square 2.4e-6, 1.3e-8, 6.2e-11.
    observed = np.log2(errors[:-1] / errors[1:])
    assert np.all(observed > 5.0), observed
    # Dirichlet's principle: the discrete energy is an upper bound (Strang & Fix 1973).
    assert np.all(values > reference)
    extrapolated = richardson(values[-1], values[-2], 2.0, 6.0)
    assert abs(extrapolated / reference - 1.0) < 1e-6
    assert errors[-1] < 1e-6


def test_case_potential_and_gradient_match_the_solution(case):
    # With the map's u and grad u as the exact solution, the P3 errors are small and
    # both capacitance measures (flux and energy) are judged against C' = 1/M.
    size = 0.8
    problem = case.problem(size)
    mesh = triangulate(problem, size=size, size_field=graded_size_field(case, size, 3))
    solution = solve(problem, order=3, mesh=mesh)
    norms = solution_norms(solution, case)
    # Measured (L-hexagon / slit-square): L2 1.6e-6 / 2.8e-6, H1 8.2e-4 / 1.3e-3, max
    # nodal 3.8e-5 / 1.7e-4, capacitance 9.0e-7 / 2.4e-6.
    assert norms.L2_rel < 1e-5 and norms.H1_rel < 1e-2 and norms.max_nodal < 1e-3
    measures = {m.name: m for m in measure_qoi(solution, case)}
    for name in ("capacitance (flux)", "capacitance (energy)"):
        assert measures[name].judged and measures[name].relative < 1e-5


@pytest.mark.slow
def test_graded_p3_four_levels_to_round_off(case):
    # One more level (about 3e5 DOFs): measured 2.7e-14 (L-hexagon) and 7.4e-13
    # (slit-square) raw; the map's residual is about 1e-15.
    reference = case.references[0].value
    values = capacitances(case, (0.8, 0.4, 0.2, 0.1))
    assert abs(values[-1] / reference - 1.0) < 1e-11
    assert abs(richardson(values[-1], values[-2], 2.0, 6.0) / reference - 1.0) < 1e-11


def test_study_runs_on_a_quadrilateral_case():
    # Graded P2 study: expected orders 2 min(p, lambda) with grading, in N^(-1/2)
    # (verification.study; Babuska, Kellogg & Pitkaranta 1979).
    from verification.study import run_study

    vertices, corners = L_HEXAGON
    study = run_study(quadrilateral_case(vertices, corners, "quad-l"), 2, levels=3, size=0.4,
                      graded=True)
    assert study.status == "PASS", study.to_dict()["checks"]
