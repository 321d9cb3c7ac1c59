"""``lapsolve certify MANIFEST --results DIR --out DIR``: certify another solver's results."""

HELP = ("certify another solver: import its results on its own mesh and element type, "
        "measure the errors against the exact solutions, judge the orders")


def add_args(p):
    p.add_argument("manifest", help="manifest.json written by 'lapsolve export'")
    p.add_argument("--results", required=True, metavar="DIR",
                   help="folder with <case>/P<order>/level<k>.<ext> result files")
    p.add_argument("--field", help="point field to read (default: the manifest's)")
    p.add_argument("--out", metavar="DIR",
                   help="write certificate.html, certificate.json and junit.xml here")
    p.add_argument("--tol", type=float, default=0.1,
                   help="allowed shortfall of an observed order (default 0.1)")
    p.add_argument("--qoi-tol", type=float, default=None,
                   help="allowed shortfall of a quantity's order (default 0.25)")
    p.add_argument("--require-all", action="store_true",
                   help="fail when a case or order of the manifest has no results")
    p.add_argument("--json", action="store_true", help="print the certificate as JSON")


def run(args):
    import json

    from lapsolve.errors import InputError
    from verification.certify import QOI_TOL, certify, write_certificate

    qoi_tol = QOI_TOL if args.qoi_tol is None else args.qoi_tol
    if not (args.tol >= 0 and qoi_tol >= 0):
        raise InputError("tolerances must be non-negative", field="--tol")
    cert = certify(args.manifest, args.results, field=args.field, tol=args.tol,
                   qoi_tol=qoi_tol, require_all=args.require_all)
    if args.out:
        write_certificate(cert, args.out)
    if args.json:
        print(json.dumps(cert.to_dict(), indent=1))
    else:
        print(summary_text(cert, args.out))
    return 0 if cert.passed else 1


def summary_text(cert, out=None):
    """A short table of the certificate for the terminal."""
    lines = [f"{'case':22s} {'order':5s} {'status':14s} " + " ".join(
        f"{n + ' obs/exp':>14s}" for n in ("L2", "H1", "energy"))]
    for slot in cert.slots:
        rates = []
        for norm in ("L2", "H1", "energy"):
            v = slot.verdicts.get(norm)
            rates.append(f"{_f(v.observed)}/{_f(v.expected)}" if v else "–")
        lines.append(f"{slot.case:22s} P{slot.order:<4d} {slot.status:14s} "
                     + " ".join(f"{r:>14s}" for r in rates))
        for q in slot.quantities:
            if q.status != "LISTED":
                lines.append(f"{'':22s} {'':5s} {q.status:14s} quantity {q.name}: "
                             f"{q.verdict['reason']}")
        if slot.diagnosis:
            lines.append(f"{'':22s} {'':5s} why: {slot.diagnosis}")
    lines.append(f"certificate: {cert.status}" + (f" (written to {out}/)" if out else ""))
    return "\n".join(lines)


def _f(value):
    import math

    return "–" if value is None or not math.isfinite(value) else f"{value:.2f}"
