"""Quantity-of-interest errors: capacitance, energy and boundary fluxes against references.

Each :class:`~verification.exact.case.Reference` of a case names a quantity;
this module measures it on a solution and says whether its error is expected
to converge to zero (is *judged*) under refinement of the meshed domain.

Quantities measured
-------------------
``capacitance``
    From the residual flux (``Q / ΔV``) and from the energy (``2 W / ΔV²``)
    when the solution reports a two-level capacity; otherwise, when the case
    names ``extras["flux_electrode"]`` and ``extras["voltage"]``, from the flux
    through that electrode only.
``energy``
    ``W = 1/2 a(u_h, u_h)`` as reported by the solution (label ``energy W``).
``flux:<part>``
    Outward flux of ``-k grad u`` through the named boundary part.

Other quantities (point values, field ratios) are listed as not measured.

Scope rule
----------
``scope == "domain"``: the reference belongs to the meshed domain: judged.
``scope == "true circle"``: the mesh converges to the curved domain: judged
(the expected order is limited by the geometry, see :func:`order_caps`).
A scope saying the value ``equals the flux`` (a truncated unbounded problem
carrying the exact far-field data): only the flux-based measure is judged,
the energy of the truncated domain is a different number. Any other scope
(e.g. ``"untruncated"``): reported, not judged.
"""

from dataclasses import asdict, dataclass

import numpy as np

JUDGED_SCOPES = ("domain", "true circle")
#: Label of the energy functional W (not the energy norm of the error).
ENERGY_LABEL = "energy W"
NOT_STATIONARY = ("with non-zero Neumann data beside Dirichlet data, W = a(u, u)/2 is not the "
                  "stationary energy: its error is first order in the boundary error of u_h "
                  "(reported, not judged)")
FLUX_ONLY_MARK = "equals the flux"


@dataclass(frozen=True)
class QoIMeasure:
    """One measured quantity on one level.

    Attributes
    ----------
    name : str
        Label of the measure, e.g. ``"capacitance (flux)"``; unique per case.
    quantity : str
        The reference's quantity.
    value, reference : float
        Computed and reference values (``value`` NaN when not measured).
    error, relative : float
        ``|value - reference|`` and that over ``|reference|``.
    judged : bool
        Whether a convergence verdict applies (scope rule above).
    scope, source : str
        From the reference.
    note : str
        Why the measure is not judged, or empty.
    """

    name: str
    quantity: str
    value: float
    reference: float
    error: float
    relative: float
    judged: bool
    scope: str
    source: str
    note: str = ""

    def to_dict(self):
        data = asdict(self)
        for key in ("value", "reference", "error", "relative"):
            data[key] = data[key] if np.isfinite(data[key]) else None
        return data


def _flux_capacitance(solution, case):
    cap = getattr(solution, "capacity", None)
    if cap:
        return cap["from_flux"], cap["from_energy"]
    electrode = case.extras.get("flux_electrode")
    voltage = case.extras.get("voltage")
    fluxes = getattr(solution, "fluxes", None) or {}
    if electrode in fluxes and voltage:
        # outward flux through an electrode is minus the charge it carries
        return -fluxes[electrode] / voltage, None
    return None, None


def _measures_of(solution, case, ref):
    """``[(label, value, kind)]`` with kind "flux" or "energy" (how it is computed)."""
    q = ref.quantity
    if q == "capacitance":
        by_flux, by_energy = _flux_capacitance(solution, case)
        out = []
        if by_flux is not None:
            out.append(("capacitance (flux)", by_flux, "flux"))
        if by_energy is not None:
            out.append(("capacitance (energy)", by_energy, "energy"))
        return out
    if q == "energy" and getattr(solution, "energy", None) is not None:
        return [(ENERGY_LABEL, float(solution.energy), "energy")]
    if q.startswith("flux:"):
        part = q.split(":", 1)[1]
        fluxes = getattr(solution, "fluxes", None) or {}
        if part in fluxes:
            return [(q, float(fluxes[part]), "flux")]
    return []


def _judged(scope, kind):
    if scope in JUDGED_SCOPES:
        return True, ""
    if FLUX_ONLY_MARK in scope:
        if kind == "flux":
            return True, ""
        return False, "the reference is the flux of an untruncated problem; the energy of " \
                      "the truncated domain is a different number"
    return False, f"reference scope '{scope}' is not the meshed domain"


def measure_qoi(solution, case, energy_stationary=True):
    """Every reference quantity of ``case`` measured on ``solution``.

    Parameters
    ----------
    solution : Solution-like
        Needs whichever of ``capacity``, ``energy``, ``fluxes`` the references use.
    case : ExactCase
    energy_stationary : bool
        False when non-zero Neumann data share the boundary with Dirichlet data
        (:func:`neumann_data_vanish`): the energy is then not judged.

    Returns
    -------
    list of QoIMeasure
    """
    out = []
    for ref in case.references:
        found = _measures_of(solution, case, ref)
        if not found:
            out.append(QoIMeasure(ref.quantity, ref.quantity, float("nan"), float(ref.value),
                                  float("nan"), float("nan"), False, ref.scope, ref.source,
                                  "no measure of this quantity on a solution"))
            continue
        for label, value, kind in found:
            judged, note = _judged(ref.scope, kind)
            if judged and label == ENERGY_LABEL and not energy_stationary:
                judged, note = False, NOT_STATIONARY
            err = abs(float(value) - float(ref.value))
            rel = err / abs(ref.value) if ref.value != 0 else float("nan")
            out.append(QoIMeasure(label, ref.quantity, float(value), float(ref.value), err,
                                  rel, judged, ref.scope, ref.source, note))
    return out


def _edge_midpoints(mesh, mask):
    """Midpoints and unit normals of the selected segments, on the true curve when curved."""
    seg = mesh.segments[mask]
    a, b = mesh.points[seg[:, 0]], mesh.points[seg[:, 1]]
    mid, t = 0.5 * (a + b), b - a
    normal = np.column_stack([t[:, 1], -t[:, 0]]) / np.linalg.norm(t, axis=1)[:, None]
    for k in np.unique(mesh.segment_tags[mask]):
        circle = mesh.tags[k].circle
        if circle is None:
            continue
        sel = mesh.segment_tags[mask] == k
        d = mid[sel] - circle[:2]
        radial = d / np.linalg.norm(d, axis=1)[:, None]
        mid[sel] = np.asarray(circle[:2]) + circle[2] * radial
        normal[sel] = radial
    return mid, normal


def neumann_data_vanish(case, problem, mesh):
    """Whether ``W = a(u, u)/2`` is a stationary functional for ``case``.

    By Green's identity ``W_h - W = |e|^2/2 + int_D du/dn (g_h - g) + int_N g_N e``:
    the last term is first order in the error ``e`` unless the Neumann data
    ``g_N`` vanish, or the problem is pure Neumann (then ``W_h - W = -|e|^2/2``
    exactly). Checked at the boundary edge midpoints of ``mesh``.
    """
    from lapsolve.solve import segment_parts

    kinds = {spec.kind for spec in case.conditions.values()}
    if "neumann" not in kinds or "dirichlet" not in kinds:
        return True
    parts = segment_parts(problem, mesh)
    names = [p.name for p in problem.parts]
    flux = case.flux_data()
    for i, name in enumerate(names):
        if case.conditions[name].kind != "neumann":
            continue
        mid, n = _edge_midpoints(mesh, parts == i)
        g = flux(mid[:, 0], mid[:, 1], n[:, 0], n[:, 1])
        gx, gy = case.grad(mid[:, 0], mid[:, 1])
        scale = float(np.max(np.hypot(gx, gy))) if len(mid) else 0.0
        if len(mid) and np.max(np.abs(g)) > 1e-9 * max(scale, 1e-300):
            return False
    return True


def order_caps(order, curved, interpolated_dirichlet):
    """Upper limits on the functional order from the discrete setting, with reasons.

    Parameters
    ----------
    order : int
        Element degree p.
    curved : bool
        The domain has circular boundaries or interfaces, represented by straight
        edges (P1) or quadratic isoparametric edges (P2, P3).
    interpolated_dirichlet : bool
        Some Dirichlet data are not constant, so they are interpolated at the
        element nodes.

    Returns
    -------
    list of (float, str)
        Each cap and the one-sentence reason for it.
    """
    caps = []
    if curved:
        # Geometry of degree q moves the boundary by O(h**(q+1)) between nodes, an
        # O(h**(2q)) change in energy-type functionals (Strang & Fix, An Analysis of the
        # Finite Element Method, 1973, sec. 4.4, from memory); measured on the coax case:
        # P1 2.0, P2 3.9, P3 4.0.
        q = 1 if order == 1 else 2
        edges = "straight" if q == 1 else "quadratic"
        caps.append((2.0 * q, f"the circle is represented by {edges} edges, which limits "
                              f"functionals to order {2 * q}"))
    if interpolated_dirichlet and order % 2 == 1 and order >= 3:
        # Green's first identity: W_h - W = |e|_a^2 / 2 + int du/dn (g_h - g) ds. The
        # nodal interpolation error g_h - g of odd degree p at equispaced nodes does not
        # integrate to zero over an edge, so the boundary term is O(h**(p+1)); for even p
        # the leading term is odd about the edge midpoint and cancels, O(h**(p+2)).
        # Derived here, no source.
        caps.append((float(order + 1), f"Dirichlet data interpolated at the equispaced P{order} "
                                       f"nodes limit functionals to order {order + 1}"))
    return caps


def quantity_value(solution, quantity):
    """A quantity of a solution without a reference: ``capacitance``, ``energy``, ``flux:<part>``.

    Raises
    ------
    InputError
        Unknown quantity, a part that does not exist, or a capacitance asked of a
        problem without exactly two constant potentials.
    """
    from lapsolve.errors import InputError

    if quantity == "capacitance":
        cap = getattr(solution, "capacity", None)
        if not cap:
            raise InputError("capacitance needs exactly two constant Dirichlet potentials, the "
                             "rest insulated, and no source", field="--quantity")
        return float(cap["from_energy"])
    if quantity == "energy":
        return float(solution.energy)
    if quantity.startswith("flux:"):
        part = quantity.split(":", 1)[1]
        if part not in solution.fluxes:
            raise InputError(f"no boundary part '{part}' (parts: {', '.join(solution.fluxes)})",
                             field="--quantity")
        return float(solution.fluxes[part])
    raise InputError(f"unknown quantity '{quantity}' (use capacitance, energy or flux:<part>)",
                     field="--quantity")
