"""Documented resource limits: refused before the work, with a clear message, exit 2.

Limits (``docs/robustness.md``): ``lapsolve.mesh.MAX_TRIANGLES`` triangles per
mesh, the memory estimate of ``lapsolve.resources`` against the memory
available, ``lapsolve.geometry.MAX_POLYGON_VERTICES`` vertices per polygon,
``lapsolve.meshing.MAX_CIRCLE_SEGMENTS`` segments per circle,
``lapsolve.problem_file.MAX_FILE_BYTES`` per problem file, and the coordinate
range of ``lapsolve.geometry``.
"""

import time

import numpy as np
import pytest
from helpers import SQUARE_TOML, rectangle, write

import lapsolve
from lapsolve import resources
from lapsolve.cli import main
from lapsolve.errors import ResourceLimitError
from lapsolve.geometry import MAX_COORDINATE, MAX_POLYGON_VERTICES
from lapsolve.mesh import MAX_TRIANGLES, check_size
from lapsolve.meshing import MAX_CIRCLE_SEGMENTS, triangulate


def run(capsys, args):
    code = main(args)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def one_line(code, err):
    assert code == 2, err
    assert err.count("\n") == 1 and err.startswith("lapsolve: error: "), err
    assert "Traceback" not in err


def forbid(monkeypatch, module, name):
    """Make ``module.name`` fail the test if called: proof that no work started."""
    def called(*args, **kwargs):
        pytest.fail(f"{name} ran although the request was refused before any work")
    monkeypatch.setattr(module, name, called)


def test_refinement_beyond_the_cap_is_refused_before_meshing(tmp_path, capsys, monkeypatch):
    import lapsolve.meshing

    text = SQUARE_TOML.replace("max_size = 0.25", "max_size = 0.05")
    path = write(tmp_path, "p.toml", text)  # at least 923 triangles before refinement
    forbid(monkeypatch, lapsolve.meshing, "triangulate")
    forbid(monkeypatch, lapsolve, "solve")
    start = time.process_time()
    code, out, err = run(capsys, ["solve", path, "--refine", "8", "--out",
                                  str(tmp_path / "out")])
    assert time.process_time() - start < 0.5
    one_line(code, err)
    # A triangulation of area A with triangles of area at most a has at least A / a of
    # them (common practice, no source); each refinement multiplies by 4.
    at_least = int(np.floor(1.0 / (np.sqrt(3) / 4 * 0.05**2))) * 4**8
    assert f"--refine 8 of a level-0 mesh of at least {at_least // 4**8:,} triangles" in err
    assert f"would have at least {at_least:,} triangles" in err
    assert f"the limit is {MAX_TRIANGLES:,}" in err
    assert not (tmp_path / "out").exists()


def test_refinement_is_checked_on_the_real_mesh_before_refining(tmp_path, capsys,
                                                                 monkeypatch):
    from lapsolve import mesh as mesh_module

    # The lower bound A / a of the level-0 mesh passes a cap set between it and the
    # real count (times 4^4); the real mesh is then refused before any refinement.
    text = SQUARE_TOML.replace("max_size = 0.25", "max_size = 0.02")
    path = write(tmp_path, "p.toml", text)
    lower = int(np.floor(1.0 / (np.sqrt(3) / 4 * 0.02**2)))
    real = triangulate(lapsolve.load_problem(path)).n_triangles
    assert lower < real
    monkeypatch.setattr(mesh_module, "MAX_TRIANGLES", (lower + real) // 2 * 4**4)
    refined = []
    monkeypatch.setattr(mesh_module, "_refine_once",
                        lambda m: refined.append(1) or pytest.fail("refined"))
    code, out, err = run(capsys, ["solve", path, "--refine", "4", "--order", "1"])
    one_line(code, err)
    assert f"--refine 4 of the level-0 mesh of {real:,} triangles" in err
    assert f"would have {real * 4**4:,} triangles" in err
    assert refined == []


def test_mesh_beyond_the_cap_names_the_file_and_field(tmp_path, capsys):
    text = SQUARE_TOML.replace("max_size = 0.25", "max_size = 1e-4")
    path = write(tmp_path, "p.toml", text)
    start = time.process_time()
    code, out, err = run(capsys, ["solve", path])
    assert time.process_time() - start < 0.5
    one_line(code, err)
    # about 2.5 A / a triangles for a quality mesh of maximum triangle area a
    estimate = int(2.5 / (np.sqrt(3) / 4 * 1e-4**2))
    assert f"{path}: mesh.max_size: the requested mesh would have {estimate:,} triangles" \
        in err


def test_memory_beyond_what_is_available_is_refused(tmp_path, capsys, monkeypatch):
    text = SQUARE_TOML.replace("max_size = 0.25", "max_size = 0.05")
    path = write(tmp_path, "p.toml", text)
    monkeypatch.setattr(resources, "available_memory", lambda: 200 * 2**20)
    code, out, err = run(capsys, ["solve", path, "--refine", "4", "--order", "3"])
    one_line(code, err)
    assert "a P3 solve on" in err and "needs about" in err
    assert "but only 0.2 GiB is available" in err
    # the estimate is base + triangles * bytes per triangle (measured, docs/robustness.md)
    mesh = triangulate(lapsolve.load_problem(path))
    need = resources.solve_bytes(mesh.n_triangles * 4**4, 3)
    assert f"needs about {need / 2**30:.1f} GiB" in err


def test_refinement_memory_is_checked_before_the_first_split(monkeypatch):
    mesh = triangulate(lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1, 1)},
                                                   "mesh": {"max_size": 0.2}}))
    monkeypatch.setattr(resources, "available_memory", lambda: 10 * 2**20)
    with pytest.raises(ResourceLimitError, match="needs about .* of memory"):
        mesh.refined(5)
    monkeypatch.setattr(resources, "available_memory", lambda: None)  # unknown: no check
    assert mesh.refined(1).n_triangles == 4 * mesh.n_triangles


def test_available_memory_reads_the_kernel_figures():
    free = resources.available_memory()
    with open("/proc/meminfo") as fh:
        total = next(int(line.split()[1]) * 1024 for line in fh
                     if line.startswith("MemTotal:"))
    assert free is not None and 0 < free <= total


def test_estimates_grow_with_order_and_size():
    assert resources.solve_bytes(10**6, 1) < resources.solve_bytes(10**6, 2) \
        < resources.solve_bytes(10**6, 3)
    assert resources.solve_bytes(2 * 10**6, 2) - resources.BASE_BYTES == pytest.approx(
        2 * (resources.solve_bytes(10**6, 2) - resources.BASE_BYTES))


@pytest.mark.parametrize("value, words", [
    (MAX_TRIANGLES + 1, f"would have {MAX_TRIANGLES + 1:,} triangles"),
    (float("inf"), "more than 10\\^18"),
    (float("nan"), "an unbounded number of"),
])
def test_check_size_handles_estimates(value, words):
    with pytest.raises(ResourceLimitError, match=words):
        check_size(value, "the mesh")
    assert check_size(MAX_TRIANGLES, "the mesh") == MAX_TRIANGLES


def test_polygon_vertex_limit(tmp_path, capsys):
    t = np.linspace(0, 2 * np.pi, MAX_POLYGON_VERTICES + 1, endpoint=False)
    ring = ", ".join(f"[{np.cos(a):.9f}, {np.sin(a):.9f}]" for a in t)
    path = write(tmp_path, "p.toml", f"[outer]\npolygon = [{ring}]\n")
    code, out, err = run(capsys, ["solve", path])
    one_line(code, err)
    assert f"outer.polygon: polygon has {MAX_POLYGON_VERTICES + 1} vertices; the limit " \
           f"is {MAX_POLYGON_VERTICES}" in err


def test_circle_segment_limit():
    # grading down to 1e-7 at a point of the circle: 2 pi / 1e-7 segments
    data = {"outer": {"polygon": rectangle(4, 4, -2, -2)},
            "holes": [{"name": "wire", "circle": {"center": [0, 0], "radius": 1.0}}],
            "mesh": {"max_size": 0.5, "grading": [{"point": [1.0, 0.0], "size": 1e-7}]}}
    start = time.process_time()
    with pytest.raises(ResourceLimitError, match=f"circle 'wire' would be split into "
                                                 f"62,831,853 boundary segments; the limit "
                                                 f"is {MAX_CIRCLE_SEGMENTS:,}"):
        triangulate(lapsolve.problem_from_dict(data))
    assert time.process_time() - start < 0.5


def test_graded_mesh_beyond_the_cap_is_refused():
    data = {"outer": {"polygon": rectangle(1, 1)},
            "mesh": {"max_size": 0.3, "grading": [{"point": [0.5, 0.5], "size": 1e-6,
                                                   "growth": 1e-6}]}}
    with pytest.raises(ResourceLimitError, match="the graded mesh would have"):
        triangulate(lapsolve.problem_from_dict(data))


def test_coordinates_beyond_the_range_are_refused():
    big = 10 * MAX_COORDINATE
    with pytest.raises(lapsolve.LapsolveError, match="limited to 1e\\+12"):
        lapsolve.problem_from_dict({"outer": {"polygon": [[0, 0], [big, 0], [0, big]]}})
    with pytest.raises(lapsolve.LapsolveError, match="limited to 1e\\+12"):
        lapsolve.problem_from_dict({"outer": {"circle": {"center": [0, 0], "radius": big}}})


def test_tiny_but_valid_geometry_meshes(tmp_path):
    # A 1e-7 square with 1e-8 elements: the area switch of the mesher keeps 12
    # significant digits (a fixed number of decimals made it 'a0', which it refuses).
    problem = lapsolve.problem_from_dict({"outer": {"polygon": rectangle(1e-7, 1e-7)},
                                          "mesh": {"max_size": 1e-8}})
    mesh = triangulate(problem)
    p = mesh.points[mesh.triangles]
    d1, d2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    area = 0.5 * (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0])
    # covers the square exactly; no triangle above the requested area
    assert area.sum() == pytest.approx(1e-14, rel=1e-10)
    assert area.max() <= np.sqrt(3) / 4 * 1e-16 * (1 + 1e-9)
