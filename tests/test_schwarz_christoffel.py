"""Schwarz-Christoffel map, quadrilateral modulus and exact potential."""

import mpmath
import numpy as np
import pytest
from scipy.special import ellipk, ellipkm1

from lapsolve.errors import GeometryError, InputError
from lapsolve.problem import EPSILON_0, PHYSICS, Problem
from verification.exact.case import ExactCase
from verification.exact.quadrilateral import (
    HIGH,
    INSULATED_01,
    INSULATED_23,
    LOW,
    case_from_problem,
    corner_gradings,
    quadrilateral_case,
)
from verification.modulus import (
    cross_ratios,
    quadrilateral_modulus,
    reciprocal_check,
    uhp_modulus,
)
from verification.sc.lines import line_spacing, rectangle_map, trace_lines
from verification.sc.polygon import doubled_edges, prepare_polygon
from verification.schwarz_christoffel import SCMap, as_complex, winding_number

L_SHAPE = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]
# Square [0, 2]^2 with a slit along the diagonal from (0, 0) to (0.6, 0.6).
DIAGONAL_SLIT = [(0.6, 0.6), (0, 0), (2, 0), (2, 2), (0, 2), (0, 0)]
# Rectangle [0, 2] x [0, 1.5] with a vertical slit from (1, 0) to (1, 1).
BOTTOM_SLIT = [(0, 0), (1, 0), (1, 1), (1, 0), (2, 0), (2, 1.5), (0, 1.5)]
# Square [0, 2]^2 with a slit from the middle of its left side to (0.8, 1).
LEFT_SLIT = [(0, 0), (2, 0), (2, 2), (0, 2), (0, 1), (0.8, 1), (0, 1)]


def rectangle(length, height):
    return [(0, 0), (length, 0), (length, height), (0, height)]


def star(points, inner=0.6):
    k = np.arange(points)
    r = np.where(k % 2 == 0, 1.0, inner)
    theta = 2 * np.pi * k / points
    return np.column_stack([r * np.cos(theta), r * np.sin(theta)])


def jagged(points, seed):
    rng = np.random.default_rng(seed)
    theta = 2 * np.pi * np.arange(points) / points
    r = 1.0 + 0.4 * rng.random(points)
    return np.column_stack([r * np.cos(theta), r * np.sin(theta)])


def inside_points(vertices, count, seed=0):
    z = as_complex(vertices)
    rng = np.random.default_rng(seed)
    lo = np.array([z.real.min(), z.imag.min()])
    hi = np.array([z.real.max(), z.imag.max()])
    found = []
    while sum(len(f) for f in found) < count:
        p = lo + (hi - lo) * rng.random((4 * count, 2))
        found.append(p[winding_number(p[:, 0] + 1j * p[:, 1], z) != 0])
    return np.concatenate(found)[:count]


def reciprocal_product(vertices, corners):
    """M(c0, c1, c2, c3) * M(c1, c2, c3, c0) from two independently normalised maps."""
    c0, c1, c2, c3 = corners
    first = quadrilateral_modulus(vertices, corners, normalisation=(c0, c1))
    second = quadrilateral_modulus(vertices, (c1, c2, c3, c0), normalisation=(c2, c3))
    assert first.map.infinity_index != second.map.infinity_index
    return first, second, first.modulus * second.modulus


# --- rectangles -------------------------------------------------------------


@pytest.mark.parametrize("length, height", [(1, 1), (3, 1), (20, 1), (1, 20), (2.5, 7)])
def test_rectangle_modulus_is_aspect_ratio(length, height):
    # A rectangle L x H maps onto [0, L/H] x [0, 1] by a similarity, so M = L/H
    # (Papamichael & Stylianopoulos, Numerical Conformal Mapping: Domain
    # Decomposition and the Mapping of Quadrilaterals, 2010, ch. 2).
    result = quadrilateral_modulus(rectangle(length, height), (0, 1, 2, 3), eps=2.0, rho_s=3.0)
    expected = length / height
    assert result.modulus == pytest.approx(expected, rel=1e-10)
    assert result.capacitance == pytest.approx(2.0 / expected, rel=1e-10)
    assert result.resistance == pytest.approx(3.0 * expected, rel=1e-10)
    assert result.residual < 1e-10


def test_clockwise_rectangle_gives_same_modulus():
    # Same as above (Papamichael & Stylianopoulos 2010), listed clockwise; the
    # corners follow the listing: c0 = (3, 0), c1 = (0, 0), c2 = (0, 1), c3 = (3, 1),
    # so the electrodes are x = 3 (u = 0) and x = 0 (u = 1).
    cw = rectangle(3, 1)[::-1]  # (0,1), (3,1), (3,0), (0,0)
    result = quadrilateral_modulus(cw, (2, 3, 0, 1))
    assert result.modulus == pytest.approx(3.0, rel=1e-10)
    points = np.array([(0.5, 0.5), (2.0, 0.25), (2.9, 0.9)])
    assert np.max(np.abs(result.potential(points) - (3 - points[:, 0]) / 3)) < 1e-10


@pytest.mark.parametrize("length", [3.0, 20.0])
def test_rectangle_potential_is_linear(length):
    # The potential between the ends of a rectangle is x / L (Papamichael &
    # Stylianopoulos 2010: the rectangle is its own canonical domain).
    result = quadrilateral_modulus(rectangle(length, 1), (0, 1, 2, 3))
    points = np.random.default_rng(1).random((200, 2)) * [length, 1.0]
    assert np.max(np.abs(result.potential(points) - points[:, 0] / length)) < 1e-8
    grad = result.gradient(points[:50])
    assert np.max(np.abs(grad - [1.0 / length, 0.0])) < 1e-8 / length


def test_potential_on_boundary_and_vertices():
    # u = x / L on the closed rectangle (same source as above).
    result = quadrilateral_modulus(rectangle(2, 1), (0, 1, 2, 3))
    points = np.array([(0, 0), (2, 1), (0.5, 0), (1.5, 1), (0, 0.3), (2, 0.7)])
    assert np.max(np.abs(result.potential(points) - points[:, 0] / 2)) < 1e-10


# --- upper half-plane -------------------------------------------------------


@pytest.mark.parametrize("k", [0.9, 0.5, 0.1, 1e-6])
def test_uhp_modulus_symmetric_prevertices(k):
    # Corners -1/k, -1, 1, 1/k: M = K'(k) / (2 K(k)) (Papamichael & Stylianopoulos
    # 2010, sec. 2.4), with K from scipy.special.ellipk (parameter m = k**2).
    expected = ellipkm1(k * k) / (2 * ellipk(k * k))
    assert uhp_modulus([-1 / k, -1, 1, 1 / k]) == pytest.approx(expected, rel=1e-12)
    # Moebius invariance: send -1/k to infinity.
    moved = [np.inf] + [x / (1 + k * x) for x in (-1, 1, 1 / k)]
    assert uhp_modulus(moved) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("k", [0.5, 0.05])
def test_sn_rectangle_prevertices(k):
    # w -> sn^{-1}(w, k) maps the upper half-plane onto [-K, K] x [0, K'] with
    # -1/k, -1, 1, 1/k going to the corners (Abramowitz & Stegun, Handbook of
    # Mathematical Functions, 1964, 16.1 and 17.4; Papamichael & Stylianopoulos 2010):
    # the solved map must reproduce their cross-ratio and M = K'/(2K).
    big_k, small_k = ellipk(k * k), ellipk(1 - k * k)
    vertices = [(-big_k, 0), (big_k, 0), (big_k, small_k), (-big_k, small_k)]
    corners = (3, 0, 1, 2)
    result = quadrilateral_modulus(vertices, corners)
    assert result.modulus == pytest.approx(small_k / (2 * big_k), rel=1e-10)
    rho, _ = cross_ratios(result.map.prevertices[list(corners)])
    assert rho == pytest.approx(((1 - k) / (1 + k)) ** 2, rel=1e-10)


def test_rectangle_with_marked_point_on_top():
    # The top side of [-K, K] x [0, K'] is the image of |w| > 1/k with
    # sn(u + iK') = 1 / (k sn u) (DLMF 22.4, Table 22.4.3). Marking the point
    # (x, K') instead of the corner (-K, K') gives prevertices -1, 1, 1/k,
    # 1/(k sn x) and M = K(rho) / K(sigma) from the cross-ratios (Papamichael &
    # Stylianopoulos 2010, sec. 2.4), evaluated here with mpmath.
    k = 0.4
    m = k * k
    big_k, small_k = float(mpmath.ellipk(m)), float(mpmath.ellipk(1 - m))
    x = 0.3 * big_k
    vertices = [(-big_k, 0), (big_k, 0), (big_k, small_k), (x, small_k), (-big_k, small_k)]
    a, b, c = mpmath.mpf(-1), mpmath.mpf(1), 1 / mpmath.mpf(k)
    d = 1 / (k * mpmath.ellipfun("sn", x, m=m))
    rho = (b - a) * (d - c) / ((c - a) * (d - b))
    sigma = (c - b) * (d - a) / ((c - a) * (d - b))
    expected = float(mpmath.ellipk(rho) / mpmath.ellipk(sigma))
    result = quadrilateral_modulus(vertices, (0, 1, 2, 3))
    assert result.modulus == pytest.approx(expected, rel=1e-10)


# --- symmetry and the reciprocal identity ------------------------------------


@pytest.mark.parametrize("vertices, corners", [
    ([(np.cos(np.pi * j / 4), np.sin(np.pi * j / 4)) for j in range(8)], (0, 2, 4, 6)),
    # Square with a corner notch, symmetric under reflection in y = x.
    ([(0, 0), (2, 0), (2, 1.5), (1.5, 1.5), (1.5, 2), (0, 2)], (0, 1, 3, 5)),
    # L-shape with c2 at the re-entrant corner, symmetric under y = x.
    (L_SHAPE, (0, 1, 3, 5)),
    # Diagonal slit with c0 at its tip (interior angle 2 pi), symmetric under y = x.
    (DIAGONAL_SLIT, (0, 2, 3, 4)),
    # Square with corners at the side midpoints (straight angles), quarter-turn symmetric.
    ([(0, 0), (1, 0), (2, 0), (2, 1), (2, 2), (1, 2), (0, 2), (0, 1)], (1, 3, 5, 7)),
    # 20-vertex star, quarter-turn symmetric.
    (star(20), (0, 5, 10, 15)),
])
def test_symmetric_quadrilaterals_have_unit_modulus(vertices, corners):
    # A symmetry swapping the two pairs of sides gives M = 1/M, so M = 1
    # (common practice, no source).
    result = quadrilateral_modulus(vertices, corners)
    assert result.modulus == pytest.approx(1.0, rel=1e-10)
    assert result.residual < 1e-10


@pytest.mark.parametrize("vertices, corners", [
    (L_SHAPE, (0, 1, 2, 4)),
    (jagged(14, seed=3), (0, 3, 7, 11)),
    (BOTTOM_SLIT, (0, 4, 5, 6)),
    (DIAGONAL_SLIT, (1, 2, 3, 4)),
])
def test_reciprocal_identity(vertices, corners):
    # M(Q(c0,c1,c2,c3)) * M(Q(c1,c2,c3,c0)) = 1 (Hakula, Rasila & Vuorinen,
    # "Conformal modulus on domains with strong singularities and cusps",
    # ETNA 48, 2018), from two maps with different normalisations.
    first, second, product = reciprocal_product(vertices, corners)
    assert product == pytest.approx(1.0, abs=1e-10)
    assert max(first.residual, second.residual) < 1e-10


def test_fifty_vertex_star():
    # Reciprocal identity (Hakula, Rasila & Vuorinen, ETNA 48, 2018) on 50 vertices
    # with sharp tips (interior angle ~0.12 pi) and re-entrant corners.
    vertices = star(50)
    first, second, product = reciprocal_product(vertices, (0, 12, 26, 38))
    assert first.map.residual < 1e-10 and second.map.residual < 1e-10
    assert product == pytest.approx(1.0, abs=1e-10)


def test_slit_map_converges_and_slit_tip_angle():
    # A slit tip has interior angle 2 pi (Driscoll & Trefethen, Schwarz-Christoffel
    # Mapping, 2002, sec. 2.1): the boundary turns back.
    sc = SCMap.from_polygon(BOTTOM_SLIT)
    assert sc.angles[2] == pytest.approx(2.0, abs=1e-12)
    assert sc.residual < 1e-10
    assert np.sum(sc.angles) == pytest.approx(len(BOTTOM_SLIT) - 2, abs=1e-12)


# --- the potential ------------------------------------------------------------


def test_potential_reflection_antisymmetry():
    # Rectangle [0, 2] x [0, 1] with a notch centred in the bottom side: the
    # reflection x -> 2 - x swaps the electrodes, so u + u(reflected) = 1
    # (common practice, no source).
    vertices = [(0, 0), (0.8, 0), (0.8, 0.5), (1.2, 0.5), (1.2, 0), (2, 0), (2, 1), (0, 1)]
    result = quadrilateral_modulus(vertices, (0, 5, 6, 7))
    points = inside_points(vertices, 200, seed=4)
    mirrored = points * [-1, 1] + [2, 0]
    assert np.max(np.abs(result.potential(points) + result.potential(mirrored) - 1)) < 1e-8
    grad, grad_m = result.gradient(points[:40]), result.gradient(mirrored[:40])
    assert np.max(np.abs(grad - grad_m * [1, -1])) < 1e-8


def test_gradient_matches_difference_quotients():
    # Central differences of the potential, error O(h^2) (common practice, no source).
    result = quadrilateral_modulus(L_SHAPE, (0, 1, 2, 4))
    points = inside_points(L_SHAPE, 20, seed=5)
    h = 1e-5
    fx = (result.potential(points + [h, 0]) - result.potential(points - [h, 0])) / (2 * h)
    fy = (result.potential(points + [0, h]) - result.potential(points - [0, h])) / (2 * h)
    assert np.max(np.abs(result.gradient(points) - np.column_stack([fx, fy]))) < 1e-6


def test_potential_between_zero_and_one_near_sharp_corners():
    # Maximum principle (common practice, no source); points 1e-9 from star tips
    # stress the crowded preimages.
    vertices = star(20)
    result = quadrilateral_modulus(vertices, (0, 5, 10, 15))
    z = result.map.vertices
    tips = z[::2] * (1 - 1e-9)
    u = result.potential(np.column_stack([tips.real, tips.imag]))
    assert np.all((u > -1e-12) & (u < 1 + 1e-12))
    anchor, offset = result.map.locate(tips)
    back = result.map.forward(offset, anchor=anchor)
    assert np.max(np.abs(back - tips)) < 1e-12


# --- bad input -----------------------------------------------------------------


@pytest.mark.parametrize("vertices, words", [
    ([(0, 0), (2, 2), (2, 0), (0, 1)], "not simple: edges 0 and 2 cross"),  # bow-tie
    ([(0, 0), (1, 0)], "at least 3"),
    ([(0, 0), (1, 0), (1, 0), (0, 1)], "coincide"),
    ([(0, 0), (1, 0), (2, 0)], "zero area"),
    # Square with a zero-width spike pointing out of it.
    ([(0, 0), (1, 0), (1, 0.5), (2, 0.5), (1, 0.5), (1, 1), (0, 1)], "not simple"),
])
def test_bad_polygons(vertices, words):
    with pytest.raises(GeometryError, match=words) as info:
        SCMap.from_polygon(vertices)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("corners, words", [
    ((0, 1, 2), "four"),
    ((0, 1, 1, 3), "distinct"),
    ((0, 1, 2, 7), "out of range"),
    ((0, 2, 1, 3), "order"),
    ((0, 1.0, 2, 3), "four"),
])
def test_bad_corners(corners, words):
    with pytest.raises(InputError, match=words):
        quadrilateral_modulus(rectangle(2, 1), corners)


def test_parameter_problem_failure_reports_residual():
    # M = 300 needs prevertex gaps near exp(-300 pi): beyond double precision.
    with pytest.raises(GeometryError, match=r"residual \d\.\de[+-]\d+"):
        quadrilateral_modulus(rectangle(300, 1), (0, 1, 2, 3))


@pytest.mark.parametrize("vertices, words", [
    ([(0, 0), (2, 2), (2, 0), (0, 1)], "not simple"),
    ([(0, 0), (1, 0), (1, 1), (0, 1), (0.5, 1.5)], "not simple"),  # edge 4 crosses edge 2
])
def test_non_simple_polygons_are_refused_by_the_modulus(vertices, words):
    with pytest.raises(GeometryError, match=words):
        quadrilateral_modulus(vertices, (0, 1, 2, 3))


def test_point_outside_is_refused():
    result = quadrilateral_modulus(L_SHAPE, (0, 1, 2, 4))
    with pytest.raises(InputError, match="outside"):
        result.potential(np.array([(1.5, 1.5)]))


# --- long strips: boundary and near-boundary points ----------------------------------


@pytest.mark.parametrize("length", [20.0, 100.0])
def test_potential_near_the_sides_of_a_long_strip(length):
    # u = x / L (Papamichael & Stylianopoulos 2010, as above) at points on and 1e-3
    # from the insulated sides, where the preimages lie 1e26..1e136 from the others:
    # a radial path must not start at a prevertex whose distance only ties by rounding.
    result = quadrilateral_modulus(rectangle(length, 1), (0, 1, 2, 3))
    x = np.linspace(0.25, length - 0.25, 41)
    points = np.concatenate([x + 1j * y for y in (0.0, 1e-3, 0.999, 1.0)])
    assert np.max(np.abs(result.potential(points) - points.real / length)) < 1e-10


# --- slits, the conjugate check, traced lines -------------------------------------------


def test_doubled_edges_are_the_slit_sides():
    # A slit is run along twice, once each way (Driscoll & Trefethen 2002, sec. 2.1).
    assert doubled_edges(prepare_polygon(LEFT_SLIT).vertices) == [(4, 5)]
    assert doubled_edges(prepare_polygon(BOTTOM_SLIT).vertices) == [(1, 2)]
    assert doubled_edges(prepare_polygon(L_SHAPE).vertices) == []


@pytest.mark.parametrize("vertices, corners", [
    (L_SHAPE, (0, 1, 2, 4)),
    (rectangle(20, 1), (0, 1, 2, 3)),
    (L_SHAPE[::-1], (1, 3, 4, 5)),
])
def test_reciprocal_check(vertices, corners):
    # M(Q) M(conjugate Q) = 1 (Hakula, Rasila & Vuorinen, ETNA 48, 2018); the check maps
    # the conjugate with the other two corners at infinity and 0.
    result = quadrilateral_modulus(vertices, corners)
    check = reciprocal_check(result, vertices)
    assert check.error < 1e-12
    assert check.conjugate == pytest.approx(1 / result.modulus, rel=1e-12)


@pytest.mark.parametrize("normalisation", [None, (1, 3)])
def test_traced_lines_of_a_rectangle_are_straight(normalisation):
    # In a rectangle L x 1 the equipotential u sits at x = L u and the field line s at
    # y = s (Papamichael & Stylianopoulos 2010: the rectangle is its own canonical
    # domain). The marked midpoint (1.5, 0) with normalisation (1, 3) puts no corner
    # at infinity: the rectangle map then has a fifth, straight vertex.
    vertices = [(0, 0), (1.5, 0), (3, 0), (3, 1), (0, 1)]
    result = quadrilateral_modulus(vertices, (0, 2, 3, 4), normalisation=normalisation)
    assert rectangle_map(result).vertices.size == (4 if normalisation is None else 5)
    lines = trace_lines(result)
    assert len(lines.equipotentials) == 29 and len(lines.field_lines) == 9
    for u, curve in lines.equipotentials:
        assert np.max(np.abs(curve.real - 3 * u)) < 1e-10
    for s, curve in lines.field_lines:
        assert np.max(np.abs(curve.imag - s)) < 1e-10


def test_traced_lines_are_level_lines_of_the_potential():
    # Lines come from the inverse rectangle map and the forward polygon map; the
    # potential from the inverse polygon map and the forward rectangle map: the two
    # routes must agree (common practice, no source).
    result = quadrilateral_modulus(LEFT_SLIT, (0, 1, 2, 3))
    lines = trace_lines(result)
    for u, curve in lines.equipotentials:
        assert np.max(np.abs(result.potential(curve) - u)) < 1e-10
    for s, curve in lines.field_lines:
        flux = result.complex_potential(curve[1:-1]).imag * result.modulus
        assert np.max(np.abs(flux - s)) < 1e-10


@pytest.mark.parametrize("modulus, steps", [
    (1.0, (0.1, 0.1)), (2.5, (0.1, 0.1)), (0.05, (0.025, 0.025)), (20.0, (0.5, 0.5)),
    (100.0, (2.5, 0.5)),
])
def test_line_spacing(modulus, steps):
    # Equal steps give curvilinear squares (Maxwell, A Treatise on Electricity and
    # Magnetism, 1873, vol. 1, art. 123, from memory); at most 40 lines per family.
    assert line_spacing(modulus) == pytest.approx(steps)


# --- the exact case ---------------------------------------------------------------------


def test_case_follows_the_contract():
    case = quadrilateral_case(L_SHAPE, (0, 1, 2, 4), "quad-l")
    assert isinstance(case, ExactCase)
    spec = case.conditions
    assert (spec[LOW].edges, spec[LOW].kind, spec[LOW].electrode) == ((4, 5), "dirichlet", 0.0)
    assert (spec[HIGH].edges, spec[HIGH].electrode) == ((1,), 1.0)
    assert spec[INSULATED_01].edges == (0,) and spec[INSULATED_01].kind == "insulated"
    assert spec[INSULATED_23].edges == (2, 3) and spec[INSULATED_23].kind == "insulated"
    problem = case.problem(0.5)
    assert isinstance(problem, Problem) and problem.outer.n_edges == 6
    # C' = eps / M and W = C' / 2 at V = 1 (Papamichael & Stylianopoulos 2010).
    modulus = quadrilateral_modulus(L_SHAPE, (0, 1, 2, 4)).modulus
    refs = {r.quantity: r for r in case.references}
    assert refs["capacitance"].value == pytest.approx(1 / modulus, rel=1e-14)
    assert refs["energy"].value == pytest.approx(0.5 / modulus, rel=1e-14)
    assert refs["capacitance"].scope == "domain"
    # u = 0 and 1 on the electrodes, vectorised over any shape.
    x = np.array([[0.0, 0.0], [2.0, 2.0]])
    y = np.array([[0.3, 1.7], [0.2, 0.9]])
    assert np.allclose(case.u(x, y), [[0, 0], [1, 1]], atol=1e-12)
    gx, gy = case.grad(np.array([0.5, 1.5]), np.array([0.5, 0.5]))
    assert gx.shape == (2,) and np.all(gx > 0)


@pytest.mark.parametrize("vertices, corners, lam, point", [
    # Dirichlet-Dirichlet or Neumann-Neumann corner of angle alpha: lambda = pi / alpha;
    # Dirichlet-Neumann: pi / (2 alpha) (Grisvard, Elliptic Problems in Nonsmooth
    # Domains, 1985, sec. 5.1).
    (L_SHAPE, (0, 1, 2, 4), 2 / 3, (1.0, 1.0)),      # re-entrant corner in an insulated arc
    (L_SHAPE, (0, 1, 3, 5), 1 / 3, (1.0, 1.0)),      # re-entrant corner marked
    (LEFT_SLIT, (0, 1, 2, 3), 1 / 2, (0.8, 1.0)),    # slit tip inside an electrode
    ([(0, 0), (1, 0), (2, 0), (2, 1), (0, 1)], (0, 1, 3, 4), 1 / 2, (1.0, 0.0)),  # marked point
])
def test_case_singular_exponent(vertices, corners, lam, point):
    case = quadrilateral_case(vertices, corners)
    assert case.singular_exponent == pytest.approx(lam, rel=1e-12)
    assert case.singular_point == pytest.approx(point)
    assert not case.smooth
    assert all(g.mu <= 1 for g in corner_gradings(case, 3))


def test_rectangle_case_is_smooth():
    # Right angles: lambda = 1 at the marked corners, a polynomial term (Grisvard 1985).
    case = quadrilateral_case(rectangle(3, 1), (0, 1, 2, 3))
    assert case.smooth and np.isinf(case.singular_exponent) and case.singular_point is None
    assert corner_gradings(case, 3) == []


def test_case_refuses_a_slit_outside_the_electrodes():
    with pytest.raises(GeometryError, match="slit"):
        quadrilateral_case(BOTTOM_SLIT, (0, 4, 5, 6))


def test_case_scales_with_physics():
    # C' = eps0 eps_r / M for electrostatics (Ramo, Whinnery & Van Duzer, Fields and Waves
    # in Communication Electronics, 3rd ed. 1994: capacitance scales with permittivity).
    case = quadrilateral_case(rectangle(3, 1), (0, 1, 2, 3), coefficient=2.5,
                              physics="electrostatic")
    assert case.references[0].value == pytest.approx(EPSILON_0 * 2.5 / 3, rel=1e-12)
    assert case.problem().physics is PHYSICS["electrostatic"]


def test_case_from_problem_refuses_holes_and_regions():
    from lapsolve.geometry import make_circle, make_polygon
    from lapsolve.problem import Region

    outer = make_polygon("outer", rectangle(4, 2))
    with pytest.raises(GeometryError, match="simply connected"):
        case_from_problem(Problem("p", outer, holes=(make_circle("h", (2, 1), 0.3),)),
                          (0, 1, 2, 3))
    with pytest.raises(InputError, match="material"):
        case_from_problem(Problem("p", outer, regions=(
            Region("r", make_circle("r", (2, 1), 0.3), 2.0),)), (0, 1, 2, 3))
    clockwise = make_polygon("outer", rectangle(4, 2)[::-1])
    # The file order (0,2), (4,2), (4,0), (0,0): u = 0 on the arc 1 -> 2, x = 4.
    case = case_from_problem(Problem("p", clockwise), (2, 3, 0, 1))
    assert case.u(np.array([1.0]), np.array([1.0]))[0] == pytest.approx(0.75, abs=1e-12)
