"""Boundary fluxes from the discrete residual, and two-level capacity.

Sign convention: the flux of a part is the outward flow of the flux field
``q = -k grad u`` through it, ``int_part q . n ds``. The fluxes of all parts sum
to the source integral ``int f dA`` (flux balance).
"""

import numpy as np


def boundary_fluxes(problem, disc, K, f, u, natural, robin, dirichlet):
    """Outward flux per named part, computed from the reaction ``K u - f``.

    For a Galerkin solution, ``(K u - f)_i = int_boundary k du/dn phi_i`` for every
    test function, so summing the reaction over a Dirichlet part's degrees of
    freedom gives its flux without differentiating u. Loads of flux-type parts
    touching the same nodes are subtracted first; a node shared by two Dirichlet
    parts is split evenly between them.
    """
    from .solve import part_dofs

    reaction = K @ u - f
    inflow_nat = {}
    for name, load in natural.items():
        flow = load - (robin[name] @ u if name in robin else 0.0)
        inflow_nat[name] = flow
        reaction = reaction - flow
    share = np.zeros(disc.n_dofs)
    dofs = {name: part_dofs(disc, facets) for name, (facets, _) in dirichlet.items()}
    for d in dofs.values():
        share[d] += 1
    fluxes = {}
    for part in problem.parts:
        name = part.name
        if name in dofs:
            d = dofs[name]
            fluxes[name] = -float(np.sum(reaction[d] / share[d]))
        elif name in inflow_nat:
            fluxes[name] = -float(np.sum(inflow_nat[name]))
        else:
            fluxes[name] = 0.0
    return fluxes


def two_level_capacity(problem, fluxes, energy):
    """Capacitance (or conductance) per unit length when exactly two potentials are imposed.

    Applies when every Dirichlet part has a constant value, there are exactly two
    distinct values, the rest of the boundary is insulated and there is no source.
    Returns ``None`` otherwise. Computed two ways: ``Q / dV`` from the residual flux
    and ``2 W / dV^2`` from the energy; their relative difference is reported.
    """
    if problem.source is not None:
        return None
    levels = {}
    for part in problem.parts:
        cond = part.condition
        if cond.kind == "dirichlet":
            if cond.constant_value is None:
                return None
            levels.setdefault(cond.constant_value, []).append(part.name)
        elif cond.kind != "insulated":
            return None
    if len(levels) != 2:
        return None
    low, high = sorted(levels)
    dv = high - low
    # electrodes a denormal apart: dv**2 and the energy underflow, so no ratio means anything
    if not (dv * dv > 0 and energy > 0 and np.isfinite(1.0 / (dv * dv))):
        return None
    charge = -sum(fluxes[name] for name in levels[high])
    from_flux = charge / dv
    from_energy = 2 * energy / dv**2
    return {
        "high_parts": levels[high],
        "low_parts": levels[low],
        "delta_v": dv,
        "charge": charge,
        "from_flux": from_flux,
        "from_energy": from_energy,
        "relative_difference": abs(from_flux - from_energy) / abs(from_energy),
        "resistance_from_energy": 1.0 / from_energy,
    }
