"""Bad problem files: one line on stderr naming file and field, exit code 2, no output.

Each case spoils one field of a small valid problem (``helpers.SQUARE_TOML``) and
runs ``lapsolve solve`` on it through :func:`lapsolve.cli.main`.
"""

import os

import pytest
from helpers import SQUARE_TOML, write

import lapsolve
from lapsolve.cli import main
from lapsolve.errors import FormulaError, GeometryError, InputError

SQUARE = "[[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]]"


def spoil(old, new):
    assert old in SQUARE_TOML
    return SQUARE_TOML.replace(old, new, 1)


def extra(text):
    return SQUARE_TOML + "\n" + text


# (case id, file text, field named in the message, words expected in the message)
CASES = [
    ("two vertices", spoil(SQUARE, "[[0.0, 0.0], [1.0, 0.0]]"), "outer.polygon",
     "at least 3"),
    ("collinear", spoil(SQUARE, "[[0, 0], [1, 0], [2, 0]]"), "outer.polygon", "zero area"),
    ("self-intersecting", spoil(SQUARE, "[[0, 0], [1, 1], [1, 0], [0, 1]]"),
     "outer.polygon", "self-intersecting"),
    ("self-intersecting hole",
     extra('[[holes]]\nname = "h"\npolygon = [[0.2, 0.2], [0.6, 0.6], [0.6, 0.2], [0.2, 0.7]]'),
     "holes[0].polygon", "self-intersecting"),
    ("hole outside",
     extra('[[holes]]\nname = "h"\ncircle = { center = [3.0, 3.0], radius = 0.1 }'),
     "holes[0]", "inside"),
    ("hole across the boundary",
     extra('[[holes]]\nname = "h"\ncircle = { center = [1.0, 0.5], radius = 0.2 }'),
     "holes[0]", "inside"),
    ("overlapping holes",
     extra('[[holes]]\nname = "h"\ncircle = { center = [0.5, 0.5], radius = 0.1 }\n'
           '[[holes]]\nname = "g"\ncircle = { center = [0.55, 0.5], radius = 0.1 }'),
     "holes[1]", "overlaps"),
    ("region over a hole",
     extra('[[holes]]\nname = "h"\ncircle = { center = [0.5, 0.5], radius = 0.1 }\n'
           '[[regions]]\nname = "r"\npolygon = [[0.3, 0.3], [0.7, 0.3], [0.7, 0.7], '
           '[0.3, 0.7]]\ncoefficient = 2.0'),
     "regions[0]", "overlaps"),
    ("unknown loop", extra('[boundary.other]\nloop = "inner"\ntype = "insulated"'),
     "boundary.other.loop", "unknown loop"),
    ("edge out of range", spoil("edges = [1]", "edges = [4]"), "boundary.right.edges",
     "out of range"),
    ("negative edge", spoil("edges = [1]", "edges = [-1]"), "boundary.right.edges",
     "out of range"),
    ("two conditions on one edge", spoil("edges = [1]", "edges = [3]"),
     "boundary.right.edges", "already has a condition"),
    ("whole loop and an edge", extra('[boundary.all]\ntype = "insulated"'),
     "boundary.all", "already has a condition"),
    ("zero coefficient", spoil("coefficient = 1.0", "coefficient = 0"), "coefficient",
     "positive"),
    ("negative coefficient", spoil("coefficient = 1.0", "coefficient = -2.5"), "coefficient",
     "positive"),
    ("region coefficient",
     extra('[[regions]]\nname = "r"\ncircle = { center = [0.5, 0.5], radius = 0.2 }\n'
           'coefficient = -1'), "regions[0].coefficient", "positive"),
    ("robin h", extra('[boundary.film]\nedges = [0]\ntype = "robin"\nh = 0.0\nu_ref = 1.0'),
     "boundary.film.h", "positive"),
    ("radius", extra('[[holes]]\nname = "h"\ncircle = { center = [0.5, 0.5], radius = -0.1 }'),
     "holes[0].circle.radius", "positive"),
    ("mesh size", spoil("max_size = 0.25", "max_size = 0.0"), "mesh.max_size", "positive"),
    ("nan value", spoil("value = 0.0", "value = nan"), "boundary.right.value", "finite"),
    ("nan coefficient", spoil("coefficient = 1.0", "coefficient = nan"), "coefficient",
     "finite"),
    ("inf value", spoil("value = 0.0", "value = inf"), "boundary.right.value", "finite"),
    ("nan vertex", spoil("[1.0, 1.0]", "[1.0, nan]"), "outer.polygon", "NaN"),
    ("unknown function", spoil("value = 0.0", 'value = "foo(x)"'), "boundary.right.value",
     "foo"),
    ("unknown variable", spoil("value = 0.0", 'value = "x + t"'), "boundary.right.value",
     "unknown name 't'"),
    ("import", spoil("value = 0.0", "value = \"__import__('os')\""), "boundary.right.value",
     "__import__"),
    ("attribute", spoil("value = 0.0", 'value = "().__class__"'), "boundary.right.value",
     "not allowed"),
    ("source attribute", spoil("coefficient = 1.0", 'coefficient = 1.0\nsource = "x.real"'),
     "source", "not allowed"),
    ("infinite at a node", spoil("value = 1.0", 'value = "log(x)"'), "boundary.left.value",
     "inf"),
    ("unknown key", spoil("coefficient = 1.0", "coeficient = 1.0"), "coeficient",
     "unknown key"),
    ("unknown condition", spoil('type = "dirichlet"', 'type = "fixed"'),
     "boundary.left.type", "unknown condition"),
    ("unknown physics", spoil("coefficient = 1.0", 'coefficient = 1.0\nphysics = "magnetic"'),
     "physics", "unknown physics"),
    ("no outer", SQUARE_TOML.replace("[outer]\npolygon = " + SQUARE, ""), "outer", "missing"),
    ("incompatible pure neumann",
     spoil('type = "dirichlet"\nvalue = 1.0', 'type = "neumann"\nvalue = 1.0')
     .replace('type = "dirichlet"\nvalue = 0.0', 'type = "neumann"\nvalue = 2.0'),
     "boundary", "incompatible"),
    ("broken toml", extra("[[[ what"), None, "TOML"),
]


def run(args, capsys):
    code = main(args)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def check_refusal(code, out, err, path, out_dir, field, words):
    assert code == 2
    lines = err.splitlines()
    assert len(lines) == 1, err
    line = lines[0]
    assert line.startswith("lapsolve: error:")
    assert "Traceback" not in err
    assert path in line
    if field is not None:
        assert f": {field}:" in line, line
    assert words in line, line
    assert out == ""
    assert not os.path.exists(out_dir)


@pytest.mark.parametrize("text, field, words",
                         [case[1:] for case in CASES], ids=[case[0] for case in CASES])
def test_refused_with_one_line(tmp_path, capsys, text, field, words):
    path = write(tmp_path, "problem.toml", text)
    out_dir = str(tmp_path / "results")
    code, out, err = run(["solve", path, "--out", out_dir], capsys)
    check_refusal(code, out, err, path, out_dir, field, words)


def test_missing_file(tmp_path, capsys):
    path = str(tmp_path / "nowhere.toml")
    out_dir = str(tmp_path / "results")
    code, out, err = run(["solve", path, "--out", out_dir], capsys)
    check_refusal(code, out, err, path, out_dir, None, "not found")


def test_not_utf8(tmp_path, capsys):
    path = tmp_path / "latin1.toml"
    path.write_bytes(SQUARE_TOML.replace("square", "caf\xe9").encode("latin-1"))
    out_dir = str(tmp_path / "results")
    code, out, err = run(["solve", str(path), "--out", out_dir], capsys)
    check_refusal(code, out, err, str(path), out_dir, None, "cannot read")


def test_bad_probe_is_refused_before_solving(tmp_path, capsys):
    path = write(tmp_path, "problem.toml", SQUARE_TOML)
    out_dir = str(tmp_path / "results")
    code, out, err = run(["solve", path, "--probe", "0.5;0.5", "--out", out_dir], capsys)
    assert code == 2 and err.startswith("lapsolve: error: --probe:") and err.count("\n") == 1
    assert not os.path.exists(out_dir)
    code, out, err = run(["solve", path, "--probe", "5,5", "--out", out_dir], capsys)
    assert code == 2 and "outside" in err and err.count("\n") == 1
    assert not os.path.exists(out_dir)


@pytest.mark.parametrize("text, error", [
    (spoil(SQUARE, "[[0, 0], [1, 1], [1, 0], [0, 1]]"), GeometryError),
    (extra('[[holes]]\nname = "h"\ncircle = { center = [3.0, 3.0], radius = 0.1 }'),
     GeometryError),
    (spoil("value = 0.0", 'value = "().__class__"'), FormulaError),
    (spoil("coefficient = 1.0", "coefficient = nan"), InputError),
], ids=["polygon", "hole", "formula", "nan"])
def test_library_raises_typed_errors(tmp_path, text, error):
    path = write(tmp_path, "problem.toml", text)
    with pytest.raises(error) as info:
        lapsolve.load_problem(path)
    assert info.value.source == path and info.value.field
