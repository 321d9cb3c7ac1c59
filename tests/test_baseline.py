"""Regression baselines: flattening rule, save, check, JUnit output."""

import copy
import json
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from lapsolve.cli import main
from lapsolve.errors import InputError
from verification.baseline import compare, flatten, make_baseline, save_baseline

DEMO = Path(__file__).resolve().parent.parent / "meshes" / "demo"

# A study report in a layout of its own: the rule must not depend on it.
STUDY = {
    "schema": "lapsolve.study/1",
    "case": "lshape",
    "runs": [
        {"order": 1, "levels": [{"level": 0, "h": 0.2, "dofs": 50,
                                 "norms": {"L2": 1e-2, "H1": 0.3, "L2_rel": 2e-2}},
                                {"level": 1, "h": 0.1, "dofs": 190,
                                 "norms": {"L2": 4e-3, "H1": 0.19, "L2_rel": 8e-3}}],
         "verdicts": {"H1": {"observed": 0.66, "fitted": 0.65, "expected": 0.667,
                             "pairwise": [0.66]}},
         "expected_orders": {"L2": 1.33, "H1": 0.667}},
    ],
    "errors": {"L2": [1e-2, 4e-3]},
    "dof_orders": {"L2": [0.66]},
    "quantities": {"energy": {"values": [1.01, 1.004], "reference": 1.0}},
    "seconds": {"total": 3.2},
}


def test_flatten_rule_on_a_generic_report():
    flat = flatten(STUDY)
    assert flat["runs/order=1/levels/level=0/norms/L2"] == ("norm", 1e-2)
    assert flat["runs/order=1/levels/level=1/norms/L2_rel"] == ("norm", 8e-3)
    assert flat["runs/order=1/verdicts/H1/observed"] == ("order", 0.66)
    assert flat["errors/L2[1]"] == ("norm", 4e-3)
    assert flat["dof_orders/L2[0]"] == ("order", 0.66)  # a list of orders, not of norms
    assert flat["quantities/energy/values[0]"] == ("quantity", 1.01)
    # expected orders, pairwise rates, references, sizes and timings are not kept
    assert not any("expected" in p or "pairwise" in p or "reference" in p or "seconds" in p
                   or p.endswith("/h") or p.endswith("/dofs") for p in flat)
    assert len(flat) == 13


def test_compare_rules():
    base = make_baseline(STUDY, "b")
    assert all(r.status == "OK" for r in compare(base, STUDY))
    worse = copy.deepcopy(STUDY)
    worse["runs"][0]["levels"][1]["norms"]["H1"] *= 1.05  # a 5 % regression
    worse["runs"][0]["verdicts"]["H1"]["observed"] -= 0.2
    worse["quantities"]["energy"]["values"][1] *= 0.97
    del worse["errors"]
    rows = {r.path: r for r in compare(base, worse, rtol=0.02, order_drop=0.1)}
    assert rows["runs/order=1/levels/level=1/norms/H1"].status == "REGRESSED"
    assert rows["runs/order=1/verdicts/H1/observed"].status == "REGRESSED"
    assert rows["quantities/energy/values[1]"].status == "REGRESSED"
    assert rows["errors/L2[0]"].status == "MISSING"
    better = copy.deepcopy(STUDY)
    better["runs"][0]["levels"][0]["norms"]["L2"] *= 0.5
    rows = {r.path: r for r in compare(base, better)}
    assert rows["runs/order=1/levels/level=0/norms/L2"].status == "IMPROVED"


def test_a_report_without_numbers_is_refused():
    with pytest.raises(InputError, match="no norms, orders or quantities"):
        make_baseline({"schema": "lapsolve.verify/1", "cases": []}, "empty")


@pytest.fixture(scope="module")
def certificate(tmp_path_factory):
    out = tmp_path_factory.mktemp("cert")
    assert main(["certify", str(DEMO / "manifest.json"), "--results", str(DEMO / "correct"),
                 "--out", str(out)]) == 0
    return out / "certificate.json"


def _junit_failures(path):
    root = ET.parse(path).getroot()
    return {case.get("name") for case in root.iter("testcase")
            if case.find("failure") is not None}


def test_certificate_baseline_passes_unchanged_and_catches_a_5_percent_regression(
        certificate, tmp_path, capsys):
    folder = str(tmp_path / "baselines")
    assert main(["baseline", "save", str(certificate), "--name", "v4.2", "--dir", folder]) == 0
    assert "saved baseline 'v4.2'" in capsys.readouterr().out
    junit = tmp_path / "same.xml"
    assert main(["baseline", "check", str(certificate), "--against", "v4.2", "--dir", folder,
                 "--junit", str(junit)]) == 0
    assert "no regression" in capsys.readouterr().out and not _junit_failures(junit)

    data = json.loads(certificate.read_text())
    level = data["slots"][1]["levels"][-1]  # coax P2, finest level
    level["norms"]["L2"] *= 1.05
    worse = tmp_path / "worse.json"
    worse.write_text(json.dumps(data))
    junit = tmp_path / "worse.xml"
    assert main(["baseline", "check", str(worse), "--against", "v4.2", "--dir", folder,
                 "--rtol", "0.02", "--junit", str(junit)]) == 1
    out = capsys.readouterr().out
    assert "REGRESSED" in out and "error grew by +5.00%" in out and "1 regression(s)" in out
    assert _junit_failures(junit) == {"slots/case=coax,order=2/levels/level=2/norms/L2"}


def test_existing_baseline_is_kept_without_force(certificate, tmp_path, capsys):
    folder = tmp_path / "baselines"
    path, _ = save_baseline(certificate, "v1", folder)
    before = path.read_text()
    assert main(["baseline", "save", str(certificate), "--name", "v1", "--dir",
                 str(folder)]) == 2
    assert "exists already; use --force" in capsys.readouterr().err
    assert path.read_text() == before
    assert main(["baseline", "save", str(certificate), "--name", "v1", "--dir", str(folder),
                 "--force"]) == 0


def test_bad_baseline_requests_exit_2(certificate, tmp_path, capsys):
    folder = str(tmp_path)
    assert main(["baseline", "save", str(certificate), "--name", "../x", "--dir", folder]) == 2
    assert main(["baseline", "check", str(certificate), "--against", "nope", "--dir",
                 folder]) == 2
    assert "no baseline 'nope'" in capsys.readouterr().err
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    assert main(["baseline", "save", str(bad), "--name", "v1", "--dir", folder]) == 2
