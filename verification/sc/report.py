"""What ``lapsolve modulus`` reports: M, the physical quantities with units, the accuracy.

Conventions (``docs/modulus.md``): the arc ``c3 -> c0`` is the electrode at
u = 0, the arc ``c1 -> c2`` the electrode at u = 1, the other two arcs are
insulated; a long strip between its short ends has a large ``M``.

* ``capacity`` (capacitance or conductance per unit length of a long
  cylinder with this cross-section): ``k / M`` with ``k = scale * coefficient``
  (``eps0 * eps_r`` for electrostatics, in F/m; ``W/(m K)`` for thermal);
* ``resistance`` per unit length: ``M / k`` (thermal and generic physics);
* ``sheet_resistance``: a flat sheet of this shape with sheet resistance
  ``rho_s`` (ohm per square) has ``R = rho_s * M`` between the electrodes.
"""

import math

from ..modulus import quadrilateral_modulus, reciprocal_check
from .parameters import RESIDUAL_LIMIT
from .polygon import as_complex

SCHEMA = "lapsolve.modulus/1"


def _quantity(label, value, unit, formula):
    return {"label": label, "value": float(value), "unit": unit, "formula": formula}


def arc_table(n, corners):
    """Edges of each arc in the numbering of the vertex list as given.

    Edge ``i`` joins vertices ``i`` and ``i + 1`` of the list; an arc from
    corner ``a`` to corner ``b`` runs forward through the list.
    """
    c0, c1, c2, c3 = corners

    def edges(a, b):
        return [int((a + k) % n) for k in range((b - a) % n)]

    return {"electrode-low": {"from": c3, "to": c0, "edges": edges(c3, c0), "potential": 0.0},
            "insulated-c0-c1": {"from": c0, "to": c1, "edges": edges(c0, c1), "potential": None},
            "electrode-high": {"from": c1, "to": c2, "edges": edges(c1, c2), "potential": 1.0},
            "insulated-c2-c3": {"from": c2, "to": c3, "edges": edges(c2, c3), "potential": None}}


def modulus_report(vertices, corners, physics, coefficient=1.0, rho_s=None, source=None,
                   check=True, limit=RESIDUAL_LIMIT):
    """Compute the modulus of a polygon and everything the command reports.

    Parameters
    ----------
    vertices : array_like
        Shape (n, 2), in the order given (either orientation).
    corners : sequence of 4 int
    physics : Physics
    coefficient : float
    rho_s : float, optional
        Sheet resistance for ``sheet_resistance``; default 1 (the value is then
        the number of squares). Reported for thermal and generic physics, and
        for electrostatics only when given.
    source : str, optional
        Where the polygon came from (file name), for the report.
    check : bool
        Also map the conjugate quadrilateral (:func:`reciprocal_check`).
    limit : float
        Largest accepted residual.

    Returns
    -------
    data : dict
        JSON-ready report (schema ``lapsolve.modulus/1``).
    result : ModulusResult
    """
    k = physics.scale * float(coefficient)
    sheet = 1.0 if rho_s is None else float(rho_s)
    result = quadrilateral_modulus(vertices, corners, eps=k, rho_s=sheet, limit=limit)
    m = result.modulus
    n = result.map.vertices.size
    accuracy = {"residual": result.residual, "conjugate_modulus": None,
                "reciprocal_error": None, "note": "", "estimate": result.residual}
    if check:
        found = reciprocal_check(result, vertices, limit=limit)
        accuracy.update(conjugate_modulus=found.conjugate, reciprocal_error=found.error,
                        note=found.note)
        if found.error is not None:
            accuracy["estimate"] = max(result.residual, found.error)
    symbol = "eps0 eps_r" if physics.kind == "electrostatic" else "k"
    data = {
        "schema": SCHEMA,
        "source": source,
        "vertices": [[float(p.real), float(p.imag)] for p in as_complex(vertices)],
        "corners": [int(c) for c in corners],
        "arcs": arc_table(n, [int(c) for c in corners]),
        "physics": physics.kind,
        "coefficient": float(coefficient),
        "modulus": m,
        "capacity": _quantity(physics.capacity_label, k / m, physics.capacity_unit,
                              f"{symbol} / M"),
        "resistance": (_quantity(physics.resistance_label, m / k, physics.resistance_unit,
                                 f"M / {symbol}") if physics.resistance_label else None),
        "sheet_resistance": (_quantity("resistance of a sheet", sheet * m, "ohm", "rho_s * M")
                             | {"rho_s": sheet}
                             if physics.kind != "electrostatic" or rho_s is not None else None),
        "accuracy": accuracy,
    }
    return data, result


def format_report(data):
    """The report as text lines (what the command prints without ``--json``)."""
    where = data["source"] or "polygon"
    n = len(data["vertices"])
    lines = [f"{where}: {n} vertices, corners c0..c3 = {' '.join(map(str, data['corners']))}"]
    for name, arc in data["arcs"].items():
        role = ("insulated" if arc["potential"] is None
                else f"electrode at u = {arc['potential']:g}")
        lines.append(f"  {name + ':':17s} vertices {arc['from']} -> {arc['to']}, edges "
                     f"{_ranges(arc['edges'])} ({role})")
    lines.append(f"conformal modulus M = {data['modulus']:.15g}")
    for key in ("capacity", "resistance"):
        q = data[key]
        if q:
            unit = f" {q['unit']}" if q["unit"] else ""
            lines.append(f"{q['label']} = {q['formula']} = {q['value']:.12g}{unit}")
    sheet = data["sheet_resistance"]
    if sheet:
        lines.append(f"sheet resistance R = rho_s * M = {sheet['value']:.12g} ohm "
                     f"(rho_s = {sheet['rho_s']:g} ohm per square)")
    acc = data["accuracy"]
    text = f"accuracy estimate: relative error of M about {acc['estimate']:.1e} " \
           f"(map residual {acc['residual']:.1e}"
    if acc["reciprocal_error"] is not None:
        text += f", |M * M(conjugate) - 1| = {acc['reciprocal_error']:.1e}"
    lines.append(text + ")")
    if acc["note"]:
        lines.append(f"  note: {acc['note']}")
    return lines


def _ranges(edges):
    """``[0, 1, 2, 5]`` -> ``"0-2, 5"``."""
    if not edges:
        return "none"
    out, start = [], edges[0]
    for prev, cur in zip(edges, edges[1:] + [math.nan]):
        if cur != prev + 1:
            out.append(f"{start}" if start == prev else f"{start}-{prev}")
            start = cur
    return ", ".join(out)
