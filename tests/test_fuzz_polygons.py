"""Fuzzing polygons: vertex soups through ``make_polygon`` and through ``lapsolve solve``.

Every outcome is either an accepted polygon that meshes and solves, or a typed
error (:class:`~lapsolve.errors.LapsolveError`) shown by the command line as one
line with exit code 2. Anything else (a traceback) is a bug.

The strategies and targets are shared with ``benchmarks/fuzz_long.py`` through
:data:`FUZZ_TARGETS`; the test suite runs the bounded profile ``lapsolve-fuzz``.
"""

import contextlib
import io
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import lapsolve
from lapsolve.cli import main
from lapsolve.errors import GeometryError, LapsolveError, ResourceLimitError
from lapsolve.geometry import MAX_POLYGON_VERTICES, make_polygon, polygon_area
from lapsolve.meshing import triangulate

# Bounded profile of the test suite (derandomized: CI runs the same examples every
# time; the long, random exploration is benchmarks/fuzz_long.py's profile).
settings.register_profile("lapsolve-fuzz", max_examples=300, deadline=None, database=None,
                          derandomize=True, suppress_health_check=list(HealthCheck),
                          print_blob=True)
settings.register_profile("lapsolve-fuzz-long", max_examples=10_000, deadline=None,
                          database=None, suppress_health_check=list(HealthCheck))
FUZZ = settings.get_profile("lapsolve-fuzz")


def outcome(function, *args):
    """'ok', or the class name of the typed error; any other exception propagates."""
    try:
        function(*args)
    except LapsolveError as exc:
        assert "\n" not in str(exc), str(exc)
        return type(exc).__name__
    return "ok"


# --------------------------------------------------------------------------- strategies
# Small integer grids make collinear runs, repeated points and crossings common.
grid_coordinate = st.integers(-3, 3).map(float)
wild_coordinate = st.one_of(
    st.floats(-10, 10, allow_nan=False),
    st.sampled_from([0.0, 1.0, 1e-13, 1 + 1e-13, 1e-300, -1e-300, 1e15, -1e15, 5e-324,
                     1e300, float("nan"), float("inf"), -float("inf")]))


@st.composite
def star_polygons(draw, min_size=3, max_size=12, radii=(0.2, 3.0)):
    """A simple polygon: vertices at increasing angles around the origin."""
    n = draw(st.integers(min_size, max_size))
    angles = np.sort(draw(st.lists(st.floats(0, 2 * math.pi, exclude_max=True),
                                   min_size=n, max_size=n, unique=True)))
    radii = draw(st.lists(st.floats(*radii), min_size=n, max_size=n))
    gaps = np.diff(np.append(angles, angles[0] + 2 * math.pi))
    if np.min(gaps) < 1e-3 or np.max(gaps) > 0.9 * math.pi:
        angles = 2 * math.pi * np.arange(n) / n  # keep the origin strictly inside
    v = np.column_stack([radii * np.cos(angles), radii * np.sin(angles)])
    return v.tolist()


def _corrupt(v, kind, draw):
    v = [list(p) for p in v]
    i = draw(st.integers(0, len(v) - 1))
    if kind == "duplicate":
        v.insert(i, list(v[i]))
    elif kind == "collinear":  # a vertex in the middle of an edge: still a valid polygon
        j = (i + 1) % len(v)
        v.insert(i + 1, [(v[i][0] + v[j][0]) / 2, (v[i][1] + v[j][1]) / 2])
    elif kind == "swap":
        j = draw(st.integers(0, len(v) - 1))
        v[i], v[j] = v[j], v[i]
    elif kind == "spike":  # an edge that goes out and comes straight back
        v.insert(i + 1, [2 * v[i][0], 2 * v[i][1]])
        v.insert(i + 2, list(v[i]))
    elif kind == "reverse":
        v.reverse()
    elif kind == "close":
        v.append(list(v[0]))
    elif kind == "scale":
        s = draw(st.sampled_from([1e-300, 1e-12, 1e-6, 1e6, 1e11, 1e13, 1e300]))
        v = [[x * s, y * s] for x, y in v]
    elif kind == "offset":
        d = draw(st.sampled_from([1e3, 1e9, 1e11, 1e13, 1e100]))
        v = [[x + d, y - d] for x, y in v]
    elif kind == "wild":
        v[i][draw(st.integers(0, 1))] = draw(wild_coordinate)
    return v


CORRUPTIONS = ("duplicate", "collinear", "swap", "spike", "reverse", "close", "scale",
               "offset", "wild")


@st.composite
def vertex_soups(draw):
    """Random vertex lists: grid soups, float soups, and corrupted star polygons."""
    kind = draw(st.sampled_from(["grid", "float", "star", "star", "star"]))
    if kind == "grid":
        return draw(st.lists(st.lists(grid_coordinate, min_size=2, max_size=2), max_size=9))
    if kind == "float":
        return draw(st.lists(st.lists(wild_coordinate, min_size=2, max_size=2), max_size=9))
    v = draw(star_polygons())
    for corruption in draw(st.lists(st.sampled_from(CORRUPTIONS), max_size=2)):
        v = _corrupt(v, corruption, draw)
    return v


# --------------------------------------------------------------------------- targets
def check_polygon(vertices):
    """make_polygon accepts a valid polygon (checked) or raises a typed error."""
    loop = make_polygon("outer", vertices, "fuzz.toml", "outer.polygon")
    v = np.asarray(vertices, float)
    if len(v) > 1 and np.array_equal(v[0], v[-1]):
        v = v[:-1]
    n = len(v)
    # Stored counter-clockwise with the input's area (shoelace formula, Gauss).
    assert polygon_area(loop.vertices) > 0
    assert polygon_area(loop.vertices) == pytest.approx(abs(polygon_area(v)), rel=1e-12)
    # Edge i joins input vertices i and i+1 whatever the orientation.
    assert sorted(loop.edge_labels().tolist()) == list(range(n))
    for i in range(n):
        a, b = loop.edge_points(i)
        assert {tuple(a), tuple(b)} == {tuple(v[i]), tuple(v[(i + 1) % n])}


def polygon_target(vertices):
    return outcome(check_polygon, vertices)


def solve_polygon(vertices):
    """The full command: exit 0 with a balanced flux, or one error line and exit 2."""
    extent = 1.0
    with contextlib.suppress(TypeError, ValueError, OverflowError):
        v = np.asarray(vertices, float)
        if v.ndim == 2 and v.size and np.all(np.isfinite(v)):
            extent = float(np.max(np.ptp(v, axis=0))) or 1.0
    text = (f"[outer]\npolygon = {_toml_pairs(vertices)}\n"
            "[boundary.hot]\nedges = [0]\ntype = \"dirichlet\"\nvalue = 1.0\n"
            "[boundary.cold]\nedges = [1]\ntype = \"dirichlet\"\nvalue = 0.0\n"
            f"[mesh]\nmax_size = {_toml_float(extent / 6)}\n")
    return run_cli_solve(text)


def run_cli_solve(text, order=1, balanced=True, k_max=1.0):
    """``lapsolve solve`` on a problem text; checks the exit code and the stderr line.

    ``balanced``: the problem has no source, so the part fluxes must sum to zero;
    ``k_max`` is its largest coefficient (times the physics' scale).
    """
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "p.toml"
        path.write_text(text, encoding="utf-8")
        out_dir = Path(tmp) / "out"
        stdout, stderr = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
            code = main(["solve", str(path), "--order", str(order), "--no-plot", "--json",
                         "--out", str(out_dir)])
        err = stderr.getvalue()
        assert "Traceback" not in err, err
        if code == 0:
            assert err == "", err
            data = json.loads((out_dir / "summary.json").read_text())
            assert data == json.loads(stdout.getvalue())
            # the stream function's residual is reported, or the reason it is not
            ortho = data.get("orthogonality", {"skipped": "two-terminal bounds failed"})
            assert "skipped" in ortho or (math.isfinite(ortho["eta"]) and ortho["eta"] >= 0)
            fluxes = list(data["fluxes"].values())
            # Conservation (divergence theorem): without a source the outward fluxes of
            # the parts balance. Checked where two or more parts carry flux, to 1e-5 of
            # the largest, or round-off 1e-10 k |u| where u is nearly constant (it grows
            # with coordinates far from the origin and with under-resolved data;
            # common practice, no source).
            if balanced and sum(abs(f) > 0 for f in fluxes) >= 2:
                import meshio

                u_max = float(np.max(np.abs(meshio.read(out_dir / "solution.vtu")
                                            .point_data["u"])))
                tol = max(1e-5 * max(abs(f) for f in fluxes), 1e-10 * k_max * u_max)
                assert abs(sum(fluxes)) <= tol, data["fluxes"]
            return "ok"
        assert code == 2, (code, err)
        assert err.count("\n") == 1 and err.startswith("lapsolve: error: "), err
        assert not out_dir.exists()
        return "exit 2"


def _toml_float(x):
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(float(x))


def _toml_pairs(vertices):
    return "[" + ", ".join(f"[{_toml_float(a)}, {_toml_float(b)}]" for a, b in vertices) + "]"


FUZZ_TARGETS = {
    "polygon": (vertex_soups(), polygon_target),
    "polygon-solve": (vertex_soups(), solve_polygon),
}


# --------------------------------------------------------------------------- tests
@FUZZ
@given(vertex_soups())
def test_vertex_soups_give_a_polygon_or_a_typed_error(vertices):
    assert polygon_target(vertices) in ("ok", "GeometryError", "ResourceLimitError")


@settings(FUZZ, max_examples=150)
@given(vertex_soups())
def test_vertex_soups_solve_or_exit_2_with_one_line(vertices):
    assert solve_polygon(vertices) in ("ok", "exit 2")


@settings(FUZZ, max_examples=60)
@given(star_polygons(), st.sampled_from(["collinear", "reverse", "close", None]), st.data())
def test_simple_polygons_are_accepted_and_meshed_exactly(vertices, corruption, data):
    if corruption:
        vertices = _corrupt(vertices, corruption, data.draw)
    problem = lapsolve.problem_from_dict({"outer": {"polygon": vertices}})
    mesh = triangulate(problem)
    p = mesh.points[mesh.triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    areas = 0.5 * (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    # A conforming triangulation covers the polygon exactly (shoelace formula, Gauss).
    assert np.all(areas > 0)
    assert areas.sum() == pytest.approx(problem.outer.area(), rel=1e-10)


@pytest.mark.parametrize("vertices, words", [
    ([[0, 0], [1, 1], [1, 0], [0, 1]], "self-intersecting"),
    ([[0, 0], [1, 0], [1, 0], [0, 1]], "repeated consecutive vertices"),
    ([[0, 0], [1, 0], [2, 0]], "zero area"),
    ([[0, 0], [1, float("nan")], [0, 1]], "NaN or infinite"),
    ([[0, 0], [2, 0], [2, 2], [1, 0], [0, 2]], "vertex 3 lies on edge 0"),
    ([[0, 0], [1e13, 0], [0, 1]], "coordinates and radii are limited"),
    ([[0, 0], [1e-13, 0], [0, 1e-13]], "at least 1e-12 across"),
    ([[1e9, 1e9], [1e9 + 1e-3, 1e9], [1e9, 1e9 + 1e-3]], "distance from the origin"),
    ([[0, 0], ["1", 0], [0, 1]], "number pairs"),
    ([[0, 0], [True, 0], [0, 1]], "number pairs"),
    ([[0, 0], [10**400, 0], [0, 1]], "number pairs"),
    ([[0, 0], [1, 0, 0], [0, 1]], "number pairs"),
])
def test_refusals_name_the_defect(vertices, words):
    with pytest.raises(GeometryError, match=words):
        make_polygon("outer", vertices)


def test_vertex_limit_is_a_resource_limit_checked_quickly():
    import time

    t = np.linspace(0, 2 * np.pi, MAX_POLYGON_VERTICES, endpoint=False)
    ring = np.column_stack([np.cos(t), np.sin(t)]).tolist()
    start = time.process_time()
    assert make_polygon("outer", ring).n_edges == MAX_POLYGON_VERTICES
    # common practice, no source: the O(n^2) pair checks run in blocks of bounded memory
    assert time.process_time() - start < 10.0
    with pytest.raises(ResourceLimitError, match=f"limit is {MAX_POLYGON_VERTICES}"):
        make_polygon("outer", ring + [[2.0, 0.0]])
    start = time.process_time()
    with pytest.raises(ResourceLimitError):
        make_polygon("outer", [[0.0, 0.0]] * 10_000_000)
    assert time.process_time() - start < 0.1  # refused on its length, before converting


def test_mesher_failures_are_typed_and_its_printout_stays_off_the_terminal(capfd,
                                                                         monkeypatch):
    import triangle

    def failing(data, switches):
        os.write(1, b"Error:  Ran out of precision at (1, 2).\n")  # as printf would
        raise RuntimeError("Triangulation failed")

    monkeypatch.setattr(triangle, "triangulate", failing)
    problem = lapsolve.problem_from_dict({"outer": {"polygon": [[0, 0], [1, 0], [0, 1]]}})
    with pytest.raises(GeometryError, match="the mesher said: Error: Ran out of precision"):
        triangulate(problem)
    captured = capfd.readouterr()
    assert captured.out == "" and captured.err == ""
