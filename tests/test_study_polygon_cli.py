"""`lapsolve study FILE --corners ...`: a user's polygon studied as an exact case.

The reference is the Schwarz-Christoffel conformal modulus (checked against closed
forms in test_schwarz_christoffel.py); here the command must report what the
library reports for the same case.
"""

import json

from helpers import EXAMPLES

from lapsolve.cli import main
from verification.exact.quadrilateral import case_from_problem_file
from verification.study import run_study

PLATE = str(EXAMPLES / "notched_plate.toml")
CORNERS = ["0", "1", "2", "7"]


def test_polygon_study_from_the_command_line_matches_the_library(capsys):
    code = main(["study", PLATE, "--corners", *CORNERS, "--order", "1", "--levels", "3",
                 "--quiet", "--json"])
    doc = json.loads(capsys.readouterr().out)
    study = run_study(case_from_problem_file(PLATE, [int(c) for c in CORNERS]), 1, levels=3)
    assert code == (0 if study.status == "PASS" else 1)
    assert doc["status"] == study.status
    # re-entrant slot corners inside insulated arcs: lambda = 2/3, H1 order 2/3
    # (Grisvard, Elliptic Problems in Nonsmooth Domains, 1985)
    h1 = study.checks["H1"]
    assert abs(h1.observed - 2 / 3) < 0.1, f"H1 order {h1.observed:.3f}"


def test_corners_without_a_problem_file_are_refused(capsys):
    assert main(["study", "lshape", "--corners", *CORNERS]) == 2
    err = capsys.readouterr().err
    assert err.startswith("lapsolve: error:") and err.count("\n") == 1
