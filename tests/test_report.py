"""Study reports and ``lapsolve study``: files, self-containment, CLI against the library, GCI."""

import io
import json
import re

import numpy as np
import pytest
from helpers import COAX_TOML, coax_capacitance
from test_study import SMOOTH

import verification.study as study_module
from lapsolve import load_problem
from lapsolve.cli import main
from lapsolve.solve import solve
from verification.exact.catalogue import get_case
from verification.gci import gci_multi_grid
from verification.norms import error_norms
from verification.report import ProgressBar, write_study_report
from verification.report.plots import cell_errors
from verification.study import StudyInterrupted, run_studies, run_study


def _self_contained(html):
    """No script, and no resource fetched from the network (SVG namespaces are not fetches)."""
    assert "<script" not in html.lower()
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", html), "network reference"
    assert "url(http" not in html and "@import" not in html


def test_study_report_is_complete_and_self_contained(tmp_path):
    studies = run_studies(SMOOTH, [1, 2], 3, 0.25)
    doc = write_study_report(tmp_path, studies, {SMOOTH.name: SMOOTH})
    names = {p.name for p in tmp_path.iterdir()}
    assert {"study.json", "report.md", "report.html", "test-smooth_error_vs_h.svg",
            "test-smooth_error_vs_dofs.svg", "test-smooth_field.png",
            "test-smooth_error_map.png"} <= names
    data = json.loads((tmp_path / "study.json").read_text())
    assert data == json.loads(json.dumps(doc))
    assert data["schema"] == "lapsolve.study/1" and data["kind"] == "convergence"
    assert data["incomplete"] is False and data["status"] == "PASS"
    assert {"numpy", "scipy", "scikit-fem", "lapsolve", "python", "platform"} <= \
        set(data["software"])
    html = (tmp_path / "report.html").read_text()
    _self_contained(html)
    assert html.count("<svg") >= 2 and "data:image/png;base64," in html
    assert "licensed engineering practice" in html and "PASS" in html
    for name in ("numpy", "scipy", "scikit-fem"):
        assert name in html
    md = (tmp_path / "report.md").read_text()
    assert "| P | check | expected |" in md and "licensed engineering practice" in md
    assert (tmp_path / "test-smooth_field.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # the levels in the file are the study's levels
    assert [lv["dofs"] for lv in data["studies"][0]["levels"]] == \
        [lv.dofs for lv in studies[0].levels]


def test_incomplete_report_is_marked(tmp_path):
    calls = []

    def interrupting(problem, order, mesh):
        calls.append(order)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return solve(problem, order, mesh)

    with pytest.raises(StudyInterrupted) as info:
        run_study(SMOOTH, 1, 4, 0.25, solver=interrupting)
    write_study_report(tmp_path, [info.value.partial], {SMOOTH.name: SMOOTH}, incomplete=True)
    data = json.loads((tmp_path / "study.json").read_text())
    assert data["incomplete"] is True and data["status"] == "INCONCLUSIVE"
    assert len(data["studies"][0]["levels"]) == 2
    assert "incomplete" in (tmp_path / "report.md").read_text()


def test_study_cli_matches_the_library(tmp_path, capsys):
    out = tmp_path / "study"
    code = main(["study", "lshape", "--order", "1", "--levels", "3", "--size", "0.25",
                 "--out", str(out), "--quiet", "--no-pictures"])
    printed = capsys.readouterr().out
    assert code == 0, printed
    data = json.loads((out / "study.json").read_text())
    library = run_study(get_case("lshape"), 1, 3, 0.25, keep_finest=False)
    (got,) = data["studies"]
    assert [lv["dofs"] for lv in got["levels"]] == [lv.dofs for lv in library.levels]
    for name, v in library.checks.items():
        assert got["checks"][name]["observed"] == pytest.approx(v.observed, abs=1e-12)
        assert got["checks"][name]["status"] == v.status
    # L-shape, λ = 2/3: H1 2/3 and L2 4/3 in h (Grisvard 1985; Strang & Fix 1973)
    assert got["expected"]["H1"]["order"] == pytest.approx(2 / 3)
    assert got["expected"]["L2"]["order"] == pytest.approx(4 / 3)
    assert "lshape P1 (uniform, orders in h): PASS" in printed
    assert not any(p.suffix == ".png" for p in out.iterdir())  # --no-pictures


def test_study_cli_ctrl_c_exits_130_and_keeps_levels(tmp_path, monkeypatch):
    calls = []

    def interrupting(problem, order, mesh):
        calls.append(order)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return solve(problem, order, mesh)

    monkeypatch.setattr(study_module, "default_solver", interrupting)
    out = tmp_path / "partial"
    code = main(["study", "lshape", "--order", "1", "--levels", "4", "--size", "0.25",
                 "--out", str(out), "--quiet", "--no-pictures"])
    assert code == 130
    data = json.loads((out / "study.json").read_text())
    assert data["incomplete"] is True and len(data["studies"][0]["levels"]) == 2


def test_study_cli_gci_of_a_problem_file(tmp_path, capsys):
    path = tmp_path / "coax.toml"
    path.write_text(COAX_TOML)
    out = tmp_path / "gci"
    code = main(["study", str(path), "--levels", "3", "--quantity", "capacitance", "--order",
                 "1", "--size", "0.3", "--out", str(out), "--quiet", "--no-pictures"])
    assert code == 0
    data = json.loads((out / "study.json").read_text())
    assert data["schema"] == "lapsolve.study/1" and data["kind"] == "gci"
    q = data["quantity_study"]
    values = [lv["value"] for lv in q["levels"]]
    library = study_module.run_quantity_study(load_problem(path), "capacitance", 3, 1,
                                              size=0.3, keep_finest=False)
    assert values == pytest.approx([lv["value"] for lv in library.levels], rel=1e-13)
    # Celik et al. (2008): grids fine to coarse
    direct = gci_multi_grid([lv["h"] for lv in q["levels"]][::-1], values[::-1])
    assert q["gci"]["finest"]["p"] == pytest.approx(direct.finest.p, rel=1e-12)
    # C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer, 3rd ed., 1994): the
    # extrapolation is closer to it than the finest value
    exact = coax_capacitance(1.0, 2.0, 2.0)
    assert abs(q["extrapolated"] - exact) < abs(values[-1] - exact)
    assert "GCI (fine)" in capsys.readouterr().out


@pytest.mark.parametrize("argv, field", [
    (["study", "lshape", "--levels", "0"], "--levels"),
    (["study", "lshape", "--quantity", "energy"], "--quantity"),
    (["study", "lshap"], "did you mean lshape"),
    (["study", "missing.toml", "--quantity", "energy"], "file not found"),
])
def test_study_cli_rejects_bad_input(argv, field, capsys):
    assert main(argv + ["--quiet"]) == 2
    assert field in capsys.readouterr().err


def test_progress_bar_only_on_a_terminal():
    quiet_stream = io.StringIO()
    bar = ProgressBar(stream=quiet_stream)
    bar(1, 4, "level 0")
    bar.close()
    assert quiet_stream.getvalue() == ""

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    tty = Terminal()
    bar = ProgressBar(stream=tty)
    bar(1, 4, "level 0")
    assert "1/4" in tty.getvalue() and "#" in tty.getvalue()
    quiet = Terminal()
    ProgressBar(stream=quiet, quiet=True)(1, 4, "x")
    assert quiet.getvalue() == ""


def test_cell_errors_add_up_to_the_l2_error():
    study = run_study(SMOOTH, 2, 2, 0.25)
    solution = study.finest
    cells = cell_errors(solution, SMOOTH)
    area = np.sum(solution.basis.dx, axis=1)
    norms = error_norms(solution.basis, solution.u, SMOOTH.u, SMOOTH.grad)
    # the same integral, cell by cell and in one sum
    assert np.sqrt(np.sum(cells**2 * area)) == pytest.approx(norms.L2, rel=1e-9)
