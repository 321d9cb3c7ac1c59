"""``lapsolve verify --out DIR``: run the standard suite, print PASS/FAIL, write a certificate.

Exit status 0 when every case and degree passes, 1 when anything does not.
"""

from lapsolve.errors import InputError

HELP = ("run the standard verification suite (every exact case at P1, P2 and P3 for smooth "
        "ones); print PASS/FAIL per case and degree and write a certificate")


def add_args(p):
    p.add_argument("--out", metavar="DIR",
                   help="write report.html (certificate), report.md, verify.json, junit.xml")
    p.add_argument("--cases", nargs="+", metavar="CASE", help="only these cases")
    p.add_argument("--orders", type=int, nargs="+", choices=(1, 2, 3), metavar="P",
                   help="only these element degrees")
    p.add_argument("--quick", action="store_true",
                   help="three levels instead of four for P1 and P2 (less margin; P3 keeps "
                        "four)")
    p.add_argument("--tol", type=float, default=None,
                   help="allowed shortfall of a norm's order (default 0.1)")
    p.add_argument("--qoi-tol", type=float, default=None,
                   help="allowed shortfall of a quantity's order (default 0.25)")
    p.add_argument("--no-pictures", action="store_true",
                   help="leave the field pictures out of the certificate")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print verify.json to stdout")


def run(args):
    from verification.report import ProgressBar, write_verify_report
    from verification.report.write import dumps, verify_document
    from verification.study import DEFAULT_QOI_TOL, DEFAULT_TOL
    from verification.suite import SuiteInterrupted, run_suite, standard_plans

    tol = DEFAULT_TOL if args.tol is None else args.tol
    qoi_tol = DEFAULT_QOI_TOL if args.qoi_tol is None else args.qoi_tol
    if not (tol >= 0 and qoi_tol >= 0):
        raise InputError("tolerances must be non-negative", field="--tol")
    plans = standard_plans(args.cases, args.orders, quick=args.quick)
    pictures = bool(args.out) and not args.no_pictures
    bar = ProgressBar(quiet=args.quiet)
    try:
        suite = run_suite(plans, tol=tol, qoi_tol=qoi_tol, progress=bar, keep_finest=pictures)
    except SuiteInterrupted as exc:
        bar.close()
        if args.out:
            write_verify_report(args.out, exc.partial, pictures=pictures)
        raise
    bar.close()
    doc = (write_verify_report(args.out, suite, pictures=pictures) if args.out
           else verify_document(suite))
    if args.json:
        print(dumps(doc), end="")
    else:
        print(format_suite(suite, args.out))
    return 0 if suite.passed else 1


def _o(value):
    return "–" if value is None or value != value else f"{value:.2f}"


def _pair(verdict):
    if verdict is None:
        return "–"
    return f"{_o(verdict.observed)}/{_o(verdict.expected)}"


def _worst_quantity(study):
    """The quantity check with the least margin, as 'name obs/exp'."""
    others = [(n, v) for n, v in study.checks.items() if n not in ("L2", "H1", "energy norm")]
    if not others:
        return "–"
    name, v = min(others, key=lambda item: (item[1].passed, (item[1].observed or 0)
                                            - item[1].expected))
    return f"{name} {_pair(v)}"


def format_suite(suite, out=None):
    """The terminal table: one row per case and degree, then every reason for a FAIL."""
    lines = [f"{'case':22s} {'P':>2s} {'status':6s} {'L2 obs/exp':>11s} {'H1 obs/exp':>11s} "
             f"{'DOFs':>8s} {'s':>5s}  least-margin quantity"]
    for s in suite.studies:
        status = "PASS" if s.status == "PASS" else "FAIL"
        dofs = s.levels[-1].dofs if s.levels else 0
        lines.append(f"{s.case:22s} {s.order:2d} {status:6s} {_pair(s.checks.get('L2')):>11s} "
                     f"{_pair(s.checks.get('H1')):>11s} {dofs:8,d} {s.seconds:5.1f}  "
                     f"{_worst_quantity(s)}")
    for s in suite.studies:
        for check, reason in s.problems():
            lines.append(f"FAIL {s.case} P{s.order} {check}: {reason}")
    counts = suite.counts()
    passed = counts["PASS"]
    verdict = "PASS" if suite.passed else "FAIL"
    lines.append(f"verification: {verdict} ({passed}/{len(suite.plans)} case-degree pairs passed"
                 f"{', interrupted' if suite.incomplete else ''}) in {suite.seconds:.1f} s")
    if out:
        lines.append(f"certificate: {out}/report.html (also verify.json, junit.xml, report.md)")
    return "\n".join(lines)
