"""Markdown reports, rendered from the plain data written to study.json / verify.json."""

from .provenance import CAUTION


def _f(value, spec=".3e"):
    if value is None:
        return "–"
    return format(value, spec)


def _o(value):
    return _f(value, ".2f")


def table(headers, rows):
    """A Markdown pipe table."""
    lines = ["| " + " | ".join(headers) + " |", "|" + "|".join("---" for _ in headers) + "|"]
    lines += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


def _software(doc):
    sw = doc.get("software", {})
    m = doc.get("machine", {})
    text = ", ".join(f"{k} {v}" for k, v in sw.items())
    return (f"Software: {text}.\n\nMachine: {m.get('cpus')} CPUs ({m.get('machine')}), "
            f"load average {m.get('load_average')}; generated {doc.get('created')}.")


def check_rows(study):
    rows = []
    for name, v in study["checks"].items():
        exp = study["expected"][name]
        dof = study["dof_orders"].get(name) or [None]
        rows.append([f"P{study['order']}", name, _o(exp["order"]), _o(v["observed"]),
                     _o(v["fitted"]), _o(dof[-1]), f"**{v['status']}**"])
    return rows


NORM_CHECKS = {"L2": "L2", "H1": "H1", "energy norm": "energy"}


def level_rows(study):
    """Headers and plain-text rows of a study's level table (shared with the HTML report)."""
    names = list(study["checks"]) or ["L2", "H1"]
    headers = ["level", "h", "DOFs", "elements"] + [
        f"{n} error (relative)" if n in NORM_CHECKS else f"{n} error" for n in names] + \
        ["max nodal", "seconds"]
    rows = []
    for lv in study["levels"]:
        errs = []
        for n in names:
            if n in NORM_CHECKS:
                key = NORM_CHECKS[n]
                errs.append(f"{_f(lv['errors'][key])} ({_f(lv['errors'][key + '_rel'], '.1e')})")
            else:
                errs.append(_f(next((q["error"] for q in lv["qoi"] if q["name"] == n), None)))
        rows.append([str(lv["index"]), _f(lv["h"], ".4g"), f"{lv['dofs']:,}",
                     f"{lv['elements']:,}"] + errs
                    + [_f(lv["errors"]["max_nodal"]), _f(lv["seconds"]["total"], ".2f")])
    return headers, rows


def level_table(study):
    return table(*level_rows(study))


def _pairwise(study):
    lines = []
    for name, v in study["checks"].items():
        orders = ", ".join(_o(x) for x in v["pairwise"])
        lines.append(f"- {name}: pairwise orders in {study['rate_axis']}: {orders}")
    return "\n".join(lines)


def study_markdown(doc):
    """The report of ``lapsolve study`` from the content of study.json."""
    studies = doc["studies"]
    title = ", ".join(sorted({s["case"] for s in studies}))
    status = doc["status"]
    out = [f"# Convergence study: {title}", "",
           f"Status: **{status}**" + (" (incomplete: interrupted)" if doc["incomplete"] else ""),
           "", f"> {CAUTION}", ""]
    out += ["## Observed against expected orders", "",
            f"Observed = last pairwise order; fitted = least-squares slope over the asymptotic "
            f"levels; PASS when observed >= expected - {doc['tol']} (norms) or {doc['qoi_tol']} "
            "(quantities). Orders are in h for "
            "uniform refinement and in N^(-1/2) for graded meshes; the column 'in N' is the "
            "order in the number of unknowns (half the order in h).", ""]
    rows = [r for s in studies for r in check_rows(s)]
    out += [table(["P", "check", "expected", "observed", "fitted", "in N", "verdict"], rows), ""]
    problems = [(s, p) for s in studies for p in s["problems"]]
    if problems:
        out += ["## Explanations", ""]
        out += [f"- {s['case']} P{s['order']} {p['check']}: {p['reason']}" for s, p in problems]
        out.append("")
    for s in studies:
        kind = "graded" if s["graded"] else "uniform refinement"
        out += [f"## {s['case']} P{s['order']} ({kind}, {len(s['levels'])} levels, "
                f"{s['seconds']:.1f} s)", ""]
        if s["graded"]:
            g = s["grading"]
            out += [f"Grading toward {tuple(g['point'])}: mu = {g['mu']:.3g}, "
                    f"R = {g['radius']:.3g}; {g['rule']}.", ""]
        out += [level_table(s), "", _pairwise(s), ""]
        out += ["Expected orders: " + "; ".join(f"{k}: {v['basis']}"
                                                for k, v in s["expected"].items()), ""]
    out += ["## Software", "", _software(doc), ""]
    return "\n".join(out)


def verify_markdown(doc):
    """The certificate of ``lapsolve verify`` from the content of verify.json."""
    counts = doc["counts"]
    out = ["# lapsolve verification certificate", "",
           f"Status: **{doc['status']}**" + (" (incomplete: interrupted)" if doc["incomplete"]
                                             else ""),
           f"({counts['PASS']} passed, {counts['FAIL']} failed, {counts['INCONCLUSIVE']} "
           f"inconclusive, {counts['not run']} not run; {doc['seconds']:.1f} s; solver "
           f"{doc['solver']}; tolerance {doc['tol']} on norm orders, {doc['qoi_tol']} on "
           "quantity orders).", "",
           f"> {CAUTION}", "", "## Cases", "",
           verify_table(doc["rows"]), ""]
    failing = [r for r in doc["rows"] if r["status"] != "PASS"]
    if failing:
        out += ["## Why it failed", ""]
        for r in failing:
            out += [f"- {r['case']} P{r['order']}: {p}" for p in r["problems"]]
        out.append("")
    out += ["## Software", "", _software(doc), ""]
    return "\n".join(out)


def verify_table(rows):
    body = []
    for r in rows:
        cells = []
        for name, c in r["checks"].items():
            cells.append(f"{name} {_o(c['observed'])}/{_o(c['expected'])}")
        body.append([r["case"], f"P{r['order']}", f"**{r['status']}**", "; ".join(cells),
                     f"{r['finest_dofs']:,}", f"{r['seconds']:.1f}"])
    return table(["case", "P", "status", "observed/expected order per check", "finest DOFs",
                  "s"], body)


def gci_markdown(doc):
    """The report of a quantity study (GCI) from the content of study.json."""
    q = doc["quantity_study"]
    out = [f"# Grid convergence of {q['quantity']}: {q['problem']}", "",
           f"Problem file: {q['origin']}; P{q['order']}, uniform refinement."
           + (" Incomplete: interrupted." if doc["incomplete"] else ""), "",
           f"> {CAUTION}", ""]
    rows = [[lv["index"], _f(lv["h"], ".4g"), f"{lv['dofs']:,}", _f(lv["value"], ".10g"),
             _f(lv["seconds"]["solve"], ".2f")] for lv in q["levels"]]
    out += [table(["level", "h", "DOFs", q["quantity"], "seconds"], rows), ""]
    g = q.get("gci")
    if g:
        f = g["finest"]
        out += ["## Grid convergence index (three finest levels)", "",
                "Celik, Ghia, Roache, Freitas, Coleman & Raad, J. Fluids Eng. 130 (2008) "
                "078001; safety factor 1.25.", "",
                table(["apparent order p", "extrapolated", "GCI fine", "relative change",
                       "oscillatory"],
                      [[_o(f["p"]), _f(f["phi_ext21"], ".10g"),
                        _f(None if f["gci_fine21"] is None else 100 * f["gci_fine21"], ".3g")
                        + " %",
                        _f(f["e_a21"], ".2e"), f["oscillatory"]]]), ""]
        if f["note"]:
            out += [f"Note: {f['note']}", ""]
        out += [f"Result: {q['quantity']} = {_f(f['phi_ext21'], '.10g')} (extrapolated); "
                f"fine-grid value {_f(f['phi'][0], '.10g')} with a GCI of "
                f"{_f(None if f['gci_fine21'] is None else 100 * f['gci_fine21'], '.3g')} %.",
                ""]
    else:
        out += ["Fewer than three levels finished: no GCI.", ""]
    out += ["## Software", "", _software(doc), ""]
    return "\n".join(out)
