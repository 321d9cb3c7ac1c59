"""``lapsolve study CASE --order 1 2 --levels 6 --out DIR``: a convergence study.

With a problem file instead of a case name (``lapsolve study problem.toml
--levels 4 --quantity capacitance``) the quantity is computed per level and its
discretisation error estimated by Richardson extrapolation and the GCI.
"""

from pathlib import Path

from lapsolve.errors import InputError

HELP = ("refine an exact case level by level and judge the observed orders (or, for a "
        "problem file, estimate a quantity's discretisation error by the GCI)")

MAX_LEVELS = 9


def add_args(p):
    p.add_argument("target", metavar="CASE|PROBLEM.toml",
                   help="an exact case ('lapsolve cases') or a problem file")
    p.add_argument("--order", type=int, nargs="+", default=None, choices=(1, 2, 3),
                   help="element degrees (default: 1 2 for a case, 2 for a problem file)")
    p.add_argument("--levels", type=int, default=4, metavar="N",
                   help="number of levels (default 4); each halves h")
    p.add_argument("--size", type=float, metavar="H", help="coarsest element size "
                   "(default: the case's own, or the file's mesh.max_size)")
    p.add_argument("--graded", action="store_true",
                   help="mesh each level graded toward the singular corner; orders in DOFs")
    p.add_argument("--mu", type=float, metavar="MU",
                   help="grading parameter in (0, 1]: local size h (r/R)^(1-MU) "
                        "(default 0.75 lambda/p)")
    p.add_argument("--tol", type=float, default=None,
                   help="allowed shortfall of a norm's order (default 0.1)")
    p.add_argument("--qoi-tol", type=float, default=None,
                   help="allowed shortfall of a quantity's order (default 0.25)")
    p.add_argument("--quantity", metavar="Q",
                   help="for a problem file: capacitance, energy or flux:<part>")
    p.add_argument("--corners", type=int, nargs=4, metavar="C",
                   help="with a problem file: four marked vertices of its outer polygon; the "
                        "polygon becomes an exact case (Schwarz-Christoffel; arc C3->C0 at 0, "
                        "arc C1->C2 at 1, the rest insulated)")
    p.add_argument("--out", metavar="DIR", help="write report.html, report.md, study.json, plots")
    p.add_argument("--no-pictures", action="store_true",
                   help="leave the field and error maps out of the report")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print study.json to stdout")


def _is_file(target):
    return target.endswith(".toml") or Path(target).is_file()


def _check(args):
    if not 1 <= args.levels <= MAX_LEVELS:
        raise InputError(f"must be between 1 and {MAX_LEVELS}", field="--levels")
    if args.size is not None and not args.size > 0:
        raise InputError("must be a positive number", field="--size")
    for name in ("tol", "qoi_tol"):
        value = getattr(args, name)
        if value is not None and not value >= 0:
            raise InputError("must be a non-negative number", field=f"--{name.replace('_', '-')}")


def run(args):
    _check(args)
    if _is_file(args.target) and args.corners is None and not _has_exact(args.target):
        return _run_quantity(args)
    return _run_case(args)


def _has_exact(path):
    from lapsolve import load_problem

    return "exact" in load_problem(path).extras


def _case_for(args):
    """The exact case a study runs: a catalogue name, a polygon with marked corners,
    or a problem file with ``exact = "f(z)"``."""
    from verification.exact.catalogue import get_case

    if not _is_file(args.target):
        if args.corners is not None:
            raise InputError("--corners needs a problem file with an outer polygon",
                             field="--corners")
        return get_case(args.target)
    if args.corners is not None:
        from verification.exact.quadrilateral import case_from_problem_file

        return case_from_problem_file(args.target, args.corners)
    from lapsolve import load_problem
    from verification.exact.user import case_from_problem

    return case_from_problem(load_problem(args.target))


def _run_case(args):
    from verification.report import ProgressBar, write_study_report
    from verification.report.write import study_document
    from verification.study import DEFAULT_QOI_TOL, DEFAULT_TOL, StudyInterrupted, run_studies

    if args.quantity:
        raise InputError("--quantity applies to a problem file; a case is judged against its "
                         "exact solution and references", field="--quantity")
    case = _case_for(args)
    orders = args.order or [1, 2]
    bar = ProgressBar(quiet=args.quiet)
    offset = [0]

    def progress(done, total, text):
        bar(offset[0] + done, args.levels * len(orders), text)
        if done == total:
            offset[0] += total

    options = dict(solver=None, graded=args.graded, mu=args.mu,
                   tol=DEFAULT_TOL if args.tol is None else args.tol,
                   qoi_tol=DEFAULT_QOI_TOL if args.qoi_tol is None else args.qoi_tol,
                   progress=progress, keep_finest=bool(args.out) and not args.no_pictures)
    try:
        studies = run_studies(case, orders, args.levels, args.size, **options)
    except StudyInterrupted as exc:
        bar.close()
        if args.out:
            write_study_report(args.out, exc.partial, {case.name: case}, incomplete=True,
                               pictures=not args.no_pictures)
        raise
    bar.close()
    if args.out:
        doc = write_study_report(args.out, studies, {case.name: case},
                                 pictures=not args.no_pictures)
    else:
        doc = study_document(studies)
    if args.json:
        from verification.report.write import dumps

        print(dumps(doc), end="")
    else:
        print(format_studies(studies, args.out))
    return 0 if doc["status"] == "PASS" else 1


def _e(value):
    return "–" if value is None else f"{value:.3e}"


def _o(value):
    return "–" if value is None or value != value else f"{value:.2f}"


def format_studies(studies, out=None):
    """The terminal table of a study: levels, then orders against theory, then reasons."""
    lines = []
    for s in studies:
        axis = "N^(-1/2)" if s.graded else "h"
        lines.append(f"{s.case} P{s.order} ({'graded' if s.graded else 'uniform'}, "
                     f"orders in {axis}): {s.status}")
        lines.append(f"  {'level':>5s} {'h':>9s} {'DOFs':>9s} {'L2':>10s} {'H1':>10s} "
                     f"{'seconds':>8s}")
        for lv in s.levels:
            lines.append(f"  {lv.index:5d} {lv.h:9.4g} {lv.dofs:9,d} {_e(lv.errors['L2']):>10s} "
                         f"{_e(lv.errors['H1']):>10s} {lv.seconds['total']:8.2f}")
        for name, v in s.checks.items():
            pairs = " ".join(_o(x) for x in v.pairwise)
            lines.append(f"  {name:22s} expected {v.expected:5.2f}  observed {_o(v.observed):>5s} "
                         f" fitted {_o(v.fitted):>5s}  {v.status:12s} pairwise {pairs}")
        for check, reason in s.problems():
            lines.append(f"  why ({check}): {reason}")
    if out:
        lines.append(f"report: {out}/report.html")
    return "\n".join(lines)


def _run_quantity(args):
    from lapsolve import load_problem
    from verification.report import ProgressBar, write_gci_report
    from verification.report.write import dumps, gci_document
    from verification.study import StudyInterrupted, run_quantity_study

    if not args.quantity:
        raise InputError("a problem file has no exact solution: give --quantity "
                         "(capacitance, energy or flux:<part>)", field="--quantity")
    if args.graded or args.mu is not None:
        raise InputError("grading needs a singular point: use it with an exact case",
                         field="--graded")
    orders = args.order or [2]
    if len(orders) != 1:
        raise InputError("give one degree for a quantity study", field="--order")
    problem = load_problem(args.target)
    bar = ProgressBar(quiet=args.quiet)
    try:
        qstudy = run_quantity_study(problem, args.quantity, args.levels, orders[0],
                                    size=args.size, progress=bar,
                                    keep_finest=bool(args.out) and not args.no_pictures)
    except StudyInterrupted as exc:
        bar.close()
        if args.out:
            write_gci_report(args.out, exc.partial, pictures=not args.no_pictures)
        raise
    bar.close()
    if args.out:
        doc = write_gci_report(args.out, qstudy, pictures=not args.no_pictures)
    else:
        doc = gci_document(qstudy)
    if args.json:
        print(dumps(doc), end="")
    else:
        print(format_quantity(qstudy, args.out))
    return 0


def format_quantity(q, out=None):
    lines = [f"{q.problem}: {q.quantity}, P{q.order}, uniform refinement"]
    lines.append(f"  {'level':>5s} {'h':>9s} {'DOFs':>9s} {'value':>18s}")
    for lv in q.levels:
        lines.append(f"  {lv['index']:5d} {lv['h']:9.4g} {lv['dofs']:9,d} {lv['value']:18.10g}")
    if q.gci:
        f = q.gci["finest"]
        gci = "–" if f["gci_fine21"] is None else f"{100 * f['gci_fine21']:.3g} %"
        ext = "–" if f["phi_ext21"] is None else f"{f['phi_ext21']:.10g}"
        lines.append(f"  apparent order {_o(f['p'])}, extrapolated {ext}, GCI (fine) {gci}"
                     " (Celik et al. 2008, safety factor 1.25)")
        if f["note"]:
            lines.append(f"  note: {f['note']}")
    if out:
        lines.append(f"report: {out}/report.html")
    return "\n".join(lines)

