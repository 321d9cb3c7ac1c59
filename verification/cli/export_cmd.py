"""``lapsolve export CASE... --levels N --order 1 2 --out DIR``: a benchmark for another solver."""

import math
from pathlib import Path

from lapsolve.errors import InputError

HELP = ("export meshes (Gmsh MSH 4.1 and VTU), boundary data and a manifest so that another "
        "solver can be certified (see docs/certification.md)")


def add_args(p):
    p.add_argument("cases", nargs="+", metavar="CASE", help="exact cases ('lapsolve cases')")
    p.add_argument("--levels", type=int, default=4, metavar="N",
                   help="number of levels; each refines the previous uniformly (default 4)")
    p.add_argument("--order", type=int, nargs="+", default=[1, 2], choices=(1, 2),
                   help="element orders: 1 writes 3-node, 2 writes 6-node triangles "
                        "(default: 1 2)")
    p.add_argument("--size", type=float, metavar="H",
                   help="level-0 element size (default: each case's own)")
    p.add_argument("--field", default="u", help="name of the point field to return (default u)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the benchmark")


def run(args):
    from verification.exact.catalogue import get_case
    from verification.export import export_benchmark

    if args.size is not None and not (args.size > 0 and math.isfinite(args.size)):
        raise InputError("must be a positive number", field="--size")
    if not args.field.strip() or any(c in args.field for c in "\n\r\t"):
        raise InputError("must name a point field", field="--field")
    cases = [get_case(name) for name in args.cases]
    manifest = export_benchmark(cases, args.out, levels=args.levels, orders=args.order,
                                field=args.field, size=args.size)
    for entry in manifest["cases"]:
        sizes = ", ".join(f"{row['triangles']}" for row in entry["levels"])
        print(f"{entry['name']}: levels {manifest['levels'][0]}..{manifest['levels'][-1]} "
              f"({sizes} triangles), orders {', '.join(f'P{p}' for p in manifest['orders'])}")
    print(f"wrote {Path(args.out) / 'manifest.json'}; return results as "
          f"{manifest['results']['pattern']} with point field '{manifest['field']}'")
    return 0
