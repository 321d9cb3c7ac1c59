"""Write an exact case as a problem file that ``lapsolve solve`` accepts.

An analytic case is written with ``exact = "f(z)"``: verification tools read it
(:func:`verification.exact.user.case_from_problem`) and take all boundary data
from f at the actual points, so the file is exact. The ``value`` of each part
is written too, as the same solution in ``x`` and ``y`` (Dirichlet) or its
normal flux on each straight edge or circle (Neumann), so that ``lapsolve
solve`` on its own solves the same problem. A case without a single f(z)
(piecewise) is written without ``exact`` when its Dirichlet data have an x, y
formula; anything else is refused with a clear message.
"""

import json

import numpy as np

from lapsolve.atomic import write_text
from lapsolve.errors import GeometryError, InputError
from lapsolve.formula import parse
from lapsolve.geometry import CircleLoop, make_polygon


def case_toml(case):
    """The problem-file text of ``case``.

    Raises
    ------
    InputError
        The case has no formula for its boundary data, or its domain cannot be
        written as a problem file (a polygon the loader refuses).
    """
    u_xy = case.extras.get("u_xy")
    if u_xy is None:
        _refuse(case, "it has no formula for its boundary data")
    problem = case.problem()
    outer_name = problem.outer.name
    lines = [f"# Exact case '{case.name}' written by 'lapsolve cases export'.",
             f"# {case.description}"]
    formula = case.extras.get("formula")
    if formula is not None:
        lines += ["# u = Re f(z) with f = exact below: verification tools take every boundary",
                  "# value from f at the actual points; 'value' holds the same data in x, y."]
    else:
        lines += ["# Not a single analytic f(z): the Dirichlet values are the exact solution in "
                  "x, y."]
    lines += [f"title = {_str(case.name)}",
              f"description = {_str(case.description)}",
              f"physics = {_str(problem.physics.kind)}",
              f"coefficient = {_num(problem.coefficient)}"]
    if formula is not None:
        lines.append(f"exact = {_str(formula)}")
    lines += ["", "[outer]", _loop_line(case, problem.outer)]
    for hole in problem.holes:
        lines += ["", "[[holes]]", f"name = {_str(hole.name)}", _loop_line(case, hole)]
    for region in problem.regions:
        lines += ["", "[[regions]]", f"name = {_str(region.name)}",
                  _loop_line(case, region.loop), f"coefficient = {_num(region.coefficient)}"]
    derivatives = None
    for name, spec in case.conditions.items():
        loop = problem.loop(spec.loop)
        loop_name = "outer" if spec.loop == outer_name else spec.loop
        if spec.kind == "dirichlet":
            value = _num(spec.electrode) if spec.electrode is not None else _str(u_xy)
            lines += _part(name, loop_name, spec.edges, "dirichlet", value)
        elif spec.kind == "neumann":
            derivatives = derivatives or _gradient_text(u_xy)
            for part_name, edges, flux in _neumann_pieces(case, name, spec, loop,
                                                          loop is problem.outer, derivatives):
                lines += _part(part_name, loop_name, edges, "neumann", _str(flux))
        else:
            lines += _part(name, loop_name, spec.edges, "insulated", None)
    lines += ["", "[mesh]", f"max_size = {_num(case.default_size)}",
              f"min_angle = {_num(problem.mesh.min_angle)}", ""]
    return "\n".join(lines)


def export_case(case, path):
    """Write :func:`case_toml` to ``path`` atomically; returns the path."""
    text = case_toml(case)
    write_text(path, text)
    return path


def _refuse(case, why):
    raise InputError(f"case '{case.name}' cannot be written as a problem file: {why}",
                     field="case")


def _str(text):
    # A JSON string of printable ASCII is a valid TOML basic string.
    return json.dumps(str(text), ensure_ascii=True)


def _num(value):
    return repr(float(value))


def _loop_line(case, loop):
    if isinstance(loop, CircleLoop):
        cx, cy = loop.center
        return (f"circle = {{ center = [{_num(cx)}, {_num(cy)}], "
                f"radius = {_num(loop.radius)} }}")
    try:
        make_polygon(loop.name, loop.vertices)
    except GeometryError as exc:
        hint = "; the slit domain runs along the slit twice" if case.extras.get("slit") else ""
        _refuse(case, f"the problem-file loader refuses its polygon '{loop.name}' "
                      f"({exc.message}){hint}")
    pairs = ", ".join(f"[{_num(x)}, {_num(y)}]" for x, y in loop.vertices)
    return f"polygon = [{pairs}]"


def _part(name, loop_name, edges, kind, value):
    lines = ["", f"[boundary.{_str(name)}]", f"loop = {_str(loop_name)}"]
    if edges is not None:
        lines.append(f"edges = [{', '.join(str(int(e)) for e in edges)}]")
    lines.append(f"type = {_str(kind)}")
    if value is not None:
        lines.append(f"value = {value}")
    return lines


def _gradient_text(u_xy):
    u = parse(u_xy, variables=("x", "y"))
    return f"({u.derivative('x')})", f"({u.derivative('y')})"


def _neumann_pieces(case, name, spec, loop, is_outer, derivatives):
    """``(part name, edges, flux formula)``: one piece per straight edge, or the circle."""
    ux, uy = derivatives
    sign = 1.0 if is_outer else -1.0   # outward normal of the domain
    if isinstance(loop, CircleLoop):
        cx, cy = loop.center
        k = _coefficient_on(case, np.asarray(loop.center) + [loop.radius, 0.0])
        scale = sign * k / loop.radius
        return [(name, spec.edges,
                 f"{_num(scale)}*((x - {_num(cx)})*{ux} + (y - {_num(cy)})*{uy})")]
    edges = range(loop.n_edges) if spec.edges is None else spec.edges
    pieces = []
    for e in edges:
        a, b = loop.edge_points(e)
        d = b - a
        nx, ny = sign * d[1] / np.hypot(*d), -sign * d[0] / np.hypot(*d)
        k = _coefficient_on(case, 0.5 * (a + b))
        part = name if len(edges) == 1 else f"{name}-{e}"
        terms = [f"{_num(k * c)}*{d}" for c, d in ((nx, ux), (ny, uy)) if c != 0]
        pieces.append((part, (int(e),), " + ".join(terms)))
    return pieces


def _coefficient_on(case, point):
    return float(np.asarray(case.k(np.array([point[0]]), np.array([point[1]]))).ravel()[0])
