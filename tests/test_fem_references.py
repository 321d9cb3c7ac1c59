"""Finite-element solutions against closed forms and exactness properties."""

import math

import numpy as np
import pytest
from helpers import coax, coax_capacitance, plates, relative, slab, solved, two_layer

import lapsolve
from lapsolve.formula import parse
from lapsolve.meshing import triangulate
from lapsolve.problem import EPSILON_0


def test_coax_capacitance_p2():
    a, b, eps_r = 1.0, 2.0, 2.0
    solution = solved(coax(a, b, eps_r, max_size=0.15), order=2)
    # C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer, Fields and Waves in
    # Communication Electronics, 3rd ed. 1994). Measured error 4.9e-7 at this mesh.
    exact = coax_capacitance(a, b, eps_r)
    assert solution.disc.curved
    assert relative(solution.capacity["from_flux"], exact) < 1e-5
    assert relative(solution.capacity["from_energy"], exact) < 1e-5


def test_coax_p3_geometry_order():
    # P3 on quadratic edges: a quadratic through three points of a circular arc
    # (ends and arc midpoint) deviates from it by O(h^4) because the odd terms cancel
    # (Taylor expansion, common practice, no source), so the capacitance error falls
    # like h^4 rather than the P3 energy rate h^6. Reference C' = 2 pi eps / ln(b/a)
    # (Ramo, Whinnery & Van Duzer, Fields and Waves in Communication Electronics,
    # 3rd ed. 1994). Measured orders 3.95 and 3.98.
    problem = lapsolve.problem_from_dict(coax(1.0, 2.0, 1.0, max_size=0.5))
    mesh = triangulate(problem)
    exact = coax_capacitance(1.0, 2.0, 1.0)
    errors = [relative(lapsolve.solve(problem, order=3, mesh=mesh.refined(level))
                       .capacity["from_energy"], exact) for level in range(3)]
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert np.all((orders > 3.6) & (orders < 4.4)), orders


def test_curved_edges_follow_the_circle():
    # P2/P3 geometry: each quadratic boundary edge passes through the circle at its ends
    # and midpoint (isoparametric elements, common practice, no source); between them it
    # stays within about r theta^4 / 4 of the circle, theta = half the edge's angle
    # (Taylor expansion, same). A straight chord would sag by h^2 / (8 r) ~ 5e-3 here.
    solution = solved(coax(1.0, 2.0, max_size=0.4), order=2)
    disc = solution.disc
    facets = disc.skmesh.boundary_facets()
    nodes = disc.basis.doflocs[:, disc.basis.get_dofs(facets=facets).all()]
    r_nodes = np.hypot(*nodes)
    assert np.max(np.minimum(abs(r_nodes - 1.0), abs(r_nodes - 2.0))) < 1e-12
    x = np.asarray(disc.facet_basis(facets).global_coordinates())  # points on the edges
    r = np.hypot(x[0], x[1])
    gap = np.minimum(abs(r - 1.0), abs(r - 2.0))
    assert 1e-9 < gap.max() < 1e-4, gap.max()


def test_parallel_plates_exact_p1():
    w, d, eps_r = 2.0, 0.5, 3.0
    solution = solved(plates(w, d, eps_r), order=1)
    # C' = eps w / d with insulated side walls (Griffiths, Introduction to
    # Electrodynamics, 4th ed. 2013, sec. 2.5.4): the field is uniform, P1 is exact.
    exact = eps_r * EPSILON_0 * w / d
    assert relative(solution.capacity["from_flux"], exact) < 1e-12
    assert relative(solution.capacity["from_energy"], exact) < 1e-12


def test_two_layer_capacitor_exact_p1():
    w, d1, d2, e1, e2 = 2.0, 0.3, 0.7, 4.0, 1.5
    solution = solved(two_layer(w, d1, d2, e1, e2), order=1)
    # Layers in series: C' = w / (d1/eps1 + d2/eps2) (Griffiths, Introduction to
    # Electrodynamics, 4th ed. 2013, ch. 4): piecewise linear potential, P1 is exact.
    exact = EPSILON_0 * w / (d1 / e1 + d2 / e2)
    assert np.bincount(solution.mesh.regions).tolist()[1] > 0
    assert relative(solution.capacity["from_flux"], exact) < 1e-12
    assert relative(solution.capacity["from_energy"], exact) < 1e-12


def test_thermal_robin_slab_exact_p1():
    t, w, k, h, hot, air = 0.2, 1.0, 0.8, 12.0, 80.0, 15.0
    solution = solved(slab(t, w, k, h, hot, air), order=1)
    # Plane wall with convection: q = dT / (t/k + 1/h) per unit area (Incropera &
    # DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed. 2007, sec. 3.1).
    q = w * (hot - air) / (t / k + 1 / h)
    assert relative(solution.fluxes["air"], q) < 1e-12
    assert relative(-solution.fluxes["hot"], q) < 1e-12
    # The cooled face sits at air + q/(h w) (same source): the Robin condition holds.
    u_face = air + q / (h * w)
    values, _ = solution.evaluate(np.array([[t, 0.5 * w]]) - [1e-9, 0])
    assert abs(values[0] - u_face) < 1e-7 * hot


K = 2.5
W, H = 2.0, 1.0

# (order, u, source f = -k lap u or None, {edge: k du/dn on that edge}, Dirichlet edges)
# Edges of the W x H rectangle: 0 bottom n=(0,-1), 1 right n=(1,0), 2 top n=(0,1),
# 3 left n=(-1,0). The flux data are k grad u . n written out by hand.
PATCH_CASES = [
    (1, "1 + 2*x - 3*y", None, {1: f"{K}*2", 0: f"{K}*3"}, [2, 3]),
    (2, "x**2 + x*y + 2*y**2 - x + 1", f"{-6 * K}", {}, [0, 1, 2, 3]),
    (2, "x**2 + x*y + 2*y**2 - x + 1", f"{-6 * K}", {1: f"{K}*(2*x + y - 1)"}, [0, 2, 3]),
    (2, "x**2 - y**2", None, {1: f"{K}*2*x", 0: f"{K}*2*y"}, [2, 3]),
    (3, "x**3 + x*y**2 - 2*y**3 + x*y", f"-{K}*(8*x - 12*y)", {}, [0, 1, 2, 3]),
    (3, "x**3 - 3*x*y**2", None, {1: f"{K}*(3*x**2 - 3*y**2)", 2: f"{K}*(-6*x*y)"}, [0, 3]),
    (3, "x**3 - 3*x*y**2", None, {0: f"{K}*6*x*y", 3: f"-{K}*(3*x**2 - 3*y**2)"}, [1, 2]),
]


@pytest.mark.parametrize("order, u, f, flux, fixed", PATCH_CASES)
def test_patch_polynomials_reproduced(order, u, f, flux, fixed):
    # Patch test (common practice, no source): degree-p Lagrange elements reproduce
    # polynomials of degree p to round-off.
    boundary = {f"fixed{e}": {"edges": [e], "type": "dirichlet", "value": u} for e in fixed}
    boundary.update({f"flux{e}": {"edges": [e], "type": "neumann", "value": g}
                     for e, g in flux.items()})
    data = {"coefficient": K, "outer": {"polygon": [[0, 0], [W, 0], [W, H], [0, H]]},
            "boundary": boundary, "mesh": {"max_size": 0.35}}
    if f is not None:
        data["source"] = f
    solution = solved(data, order=order)
    x = solution.basis.doflocs
    exact = parse(u, variables=("x", "y"))(x=x[0], y=x[1])
    assert np.max(np.abs(solution.u - exact)) < 1e-12 * np.max(np.abs(exact)) * 10


def test_patch_with_robin_condition():
    # Patch test (common practice, no source) through a Robin edge:
    # k du/dn = h (u_ref - u) with u_ref = u + (k du/dn)/h for u = x^2 - y^2.
    h = 4.0
    data = {"coefficient": K, "outer": {"polygon": [[0, 0], [W, 0], [W, H], [0, H]]},
            "boundary": {
                "fixed": {"edges": [2], "type": "dirichlet", "value": "x**2 - y**2"},
                "left": {"edges": [3], "type": "dirichlet", "value": "x**2 - y**2"},
                "bottom": {"edges": [0], "type": "neumann", "value": f"{K}*2*y"},
                "film": {"edges": [1], "type": "robin", "h": h,
                         "u_ref": f"x**2 - y**2 + {K}*2*x/{h}"}},
            "mesh": {"max_size": 0.35}}
    solution = solved(data, order=2)
    x = solution.basis.doflocs
    assert np.max(np.abs(solution.u - (x[0] ** 2 - x[1] ** 2))) < 1e-12 * 40
    # Outward flux through the film: -int k du/dn ds = -int_0^H k 2W dy (same u).
    assert relative(solution.fluxes["film"], -K * 2 * W * H) < 1e-12


def test_flux_balance_with_source_and_robin():
    # Divergence theorem (Kreyszig, Advanced Engineering Mathematics, 10th ed. 2011,
    # sec. 10.7): the outward fluxes of -k grad u through all parts add up to int f dA.
    # Source f = 1 + x y on [0,2]x[0,1]: int f dA = 2 + 1 = 3 by hand.
    data = {"coefficient": 1.3, "source": "1 + x*y",
            "outer": {"polygon": [[0, 0], [2, 0], [2, 1], [0, 1]]},
            "regions": [{"name": "insert", "polygon": [[0.5, 0.25], [1.2, 0.25],
                                                       [1.2, 0.75], [0.5, 0.75]],
                         "coefficient": 7.0}],
            "boundary": {
                "cold": {"edges": [3], "type": "dirichlet", "value": "0.2*y"},
                "film": {"edges": [1], "type": "robin", "h": 3.0, "u_ref": "0.5 + y"},
                "inflow": {"edges": [2], "type": "neumann", "value": "0.4*x"},
                "wall": {"edges": [0], "type": "insulated"}},
            "mesh": {"max_size": 0.2}}
    inflow = 0.4 * 2.0 ** 2 / 2  # int_0^2 0.4 x dx, by hand
    for order in (1, 2, 3):
        fluxes = solved(data, order=order).fluxes
        assert fluxes["wall"] == 0.0
        assert relative(fluxes["inflow"], -inflow) < 1e-12
        assert relative(sum(fluxes.values()), 3.0) < 1e-10, (order, fluxes)


def test_insulated_default_matches_listed_insulated():
    # Edges left out of [boundary] are insulated: the same as listing them so
    # (the plates' exact answer is independent of the side walls only when insulated,
    # Griffiths, Introduction to Electrodynamics, 4th ed. 2013, sec. 2.5.4).
    data = plates()
    listed = dict(data, boundary=dict(data["boundary"],
                                      sides={"edges": [1, 3], "type": "insulated"}))
    a, b = solved(data), solved(listed)
    assert np.array_equal(a.u, b.u)
    assert b.fluxes["sides"] == 0.0
    assert relative(a.capacity["from_flux"], 3.0 * EPSILON_0 * 2.0 / 0.5) < 1e-12


def test_coax_field_at_points():
    a, b = 1.0, 2.0
    solution = solved(coax(a, b, max_size=0.15), order=2)
    pts = np.array([[1.5, 0.0], [0.0, -1.25], [1.1, 1.1], [-1.3, 0.9]])
    u, grad = solution.evaluate(pts)
    r = np.hypot(pts[:, 0], pts[:, 1])
    # u = V ln(b/r)/ln(b/a), E = -grad u = V/(r ln(b/a)) r_hat (Ramo, Whinnery &
    # Van Duzer, Fields and Waves in Communication Electronics, 3rd ed. 1994).
    exact_u = np.log(b / r) / math.log(b / a)
    exact_grad = -pts / (r**2 * math.log(b / a))[:, None]
    # P2 at this mesh: measured 3.6e-5 in u and 2.5e-3 relative in the field.
    assert np.max(np.abs(u - exact_u)) < 1e-4
    assert np.max(np.linalg.norm(grad - exact_grad, axis=1) / np.linalg.norm(exact_grad,
                                                                             axis=1)) < 5e-3


@pytest.mark.parametrize("order, refine", [(1, 1), (3, 1),
                                           pytest.param(3, 3, marks=pytest.mark.slow)])
def test_pure_neumann_iterative_solve_converges(order, refine):
    # smooth-neumann: u = Re(cosh(3z/2) + z^2) with flux data only (closed form from
    # the catalogue). The AMG branch pins one DOF; it must converge and agree with the
    # bordered direct solve to the algebraic tolerance. P3 refined 3 times (187k DOFs,
    # rtol 1e-14) is where AMG-CG on the singular system stalled at 1.5e-6.
    from verification.exact.catalogue import CASES
    from verification.norms import solution_norms

    case = CASES["smooth-neumann"]
    problem = case.problem()
    amg = lapsolve.solve(problem, order=order, refine=refine, solver="amg")
    direct = lapsolve.solve(problem, order=order, refine=refine, solver="direct")
    assert amg.solver.converged
    assert np.max(np.abs(amg.u - direct.u)) < 1e-8 * np.max(np.abs(direct.u))
    assert solution_norms(amg, case).H1 == pytest.approx(solution_norms(direct, case).H1,
                                                         rel=1e-6)
