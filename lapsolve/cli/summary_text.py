"""The one-screen terminal summary of a solve."""


def _unit(u):
    return f" {u}" if u else ""


def format_summary(data, physics, out=None):
    q = data["mesh_quality"]
    s = data["solver"]
    lines = [
        f"{data['problem']}  ({data['physics']}, P{data['order']})",
        f"  mesh      {data['elements']:,} triangles, {data['dofs']:,} DOFs, "
        f"angles {q['min_angle_deg']:.1f}-{q['max_angle_deg']:.1f} deg, "
        f"h {q['h_min']:.3g}-{q['h_max']:.3g}",
        f"  solver    {s['method']}, {s['iterations']} iterations, "
        f"relative residual {s['relative_residual']:.1e}",
        f"  {physics.flux_label} out of each part{_unit(physics.flux_unit)}:",
    ]
    for name, value in data["fluxes"].items():
        lines.append(f"    {name:<20s} {value: .6e}")
    lines.append(f"    {'(sum)':<20s} {data['flux_balance']['sum_of_part_fluxes']: .3e}")
    lines.append(f"  energy    {data['energy']:.6e}")
    cap = data.get("capacity")
    if cap:
        lines.append(f"  {physics.capacity_label}{_unit(physics.capacity_unit)}: "
                     f"{cap['from_energy']:.8e} (energy), {cap['from_flux']:.8e} (flux), "
                     f"difference {cap['relative_difference']:.1e}")
        if physics.resistance_label:
            lines.append(f"  {physics.resistance_label}{_unit(physics.resistance_unit)}: "
                         f"{cap['resistance_from_energy']:.8e}")
    bounds = data.get("capacity_bounds")
    if bounds:
        lines.append(f"  bounds    {bounds['lower']:.8e} <= {physics.capacity_label} <= "
                     f"{bounds['upper']:.8e} (relative width {bounds['relative_width']:.1e}"
                     + ("" if bounds["guaranteed"] else ", for the meshed domain") + ")")
    ortho = data.get("orthogonality")
    if ortho and "eta" in ortho:
        kind = "upper bound" if ortho["guaranteed"] else "estimate"
        lines.append(f"  residual  ||k grad u - J grad psi|| = {ortho['eta']:.3e} "
                     f"({ortho['relative']:.1e} of ||grad u||_k): energy-error {kind}")
    elif ortho:
        lines.append(f"  residual  not computed: {ortho['skipped']}")
    for p in data.get("probes", []):
        lines.append(f"  probe ({p['x']:g}, {p['y']:g}): u = {p['u']:.8g}, "
                     f"field = ({p['field'][0]:.5g}, {p['field'][1]:.5g})")
    for note in data.get("notes", []):
        lines.append(f"  note: {note}")
    t = data["seconds"]
    lines.append("  seconds   " + ", ".join(f"{k} {v:.2f}" for k, v in t.items()))
    if out:
        lines.append(f"  wrote     {out}/solution.vtu, summary.json, field.png")
    return "\n".join(lines)
