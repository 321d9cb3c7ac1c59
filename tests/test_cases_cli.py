"""``lapsolve cases`` through ``lapsolve.cli.main``: outputs equal what the library returns."""

import json

import numpy as np
import pytest

from lapsolve import load_problem
from lapsolve.cli import main
from verification.exact.catalogue import CASES, describe
from verification.exact.toml_export import case_toml
from verification.exact.user import case_from_problem


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def one_line_error(err):
    lines = err.strip().splitlines()
    return len(lines) == 1 and lines[0].startswith("lapsolve: error:") and "Traceback" not in err


def test_list_names_every_case(capsys):
    code, out, _ = run(capsys, "cases")
    assert code == 0
    for name in CASES:
        assert name in out
    assert f"{len(CASES)} cases" in out


def test_list_json_equals_the_library(capsys):
    code, out, _ = run(capsys, "cases", "--json")
    assert code == 0
    assert json.loads(out) == [describe(case) for case in CASES.values()]


def test_show_prints_sources(capsys):
    code, out, _ = run(capsys, "cases", "show", "coax-eccentric")
    assert code == 0
    assert "Smythe, Static and Dynamic Electricity" in out
    assert "capacitance" in out and "electrode at u = 1" in out
    code, out, _ = run(capsys, "cases", "show", "lshape", "--json")
    assert code == 0
    info = json.loads(out)
    assert info == describe(CASES["lshape"])
    assert info["lambda"] == pytest.approx(2 / 3, rel=1e-15)


def test_unknown_case_suggests_names(capsys):
    code, _, err = run(capsys, "cases", "show", "coax-excentric")
    assert code == 2 and one_line_error(err)
    assert "did you mean" in err and "coax-eccentric" in err
    code, _, err = run(capsys, "cases", "export", "wedge", "--toml")
    assert code == 2 and "wedge-135" in err


def test_missing_name_and_format(capsys):
    code, _, err = run(capsys, "cases", "show")
    assert code == 2 and one_line_error(err)
    code, _, err = run(capsys, "cases", "export", "coax")
    assert code == 2 and "--toml" in err


def test_export_to_stdout_is_the_library_text(capsys):
    code, out, _ = run(capsys, "cases", "export", "smooth-mixed", "--toml")
    assert code == 0
    assert out == case_toml(CASES["smooth-mixed"])


@pytest.mark.parametrize("name", ["coax", "dn-corner", "dielectric-cylinder"])
def test_exported_file_solves(capsys, tmp_path, name):
    path = tmp_path / f"{name}.toml"
    code, out, _ = run(capsys, "cases", "export", name, "--toml", "--out", str(path))
    assert code == 0 and str(path) in out
    problem = load_problem(path)
    case = CASES[name]
    names = [p.name for p in problem.parts]
    for part in case.conditions:  # Neumann parts are split per edge as "<part>-<edge>"
        assert any(n == part or n.startswith(part + "-") for n in names), (part, names)
    code, out, err = run(capsys, "solve", str(path), "--order", "2", "--json")
    assert code == 0, err
    summary = json.loads(out)
    if name == "coax":
        # C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer 1994); P2, default mesh
        expected = 2 * np.pi / np.log(4.0)
        assert abs(summary["capacity"]["from_flux"] / expected - 1) < 1e-3
    if "exact" in problem.extras:
        user = case_from_problem(problem)
        x, y = np.array([0.55, -0.6]), np.array([0.6, 0.7])
        np.testing.assert_allclose(user.u(x, y), case.u(x, y), rtol=1e-12)


def test_export_refusal_writes_nothing(capsys, tmp_path):
    path = tmp_path / "slit.toml"
    code, _, err = run(capsys, "cases", "export", "slit", "--toml", "--out", str(path))
    assert code == 2 and one_line_error(err)
    assert "slit" in err and not path.exists()
    assert list(tmp_path.iterdir()) == []


def write_exact_file(tmp_path, formula, name="exact.toml"):
    path = tmp_path / name
    path.write_text(
        f'exact = "{formula}"\n'
        '[outer]\npolygon = [[0, 0], [1, 0], [1, 1], [0, 1]]\n'
        '[boundary.all]\ntype = "dirichlet"\nvalue = 0.0  # ignored: data come from exact\n',
        encoding="utf-8")
    return path


def test_check_accepts_a_good_file(capsys, tmp_path):
    path = write_exact_file(tmp_path, "exp(z)*cos(z)")
    code, out, _ = run(capsys, "cases", "check", str(path))
    assert code == 0 and "no singularity" in out
    code, out, _ = run(capsys, "cases", "check", str(path), "--json")
    info = json.loads(out)
    assert info["parts"] == {"all": {"kind": "dirichlet", "electrode": None}}
    assert info["warnings"] == []


@pytest.mark.parametrize("formula, message", [
    ("__import__('os').system('true')", "not allowed"),   # forbidden syntax
    ("exp(z) + q", "unknown"),                            # unknown name
    ("conj(z)", "not analytic"),                          # non-analytic function
    ("1/(z - 0.4 - 0.6*i)", "not harmonic"),              # pole inside the domain
    ("sqrt(z - 0.5 - 0.5*i)", "not harmonic"),            # branch point inside
])
def test_check_refuses_bad_formulas(capsys, tmp_path, formula, message):
    path = write_exact_file(tmp_path, formula.replace('"', "'"))
    code, _, err = run(capsys, "cases", "check", str(path))
    assert code == 2 and one_line_error(err), err
    assert message in err and "exact" in err


def test_check_needs_an_exact_formula(capsys, tmp_path):
    path = tmp_path / "plain.toml"
    path.write_text('[outer]\npolygon = [[0, 0], [1, 0], [1, 1]]\n', encoding="utf-8")
    code, _, err = run(capsys, "cases", "check", str(path))
    assert code == 2 and "exact" in err
    code, _, err = run(capsys, "cases", "check", str(tmp_path / "missing.toml"))
    assert code == 2 and "not found" in err
