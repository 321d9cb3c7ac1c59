"""``lapsolve baseline save|check``: regression baselines of study, verify or certify runs."""

HELP = ("store the norms, orders and quantities of a run as a named baseline, or check a "
        "run against one (exit 1 on a regression)")


def add_args(p):
    sub = p.add_subparsers(dest="action", metavar="ACTION")
    sub.required = True
    save = sub.add_parser("save", help="store RUN.json as baseline NAME")
    save.add_argument("run_file", metavar="RUN.json",
                      help="a study, verify or certify JSON report")
    save.add_argument("--name", required=True, help="baseline name, e.g. v4.2")
    save.add_argument("--dir", default="baselines", help="baseline folder (default baselines/)")
    save.add_argument("--force", action="store_true", help="replace an existing baseline")
    check = sub.add_parser("check", help="compare RUN.json with a stored baseline")
    check.add_argument("run_file", metavar="RUN.json")
    check.add_argument("--against", required=True, metavar="NAME",
                       help="baseline name (in --dir) or baseline file")
    check.add_argument("--dir", default="baselines", help="baseline folder (default baselines/)")
    check.add_argument("--rtol", type=float, default=0.02,
                       help="allowed relative growth of an error norm (default 0.02)")
    check.add_argument("--order-drop", type=float, default=0.1,
                       help="allowed drop of an observed order (default 0.1)")
    check.add_argument("--qtol", type=float, default=None,
                       help="allowed relative drift of a quantity (default: --rtol)")
    check.add_argument("--atol", type=float, default=1e-12,
                       help="absolute slack for errors near round-off (default 1e-12)")
    check.add_argument("--junit", metavar="FILE", help="write JUnit XML here")
    check.add_argument("--all", action="store_true", help="list unchanged entries too")
    check.add_argument("--json", action="store_true", help="print the comparison as JSON")


def run(args):
    if args.action == "save":
        return _save(args)
    return _check(args)


def _save(args):
    from verification.baseline import save_baseline

    path, baseline = save_baseline(args.run_file, args.name, args.dir, force=args.force)
    kinds = {}
    for entry in baseline["entries"].values():
        kinds[entry["kind"]] = kinds.get(entry["kind"], 0) + 1
    counts = ", ".join(f"{v} {k}" for k, v in sorted(kinds.items()))
    print(f"saved baseline '{args.name}' ({counts} entries) to {path}")
    return 0


def _check(args):
    import json

    from lapsolve.atomic import write_text
    from verification.baseline import compare, comparison_junit, diff_table, load_baseline, read_run

    baseline = load_baseline(args.against, args.dir)
    rows = compare(baseline, read_run(args.run_file), rtol=args.rtol,
                   order_drop=args.order_drop, atol=args.atol, qtol=args.qtol)
    failed = [r for r in rows if r.failed]
    if args.junit:
        write_text(args.junit, comparison_junit(rows, baseline["name"]))
    if args.json:
        print(json.dumps({"baseline": baseline["name"], "passed": not failed,
                          "entries": [r.to_dict() for r in rows]}, indent=1, default=str))
    else:
        print(diff_table(rows, show_all=args.all))
        print(f"baseline '{baseline['name']}': "
              + (f"{len(failed)} regression(s)" if failed else "no regression"))
    return 1 if failed else 0
