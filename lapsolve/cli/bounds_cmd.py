"""``lapsolve bounds PROBLEM.toml``: guaranteed two-sided bounds on capacitance or conductance."""

import json
import math

from ..errors import InputError

HELP = ("guaranteed lower and upper bounds on the capacitance (conductance) of a "
        "two-terminal problem, level by level")


def add_args(p):
    p.add_argument("problem", help="problem file (TOML) with two electrodes, the rest insulated")
    p.add_argument("--order", type=int, choices=(1, 2, 3), default=2,
                   help="polynomial degree of the Lagrange elements (default 2)")
    p.add_argument("--levels", type=int, default=3, metavar="N",
                   help="number of meshes: the problem's mesh and N-1 uniform refinements "
                        "(default 3)")
    p.add_argument("--solver", choices=("auto", "direct", "amg", "gmg"), default="auto",
                   help="linear solver for both problems (the bounds hold for any solver "
                        "accuracy; a loose solve only widens them)")
    p.add_argument("--exact", type=float, metavar="VALUE",
                   help="a reference value (same units) to report effectivity indices")
    p.add_argument("--json", action="store_true", help="print the result as JSON")


def run(args):
    from .. import load_problem
    from ..bounds import capacity_bounds

    if not 1 <= args.levels <= 8:
        raise InputError("must be between 1 and 8", field="--levels")
    if args.exact is not None and not (math.isfinite(args.exact) and args.exact > 0):
        raise InputError("must be a positive finite number", field="--exact")
    problem = load_problem(args.problem)
    result = capacity_bounds(problem, order=args.order, levels=args.levels,
                             solver=args.solver, exact=args.exact)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2, default=float))
    else:
        print(format_bounds(result))
    return 0


def format_bounds(result):
    """The terminal table of a :class:`lapsolve.bounds.BoundsResult`."""
    unit = f" [{result.unit}]" if result.unit else ""
    first = result.levels[0]
    lines = [f"{result.problem}  ({result.physics}, P{result.order}): {result.quantity}{unit}",
             f"  electrodes  {', '.join(result.electrodes['high'])} at "
             f"{result.electrodes['v_high']:g}, {', '.join(result.electrodes['low'])} at "
             f"{result.electrodes['v_low']:g}",
             f"  layout      {result.topology}",
             f"  geometry    {first.geometry['note']}"
             + (f" (boundary gap {first.geometry['boundary_gap']:.1e} on the coarsest mesh)"
                if first.geometry["boundary_gap"] else "")]
    exact = result.exact is not None
    head = (f"  {'level':>5} {'DOFs':>10} {'lower':>17} {'upper':>17} {'rel.width':>9} "
            f"{'order':>5} {'resid u':>8} {'resid psi':>9}")
    if exact:
        head += f" {'inside':>6} {'effect.':>7}"
    lines.append(head)
    orders = [None] + result.width_orders()
    for lv, order in zip(result.levels, orders):
        row = (f"  {lv.level:>5} {lv.dofs:>10,} {lv.lower:>17.10e} {lv.upper:>17.10e} "
               f"{lv.relative_width:>9.2e} {_order(order):>5} "
               f"{lv.solver_u['relative_residual']:>8.1e} "
               f"{lv.solver_psi['relative_residual']:>9.1e}")
        if exact:
            eff = lv.effectivity
            row += f" {'yes' if lv.contains else 'NO':>6} {eff:>7.2f}"
        lines.append(row)
    last = result.levels[-1]
    lines.append(f"  midpoint    {last.midpoint:.12e} +- {0.5 * last.width:.2e} "
                 f"(hypercircle residual {last.eta:.3e})")
    if result.resistance_label:
        r_unit = f" [{result.resistance_unit}]" if result.resistance_unit else ""
        lines.append(f"  {result.resistance_label}{r_unit}: between {1 / last.upper:.10e} "
                     f"and {1 / last.lower:.10e}")
    for note in dict.fromkeys(n for lv in result.levels for n in lv.notes):
        lines.append(f"  note        {note}")
    if exact:
        lines.append("  effect.     (upper - lower) / (2 |exact - midpoint|), at least 1 "
                     "when the bounds hold")
    return "\n".join(lines)


def _order(value):
    return "" if value is None or not math.isfinite(value) else f"{value:.2f}"
