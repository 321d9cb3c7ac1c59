"""``lapsolve cases``: list, show, export and check exact-solution cases."""

import json

from lapsolve.errors import InputError

HELP = "list the exact-solution cases; show one, export it as a problem file, check a file"

ACTIONS = ("list", "show", "export", "check")


def add_args(p):
    p.add_argument("action", nargs="?", default="list", choices=ACTIONS,
                   help="list (default); show NAME; export NAME --toml [--out FILE]; "
                        "check PROBLEM.toml (a file with exact = \"f(z)\")")
    p.add_argument("name", nargs="?", metavar="NAME|FILE",
                   help="case name (show, export) or problem file (check)")
    p.add_argument("--toml", action="store_true", help="export as a TOML problem file")
    p.add_argument("--out", metavar="FILE", help="write the export to FILE (default: stdout)")
    p.add_argument("--json", action="store_true", help="print plain data as JSON")


def run(args):
    if args.action == "list":
        return _list(args)
    if not args.name:
        raise InputError(f"'cases {args.action}' needs a "
                         f"{'problem file' if args.action == 'check' else 'case name'}",
                         field="NAME")
    return {"show": _show, "export": _export, "check": _check}[args.action](args)


def _list(args):
    from verification.exact.catalogue import CASES, describe

    rows = [describe(case) for case in CASES.values()]
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    width = max(len(row["domain"]) for row in rows)
    print(f"{'name':20s} {'lambda':>7s}  {'domain':{width}s}  references")
    for row in rows:
        refs = ", ".join(f"{r['quantity']}={r['value']:.6g}" for r in row["references"])
        print(f"{row['name']:20s} {_lam(row['lambda']):>7s}  {row['domain']:{width}s}  {refs}")
    print(f"{len(rows)} cases; 'lapsolve cases show NAME' for details and sources")
    return 0


def _lam(lam):
    return "smooth" if lam is None else f"{lam:.4g}"


def _show(args):
    from verification.exact.catalogue import describe, get_case

    info = describe(get_case(args.name))
    if args.json:
        print(json.dumps(info, indent=2))
        return 0
    print(f"{info['name']}: {info['description']}")
    print(f"  domain: {info['domain']}")
    where = "" if info["singular_point"] is None else f" at {tuple(info['singular_point'])}"
    print(f"  singular exponent lambda: {_lam(info['lambda'])}{where}")
    print(f"  P3 suite: {'yes' if info['smooth'] else 'no'}; default mesh size "
          f"{info['default_size']:g}")
    if info["formula"]:
        print(f"  u = Re f(z), f = {info['formula']}")
    print("  boundary parts:")
    for name, part in info["parts"].items():
        edges = "all edges" if part["edges"] is None else f"edges {part['edges']}"
        level = "" if part["electrode"] is None else f", electrode at u = {part['electrode']:g}"
        print(f"    {name}: {part['kind']} on loop '{part['loop']}' ({edges}){level}")
    print("  references:")
    for ref in info["references"]:
        print(f"    {ref['quantity']} = {ref['value']:.15g} (scope: {ref['scope']})")
        print(f"      source: {ref['source']}")
    return 0


def _export(args):
    from lapsolve.atomic import write_text
    from verification.exact.catalogue import get_case
    from verification.exact.toml_export import case_toml

    if not args.toml:
        raise InputError("choose the export format: --toml", field="--toml")
    text = case_toml(get_case(args.name))
    if args.out:
        write_text(args.out, text)
        print(f"wrote {args.out}")
    else:
        print(text, end="")
    return 0


def _check(args):
    from lapsolve import load_problem
    from verification.exact.user import case_from_problem

    case = case_from_problem(load_problem(args.name))
    info = {
        "name": case.name,
        "formula": case.extras["formula"],
        "domain": case.extras["domain"],
        "parts": {name: {"kind": spec.kind, "electrode": spec.electrode}
                  for name, spec in case.conditions.items()},
        "warnings": case.extras["warnings"],
    }
    if args.json:
        print(json.dumps(info, indent=2))
        return 0
    print(f"{args.name}: exact solution u = Re({info['formula']}) on {info['domain']}")
    for name, part in info["parts"].items():
        level = "" if part["electrode"] is None else f" (electrode at u = {part['electrode']:g})"
        print(f"  {name}: exact {part['kind']} data{level}")
    for message in info["warnings"]:
        print(f"  warning: {message}")
    print("no singularity or branch cut found inside the domain")
    return 0
