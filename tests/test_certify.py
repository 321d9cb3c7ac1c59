"""Certification of an external solver, end to end, and certification of a mesh.

The round trip exports a benchmark, solves it with the stand-in external solver of
``tests/adapter_external.py`` (which reads only the exported MSH mesh, boundary
table and materials file), imports the results and certifies them.
"""

import json
import math
import shutil
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import meshio
import numpy as np
import pytest

from lapsolve.cli import main
from lapsolve.errors import InputError
from verification.certify import certificate_junit, certify
from verification.exact.catalogue import get_case
from verification.export import export_benchmark
from verification.mesh_certify import DEFECTIVE, OK, certify_mesh

sys.path.insert(0, str(Path(__file__).parent))
from adapter_external import run_benchmark  # noqa: E402
from test_export import _exp_case  # noqa: E402

COAX = get_case("coax")
EXP = _exp_case()
CASES = {"coax": COAX, "square-exp": EXP}
DEMO = Path(__file__).resolve().parent.parent / "meshes" / "demo"


def lookup(name):
    return CASES[name]


@pytest.fixture(scope="module")
def round_trip(tmp_path_factory):
    root = tmp_path_factory.mktemp("trip")
    export_benchmark([COAX, EXP], root / "bench", levels=3, orders=(1, 2))
    run_benchmark(root / "bench", root / "results")
    return root


# Expected orders for smooth solutions: H1 p, L2 p + 1 (Strang & Fix, An Analysis of
# the Finite Element Method, 1973, ch. 3), quadratic isoparametric boundary for P2
# (Ciarlet & Raviart, The combined effect of curved boundaries and numerical
# integration in isoparametric finite element methods, 1972).
ROUND_TRIP = [("coax", 1, 2.0, 1.0), ("coax", 2, 3.0, 2.0),
              ("square-exp", 1, 2.0, 1.0), ("square-exp", 2, 3.0, 2.0)]


def test_round_trip_certifies_p1_and_p2(round_trip):
    cert = certify(round_trip / "bench" / "manifest.json", round_trip / "results",
                   case_lookup=lookup)
    slots = {(s.case, s.order): s for s in cert.slots}
    for case, order, l2, h1 in ROUND_TRIP:
        slot = slots[(case, order)]
        got = {n: v.observed for n, v in slot.verdicts.items()}
        assert slot.status == "PASS", (case, order, got, slot.diagnosis)
        assert abs(got["L2"] - l2) < 0.12 and abs(got["H1"] - h1) < 0.12, (case, order, got)
    assert cert.passed
    coax_cap = [q for q in slots[("coax", 1)].quantities if q.name == "capacitance"][0]
    # capacitance per unit length 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer, 1994)
    assert coax_cap.reference == pytest.approx(2 * math.pi / math.log(4))
    assert coax_cap.per_level[-1]["rel_error"] < 1e-3 and coax_cap.status == "PASS"


def validate_junit(text):
    """Structural check of a JUnit XML document (common practice, no source)."""
    root = ET.fromstring(text)
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert len(suites) == 1
    suite = suites[0]
    cases = suite.findall("testcase")
    assert int(suite.get("tests")) == len(cases) == int(root.get("tests"))
    assert int(suite.get("failures")) == len(suite.findall("testcase/failure"))
    assert int(suite.get("skipped")) == len(suite.findall("testcase/skipped"))
    for case in cases:
        assert case.get("classname") and case.get("name")
        assert float(case.get("time")) >= 0
        assert {c.tag for c in case} <= {"properties", "failure", "skipped", "system-out"}
    return cases


def test_demo_correct_set_passes_and_flawed_set_fails(tmp_path, capsys):
    manifest = str(DEMO / "manifest.json")
    good = tmp_path / "good"
    assert main(["certify", manifest, "--results", str(DEMO / "correct"),
                 "--out", str(good)]) == 0
    assert "certificate: PASS" in capsys.readouterr().out
    bad = tmp_path / "bad"
    assert main(["certify", manifest, "--results", str(DEMO / "flawed"), "--out", str(bad)]) == 1
    out = capsys.readouterr().out
    assert "certificate: FAIL" in out and "mid-edge nodes" in out and "Neumann" in out
    data = json.loads((bad / "certificate.json").read_text())
    status = {(s["case"], s["order"]): s["status"] for s in data["slots"]}
    assert status == {("coax", 1): "PASS", ("coax", 2): "FAIL",
                      ("smooth-mixed", 1): "FAIL", ("smooth-mixed", 2): "FAIL"}
    cases = validate_junit((bad / "junit.xml").read_text())
    failed = {(c.get("classname"), c.get("name")) for c in cases if c.find("failure") is not None}
    assert ("certify.coax.P2", "L2 order") in failed
    assert ("certify.coax.P1", "L2 order") not in failed
    html = (bad / "certificate.html").read_text()
    assert html.startswith("<!DOCTYPE html>") and "What this usually means" in html


def test_junit_has_one_case_per_case_order_and_norm(round_trip):
    cert = certify(round_trip / "bench" / "manifest.json", round_trip / "results",
                   case_lookup=lookup)
    cases = validate_junit(certificate_junit(cert))
    norms = [c for c in cases if c.get("name").endswith(" order")]
    assert len(norms) == 2 * 2 * 3  # cases x orders x (L2, H1, energy)


def _copy_results(round_trip, tmp_path):
    target = tmp_path / "results"
    shutil.copytree(round_trip / "results", target)
    return target


def _run_certify(round_trip, results, out, *extra):
    return main(["certify", str(round_trip / "bench" / "manifest.json"), "--results",
                 str(results), "--out", str(out), *extra])


def _rewrite(path, change):
    raw = meshio.read(path)
    change(raw)
    meshio.write(path, raw)


def test_bad_inputs_exit_2_and_write_nothing(round_trip, tmp_path, capsys):
    first = lambda r: r / "coax" / "P1" / "level0.vtu"  # noqa: E731
    cases = {
        "missing field": (lambda r: _rewrite(first(r), lambda m: m.point_data.update(
            {"phi": m.point_data.pop("u")})), "point field 'u' not found"),
        "NaN": (lambda r: _rewrite(first(r), lambda m: m.point_data["u"].__setitem__(
            3, np.nan)), "NaN or infinite"),
        "wrong case": (lambda r: shutil.copy(r / "square-exp" / "P1" / "level0.vtu", first(r)),
                       "does not look like the domain of case 'coax'"),
        "unreadable": (lambda r: first(r).write_bytes(b"garbage"), "unreadable mesh file"),
        "quantities": (lambda r: (r / "coax" / "P1" / "quantities.json").write_text(
            '{"capacitance": [1.0, "x"]}'), "finite numbers or null"),
    }
    for label, (damage, message) in cases.items():
        results = _copy_results(round_trip, tmp_path / label.replace(" ", "_"))
        damage(results)
        out = tmp_path / label.replace(" ", "_") / "cert"
        code = main(["certify", str(round_trip / "bench" / "manifest.json"), "--results",
                     str(results), "--out", str(out), "--field", "u"])
        err = capsys.readouterr().err
        assert code == 2, label
        assert message in err, (label, err)
        assert not out.exists(), label


def test_manifest_schema_mismatch_exits_2(round_trip, tmp_path, capsys):
    manifest = json.loads((round_trip / "bench" / "manifest.json").read_text())
    manifest["schema"] = "lapsolve.manifest/9"
    path = tmp_path / "manifest.json"
    path.write_text(json.dumps(manifest))
    assert main(["certify", str(path), "--results", str(round_trip / "results"),
                 "--out", str(tmp_path / "cert")]) == 2
    assert "manifest schema is 'lapsolve.manifest/9'" in capsys.readouterr().err
    assert not (tmp_path / "cert").exists()


def test_case_without_results_is_reported_not_submitted(round_trip, tmp_path):
    results = _copy_results(round_trip, tmp_path)
    shutil.rmtree(results / "square-exp" / "P2")
    cert = certify(round_trip / "bench" / "manifest.json", results, case_lookup=lookup)
    status = {(s.case, s.order): s.status for s in cert.slots}
    assert status[("square-exp", 2)] == "NOT SUBMITTED" and cert.passed
    strict = certify(round_trip / "bench" / "manifest.json", results, case_lookup=lookup,
                     require_all=True)
    assert not strict.passed
    shutil.rmtree(results)
    results.mkdir()
    with pytest.raises(InputError, match="no result files found"):
        certify(round_trip / "bench" / "manifest.json", results, case_lookup=lookup)


# ---- certify-mesh --------------------------------------------------------------------

def test_certify_mesh_reports_quality_and_accuracy(round_trip, tmp_path, capsys):
    path = round_trip / "bench" / "coax" / "P1" / "level1.msh"
    cert = certify_mesh(path, COAX, order=1)
    assert cert.status == OK
    assert cert.quality["min_angle_deg"] > 20 and cert.quality["inverted_count"] == 0
    assert cert.boundary["off_geometry"] == 0 and cert.boundary["max_distance"] < 1e-12
    # same mesh, same solver: the adapter's P1 result has the same error
    from verification.certify import certify_slot
    from verification.export import expected_for

    slot = certify_slot(COAX, 1, expected_for(1, math.inf), (0, 1, 2), round_trip / "results",
                        "u")
    assert cert.norms["L2"] == pytest.approx(slot.levels[1].norms["L2"], rel=1e-6)
    cap = [q for q in cert.quantities if q["name"] == "capacitance"][0]
    assert cap["rel_error"] < 5e-3
    assert main(["certify-mesh", str(path), "--case", "coax", "--order", "1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["schema"] == "lapsolve.mesh-certificate/1" and data["norms"]["L2"] > 0


def test_certify_mesh_flags_nodes_off_the_geometry(round_trip, tmp_path):
    raw = meshio.read(round_trip / "bench" / "coax" / "P1" / "level0.msh", file_format="gmsh")
    r = np.hypot(raw.points[:, 0], raw.points[:, 1])
    on_shield = np.flatnonzero(np.abs(r - 2.0) < 1e-12)
    raw.points[on_shield[:3], :2] *= 0.99  # three shield nodes pulled 2 cm inward
    path = tmp_path / "moved.vtu"
    meshio.write(path, meshio.Mesh(raw.points, [("triangle", raw.cells_dict["triangle"])]))
    cert = certify_mesh(path, COAX, order=1)
    assert cert.boundary["off_geometry"] == 3
    assert cert.boundary["max_distance"] == pytest.approx(0.02, rel=1e-9)


def test_certify_mesh_with_defects_is_not_solved(tmp_path, capsys):
    pts = np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0], [0.5, 0.5]])
    cells = np.array([[0, 1, 4], [1, 2, 4], [2, 3, 4], [3, 4, 0]])  # last one clockwise
    path = tmp_path / "square.vtu"
    meshio.write(path, meshio.Mesh(np.column_stack([pts, np.zeros(5)]), [("triangle", cells)]))
    cert = certify_mesh(path, EXP, order=1)
    assert cert.status == DEFECTIVE and cert.quality["inverted_cells"] == [3] and not cert.norms
    assert main(["certify-mesh", str(path), "--case", "smooth-square", "--order", "1"]) == 1
    assert "inverted cells 1" in capsys.readouterr().out


@pytest.mark.slow
def test_singular_corner_round_trip_and_the_documented_export(tmp_path, capsys):
    # The command of the documentation, then a round trip on its lshape part: the
    # corner singularity r^(2/3) caps both orders at H1 2/3, L2 4/3 (Grisvard, Elliptic
    # Problems in Nonsmooth Domains, 1985; Strang & Fix, 1973, ch. 8).
    bench = tmp_path / "bench"
    assert main(["export", "lshape", "coax-eccentric", "--levels", "5", "--order", "1", "2",
                 "--out", str(bench)]) == 0
    capsys.readouterr()
    manifest = json.loads((bench / "manifest.json").read_text())
    tri = [row["triangles"] for row in manifest["cases"][0]["levels"]]
    assert [b // a for a, b in zip(tri, tri[1:])] == [4, 4, 4, 4]
    msh = meshio.read(bench / "coax-eccentric" / "P2" / "level4.msh", file_format="gmsh")
    assert {"core", "shield", "background"} <= set(msh.field_data)
    run_benchmark(bench, tmp_path / "results", cases=("lshape",), levels=(0, 1, 2, 3))
    cert = certify(bench / "manifest.json", tmp_path / "results")
    for slot in cert.slots:
        if slot.case == "lshape":
            got = {n: v.observed for n, v in slot.verdicts.items()}
            assert slot.status == "PASS", got
            assert abs(got["L2"] - 4 / 3) < 0.1 and abs(got["H1"] - 2 / 3) < 0.1, got
