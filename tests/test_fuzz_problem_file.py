"""Fuzzing the problem-file loader: random structures, random TOML, random bytes, full solves.

Problems are drawn as mostly valid dictionaries (polygons, circles, holes,
regions, boundary parts, mesh controls), then one to three fields are replaced by
hostile values (wrong types, NaN, inf, huge and tiny numbers, empty arrays,
nested junk). They go to :func:`lapsolve.problem_from_dict` directly, through a
tiny TOML writer to :func:`lapsolve.load_problem`, and through ``lapsolve solve``.
Random bytes and damaged TOML texts go to ``load_problem`` too. Every outcome is
a problem, a solution, or a typed :class:`~lapsolve.errors.LapsolveError`
(one line, exit code 2 on the command line); anything else is a bug.
"""

import copy
import json
import math
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_fuzz_polygons import FUZZ, outcome, run_cli_solve, star_polygons

import lapsolve
from lapsolve.cli import main
from lapsolve.errors import InputError, ResourceLimitError

NAMES = ["inner", "ring", "outer", "", " ", "h\u00e9", "x" * 40]
FORMULAS = ["x", "x + y", "x**2 - y**2", "1/x", "log(x)", "sqrt(x - 10)", "sin(pi*x)*y",
            "exp(1000*x)", "atan2(y, x)", "2.5", "", "foo(x)", "x**1001", "1e999",
            "__import__('os')", "().__class__", "x.real", "lambda: 1", "\u0445**2"]
HOSTILE_NUMBERS = [0, -1, 1e-300, 1e300, 5e-324, 1e-12, 1e12, 1e13, 2**63, -2**63, 10**30,
                   float("nan"), float("inf"), -float("inf"), True, False]

hostile_values = st.one_of(
    st.sampled_from(HOSTILE_NUMBERS),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(-10**20, 10**20),
    st.text(max_size=12),
    st.sampled_from(FORMULAS),
    st.just([]), st.just({}), st.just([[]]), st.just([[0, 0]]), st.just([0, 0, 0]),
    st.just({"a": 1}), st.just([{"b": [1, "2"]}]),
    st.lists(st.lists(st.floats(-5, 5), min_size=2, max_size=2), max_size=5),
    st.recursive(st.integers(0, 3), lambda inner: st.lists(inner, max_size=2), max_leaves=6),
)


def hostile(draw):
    """A fresh hostile value (``st.just`` shares one object between draws)."""
    return copy.deepcopy(draw(hostile_values))


def _scaled(vertices, scale, shift):
    return [[x * scale + shift[0], y * scale + shift[1]] for x, y in vertices]


@st.composite
def loops(draw, scale, shift):
    """A polygon or circle table around ``shift``, between 0.5 and 1 ``scale`` in radius."""
    if draw(st.booleans()):
        v = draw(star_polygons(min_size=5, max_size=8, radii=(0.75, 1.0)))
        return {"polygon": _scaled(v, scale, shift)}
    return {"circle": {"center": list(shift), "radius": scale * draw(st.floats(0.5, 1.0))}}


@st.composite
def boundary_parts(draw, loop_names, clean):
    """Up to three parts; a clean draw has one Dirichlet part on the whole outer loop."""
    parts = {}
    if clean:
        parts["ground"] = {"type": "dirichlet", "value": draw(st.floats(-10, 10))}
    kinds = ["dirichlet", "neumann", "robin", "insulated"] + ([] if clean else ["fixed"])
    extra = (1 if len(loop_names) > 1 else 0) if clean else 3
    for i in range(draw(st.integers(0, extra))):
        spec = {"type": draw(st.sampled_from(kinds))}
        if clean or draw(st.integers(0, 3)):
            spec["loop"] = draw(st.sampled_from(loop_names[1:] if clean else loop_names))
        if not clean and draw(st.booleans()):
            spec["edges"] = draw(st.lists(st.integers(-1, 9), min_size=1, max_size=3,
                                          unique=True))
        value = draw(st.one_of(st.floats(-10, 10), st.sampled_from(FORMULAS[:10])))
        if spec["type"] == "robin":
            spec.update(h=draw(st.floats(0.1, 10)), u_ref=value)
        else:
            spec["value"] = value
        parts[f"part{i}"] = spec
    return parts


@st.composite
def problem_dicts(draw):
    """A problem table, valid when drawn 'clean'; ``mutated_problems`` spoils some of it."""
    clean = draw(st.booleans())
    scale = draw(st.sampled_from([1.0, 1.0, 1.0, 1e-6, 1e4]))
    shift = draw(st.sampled_from([(0.0, 0.0), (0.0, 0.0), (3.0, -2.0), (1e6, 1e6)]))
    shift = (shift[0] * scale, shift[1] * scale)
    outer = draw(loops(2 * scale, shift))  # radius 1 to 2 scale
    data = {"outer": outer, "coefficient": draw(st.floats(0.1, 10))}
    names = ["outer"]
    if draw(st.booleans()):
        data["holes"] = [{"name": "inner", **draw(loops(0.4 * scale, shift))}]
        names.append("inner")
    if draw(st.integers(0, 3)) == 0:
        ring = (shift[0] + 0.7 * scale, shift[1])
        data["regions"] = [{"name": "ring", "coefficient": draw(st.floats(0.1, 10)),
                            **draw(loops(0.2 * scale, ring))}]
    data["boundary"] = draw(boundary_parts(names + ([] if clean else ["nowhere"]), clean))
    mesh = {"max_size": scale * draw(st.floats(0.3, 1.5))}
    if draw(st.integers(0, 3)) == 0:
        mesh["min_angle"] = draw(st.floats(0, 34))
    if draw(st.integers(0, 4)) == 0:
        mesh["grading"] = [{"point": list(shift), "size": scale * draw(st.floats(0.05, 0.5))}]
    data["mesh"] = mesh
    physics = ["generic", "thermal", "electrostatic"] + ([] if clean else ["magnetic"])
    for key, choices in (("physics", physics), ("source", FORMULAS[:10]),
                         ("title", ["t", "", "\u00e9\u00e8"])):
        if draw(st.integers(0, 3)) == 0:
            data[key] = draw(st.sampled_from(choices))
    return data


def _paths(node, prefix=()):
    if prefix:
        yield prefix
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _paths(value, prefix + (key,))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _paths(value, prefix + (i,))


@st.composite
def mutated_problems(draw, max_mutations=3):
    """A drawn problem with 0 to ``max_mutations`` fields replaced by hostile values."""
    data = draw(problem_dicts())
    for _ in range(draw(st.integers(0, max_mutations))):
        paths = list(_paths(data))
        path = draw(st.sampled_from(paths))
        node = data
        for key in path[:-1]:
            node = node[key]
        action = draw(st.sampled_from(["replace", "replace", "delete", "add"]))
        if action == "delete" and isinstance(node, dict):
            del node[path[-1]]
        elif action == "add" and isinstance(node, dict):
            node[draw(st.sampled_from(["extra", "name", "edges", "polygon", "circle",
                                       "value", 1, "max_area"]))] = hostile(draw)
        else:
            node[path[-1]] = hostile(draw)
    return data


# --------------------------------------------------------------------------- TOML writer
def toml_value(value):
    """A TOML value (inline tables for dictionaries); None values are left out."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)  # JSON's escapes are TOML basic-string escapes
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{json.dumps(str(k))} = {toml_value(v)}"
                               for k, v in value.items() if v is not None) + "}"
    raise TypeError(type(value).__name__)


def to_toml(data):
    return "".join(f"{json.dumps(str(k))} = {toml_value(v)}\n" for k, v in data.items()
                   if v is not None)


# --------------------------------------------------------------------------- targets
def check_problem(problem):
    """Invariants of an accepted problem."""
    assert problem.outer.area() > 0
    assert all(h.area() > 0 for h in problem.holes)
    k = problem.coefficients()
    assert np.all(np.isfinite(k)) and np.all(k > 0)
    problem.part_of_edge()
    assert problem.mesh.max_size > 0 and math.isfinite(problem.mesh.max_size)


def dict_target(data):
    return outcome(lambda d: check_problem(lapsolve.problem_from_dict(d)), data)


def load_text(payload):
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "problem.toml"
        if isinstance(payload, str):
            path.write_text(payload, encoding="utf-8", errors="surrogatepass")
        else:
            path.write_bytes(payload)
        return outcome(lambda p: check_problem(lapsolve.load_problem(p)), path)


def toml_target(data):
    return load_text(to_toml(data))


VALID_TEXT = to_toml({
    "title": "fuzz", "coefficient": 2.0,
    "outer": {"polygon": [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]]},
    "holes": [{"name": "h", "circle": {"center": [0.5, 0.5], "radius": 0.1}}],
    "boundary": {"a": {"edges": [0], "type": "dirichlet", "value": "x*y"},
                 "b": {"loop": "h", "type": "robin", "h": 2.0, "u_ref": 1.0}},
    "mesh": {"max_size": 0.3}})


@st.composite
def damaged_texts(draw):
    """Random bytes, random text, or the valid text with bytes inserted, removed, swapped."""
    kind = draw(st.sampled_from(["bytes", "text", "damaged", "damaged", "nested"]))
    if kind == "bytes":
        return draw(st.binary(max_size=300))
    if kind == "text":
        return draw(st.text(max_size=300))
    if kind == "nested":
        depth = draw(st.integers(1, 5000))
        return f"a = {'[' * depth}{']' * depth}\n"
    data = bytearray(VALID_TEXT.encode())
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(data)))
        op = draw(st.sampled_from(["insert", "delete", "replace"]))
        byte = draw(st.sampled_from(b"[]{}=\",.#\n\\x0123456789e-+ \x00\xff"))
        if op == "insert":
            data.insert(i, byte)
        elif i < len(data):
            if op == "delete":
                del data[i]
            else:
                data[i] = byte
    return bytes(data)


def bytes_target(payload):
    return load_text(payload)


def small_problem(data):
    """The problem (or "refused") when its mesh stays small (keeps the solve target
    fast), else None."""
    try:
        problem = lapsolve.problem_from_dict(copy.deepcopy(data))
    except lapsolve.LapsolveError:
        return "refused"  # refused before meshing anyway
    lo, hi = problem.outer.bbox()
    extent = float(np.max(np.asarray(hi) - np.asarray(lo)))
    domain = problem.outer.area() - sum(h.area() for h in problem.holes)
    fine = min([problem.mesh.max_size] + [g.size for g in problem.mesh.grading])
    if domain / problem.mesh.max_area < 3000 and fine > extent / 60:
        return problem
    return None


def solve_target(data):
    """``lapsolve solve`` on the written file: exit 0, or one error line and exit 2."""
    problem = small_problem(data)
    if problem is None:
        return "skipped (large mesh)"
    k_max = 1.0 if problem == "refused" else float(np.max(problem.coefficients()))
    return run_cli_solve(to_toml(data), balanced="source" not in data, k_max=k_max)


FUZZ_TARGETS = {
    "problem-dict": (mutated_problems(), dict_target),
    "problem-toml": (mutated_problems(), toml_target),
    "problem-bytes": (damaged_texts(), bytes_target),
    "problem-solve": (mutated_problems(max_mutations=1), solve_target),
}
TYPED = {"ok", "InputError", "GeometryError", "FormulaError", "ResourceLimitError"}


# --------------------------------------------------------------------------- tests
@FUZZ
@given(mutated_problems())
def test_random_tables_give_a_problem_or_a_typed_error(data):
    assert dict_target(data) in TYPED


@FUZZ
@given(mutated_problems())
def test_random_toml_files_give_a_problem_or_a_typed_error(data):
    assert toml_target(data) in TYPED


@FUZZ
@given(damaged_texts())
def test_random_bytes_give_a_problem_or_a_typed_error(payload):
    assert bytes_target(payload) in TYPED


@settings(FUZZ, max_examples=150)
@given(mutated_problems(max_mutations=1))
def test_random_problems_solve_or_exit_2_with_one_line(data):
    assert solve_target(data) in ("ok", "exit 2", "skipped (large mesh)")


def test_toml_writer_round_trips():
    import tomllib

    data = {"a": [1, 2.5, "x\"\n\u00e9"], "b": {"c": True, "d": [[0.0, -1e-300]]}}
    assert tomllib.loads(to_toml(data)) == data
    assert math.isnan(tomllib.loads(to_toml({"n": float("nan")}))["n"])


SAMPLE = {
    "wrong type": ({"outer": {"polygon": "square"}}, "outer.polygon"),
    "nan radius": ({"outer": {"circle": {"center": [0, 0], "radius": float("nan")}}},
                   "outer.circle.radius"),
    "empty polygon": ({"outer": {"polygon": []}}, "outer.polygon"),
    "huge integer": ({"outer": {"circle": {"center": [0, 0], "radius": 2**63 - 1}}},
                     "outer.circle"),
    "tiny size": ({"outer": {"polygon": [[0, 0], [1, 0], [0, 1]]},
                   "mesh": {"max_size": 1e-300}}, "mesh.max_size"),
    "nested junk": ({"outer": {"polygon": [[[0, 0]], [1, 0], [0, 1]]}}, "outer.polygon"),
    "unknown key": ({"outer": {"polygon": [[0, 0], [1, 0], [0, 1]]}, "holes": [{"1": 2}]},
                    "holes[0]"),
}


@pytest.mark.parametrize("data, field", SAMPLE.values(), ids=SAMPLE.keys())
def test_cli_shows_one_line_and_exits_2(tmp_path, capsys, data, field):
    path = tmp_path / "p.toml"
    path.write_text(to_toml(data), encoding="utf-8")
    code = main(["solve", str(path), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("lapsolve: error: "), err
    assert "Traceback" not in err and str(path) in err
    if field:
        assert f": {field}" in err, err
    assert not (tmp_path / "out").exists()


def test_oversized_file_is_refused_before_parsing(tmp_path):
    from lapsolve.problem_file import MAX_FILE_BYTES

    path = tmp_path / "big.toml"
    with open(path, "wb") as fh:
        fh.write(b"# " + b"x" * (MAX_FILE_BYTES + 10) + b"\n")
    with pytest.raises(ResourceLimitError, match="larger than"):
        lapsolve.load_problem(path)


def test_deeply_nested_toml_is_an_input_error(tmp_path):
    path = tmp_path / "deep.toml"
    path.write_text("a = " + "[" * 100_000 + "]" * 100_000 + "\n")
    with pytest.raises(InputError, match="nested too deeply"):
        lapsolve.load_problem(path)


def test_holes_far_smaller_than_the_domain_are_refused():
    data = {"outer": {"polygon": [[-500, -500], [500, -500], [500, 500], [-500, 500]]},
            "holes": [{"name": "dust", "circle": {"center": [0, 0], "radius": 1e-6}}]}
    with pytest.raises(lapsolve.LapsolveError, match="'dust' is 2e-06 across"):
        lapsolve.problem_from_dict(data)


def test_exit_codes_follow_the_readme(tmp_path, capsys, monkeypatch):
    # README: 0 ok, 2 bad input, 130 interrupted, 3 internal error (1 is a failed
    # verification, tested with the verification commands).
    path = tmp_path / "p.toml"
    path.write_text(VALID_TEXT, encoding="utf-8")
    assert main(["solve", str(path), "--order", "1", "--no-plot"]) == 0
    assert main(["solve", str(path), "--order", "7"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("lapsolve: error: lapsolve solve: ")

    def interrupt(*args, **kwargs):
        raise KeyboardInterrupt

    def bug(*args, **kwargs):
        raise RuntimeError("something\nbroke")

    monkeypatch.setattr(lapsolve, "load_problem", interrupt)
    assert main(["solve", str(path)]) == 130
    assert capsys.readouterr().err == "lapsolve: interrupted\n"
    monkeypatch.setattr(lapsolve, "load_problem", bug)
    assert main(["solve", str(path)]) == 3
    err = capsys.readouterr().err
    assert err == ("lapsolve: internal error: RuntimeError: something broke (rerun with "
                   "--debug for details)\n")
    with pytest.raises(RuntimeError):
        main(["--debug", "solve", str(path)])


def test_electrodes_a_denormal_apart_solve():
    # found by benchmarks/fuzz_long.py: two_level_capacity divided by dv**2, which
    # underflows to 0 when the electrodes are less than about 1e-154 apart (exit 3)
    data = {"outer": {"polygon": [[0, 0], [1, 0], [1, 1], [0, 1]]},
            "boundary": {"low": {"edges": [0], "type": "dirichlet", "value": 0.0},
                         "high": {"edges": [2], "type": "dirichlet", "value": 1e-200}},
            "mesh": {"max_size": 0.5}}
    solution = lapsolve.solve(lapsolve.problem_from_dict(data), order=1)
    # the field is 1e-200 * y (a linear function is exact for P1); either no capacity
    # is reported or a finite one (the conductance of the unit square is 1)
    cap = solution.capacity
    assert cap is None or cap["from_flux"] == pytest.approx(1.0, rel=1e-9)
