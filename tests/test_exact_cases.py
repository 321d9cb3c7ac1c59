"""Tests of the exact-solution catalogue against outside references.

Every analytic case is re-implemented here with mpmath (written independently,
in polar form for the corner cases) and checked against the catalogue's numpy
code; published closed forms are checked by integrating the exact fields; each
case is solved with P2 elements and must converge at its expected rate.
"""

import functools
import time

import mpmath as mp
import numpy as np
import pytest

from lapsolve.errors import GeometryError, InputError
from lapsolve.formula import parse
from lapsolve.geometry import CircleLoop, PolygonLoop, make_polygon, segments_intersect
from lapsolve.meshing import triangulate
from lapsolve.solve import solve
from verification.exact.cases import coax, cylinder, dielectric, eccentric, near_singular, wires
from verification.exact.cases.analytic import from_analytic
from verification.exact.catalogue import CASES, describe, get_case
from verification.exact.user import Domain, check_analytic, loop_samples
from verification.norms import solution_norms

mp.mp.dps = 30
RNG_SEED = 20240601

# Closed-form cases; the Schwarz-Christoffel cases ("sc-...") have no closed form and are
# checked against the conformal modulus in test_schwarz_christoffel.py / test_sc_fem_agreement.py
CLOSED_FORM = [name for name in CASES if not name.startswith("sc-")]
ANALYTIC = [name for name in CLOSED_FORM if "formula" in CASES[name].extras]
ELECTRODE_CASES = ["coax", "coax-eccentric", "two-wire", "wire-over-ground"]


# -- independent mpmath versions of f -----------------------------------------------------

def polar_power(z, lam, omega, phase=0):
    """``r**lam exp(i (lam (theta - omega/2) + phase))`` with theta in [0, 2 pi)."""
    theta = mp.atan2(mp.im(z), mp.re(z))
    if theta < 0:
        theta += 2 * mp.pi
    return abs(z) ** lam * mp.expj(lam * (theta - omega / 2) + phase)


def wedge_mp(omega):
    return lambda z: polar_power(z, mp.pi / omega, omega)


def dn_corner_mp(omega):
    return lambda z: polar_power(z, mp.pi / (2 * omega), omega, -mp.pi / 4)


def eccentric_mp():
    a, b, d = (mp.mpf(t) for t in (eccentric.A, eccentric.B, eccentric.D))
    s = (b * b + d * d - a * a) / d
    p = (s - mp.sqrt(s * s - 4 * b * b)) / 2
    q = (s + mp.sqrt(s * s - 4 * b * b)) / 2
    beta = mp.acosh((a * a + b * b - d * d) / (2 * a * b))
    return lambda z: (mp.log(p / b) - mp.log((z - p) / (z - q))) / beta


def wire_constants():
    a, s = mp.mpf(wires.A), mp.mpf(wires.S)
    return mp.sqrt(s * s - a * a), mp.acosh(s / a)


def two_wire_mp():
    c, beta = wire_constants()
    return lambda z: mp.log((z + c) / (z - c)) / (2 * beta)


def ground_mp():
    c, beta = wire_constants()
    return lambda z: mp.log((z + 1j * c) / (z - 1j * c)) / beta


Z0 = mp.mpc(near_singular.Z0.real, near_singular.Z0.imag)
A_COAX, B_COAX = mp.mpf(coax.A), mp.mpf(coax.B)
A_CYL = mp.mpf(cylinder.A)
GAMMA, A_DIEL = mp.mpf(dielectric.GAMMA), mp.mpf(dielectric.A)
RATIO = 2 * mp.mpf(dielectric.EPS_OUT) / (dielectric.EPS_OUT + dielectric.EPS_IN)

MP = {
    "smooth-square": lambda z: mp.sin(2 * z) + mp.cosh(z),
    "smooth-mixed": lambda z: mp.exp(z) * mp.cos(z),
    "smooth-neumann": lambda z: mp.cosh(mp.mpf(3) / 2 * z) + z * z,
    "smooth-nonconvex": lambda z: mp.sin(z) + mp.exp(z / 2),
    "near-singular": lambda z: 1 / (z - Z0),
    "wedge-135": wedge_mp(3 * mp.pi / 4),
    "wedge-225": wedge_mp(5 * mp.pi / 4),
    "lshape": wedge_mp(3 * mp.pi / 2),
    "slit": wedge_mp(2 * mp.pi),
    "dn-corner": dn_corner_mp(mp.pi),
    "coax": lambda z: (mp.log(B_COAX) - mp.log(z)) / mp.log(B_COAX / A_COAX),
    "coax-eccentric": eccentric_mp(),
    "two-wire": two_wire_mp(),
    "wire-over-ground": ground_mp(),
    "cylinder-in-field": lambda z: z + A_CYL ** 2 / z,
}
DIELECTRIC_MP = {"inside": lambda z: -RATIO * z,
                 "outside": lambda z: -(z - GAMMA * A_DIEL ** 2 / z)}


def exact_mp(name):
    """mpmath f of a case; the dielectric cylinder by region."""
    if name == "dielectric-cylinder":
        return lambda z: DIELECTRIC_MP["inside" if abs(z) < A_DIEL else "outside"](z)
    return MP[name]


# -- sampling helpers -----------------------------------------------------------------------

def interior_points(case, n, margin=0.02, singular_margin=0.05, seed=RNG_SEED):
    """Random points inside the domain, away from its boundary and singular point."""
    domain = Domain.of(case.problem())
    origin, extent = domain.extent()
    rng = np.random.default_rng(seed)
    pts = origin + extent * rng.random((40 * n, 2))
    keep = domain.contains(pts) & (domain.distance(pts) > margin * extent)
    if case.singular_point is not None:
        keep &= np.hypot(*(pts - case.singular_point).T) > singular_margin * extent
    if case.coefficient is not None:  # stay off the material interface
        keep &= np.abs(np.hypot(*pts.T) - dielectric.A) > margin * extent
    return pts[keep][:n]


def polygon_edges(problem):
    starts, ends = [], []
    for loop in problem.loops():
        if isinstance(loop, PolygonLoop):
            starts.append(loop.vertices)
            ends.append(np.roll(loop.vertices, -1, axis=0))
    return (np.vstack(starts), np.vstack(ends)) if starts else None


def crosses_boundary(problem, p, q):
    """Per segment p-q: does it cross a polygon edge (e.g. a slit)?"""
    edges = polygon_edges(problem)
    if edges is None:
        return np.zeros(len(p), bool)
    return np.any(segments_intersect(p, q, edges[0], edges[1]), axis=1)


def closure_samples(case, n=90):
    """Interior grid plus boundary points a hair inside the domain (both sides of a slit)."""
    problem = case.problem()
    domain = Domain.of(problem)
    origin, extent = domain.extent()
    t = origin[0] + (np.arange(n) + 0.5) * extent / n, origin[1] + (np.arange(n) + 0.5) * extent / n
    gx, gy = np.meshgrid(*t)
    grid = np.column_stack([gx.ravel(), gy.ravel()])
    grid = grid[domain.contains(grid)]
    pts = []
    eps = 1e-9 * extent
    for k, loop in enumerate(problem.loops()):
        b, normals = loop_samples(loop, per_edge=200, per_circle=800)
        pts.append(b + (-eps if k == 0 else eps) * normals)
    for region in problem.regions:
        b, normals = loop_samples(region.loop, per_circle=800)
        pts += [b + eps * normals, b - eps * normals]
    return problem, domain, grid, np.vstack(pts)


# -- registry and contract -------------------------------------------------------------------

REQUIRED = ("smooth-square", "smooth-mixed", "smooth-neumann", "smooth-nonconvex", "lshape",
            "slit", "dn-corner", "coax", "coax-eccentric", "two-wire", "wire-over-ground",
            "cylinder-in-field", "dielectric-cylinder", "near-singular")


def test_registry_holds_the_required_cases():
    assert len(CASES) >= 12
    missing = [name for name in REQUIRED if name not in CASES]
    assert not missing, missing
    assert any(name.startswith("wedge-") for name in CASES)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_contract_fields(name):
    case = get_case(name)
    info = describe(case)
    assert info["domain"] and case.description
    for ref in case.references:
        assert ref.source.strip() and np.isfinite(ref.value), ref
    if np.isfinite(case.singular_exponent):
        assert case.singular_point is not None and not case.smooth
    problem = case.problem()
    assert {p.name for p in problem.parts} == set(case.conditions)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_default_mesh_is_fast(name):
    case = CASES[name]
    start = time.perf_counter()
    mesh = triangulate(case.problem())
    elapsed = time.perf_counter() - start
    # "well under a second" at the default size (common practice, no source)
    assert elapsed < 0.5, f"{name}: {elapsed:.2f} s for {mesh.n_triangles} triangles"
    assert 200 < mesh.n_triangles < 5000


def test_unknown_case_suggests_close_names():
    with pytest.raises(Exception) as info:
        get_case("lshap")
    assert "lshape" in str(info.value)


# -- f and f' against mpmath -------------------------------------------------------------------

@pytest.mark.parametrize("name", ANALYTIC)
def test_f_and_fprime_match_mpmath(name):
    """mpmath (Johansson et al., mpmath: a Python library for arbitrary-precision
    floating-point arithmetic, 2023) as the reference for f and f' (by mp.diff)."""
    case = CASES[name]
    pts = interior_points(case, 25, margin=0.005, singular_margin=0.005)
    z = pts[:, 0] + 1j * pts[:, 1]
    f, fprime = case.extras["f"], case.extras["fprime"]
    ref_f = np.array([complex(MP[name](mp.mpc(*p))) for p in pts])
    ref_d = np.array([complex(mp.diff(MP[name], mp.mpc(*p))) for p in pts])
    np.testing.assert_allclose(f(z), ref_f, rtol=1e-13, atol=1e-13)
    np.testing.assert_allclose(fprime(z), ref_d, rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("piece", ["inside", "outside"])
def test_dielectric_pieces_match_mpmath(piece):
    f, fprime = dielectric.CASE.extras["pieces"][piece]
    z = np.array([0.1 + 0.2j, -0.3 + 0.1j, 1.2 - 0.7j, -1.5 + 1.1j])
    ref_f = np.array([complex(DIELECTRIC_MP[piece](mp.mpc(w))) for w in z])
    ref_d = np.array([complex(mp.diff(DIELECTRIC_MP[piece], mp.mpc(w))) for w in z])
    np.testing.assert_allclose(f(z), ref_f, rtol=1e-14)
    np.testing.assert_allclose(fprime(z), ref_d, rtol=1e-14)


def real_partials(F, x, y):
    """(u_x, u_y, v_x, v_y) of F = u + i v by mpmath differentiation in x and y separately."""
    x, y = mp.mpf(x), mp.mpf(y)
    ux = mp.diff(lambda t: mp.re(F(mp.mpc(t, y))), x)
    uy = mp.diff(lambda t: mp.re(F(mp.mpc(x, t))), y)
    vx = mp.diff(lambda t: mp.im(F(mp.mpc(t, y))), x)
    vy = mp.diff(lambda t: mp.im(F(mp.mpc(x, t))), y)
    return float(ux), float(uy), float(vx), float(vy)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_cauchy_riemann_and_orthogonal_field_lines(name):
    """The case's grad u against mpmath derivatives of Im f (Cauchy-Riemann: u_x = v_y,
    u_y = -v_x), and grad u . grad v = 0 (field lines cross equipotentials at right angles)."""
    case = CASES[name]
    F = exact_mp(name)
    for x, y in interior_points(case, 8):
        gx, gy = case.grad(np.array([x]), np.array([y]))
        ux, uy, vx, vy = real_partials(F, x, y)
        scale = max(1.0, np.hypot(ux, uy))
        assert abs(gx[0] - vy) + abs(gy[0] + vx) < 1e-10 * scale, (x, y)
        assert abs(gx[0] * vx + gy[0] * vy) < 1e-10 * scale**2, (x, y)
        assert abs(gx[0] - ux) + abs(gy[0] - uy) < 1e-10 * scale, (x, y)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_laplacian_by_finite_differences_vanishes(name):
    """Five-point Laplacian (FD in tests only): |Δ_h u| small next to |u_xx| + |u_yy|."""
    case = CASES[name]
    pts = interior_points(case, 50, margin=0.03, singular_margin=0.1)
    h = 1e-3
    x, y = pts[:, 0], pts[:, 1]
    u0 = case.u(x, y)
    uxx = (case.u(x + h, y) - 2 * u0 + case.u(x - h, y)) / h**2
    uyy = (case.u(x, y + h) - 2 * u0 + case.u(x, y - h)) / h**2
    # truncation h^2/12 u'''' and round-off 4 eps |u| / h^2 bound the residual
    bound = 1e-3 * (np.abs(uxx) + np.abs(uyy)) + 1e-8 * (1 + np.abs(u0))
    assert np.all(np.abs(uxx + uyy) <= bound)


# -- the formula texts used by export ----------------------------------------------------------

@pytest.mark.parametrize("name", ANALYTIC)
def test_formula_text_is_the_same_function(name):
    case = CASES[name]
    pts = interior_points(case, 40, margin=0.005, singular_margin=0.005)
    z = pts[:, 0] + 1j * pts[:, 1]
    formula = parse(case.extras["formula"], variables=("z",), analytic=True)
    np.testing.assert_allclose(formula(z=z), case.extras["f"](z), rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(formula.derivative("z")(z=z), case.extras["fprime"](z),
                               rtol=1e-11, atol=1e-12)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_real_formula_text_is_u(name):
    case = CASES[name]
    pts = interior_points(case, 40, margin=0.005, singular_margin=0.005)
    if name == "dielectric-cylinder":  # the formula is the outside piece (the box data)
        pts = pts[np.hypot(*pts.T) > dielectric.A]
    u_xy = parse(case.extras["u_xy"], variables=("x", "y"))
    np.testing.assert_allclose(u_xy(x=pts[:, 0], y=pts[:, 1]), case.u(pts[:, 0], pts[:, 1]),
                               rtol=1e-12, atol=1e-13)


# -- branch cuts lie outside the domain --------------------------------------------------------

@pytest.mark.parametrize("name", CLOSED_FORM)
def test_u_and_grad_are_continuous_on_the_closed_domain(name):
    """Pairs 1e-7 apart across a dense sample of the closed domain (interior grid and
    boundary points a hair inside) show no jump beyond the Lipschitz bound; and u, du/dx,
    du/dy keep the mean-value property of harmonic functions on every cell of a quadtree
    covering the interior (Evans, Partial Differential Equations, 2nd ed. 2010, sec. 2.2):
    no branch cut of u or grad u crosses the domain."""
    case = CASES[name]
    problem, domain, grid, boundary = closure_samples(case)
    extent = domain.extent()[1]
    delta = 1e-7 * extent
    pts = np.vstack([grid, boundary])
    if case.singular_point is not None:
        pts = pts[np.hypot(*(pts - case.singular_point).T) > 1e-4 * extent]
    angles = np.arange(8) * np.pi / 4
    p = np.repeat(pts, len(angles), axis=0)
    q = p + delta * np.tile(np.column_stack([np.cos(angles), np.sin(angles)]), (len(pts), 1))
    ok = domain.contains(q) & ~crosses_boundary(problem, p, q)
    p, q = p[ok], q[ok]
    up, uq = case.u(*p.T), case.u(*q.T)
    gp, gq = np.column_stack(case.grad(*p.T)), np.column_stack(case.grad(*q.T))
    slope = np.maximum(np.hypot(*gp.T), np.hypot(*gq.T))
    assert np.all(np.abs(uq - up) <= 10 * delta * slope + 1e-12 * (1 + np.abs(up)))
    same_material = case.k(*p.T) == case.k(*q.T)
    jump = np.hypot(*(gq - gp).T)
    assert np.all(jump[same_material] <= 1e-3 * slope[same_material] + 1e-12)
    warnings = check_analytic(case.u, case.grad, problem, interfaces=True)
    if name == "slit":
        # boundary points on the slit itself take the upper side's value: expected
        assert all("grad u" in w and ", 0)" in w for w in warnings), warnings
    else:
        assert warnings == []


@pytest.mark.parametrize("omega", [3 * np.pi / 2, 2 * np.pi])
def test_continuity_check_sees_a_cut_inside_the_domain(omega):
    """The principal branch of z**(pi/omega) cuts the negative real axis, inside the
    L-shape and the slit domain: u stays continuous there but grad u flips."""
    lam = np.pi / omega
    u, _, grad = from_analytic(lambda z: z**lam, lambda z: lam * z ** (lam - 1))
    name = "lshape" if omega < 2 * np.pi else "slit"
    with pytest.raises(InputError, match="not harmonic"):
        check_analytic(u, grad, CASES[name].problem())


# -- published closed forms --------------------------------------------------------------------

def flux_through_circle(F, center, radius):
    """Outward flux of grad u through a circle, u = Re F, by mpmath quadrature."""
    c = mp.mpc(*center)

    def dudr(t):
        e = mp.expj(t)
        d = mp.diff(F, c + radius * e)
        return mp.re(d * e)  # grad u . n = Re(f' n) for analytic f

    return mp.quad(dudr, [0, mp.pi, 2 * mp.pi]) * radius


def test_coax_capacitance_closed_form():
    # C' = 2 pi eps / ln(b/a): Ramo, Whinnery & Van Duzer, Fields and Waves in
    # Communication Electronics, 3rd ed. (1994)
    expected = 2 * mp.pi / mp.log(B_COAX / A_COAX)
    charge = -flux_through_circle(MP["coax"], (0, 0), A_COAX)
    assert abs(charge - expected) < 1e-20
    ref = [r for r in coax.CASE.references if r.quantity == "capacitance"][0]
    assert abs(ref.value - float(expected)) < 1e-14 * float(expected)


def test_eccentric_coax_capacitance_smythe():
    # C' = 2 pi eps / arccosh((a^2 + b^2 - d^2)/(2 a b)): Smythe, Static and Dynamic
    # Electricity, 3rd ed. (1968)
    a, b, d = (mp.mpf(t) for t in (eccentric.A, eccentric.B, eccentric.D))
    expected = 2 * mp.pi / mp.acosh((a * a + b * b - d * d) / (2 * a * b))
    charge = -flux_through_circle(MP["coax-eccentric"], (d, 0), a)
    assert abs(charge - expected) < 1e-15
    case = eccentric.CASE
    core, _ = loop_samples(case.problem().loop("core"))
    shield, _ = loop_samples(case.problem().loop("shield"))
    np.testing.assert_allclose(case.u(*core.T), 1.0, atol=1e-14)
    np.testing.assert_allclose(case.u(*shield.T), 0.0, atol=1e-14)


def test_two_wire_capacitance_closed_form():
    # C' = pi eps / arccosh(D / 2a): Smythe, Static and Dynamic Electricity, 3rd ed. (1968)
    a, s = mp.mpf(wires.A), mp.mpf(wires.S)
    expected = mp.pi / mp.acosh(2 * s / (2 * a))
    charge = -flux_through_circle(MP["two-wire"], (s, 0), a)
    assert abs(charge / 1 - expected) < 1e-15  # potentials +-1/2: dV = 1
    case = wires.TWO_WIRE
    plus, _ = loop_samples(case.problem().loop("wire+"))
    np.testing.assert_allclose(case.u(*plus.T), 0.5, atol=1e-14)


def test_wire_over_ground_capacitance_closed_form():
    # C' = 2 pi eps / arccosh(h / a): Smythe, Static and Dynamic Electricity, 3rd ed. (1968)
    a, h = mp.mpf(wires.A), mp.mpf(wires.S)
    expected = 2 * mp.pi / mp.acosh(h / a)
    charge = -flux_through_circle(MP["wire-over-ground"], (0, h), a)
    assert abs(charge - expected) < 1e-15
    x = np.linspace(-2, 2, 41)
    np.testing.assert_allclose(wires.WIRE_OVER_GROUND.u(x, 0 * x), 0.0, atol=1e-15)


def test_dielectric_cylinder_interior_field_and_interface():
    # interior field = 2 eps1/(eps1 + eps2) E0 with eps1 outside: Jackson, Classical
    # Electrodynamics, 3rd ed. (1999)
    case = dielectric.CASE
    e1, e2 = dielectric.EPS_OUT, dielectric.EPS_IN
    x, y = np.array([0.1, -0.2, 0.3]), np.array([0.0, 0.25, -0.1])
    gx, gy = case.grad(x, y)
    np.testing.assert_allclose(-gx, 2 * e1 / (e1 + e2) * dielectric.E0, rtol=1e-15)
    np.testing.assert_allclose(gy, 0.0, atol=1e-15)
    theta = np.linspace(0, 2 * np.pi, 37)
    r_in, r_out = dielectric.A * (1 - 1e-12), dielectric.A * (1 + 1e-12)
    ci, si = r_in * np.cos(theta), r_in * np.sin(theta)
    co, so = r_out * np.cos(theta), r_out * np.sin(theta)
    np.testing.assert_allclose(case.u(ci, si), case.u(co, so), atol=1e-11)
    flux_in = e2 * (case.grad(ci, si)[0] * np.cos(theta) + case.grad(ci, si)[1] * np.sin(theta))
    flux_out = e1 * (case.grad(co, so)[0] * np.cos(theta) + case.grad(co, so)[1] * np.sin(theta))
    np.testing.assert_allclose(flux_in, flux_out, atol=1e-10)
    np.testing.assert_allclose(case.v(ci, si), case.v(co, so), atol=1e-10)


def test_insulating_cylinder_surface_values():
    # u(a, theta) = 2 E a cos(theta), du/dr = 0 on r = a: uniform stream past a circular
    # cylinder; Batchelor, An Introduction to Fluid Dynamics (1967)
    case = cylinder.CASE
    theta = np.linspace(0, 2 * np.pi, 25)
    x, y = cylinder.A * np.cos(theta), cylinder.A * np.sin(theta)
    np.testing.assert_allclose(case.u(x, y), 2 * cylinder.E * cylinder.A * np.cos(theta),
                               atol=1e-15)
    gx, gy = case.grad(x, y)
    np.testing.assert_allclose(gx * np.cos(theta) + gy * np.sin(theta), 0.0, atol=1e-15)


@pytest.mark.parametrize("name", ["wedge-135", "wedge-225", "lshape", "slit"])
def test_wedge_vanishes_on_both_rays(name):
    case = CASES[name]
    omega = case.extras["omega"]
    r = np.linspace(0.01, 1.0, 30)
    for theta in (1e-14, omega - 1e-14):
        np.testing.assert_allclose(case.u(r * np.cos(theta), r * np.sin(theta)), 0.0,
                                   atol=1e-12)
    lam = case.singular_exponent
    # u = r^lam sin(lam theta) (the defining form) at a few interior angles
    theta = np.array([0.3, 1.1, 0.9 * omega])
    np.testing.assert_allclose(case.u(0.5 * np.cos(theta), 0.5 * np.sin(theta)),
                               0.5**lam * np.sin(lam * theta), rtol=1e-13)


def test_dn_corner_conditions():
    case = CASES["dn-corner"]
    x = np.linspace(0.01, 1, 25)
    np.testing.assert_allclose(case.u(x, 0 * x), 0.0, atol=1e-15)   # Dirichlet side
    np.testing.assert_allclose(case.grad(-x, 0 * x)[1], 0.0, atol=1e-13)  # zero flux side
    assert case.singular_exponent == pytest.approx(0.5, rel=1e-15)


def test_slit_polygon_needs_the_unvalidated_loop():
    """make_polygon refuses the slit polygon, yet the mesh has the slit as a constrained
    segment with triangles on both sides and u = 0 at its nodes."""
    from verification.exact.cases.wedge import sector_vertices

    with pytest.raises(GeometryError):
        make_polygon("outer", sector_vertices(2 * np.pi))
    mesh = triangulate(CASES["slit"].problem())
    on_slit = (np.abs(mesh.points[:, 1]) < 1e-14) & (mesh.points[:, 0] > 0.05) & \
              (mesh.points[:, 0] < 0.95)
    assert np.count_nonzero(on_slit) >= 5
    centroids = mesh.points[mesh.triangles].mean(axis=1)
    near = np.abs(centroids[:, 0] - 0.5) < 0.2
    assert np.any(near & (centroids[:, 1] > 0)) and np.any(near & (centroids[:, 1] < 0))


# -- reference energies ------------------------------------------------------------------------

def boundary_pieces(problem):
    """(z(t), |dz/dt|, outward unit normal, t0, t1) for every edge and circle."""
    pieces = []
    for k, loop in enumerate(problem.loops()):
        sign = 1 if k == 0 else -1
        if isinstance(loop, CircleLoop):
            c, r = mp.mpc(*loop.center), mp.mpf(loop.radius)
            pieces.append((lambda t, c=c, r=r: c + r * mp.expj(t), lambda t, r=r: r,
                           lambda t, s=sign: s * mp.expj(t), 0, 2 * mp.pi))
            continue
        v = loop.vertices
        for i in range(len(v)):
            z0, z1 = mp.mpc(*v[i]), mp.mpc(*v[(i + 1) % len(v)])
            d = z1 - z0
            pieces.append((lambda t, z0=z0, d=d: z0 + t * d, lambda t, d=d: abs(d),
                           lambda t, n=sign * (-1j) * d / abs(d): n, 0, 1))
    return pieces


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_reference_energy_by_green_identity(name):
    """W = 1/2 int |grad u|^2 = 1/2 (boundary integral of u du/dn) (Green's first identity),
    recomputed with mpmath.quad; interfaces cancel, the boundary lies where k = 1."""
    case = CASES[name]
    refs = [r.value for r in case.references if r.quantity == "energy"]
    assert refs, f"{name} has no energy reference"
    F = MP.get(name, DIELECTRIC_MP["outside"])
    total = mp.mpf(0)
    with mp.workdps(16):
        for z, ds, n, t0, t1 in boundary_pieces(case.problem()):
            def integrand(t, z=z, ds=ds, n=n):
                zt = z(t)
                return mp.re(F(zt)) * mp.re(mp.diff(F, zt) * n(t)) * ds(t)

            total += mp.quad(integrand, [t0, t1])
    assert abs(float(total / 2) - refs[0]) < 1e-12 * abs(refs[0])


# -- finite-element convergence ---------------------------------------------------------------

# Expected L2 ratio under one uniform refinement with P2: 2^min(3, 2 lambda) on quasi-uniform
# meshes (Strang & Fix, An Analysis of the Finite Element Method, 1973; from memory), with a
# margin for the pre-asymptotic range of these coarse meshes.
L2_FACTOR = {
    "smooth-square": 7.0, "smooth-mixed": 7.0, "smooth-neumann": 7.0, "smooth-nonconvex": 7.0,
    "near-singular": 6.5, "wedge-135": 4.5, "wedge-225": 2.8, "lshape": 2.3, "slit": 1.8,
    "dn-corner": 1.8, "coax": 6.5, "coax-eccentric": 6.5, "two-wire": 6.5,
    "wire-over-ground": 6.5, "cylinder-in-field": 6.5, "dielectric-cylinder": 6.5,
}


@functools.lru_cache(maxsize=None)
def p2_solutions(name):
    case = CASES[name]
    problem = case.problem()
    mesh = triangulate(problem)
    return tuple(solve(problem, order=2, mesh=mesh.refined(r)) for r in (0, 1))


def test_every_case_has_a_convergence_factor():
    assert set(L2_FACTOR) == set(CLOSED_FORM)


@pytest.mark.parametrize("name", CLOSED_FORM)
def test_p2_l2_error_drops_under_refinement(name):
    case = CASES[name]
    coarse, fine = p2_solutions(name)
    e0, e1 = solution_norms(coarse, case).L2, solution_norms(fine, case).L2
    assert e0 / e1 >= L2_FACTOR[name], f"{name}: L2 {e0:.3e} -> {e1:.3e}, ratio {e0 / e1:.2f}"
    energy = [r.value for r in case.references if r.quantity == "energy"][0]
    err0, err1 = abs(coarse.energy - energy), abs(fine.energy - energy)
    assert err1 < 0.6 * err0, f"{name}: energy error {err0:.2e} -> {err1:.2e}"


def fem_capacitance(case, solution):
    """Q/dV from the reaction flux through the high electrode (capacity dict when defined)."""
    if solution.capacity is not None:
        return solution.capacity["from_flux"]
    high = max((spec.electrode, name) for name, spec in case.conditions.items()
               if spec.electrode is not None)[1]
    levels = [spec.electrode for spec in case.conditions.values() if spec.electrode is not None]
    return -solution.fluxes[high] / (max(levels) - min(levels))


@pytest.mark.parametrize("name", ELECTRODE_CASES)
def test_p2_capacitance_approaches_the_published_value(name):
    # published values as cited in each case's Reference (Ramo et al. 1994; Smythe 1968)
    case = CASES[name]
    ref = [r.value for r in case.references if r.quantity == "capacitance"][0]
    coarse, fine = p2_solutions(name)
    err0 = abs(fem_capacitance(case, coarse) / ref - 1)
    err1 = abs(fem_capacitance(case, fine) / ref - 1)
    assert err1 < 1e-3 and err1 < err0 / 4, (err0, err1)


def test_truncated_two_wire_energy_is_not_the_untruncated_capacitance():
    """The scope statement: on the truncated box the flux gives C', the energy does not."""
    case = wires.TWO_WIRE
    _, fine = p2_solutions("two-wire")
    cap = [r.value for r in case.references if r.quantity == "capacitance"][0]
    from_energy = 2 * fine.energy / 1.0**2
    assert abs(from_energy / cap - 1) > 0.02
    assert abs(fem_capacitance(case, fine) / cap - 1) < 1e-3


def test_p2_dielectric_interior_field():
    # interior field ratio 2 eps1/(eps1 + eps2) (Jackson 1999), from the FEM gradient
    _, fine = p2_solutions("dielectric-cylinder")
    pts = np.array([[0.0, 0.0], [0.2, 0.1], [-0.15, -0.2]])
    _, grad = fine.evaluate(pts)
    np.testing.assert_allclose(-grad[:, 0], dielectric.RATIO * dielectric.E0, rtol=1e-3)
    np.testing.assert_allclose(grad[:, 1], 0.0, atol=1e-3)


def test_p2_insulating_cylinder_surface_potential():
    # u(a, 0) = 2 E a (Batchelor 1967): the mesh has a node there
    _, fine = p2_solutions("cylinder-in-field")
    pts = fine.mesh.points
    node = np.argmin(np.hypot(pts[:, 0] - cylinder.A, pts[:, 1]))
    assert np.hypot(pts[node, 0] - cylinder.A, pts[node, 1]) < 1e-12
    assert fine.vertex_values()[node] == pytest.approx(2 * cylinder.E * cylinder.A, rel=1e-3)


def test_from_analytic_is_cauchy_riemann():
    u, v, grad = from_analytic(np.exp, np.exp)
    x, y = np.array([0.3, -1.2]), np.array([0.7, 2.0])
    np.testing.assert_allclose(u(x, y), np.exp(x) * np.cos(y), rtol=1e-15)
    np.testing.assert_allclose(v(x, y), np.exp(x) * np.sin(y), rtol=1e-15)
    np.testing.assert_allclose(grad(x, y), (np.exp(x) * np.cos(y), -np.exp(x) * np.sin(y)),
                               rtol=1e-15)
