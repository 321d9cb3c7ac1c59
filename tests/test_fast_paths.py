"""The pipeline's fast paths give the same numbers as the plain scikit-fem route.

These are consistency checks between two implementations of the same operation
(common practice, no source); the physics itself is checked against closed forms
in test_fem_references.py.
"""

import numpy as np
import pytest
from skfem import Basis, ElementTriP1, MeshTri, asm, condense
from skfem.models.poisson import laplace

from lapsolve import fem, problem_from_dict
from lapsolve.linear import solve_linear
from lapsolve.meshing import triangulate
from lapsolve.solve import eliminate, solve


def _square_problem(size=0.2):
    return problem_from_dict({
        "outer": {"polygon": [[0, 0], [2, 0], [2, 1], [0, 1]]},
        "regions": [{"name": "r", "polygon": [[0.5, 0.2], [1.2, 0.2], [1.2, 0.7], [0.5, 0.7]],
                     "coefficient": 5.0}],
        "boundary": {"left": {"edges": [3], "type": "dirichlet", "value": 0.0},
                     "right": {"edges": [1], "type": "dirichlet", "value": "1 + 0.1*y"}},
        "mesh": {"max_size": size},
    })


def test_integer_key_facets_match_scikit_fem():
    mesh = triangulate(_square_problem()).refined(2)
    disc = fem.discretize(mesh, 1, np.ones(mesh.n_triangles))
    ref = MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy())
    np.testing.assert_array_equal(disc.skmesh.facets, ref.facets)
    np.testing.assert_array_equal(disc.skmesh.t2f, ref.t2f)


def test_edge_assembled_p1_stiffness_matches_scikit_fem():
    problem = _square_problem()
    mesh = triangulate(problem).refined(1)
    k = problem.coefficients()[mesh.regions]
    disc = fem.discretize(mesh, 1, k)
    ours = fem.stiffness(disc)
    basis = Basis(MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy()), ElementTriP1())
    theirs = asm(fem.diffusion, basis, k=fem.cell_field(basis, k))
    assert abs(ours - theirs).max() < 1e-12 * abs(theirs).max()
    plain = fem.p1_stiffness(mesh.points, mesh.triangles, np.ones(mesh.n_triangles))
    assert abs(plain - asm(laplace, basis)).max() < 1e-12


def test_symmetric_elimination_matches_condense():
    mesh = triangulate(_square_problem()).refined(1)
    disc = fem.discretize(mesh, 1, np.ones(mesh.n_triangles))
    A = fem.stiffness(disc)
    n = A.shape[0]
    D = np.flatnonzero(np.isclose(mesh.points[:, 0], 0) | np.isclose(mesh.points[:, 0], 2))
    xD = mesh.points[D, 0] ** 2
    b = np.random.default_rng(1).normal(size=n)
    A0, b0, lift = eliminate(A, b, D, xD)
    u = lift + solve_linear(A0, b0, method="direct")[0]
    x = np.zeros(n)
    x[D] = xD
    Ac, bc, _, interior = condense(A, b, x=x, D=D)
    ref = x.copy()
    ref[interior] = solve_linear(Ac, bc, method="direct")[0]
    assert np.max(np.abs(u - ref)) < 1e-12 * np.max(np.abs(ref))


@pytest.mark.parametrize("order", [1, 2])
def test_multigrid_solvers_agree_with_direct(order):
    problem = _square_problem(0.3)
    mesh = triangulate(problem)
    ref = solve(problem, order=order, mesh=mesh, refine=3, solver="direct")
    for method in ("gmg", "amg"):
        sol = solve(problem, order=order, mesh=mesh, refine=3, solver=method, rtol=1e-12)
        assert sol.solver.method == method
        assert sol.solver.converged
        err = np.max(np.abs(sol.u - ref.u))
        assert err < 1e-9, f"{method} differs from the direct solve by {err:.2e}"
    gmg = solve(problem, order=order, mesh=mesh, refine=3, solver="gmg", rtol=1e-12)
    assert gmg.solver.iterations <= 15, f"gmg took {gmg.solver.iterations} iterations"
