"""Triangulation, uniform refinement, curve snapping and quality statistics."""

import math
from collections import Counter

import numpy as np
import pytest
from helpers import EXAMPLES, coax, rectangle

import lapsolve
from lapsolve.mesh import EdgeTag, Mesh, quality
from lapsolve.meshing import triangulate


def mixed_problem():
    """A square with a circular hole, a circular region and a polygon region."""
    return lapsolve.problem_from_dict({
        "outer": {"polygon": [[-2, -2], [2, -2], [2, 2], [-2, 2]]},
        "holes": [{"name": "rod", "circle": {"center": [0.5, 0.3], "radius": 0.7}}],
        "regions": [
            {"name": "ring", "circle": {"center": [-1.0, -1.0], "radius": 0.6},
             "coefficient": 3.0},
            {"name": "strip", "polygon": [[1.5, -2], [2, -2], [2, 2], [1.5, 2]],
             "coefficient": 2.0},
        ],
        "mesh": {"max_size": 0.3},
    })


def boundary_edges(mesh):
    count = Counter()
    for tri in mesh.triangles:
        for a, b in ((tri[0], tri[1]), (tri[1], tri[2]), (tri[2], tri[0])):
            count[(min(a, b), max(a, b))] += 1
    return {edge for edge, n in count.items() if n == 1}


def test_default_min_angle():
    # Delaunay refinement with a 28 degree bound terminates and keeps it (Shewchuk,
    # Delaunay refinement algorithms for triangular mesh generation, Comput. Geom. 2002).
    mesh = triangulate(mixed_problem())
    assert lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)}}).mesh.min_angle \
        == 28.0
    assert quality(mesh)["min_angle_deg"] >= 28.0


def test_tiny_area_not_misread_as_exponent():
    # A max area of 3e-4 written '3e-04' in the switch string would be read as area 3
    # (a handful of triangles). A triangulation of area A with triangles of area at most
    # a has at least A / a triangles (common practice, no source).
    problem = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)},
                                          "mesh": {"max_area": 3e-4}})
    mesh = triangulate(problem)
    assert 1 / 3e-4 <= mesh.n_triangles <= 3 / 3e-4
    p = mesh.points[mesh.triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * np.abs(d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    assert area.max() <= 3e-4 * (1 + 1e-9)
    assert abs(area.sum() - 1.0) < 1e-12


def test_refinement_halves_h_on_straight_edges():
    problem = lapsolve.problem_from_dict({
        "outer": {"polygon": rectangle(3, 1)},
        "regions": [{"name": "mid", "polygon": rectangle(1, 1, x0=1), "coefficient": 2}],
        "mesh": {"max_size": 0.3}})
    mesh = triangulate(problem)
    # Splitting every triangle at its edge midpoints halves every edge (common practice,
    # no source).
    hs = [mesh.refined(level).h() for level in range(3)]
    assert hs[0] / hs[1] == pytest.approx(2.0, rel=1e-12)
    assert hs[1] / hs[2] == pytest.approx(2.0, rel=1e-12)
    fine = mesh.refined(2)
    assert fine.level == 2 and fine.n_triangles == 16 * mesh.n_triangles
    assert quality(fine)["min_angle_deg"] == pytest.approx(quality(mesh)["min_angle_deg"],
                                                           abs=1e-9)


def test_refinement_keeps_regions_tags_and_snaps_to_circles():
    mesh = triangulate(mixed_problem())
    fine = mesh.refined(3)
    # Each level splits a triangle into four children of the same region.
    assert np.array_equal(np.bincount(fine.regions), 64 * np.bincount(mesh.regions))
    centroid = fine.points[fine.triangles].mean(axis=1)
    in_ring = np.hypot(centroid[:, 0] + 1.0, centroid[:, 1] + 1.0) < 0.6
    assert np.array_equal(in_ring, fine.regions == 1)
    assert np.array_equal(centroid[:, 0] > 1.5, fine.regions == 2)
    assert fine.tags == mesh.tags
    assert np.array_equal(np.bincount(fine.segment_tags, minlength=len(fine.tags)),
                          8 * np.bincount(mesh.segment_tags, minlength=len(mesh.tags)))
    for k, tag in enumerate(fine.tags):
        nodes = np.unique(fine.segments[fine.segment_tags == k])
        if tag.circle is not None:
            cx, cy, r = tag.circle
            distance = np.abs(np.hypot(fine.points[nodes, 0] - cx,
                                       fine.points[nodes, 1] - cy) - r)
            assert distance.max() < 1e-12, tag
    # Per level h shrinks by nearly 2; snapping moves new nodes by a sagitta only.
    hs = np.array([mesh.refined(level).h() for level in range(3)])
    assert np.all((hs[:-1] / hs[1:] > 1.8) & (hs[:-1] / hs[1:] < 2.2))


def test_every_boundary_edge_is_tagged():
    # Regions touching the outer boundary and a hole (the support block of the example
    # touches the duct and the busbar along part of their edges).
    problem = lapsolve.load_problem(EXAMPLES / "busbar_duct.toml")
    mesh = triangulate(problem)
    tag_of = {(min(a, b), max(a, b)): mesh.tags[k]
              for (a, b), k in zip(mesh.segments, mesh.segment_tags)}
    edges = boundary_edges(mesh)
    assert all(edge in tag_of and tag_of[edge].boundary for edge in edges)
    loops = Counter(tag_of[edge].loop for edge in edges)
    assert set(loops) == {"outer", "busbar", "rod"}


def test_region_with_edges_on_the_outer_boundary():
    # The two-layer capacitor: the region's bottom and sides lie on the outer polygon.
    problem = lapsolve.problem_from_dict({
        "outer": {"polygon": [[0, 0], [2, 0], [2, 0.3], [2, 1], [0, 1], [0, 0.3]]},
        "regions": [{"name": "lower", "polygon": rectangle(2, 0.3), "coefficient": 4}],
        "mesh": {"max_size": 0.2}})
    mesh = triangulate(problem)
    centroid = mesh.points[mesh.triangles].mean(axis=1)
    assert np.array_equal(centroid[:, 1] < 0.3, mesh.regions == 1)
    interface = [mesh.tags[k] for k in mesh.segment_tags if not mesh.tags[k].boundary]
    assert {(t.loop, t.edge) for t in interface} == {("lower", 2)}


def test_grading_refines_near_the_point():
    data = {"outer": {"polygon": rectangle(1, 1)},
            "mesh": {"max_size": 0.2, "grading": [{"point": [0, 0], "size": 0.01,
                                                   "growth": 0.3}]}}
    mesh = triangulate(lapsolve.problem_from_dict(data))
    p = mesh.points[mesh.triangles]
    edge = np.linalg.norm(p - np.roll(p, 1, axis=1), axis=2).max(axis=1)
    dist = np.linalg.norm(p.mean(axis=1), axis=1)
    # Graded size at distance d is min(max_size, size + growth d); the longest edge of a
    # triangle of that area with angles >= 28 degrees may exceed the equilateral side
    # (common practice, no source): allow a factor 2 (measured 1.29).
    target = np.minimum(0.2, 0.01 + 0.3 * dist)
    assert np.all(edge <= 2.0 * target)
    assert edge[dist < 0.03].max() < 0.04
    ungraded = triangulate(lapsolve.problem_from_dict({**data, "mesh": {"max_size": 0.2}}))
    assert mesh.n_triangles > 2 * ungraded.n_triangles
    assert quality(mesh)["min_angle_deg"] >= 28.0


def test_circle_boundary_nodes_lie_on_circle():
    mesh = triangulate(lapsolve.problem_from_dict(coax(max_size=0.3)))
    r = np.hypot(mesh.points[:, 0], mesh.points[:, 1])
    on = np.unique(mesh.segments)
    assert np.all(np.minimum(abs(r[on] - 1.0), abs(r[on] - 2.0)) < 1e-12)


def lattice_mesh(n=4, side=1.0):
    """Equilateral triangles on a triangular lattice, rows offset by half a side."""
    height = side * math.sqrt(3) / 2
    pts, index = [], {}
    for j in range(n + 1):
        for i in range(n + 1):
            index[i, j] = len(pts)
            pts.append([(i + 0.5 * j) * side, j * height])
    tris = []
    for j in range(n):
        for i in range(n):
            tris.append([index[i, j], index[i + 1, j], index[i, j + 1]])
            tris.append([index[i + 1, j], index[i + 1, j + 1], index[i, j + 1]])
    return Mesh(np.array(pts), np.array(tris), np.zeros(len(tris), int),
                np.zeros((0, 2), int), np.zeros(0, int), (EdgeTag("outer", 0, True),))


def test_quality_of_equilateral_lattice():
    # Equilateral triangle: all angles 60 degrees and circumradius = 2 inradius
    # (Coxeter, Introduction to Geometry, 2nd ed. 1969), so the ratio is 1.
    q = quality(lattice_mesh(4, 0.5))
    assert q["elements"] == 32 and q["vertices"] == 25
    assert q["min_angle_deg"] == pytest.approx(60.0, abs=1e-9)
    assert q["max_angle_deg"] == pytest.approx(60.0, abs=1e-9)
    assert q["worst_aspect_ratio"] == pytest.approx(1.0, abs=1e-9)
    assert q["h_max"] == pytest.approx(0.5, rel=1e-12)
    assert q["h_min"] == pytest.approx(0.5, rel=1e-12)


def test_quality_of_right_and_equilateral_pair():
    # A right isosceles triangle with unit legs (angles 45, 45, 90; R = c/2 and
    # r = (a + b - c)/2, so R/(2r) = (sqrt 2/2)/(2 - sqrt 2)) next to an equilateral
    # triangle on its hypotenuse (Coxeter, Introduction to Geometry, 2nd ed. 1969).
    apex = 0.5 + math.sqrt(3) / 2
    mesh = Mesh(np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [apex, apex]]),
                np.array([[0, 1, 2], [1, 3, 2]]), np.zeros(2, int), np.zeros((0, 2), int),
                np.zeros(0, int), (EdgeTag("outer", 0, True),))
    q = quality(mesh)
    assert q["elements"] == 2 and q["vertices"] == 4
    assert q["min_angle_deg"] == pytest.approx(45.0, abs=1e-9)
    assert q["max_angle_deg"] == pytest.approx(90.0, abs=1e-9)
    assert q["worst_aspect_ratio"] == pytest.approx((math.sqrt(2) / 2) / (2 - math.sqrt(2)),
                                                    rel=1e-12)
    assert q["h_max"] == pytest.approx(math.sqrt(2), rel=1e-12)
    assert q["h_min"] == pytest.approx(1.0, rel=1e-12)
