"""Write study, certificate and GCI reports into a folder, all files together or none.

Every file goes through :class:`lapsolve.atomic.OutputSet`. Plots are also saved
as separate files next to the reports (the HTML embeds them, so it stands alone).
"""

import json
import math

import numpy as np

from lapsolve.atomic import OutputSet

from ..study import SCHEMA as STUDY_SCHEMA
from . import html, markdown, plots
from .provenance import CAUTION, machine_info, software_versions, timestamp


def _jsonable(obj):
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, tuple):
        return list(obj)
    raise TypeError(type(obj).__name__)


def _clean(obj):
    """Non-finite floats become None (JSON has no NaN)."""
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj


def dumps(doc):
    return json.dumps(_clean(doc), indent=2, default=_jsonable) + "\n"


def _header(kind, incomplete):
    return {"schema": STUDY_SCHEMA, "kind": kind, "incomplete": bool(incomplete),
            "created": timestamp(), "software": software_versions(), "machine": machine_info(),
            "caution": CAUTION}


def study_document(studies, incomplete=False):
    """The content of study.json for convergence studies."""
    statuses = [s.status for s in studies]
    status = ("FAIL" if "FAIL" in statuses else
              "PASS" if statuses and all(s == "PASS" for s in statuses) and not incomplete
              else "INCONCLUSIVE")
    tol = studies[0].tol if studies else None
    qoi_tol = studies[0].qoi_tol if studies else None
    return {**_header("convergence", incomplete), "status": status, "tol": tol,
            "qoi_tol": qoi_tol,
            "studies": [s.to_dict() for s in studies]}


def study_figures(studies, cases, pictures=True):
    """``[(file name, caption, kind, content)]`` for a study report.

    Field and error maps need the case (from ``cases``) and a kept finest solution.
    """
    figs = []
    by_case = {}
    for s in studies:
        by_case.setdefault(s.case, []).append(s)
    for name, group in by_case.items():
        checks = ("L2", "H1") + tuple(k for k in group[-1].expected if k not in ("L2", "H1"))
        if any(not s.graded for s in group):
            figs.append((f"{name}_error_vs_h.svg", f"{name}: error against h (log-log)", "svg",
                         plots.convergence_svg([s for s in group if not s.graded], "h",
                                               checks)))
        figs.append((f"{name}_error_vs_dofs.svg", f"{name}: error against DOFs (log-log)",
                     "svg", plots.convergence_svg(group, "dofs", checks)))
        top = max((s for s in group if s.finest is not None), key=lambda s: s.order,
                  default=None)
        if pictures and top is not None and name in cases:
            case = cases[name]
            figs.append((f"{name}_field.png", f"{name}: u_h on the finest P{top.order} mesh",
                         "png", plots.field_png(top.finest, case)))
            figs.append((f"{name}_error_map.png", f"{name}: |u_h - u| per cell, finest "
                         f"P{top.order} mesh", "png", plots.error_png(top.finest, case)))
    return figs


def _write(folder, files, figs):
    with OutputSet(folder) as out:
        for name, text in files.items():
            out.text(name, text)
        for name, _, kind, content in figs:
            if kind == "svg":
                out.text(name, content)
            else:
                out.bytes(name, content)
        return out.commit()


def write_study_report(folder, studies, cases, incomplete=False, pictures=True):
    """Write study.json, report.md, report.html and the plots for convergence studies.

    Parameters
    ----------
    folder : path
    studies : list of Study
    cases : dict
        Case name -> ExactCase (for the field and error pictures).
    incomplete : bool
        Mark the report as interrupted.
    pictures : bool
        Include the field and error maps.

    Returns
    -------
    dict
        The study.json content.
    """
    doc = study_document(studies, incomplete)
    figs = study_figures(studies, cases, pictures) if studies else []
    files = {"study.json": dumps(doc), "report.md": markdown.study_markdown(doc),
             "report.html": html.study_html(doc, [f[1:] for f in figs])}
    _write(folder, files, figs)
    return doc


def verify_document(suite):
    return {**_header("verify", suite.incomplete), **suite.to_dict()}


def verify_figures(suite, pictures=True):
    """One convergence plot per case (all degrees), and the field of its highest degree."""
    from ..exact.catalogue import get_case

    by_case = {}
    for s in suite.studies:
        by_case.setdefault(s.case, []).append(s)
    figs = []
    for name, group in by_case.items():
        figs.append((f"{name}_error_vs_h.svg", f"{name}: L2 and H1 errors against h",
                     "svg", plots.convergence_svg(group, "h", ("L2", "H1"))))
        top = max((s for s in group if s.finest is not None), key=lambda s: s.order,
                  default=None)
        if pictures and top is not None:
            figs.append((f"{name}_field.png", f"{name}: u_h, finest P{top.order} mesh", "png",
                         plots.field_png(top.finest, get_case(name))))
    return figs


def write_verify_report(folder, suite, pictures=True):
    """Write verify.json, junit.xml, report.md and the certificate report.html.

    Returns
    -------
    dict
        The verify.json content.
    """
    from ..junit import junit_xml

    doc = verify_document(suite)
    figs = verify_figures(suite, pictures)
    files = {"verify.json": dumps(doc),
             "junit.xml": junit_xml("lapsolve verify", suite.junit_cases(),
                                    properties=doc["software"]),
             "report.md": markdown.verify_markdown(doc),
             "report.html": html.verify_html(doc, [f[1:] for f in figs])}
    _write(folder, files, figs)
    return doc


def gci_document(qstudy):
    return {**_header("gci", qstudy.incomplete), "quantity_study": qstudy.to_dict()}


def write_gci_report(folder, qstudy, pictures=True):
    """Write study.json (kind "gci"), report.md and report.html for a quantity study."""
    from lapsolve.plotting import field_png

    doc = gci_document(qstudy)
    figs = []
    if pictures and qstudy.finest is not None:
        figs.append(("field.png", f"{qstudy.problem}: finest level", "png",
                     field_png(qstudy.finest)))
    files = {"study.json": dumps(doc), "report.md": markdown.gci_markdown(doc),
             "report.html": html.gci_html(doc, [f[1:] for f in figs])}
    _write(folder, files, figs)
    return doc
