"""``lapsolve effectivity [CASE ...]``: how well the orthogonality residual estimates
the energy error, on exact cases."""

import json
import sys

from lapsolve.errors import InputError

HELP = ("effectivity of the orthogonality (Cauchy-Riemann) residual as an energy-error "
        "estimate, on the catalogue's exact cases")


def add_args(p):
    p.add_argument("cases", nargs="*", metavar="CASE",
                   help="catalogue cases (default: every case; see 'lapsolve cases')")
    p.add_argument("--order", type=int, nargs="+", default=[1, 2], choices=(1, 2, 3),
                   help="element degrees (default 1 2)")
    p.add_argument("--levels", type=int, default=3,
                   help="uniform refinement levels per case, 1 to 6 (default 3)")
    p.add_argument("--json", metavar="FILE.json", help="write every row as JSON")
    p.add_argument("--plot", metavar="FILE.png", help="draw effectivity against DOFs")
    p.add_argument("--quiet", action="store_true", help="no progress lines on stderr")


def run(args):
    from lapsolve.atomic import write_bytes, write_text
    from verification.estimator import (
        effectivity_png,
        effectivity_rows,
        expected_energy_order,
        markdown_table,
    )
    from verification.exact.catalogue import CASES, get_case

    if not 1 <= args.levels <= 6:
        raise InputError(f"must be 1 to 6, got {args.levels}", field="--levels")
    names = args.cases or list(CASES)
    cases = [get_case(name) for name in names]  # unknown names: one-line error
    results, expected = {}, {}

    def progress(row):
        if not args.quiet:
            print(f"  {row.case} P{row.order} level {row.level}: {row.dofs:,} DOFs, "
                  f"effectivity {row.effectivity:.3f} ({row.seconds:.1f} s)", file=sys.stderr,
                  flush=True)

    for case in cases:
        for order in args.order:
            results[case.name, order] = effectivity_rows(case, order, args.levels,
                                                         progress=progress)
            expected[case.name, order] = expected_energy_order(case, order)
    lines = markdown_table(results, expected)
    if args.json:
        data = {"rows": [r.to_dict() for rows in results.values() for r in rows],
                "expected_energy_order": [{"case": k[0], "order": k[1], "value": v}
                                          for k, v in expected.items()]}
        write_text(args.json, json.dumps(data, indent=2) + "\n")
    if args.plot:
        write_bytes(args.plot, effectivity_png(results))
    print("\n".join(lines))
    effs = [r.effectivity for rows in results.values() for r in rows]
    print(f"\neffectivity: min {min(effs):.3f}, max {max(effs):.3f} over {len(effs)} solutions")
    for path in (args.json, args.plot):
        if path:
            print(f"wrote {path}")
    return 0
