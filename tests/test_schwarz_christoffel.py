"""Schwarz-Christoffel map, quadrilateral modulus and exact potential."""

import mpmath
import numpy as np
import pytest
from scipy.special import ellipk, ellipkm1

from lapsolve.errors import GeometryError, InputError
from verification.modulus import cross_ratios, quadrilateral_modulus, uhp_modulus
from verification.schwarz_christoffel import SCMap, as_complex, winding_number

L_SHAPE = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]
# Square [0, 2]^2 with a slit along the diagonal from (0, 0) to (0.6, 0.6).
DIAGONAL_SLIT = [(0.6, 0.6), (0, 0), (2, 0), (2, 2), (0, 2), (0, 0)]
# Rectangle [0, 2] x [0, 1.5] with a vertical slit from (1, 0) to (1, 1).
BOTTOM_SLIT = [(0, 0), (1, 0), (1, 1), (1, 0), (2, 0), (2, 1.5), (0, 1.5)]


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
    ([(0, 0), (2, 2), (2, 0), (0, 1)], "cross"),  # bow-tie
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


def test_point_outside_is_refused():
    result = quadrilateral_modulus(L_SHAPE, (0, 1, 2, 4))
    with pytest.raises(InputError, match="outside"):
        result.potential(np.array([(1.5, 1.5)]))
