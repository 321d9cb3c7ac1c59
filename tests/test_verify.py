"""The standard suite and ``lapsolve verify``: plans, the CLI against the library, exit codes.

Expected orders: Strang & Fix, An Analysis of the Finite Element Method (1973) and
Grisvard, Elliptic Problems in Nonsmooth Domains (1985), through verification.rates.
"""

import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest

import verification.study as study_module
from lapsolve.cli import main
from lapsolve.meshing import triangulate
from lapsolve.solve import solve
from verification.exact.catalogue import CASES, get_case
from verification.suite import (
    FINEST_DOFS,
    LEVELS,
    QUICK_LEVELS,
    plan_for,
    run_suite,
    standard_plans,
)

SMALL = ["lshape", "smooth-square"]


def test_standard_plans_cover_the_catalogue():
    plans = standard_plans()
    got = {(p.case, p.order) for p in plans}
    want = {(name, order) for name, case in CASES.items()
            for order in ((1, 2, 3) if case.smooth else (1, 2))}
    assert got == want
    assert all(p.levels == LEVELS and p.size > 0 for p in plans)
    quick = standard_plans(quick=True)
    assert [p.size for p in quick] == [p.size for p in plans]
    assert all(p.levels == (QUICK_LEVELS if p.order < 3 else LEVELS) for p in quick)
    only = standard_plans(["lshape"], [2])
    assert [(p.case, p.order) for p in only] == [("lshape", 2)]


def test_plan_meets_the_dof_budget():
    plan = plan_for(get_case("lshape"), 1)
    mesh = triangulate(get_case("lshape").problem(plan.size), size=plan.size)
    finest = len(mesh.refined(plan.levels - 1).points)  # P1: one DOF per vertex
    assert 0.6 * FINEST_DOFS <= finest <= 1.6 * FINEST_DOFS, finest


def _run(tmp_path, *extra, name="out"):
    out = tmp_path / name
    code = main(["verify", "--cases", *SMALL, "--orders", "1", "2", "--quick", "--quiet",
                 "--no-pictures", "--out", str(out), *extra])
    return code, out


def test_verify_cli_matches_the_library(tmp_path, capsys):
    code, out = _run(tmp_path)
    printed = capsys.readouterr().out
    assert code == 0, printed
    doc = json.loads((out / "verify.json").read_text())
    assert doc["schema"] == "lapsolve.verify/1" and doc["status"] == "PASS"
    assert not doc["incomplete"]
    library = run_suite(standard_plans(SMALL, [1, 2], quick=True), keep_finest=False)
    assert library.passed
    assert len(doc["rows"]) == len(library.studies) == 4
    for row, s in zip(doc["rows"], library.studies):
        assert (row["case"], row["order"], row["status"]) == (s.case, s.order, "PASS")
        for name, v in s.checks.items():
            assert row["checks"][name]["observed"] == pytest.approx(v.observed, abs=1e-12)
            assert row["checks"][name]["expected"] == v.expected
        assert f"{s.case:22s} {s.order:2d} PASS" in printed
    # JUnit: one test case per case x degree x check, none failed
    root = ET.parse(out / "junit.xml").getroot()
    cases = root.findall(".//testcase")
    assert len(cases) == sum(len(s.checks) for s in library.studies)
    assert root.get("failures") == "0"
    html = (out / "report.html").read_text()
    assert "verification certificate" in html and "PASS" in html
    assert "licensed engineering practice" in html
    assert "verification: PASS (4/4" in printed


def _perturbing(problem, order, mesh):
    """Adds 0.05 h to every DOF: an O(h) error that no correct P1/P2 solver shows."""
    solution = solve(problem, order, mesh)
    solution.u = solution.u + 0.05 * mesh.h()
    return solution


def test_verify_cli_exits_1_and_explains_a_failure(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(study_module, "default_solver", _perturbing)
    code, out = _run(tmp_path)
    printed = capsys.readouterr().out
    assert code == 1
    doc = json.loads((out / "verify.json").read_text())
    assert doc["status"] == "FAIL"
    fails = [line for line in printed.splitlines() if line.startswith("FAIL ")]
    assert fails, printed
    # every FAIL is explained in one sentence
    assert all(line.rstrip().endswith(".") and "order" in line for line in fails)
    root = ET.parse(out / "junit.xml").getroot()
    assert int(root.get("failures")) >= 1


def test_verify_ctrl_c_saves_finished_studies(tmp_path, monkeypatch):
    calls = []

    def interrupting(problem, order, mesh):
        calls.append(order)
        if len(calls) == QUICK_LEVELS + 2:  # second level of the second study
            raise KeyboardInterrupt
        return solve(problem, order, mesh)

    monkeypatch.setattr(study_module, "default_solver", interrupting)
    code, out = _run(tmp_path)
    assert code == 130
    doc = json.loads((out / "verify.json").read_text())
    assert doc["incomplete"] is True and doc["status"] == "FAIL"
    assert [len(s["levels"]) for s in doc["studies"]] == [QUICK_LEVELS, 1]
    # the interrupted study is kept (inconclusive, one level); two never started
    assert doc["counts"] == {"PASS": 1, "FAIL": 0, "INCONCLUSIVE": 1, "not run": 2}


def test_verify_rejects_unknown_case(capsys):
    assert main(["verify", "--cases", "lshap", "--quiet"]) == 2
    assert "did you mean lshape" in capsys.readouterr().err


def test_suite_rows_name_every_check():
    suite = run_suite(standard_plans(["slit"], [1], quick=True), keep_finest=False)
    (row,) = suite.rows()
    assert set(row["checks"]) == {"L2", "H1", "energy W"}
    # slit, λ = 1/2: H1 1/2, L2 1, energy 1 (Grisvard 1985; Strang & Fix 1973)
    assert row["checks"]["H1"]["expected"] == 0.5 and row["checks"]["L2"]["expected"] == 1.0
    assert np.isclose(row["checks"]["energy W"]["expected"], 1.0)
    assert row["status"] == "PASS", row["problems"]


@pytest.mark.slow
def test_the_standard_suite_passes():
    """The whole suite, as `lapsolve verify` runs it (about a minute on two cores)."""
    suite = run_suite(standard_plans(), keep_finest=False)
    failed = [(s.case, s.order, s.problems()) for s in suite.studies if s.status != "PASS"]
    assert suite.passed, failed
