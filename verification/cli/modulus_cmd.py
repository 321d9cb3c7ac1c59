"""``lapsolve modulus PROBLEM.toml --corners c0 c1 c2 c3``: exact modulus of a polygon."""

import json

import numpy as np

from lapsolve.errors import InputError

HELP = ("conformal modulus of a polygon with four marked corners (Schwarz-Christoffel): "
        "capacitance, resistance, accuracy, picture of equipotentials and field lines")

PHYSICS_CHOICES = ("generic", "thermal", "electrostatic")


def add_args(p):
    p.add_argument("problem", nargs="?", metavar="PROBLEM.toml",
                   help="problem file: its outer polygon, physics and coefficient are used "
                        "(not its boundary conditions)")
    p.add_argument("--polygon", metavar='"X,Y X,Y ..."',
                   help="the polygon on the command line instead of a file")
    p.add_argument("--corners", nargs="+", required=True, metavar="C",
                   help="four vertex indices c0 c1 c2 c3 in boundary order: u = 0 on the arc "
                        "c3 -> c0, u = 1 on the arc c1 -> c2, the other arcs insulated")
    p.add_argument("--physics", choices=PHYSICS_CHOICES,
                   help="with --polygon: physics for the units (default generic)")
    p.add_argument("--coefficient", type=float, metavar="K",
                   help="with --polygon: material coefficient (default 1)")
    p.add_argument("--sheet-resistance", type=float, metavar="RHO_S",
                   help="sheet resistance in ohm per square for R = RHO_S * M (default 1)")
    p.add_argument("--no-check", action="store_true",
                   help="skip the independent map of the conjugate quadrilateral")
    p.add_argument("--json", action="store_true", help="print the report as JSON")
    p.add_argument("--plot", metavar="FILE.png",
                   help="draw the polygon with equipotentials and field lines")
    p.add_argument("--out", metavar="DIR", help="write modulus.json and modulus.png to DIR")


def parse_polygon(text):
    """``"x,y x,y ..."`` -> array (n, 2); raises InputError naming ``--polygon``."""
    points = []
    for item in text.split():
        parts = item.split(",")
        try:
            if len(parts) != 2:
                raise ValueError
            x, y = float(parts[0]), float(parts[1])
        except ValueError:
            raise InputError(f"expected X,Y pairs separated by spaces, got '{item}'",
                             field="--polygon") from None
        if not (np.isfinite(x) and np.isfinite(y)):
            raise InputError(f"vertex '{item}' is not finite", field="--polygon")
        points.append((x, y))
    if len(points) < 3:
        raise InputError(f"a polygon needs at least 3 vertices, got {len(points)}",
                         field="--polygon")
    return np.array(points)


def parse_corners(items):
    """Four integers from the ``--corners`` words."""
    if len(items) != 4:
        raise InputError(f"give exactly four vertex indices, got {len(items)}",
                         field="--corners")
    try:
        return tuple(int(c) for c in items)
    except ValueError:
        raise InputError(f"vertex indices must be integers, got {' '.join(items)}",
                         field="--corners") from None


def _polygon_and_physics(args):
    from lapsolve.problem import PHYSICS

    if (args.problem is None) == (args.polygon is None):
        raise InputError("give a problem file or --polygon (one of them)", field="PROBLEM.toml")
    if args.polygon is not None:
        coefficient = 1.0 if args.coefficient is None else args.coefficient
        if not (np.isfinite(coefficient) and coefficient > 0):
            raise InputError(f"must be a positive number, got {coefficient}",
                             field="--coefficient")
        return (parse_polygon(args.polygon), PHYSICS[args.physics or "generic"], coefficient,
                "--polygon")
    if args.physics is not None or args.coefficient is not None:
        raise InputError("the problem file sets physics and coefficient; --physics and "
                         "--coefficient go with --polygon", field="--physics")
    from lapsolve.problem_file import load_problem
    from verification.exact.quadrilateral import polygon_of

    problem = load_problem(args.problem)
    return polygon_of(problem), problem.physics, problem.coefficient, str(args.problem)


def run(args):
    from lapsolve.atomic import OutputSet, write_bytes
    from verification.sc.picture import quadrilateral_png
    from verification.sc.report import format_report, modulus_report

    corners = parse_corners(args.corners)
    rho_s = args.sheet_resistance
    if rho_s is not None and not (np.isfinite(rho_s) and rho_s > 0):
        raise InputError(f"must be a positive number, got {rho_s}", field="--sheet-resistance")
    vertices, physics, coefficient, source = _polygon_and_physics(args)
    data, result = modulus_report(vertices, corners, physics, coefficient, rho_s=rho_s,
                                  source=source, check=not args.no_check)
    picture = None
    if args.plot or args.out:
        picture = quadrilateral_png(result, title=source)
    if args.plot:
        write_bytes(args.plot, picture)
    if args.out:
        with OutputSet(args.out) as out:
            out.text("modulus.json", json.dumps(data, indent=2) + "\n")
            out.bytes("modulus.png", picture)
            out.commit()
    if args.json:
        print(json.dumps(data, indent=2))
        return 0
    print("\n".join(format_report(data)))
    for path in [args.plot] + ([f"{args.out}/modulus.json", f"{args.out}/modulus.png"]
                               if args.out else []):
        if path:
            print(f"wrote {path}")
    return 0
