"""Read a problem file (TOML) into a :class:`~lapsolve.problem.Problem`.

The format is documented in ``docs/problem-format.md``. Every refusal is an
:class:`~lapsolve.errors.InputError` naming the file and the dotted field.
"""

import math
import re
import tomllib
from pathlib import Path

import numpy as np

from .errors import FormulaError, GeometryError, InputError, ResourceLimitError
from .geometry import (
    check_feature_size,
    loop_inside,
    loops_overlap,
    make_circle,
    make_polygon,
)
from .problem import (
    CONDITION_KINDS,
    PHYSICS,
    BoundaryPart,
    Condition,
    Grading,
    MeshControls,
    Problem,
    Region,
    constant,
)

TOP_KEYS = {"title", "description", "physics", "coefficient", "source", "outer", "holes",
            "regions", "boundary", "mesh", "exact"}
PART_KEYS = {"loop", "edges", "type", "value", "h", "u_ref"}
MESH_KEYS = {"max_size", "max_area", "min_angle", "grading"}
#: Largest accepted problem file (documented resource limit): a 5000-vertex
#: polygon takes about 0.2 MB.
MAX_FILE_BYTES = 16 * 2**20


def load_problem(path):
    """Read and validate a problem file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Problem
    """
    path = Path(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)
        if len(raw) > MAX_FILE_BYTES:
            raise ResourceLimitError(f"file is larger than {MAX_FILE_BYTES // 2**20} MiB, the "
                                     "limit for a problem file", source=str(path))
        text = raw.decode("utf-8")
    except FileNotFoundError:
        raise InputError("file not found", source=str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read file ({exc.__class__.__name__})", source=str(path)) from None
    _refuse_overlong_strings(text, str(path))
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", source=str(path)) from None
    except RecursionError:
        raise InputError("not valid TOML here: arrays or tables nested too deeply",
                         source=str(path)) from None
    return problem_from_dict(data, origin=str(path))


_SENTINEL = "\ue000"  # a private-use character: never part of a real problem file


def _refuse_overlong_strings(text, source):
    """Refuse a string longer than a formula may be, before the TOML reader sees it.

    Reading a megabyte-long string costs the TOML reader tens of milliseconds; the
    formula limit is known in advance, so the refusal comes first (a hostile input
    gets its answer within 100 ms). To name the field, the string is replaced by a
    one-character stand-in and the now small file is parsed.
    """
    from .formula import MAX_LENGTH

    match = re.search(r'"[^"\n]{%d,}' % (MAX_LENGTH + 1), text)
    if match is None:
        return
    end = text.find('"', match.end())
    stop = end if end >= 0 else len(text)
    length = stop - match.start() - 1
    field = None
    try:
        field = _find_value(tomllib.loads(text[:match.start()] + f'"{_SENTINEL}"'
                                          + text[stop + 1:]), _SENTINEL)
    except tomllib.TOMLDecodeError:
        pass
    raise FormulaError(f"a string of {length:,} characters; formulas are limited to "
                       f"{MAX_LENGTH:,} characters", source=source, field=field)


def _find_value(data, target, prefix=""):
    """Dotted path of the first occurrence of ``target`` in parsed TOML data."""
    items = data.items() if isinstance(data, dict) else enumerate(data)
    for key, value in items:
        path = f"{prefix}[{key}]" if isinstance(data, list) else \
            (f"{prefix}.{key}" if prefix else str(key))
        if value == target:
            return path
        if isinstance(value, (dict, list)):
            found = _find_value(value, target, path)
            if found:
                return found
    return None


class _Reader:
    """Typed field access that names the file and field in every error."""

    def __init__(self, origin):
        self.origin = origin

    def fail(self, field, message, kind=InputError):
        raise kind(message, source=self.origin, field=field)

    def table(self, data, field, keys=None):
        if not isinstance(data, dict):
            self.fail(field, f"must be a table, got {type(data).__name__}")
        if keys is not None:
            unknown = sorted((str(k) for k in set(data) - keys))
            if unknown:
                self.fail(f"{field}.{unknown[0]}" if field else unknown[0],
                          f"unknown key (allowed: {', '.join(sorted(keys))})")
        return data

    def number(self, value, field, positive=False, lo=None, hi=None):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(field, f"must be a number, got {type(value).__name__}")
        try:
            value = float(value)
        except OverflowError:
            self.fail(field, "must be finite, got an integer too large for a float")
        if not math.isfinite(value):
            self.fail(field, f"must be finite, got {value}")
        if positive and value <= 0:
            self.fail(field, f"must be positive, got {value}")
        if lo is not None and value < lo or hi is not None and value > hi:
            self.fail(field, f"must lie in [{lo}, {hi}], got {value}")
        return value

    def text(self, value, field):
        if not isinstance(value, str):
            self.fail(field, f"must be a string, got {type(value).__name__}")
        return value

    def data(self, value, field):
        """A number or a formula in x and y, as boundary data ``g(x, y, nx, ny)``."""
        if isinstance(value, str):
            from .formula import parse

            formula = parse(value, variables=("x", "y"), source=self.origin, field=field)
            if formula.is_constant:
                return self._checked_constant(formula(x=np.zeros(1), y=np.zeros(1))[0], field)

            def g(x, y, nx=None, ny=None):
                values = np.asarray(formula(x=x, y=y), float)
                bad = ~np.isfinite(values)
                if np.any(bad):
                    i = np.flatnonzero(bad.ravel())[0]
                    at = (np.ravel(x)[i], np.ravel(y)[i])
                    self.fail(field, f"evaluates to {values.ravel()[i]} at "
                                     f"(x, y) = ({at[0]:.6g}, {at[1]:.6g})")
                return values

            g.text = value
            return g
        return constant(self.number(value, field))

    def _checked_constant(self, value, field):
        if not math.isfinite(value):
            self.fail(field, f"evaluates to {value}")
        return constant(value)

    def loop(self, name, data, field):
        data = self.table(data, field)
        has_poly, has_circle = "polygon" in data, "circle" in data
        if has_poly == has_circle:
            self.fail(field, "give exactly one of polygon = [[x, y], ...] or "
                             "circle = {center = [x, y], radius = r}")
        if has_poly:
            poly = data["polygon"]
            if not isinstance(poly, list) or not poly:
                self.fail(f"{field}.polygon", "must be a non-empty list of [x, y] pairs")
            return make_polygon(name, poly, self.origin, f"{field}.polygon")
        circ = self.table(data["circle"], f"{field}.circle", {"center", "radius"})
        if "center" not in circ or "radius" not in circ:
            self.fail(f"{field}.circle", "needs center and radius")
        center = circ["center"]
        if not isinstance(center, list) or len(center) != 2:
            self.fail(f"{field}.circle.center", "must be [x, y]")
        return make_circle(name, [self.number(c, f"{field}.circle.center") for c in center],
                           self.number(circ["radius"], f"{field}.circle.radius", positive=True),
                           self.origin, f"{field}.circle")


def problem_from_dict(data, origin="<memory>"):
    """Build a :class:`Problem` from parsed TOML data (see :func:`load_problem`)."""
    rd = _Reader(origin)
    rd.table(data, "", TOP_KEYS)
    if "outer" not in data:
        rd.fail("outer", "missing: the outer boundary is required")
    physics_name = rd.text(data.get("physics", "generic"), "physics")
    if physics_name not in PHYSICS:
        rd.fail("physics", f"unknown physics '{physics_name}' (choose from {', '.join(PHYSICS)})")
    coefficient = rd.number(data.get("coefficient", 1.0), "coefficient", positive=True)
    outer = rd.loop("outer", {k: v for k, v in rd.table(data["outer"], "outer").items()},
                    "outer")
    holes = _holes(rd, data.get("holes", []), outer)
    regions = _regions(rd, data.get("regions", []), outer, holes)
    source = None
    if "source" in data:
        src = rd.data(data["source"], "source")
        source = (lambda x, y, g=src: g(x, y)) if getattr(src, "constant", None) != 0.0 else None
    problem = Problem(
        name=rd.text(data.get("title", Path(origin).stem), "title"),
        outer=outer, holes=holes, regions=regions, coefficient=coefficient, source=source,
        physics=PHYSICS[physics_name], origin=origin,
        description=rd.text(data.get("description", ""), "description"),
        mesh=_mesh(rd, data.get("mesh", {}), outer),
        extras={"exact": rd.text(data["exact"], "exact")} if "exact" in data else {},
    )
    parts = _parts(rd, data.get("boundary", {}), problem)
    from dataclasses import replace

    return replace(problem, parts=parts)


def _named_list(rd, items, field):
    if not isinstance(items, list):
        rd.fail(field, "must be an array of tables ([[...]])")
    names = set()
    for i, item in enumerate(items):
        item = rd.table(item, f"{field}[{i}]")
        name = item.get("name")
        if not isinstance(name, str) or not name.strip():
            rd.fail(f"{field}[{i}].name", "missing: every entry needs a name")
        if name in names or name == "outer":
            rd.fail(f"{field}[{i}].name", f"duplicate name '{name}'")
        names.add(name)
        yield i, name, item


def _holes(rd, items, outer):
    holes = []
    for i, name, item in _named_list(rd, items, "holes"):
        rd.table(item, f"holes[{i}]", {"name", "polygon", "circle"})
        hole = rd.loop(name, item, f"holes[{i}]")
        check_feature_size(hole, outer, rd.origin, f"holes[{i}]")
        if not loop_inside(hole, outer):
            rd.fail(f"holes[{i}]", f"hole '{name}' is not strictly inside the outer boundary",
                    GeometryError)
        for other in holes:
            if loops_overlap(hole, other):
                rd.fail(f"holes[{i}]", f"hole '{name}' overlaps hole '{other.name}'",
                        GeometryError)
        holes.append(hole)
    return tuple(holes)


def _regions(rd, items, outer, holes):
    regions = []
    for i, name, item in _named_list(rd, items, "regions"):
        rd.table(item, f"regions[{i}]", {"name", "polygon", "circle", "coefficient"})
        loop = rd.loop(name, item, f"regions[{i}]")
        check_feature_size(loop, outer, rd.origin, f"regions[{i}]")
        if "coefficient" not in item:
            rd.fail(f"regions[{i}].coefficient", "missing")
        k = rd.number(item["coefficient"], f"regions[{i}].coefficient", positive=True)
        if not loop_inside(loop, outer, allow_touch=True):
            rd.fail(f"regions[{i}]", f"region '{name}' is not inside the domain", GeometryError)
        for other in list(holes) + [r.loop for r in regions]:
            if loops_overlap(loop, other):
                rd.fail(f"regions[{i}]", f"region '{name}' overlaps '{other.name}'",
                        GeometryError)
        regions.append(Region(name, loop, k))
    return tuple(regions)


def _mesh(rd, data, outer):
    data = rd.table(data, "mesh", MESH_KEYS)
    lo, hi = outer.bbox()
    if "max_size" in data and "max_area" in data:
        rd.fail("mesh", "give max_size or max_area, not both")
    if "max_area" in data:
        size = math.sqrt(4 / math.sqrt(3) * rd.number(data["max_area"], "mesh.max_area",
                                                      positive=True))
    else:
        size = rd.number(data.get("max_size", float(np.hypot(*(hi - lo))) / 20),
                         "mesh.max_size", positive=True)
    angle = rd.number(data.get("min_angle", 28.0), "mesh.min_angle", lo=0.0, hi=34.0)
    grading = []
    items = data.get("grading", [])
    if not isinstance(items, list):
        rd.fail("mesh.grading", "must be an array of tables ([[mesh.grading]])")
    for i, g in enumerate(items):
        f = f"mesh.grading[{i}]"
        g = rd.table(g, f, {"point", "size", "growth"})
        pt = g.get("point")
        if not isinstance(pt, list) or len(pt) != 2:
            rd.fail(f"{f}.point", "must be [x, y]")
        grading.append(Grading(tuple(rd.number(c, f"{f}.point") for c in pt),
                               rd.number(g.get("size"), f"{f}.size", positive=True),
                               rd.number(g.get("growth", 0.3), f"{f}.growth", positive=True)))
    return MeshControls(size, angle, tuple(grading))


def _parts(rd, data, problem):
    data = rd.table(data, "boundary")
    loops = {lp.name: lp for lp in problem.loops()}
    owner = {}
    parts = []
    for name, spec in data.items():
        f = f"boundary.{name}"
        spec = rd.table(spec, f, PART_KEYS)
        loop_name = rd.text(spec.get("loop", "outer"), f"{f}.loop")
        if loop_name not in loops:
            rd.fail(f"{f}.loop", f"unknown loop '{loop_name}' (known: {', '.join(loops)})")
        loop = loops[loop_name]
        edges = None
        if "edges" in spec:
            edges = spec["edges"]
            if not isinstance(edges, list) or not edges:
                rd.fail(f"{f}.edges", "must be a non-empty list of edge indices")
            for e in edges:
                if isinstance(e, bool) or not isinstance(e, int) or not 0 <= e < loop.n_edges:
                    rd.fail(f"{f}.edges", f"edge index {e!r} out of range: loop '{loop_name}' "
                                          f"has edges 0..{loop.n_edges - 1}")
            edges = tuple(edges)
        for e in edges if edges is not None else range(loop.n_edges):
            if (loop_name, e) in owner:
                rd.fail(f"{f}.edges" if edges is not None else f,
                        f"edge {e} of loop '{loop_name}' already has a condition "
                        f"from part '{owner[(loop_name, e)]}'")
            owner[(loop_name, e)] = name
        parts.append(BoundaryPart(name, loop_name, edges, _condition(rd, spec, f)))
    return tuple(parts)


def _condition(rd, spec, f):
    kind = rd.text(spec.get("type", "insulated"), f"{f}.type")
    if kind not in CONDITION_KINDS:
        rd.fail(f"{f}.type", f"unknown condition '{kind}' (choose from "
                             f"{', '.join(CONDITION_KINDS)})")
    if kind in ("dirichlet", "neumann"):
        if "value" not in spec:
            rd.fail(f"{f}.value", f"missing: a {kind} condition needs a value")
        return Condition(kind, rd.data(spec["value"], f"{f}.value"))
    if kind == "robin":
        for key in ("h", "u_ref"):
            if key not in spec:
                rd.fail(f"{f}.{key}", "missing: a robin condition needs h and u_ref")
        return Condition(kind, None, rd.number(spec["h"], f"{f}.h", positive=True),
                         rd.data(spec["u_ref"], f"{f}.u_ref"))
    return Condition("insulated")
