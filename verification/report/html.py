"""Self-contained HTML reports: inline SVG and base64 PNG, inline CSS, no network access."""

import base64
from html import escape

from .markdown import _f, _o, level_rows
from .provenance import CAUTION

STYLE = """
body{font-family:system-ui,-apple-system,Segoe UI,Helvetica,Arial,sans-serif;margin:2em auto;
max-width:1100px;color:#222;line-height:1.4;padding:0 1em}
h1{font-size:1.6em}h2{font-size:1.25em;margin-top:1.6em;border-bottom:1px solid #ddd}
table{border-collapse:collapse;margin:.6em 0;font-size:.88em}
td,th{border:1px solid #ccc;padding:.25em .55em;text-align:right}
th{background:#f3f3f3}td.l,th.l{text-align:left}
.PASS{color:#11691f;font-weight:bold}.FAIL{color:#b00020;font-weight:bold}
.INCONCLUSIVE{color:#8a5a00;font-weight:bold}
.caution{border-left:4px solid #c77700;background:#fff7e6;padding:.6em 1em}
figure{display:inline-block;margin:.5em 1em .5em 0;vertical-align:top}
figcaption{font-size:.8em;color:#555;max-width:560px}
.small{font-size:.85em;color:#555}
"""


def _status(status):
    return f'<span class="{escape(status)}">{escape(status)}</span>'


def table(headers, rows, left=1):
    """An HTML table; the first ``left`` columns are left-aligned. Cells are pre-escaped."""
    head = "".join(f'<th class="l">{h}</th>' if i < left else f"<th>{h}</th>"
                   for i, h in enumerate(headers))
    body = []
    for row in rows:
        cells = "".join(f'<td class="l">{c}</td>' if i < left else f"<td>{c}</td>"
                        for i, c in enumerate(row))
        body.append(f"<tr>{cells}</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def figure(fig):
    """``fig`` is ``(caption, kind, content)`` with kind ``svg`` (text) or ``png`` (bytes)."""
    caption, kind, content = fig
    if kind == "svg":
        inner = content
    else:
        data = base64.b64encode(content).decode("ascii")
        inner = f'<img alt="{escape(caption)}" src="data:image/png;base64,{data}" width="560">'
    return f"<figure>{inner}<figcaption>{escape(caption)}</figcaption></figure>"


def page(title, body):
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f"<title>{escape(title)}</title><style>{STYLE}</style></head><body>"
            f"<h1>{escape(title)}</h1>{body}</body></html>\n")


def _software(doc):
    sw = doc.get("software", {})
    m = doc.get("machine", {})
    rows = [[escape(k), escape(str(v))] for k, v in sw.items()]
    rows.append(["CPUs / load average", escape(f"{m.get('cpus')} / {m.get('load_average')}")])
    rows.append(["generated", escape(str(doc.get("created")))])
    return "<h2>Software</h2>" + table(["component", "version"], rows, left=2)


def _caution():
    return f'<p class="caution">{escape(CAUTION)}</p>'


def _check_rows(study):
    rows = []
    for name, v in study["checks"].items():
        exp = study["expected"][name]
        dof = study["dof_orders"].get(name) or [None]
        rows.append([f"P{study['order']}", escape(name), _o(exp["order"]), _o(v["observed"]),
                     _o(v["fitted"]), _o(dof[-1]), _status(v["status"]),
                     f'<span class="small">{escape(v["reason"])}</span>'])
    return rows


def _levels(study):
    headers, rows = level_rows(study)
    return table([escape(h) for h in headers], [[escape(c) for c in row] for row in rows])


def study_html(doc, figures):
    """The study report: summary, explanations, per-degree level tables, plots, software."""
    studies = doc["studies"]
    title = "Convergence study: " + ", ".join(sorted({s["case"] for s in studies}))
    parts = [f"<p>Status: {_status(doc['status'])}"
             + (" <b>(incomplete: interrupted)</b>" if doc["incomplete"] else "") + "</p>",
             _caution(),
             "<h2>Observed against expected orders</h2>",
             f"<p class='small'>Observed = last pairwise order; fitted = least-squares slope "
             f"over the asymptotic levels; PASS when observed &ge; expected &minus; "
             f"{doc['tol']} (norms) or {doc['qoi_tol']} (quantities). Orders are in h for "
             "uniform refinement, in N<sup>-1/2</sup> on graded meshes; 'in N' is the order "
             "in the number of unknowns.</p>",
             table(["P", "check", "expected", "observed", "fitted", "in N", "verdict",
                    "explanation"], [r for s in studies for r in _check_rows(s)], left=2)]
    parts.append("<h2>Plots</h2>" + "".join(figure(f) for f in figures))
    for s in studies:
        kind = "graded mesh" if s["graded"] else "uniform refinement"
        parts.append(f"<h2>{escape(s['case'])} P{s['order']} ({kind}, {len(s['levels'])} "
                     f"levels, {s['seconds']:.1f} s)</h2>")
        if s["graded"]:
            g = s["grading"]
            parts.append(f"<p>Grading toward {escape(str(tuple(g['point'])))}: "
                         f"&mu; = {g['mu']:.3g}, R = {g['radius']:.3g}; {escape(g['rule'])}.</p>")
        parts.append(_levels(s))
        parts.append("<p class='small'>Expected: " + "; ".join(
            f"{escape(k)}: {escape(v['basis'])}" for k, v in s["expected"].items()) + "</p>")
    parts.append(_software(doc))
    return page(title, "".join(parts))


def verify_html(doc, figures):
    """The certificate of ``lapsolve verify``."""
    c = doc["counts"]
    rows = []
    for r in doc["rows"]:
        checks = "<br>".join(
            f"{escape(n)}: {_o(v['observed'])} / {_o(v['expected'])} {_status(v['status'])}"
            for n, v in r["checks"].items())
        why = "<br>".join(escape(p) for p in r["problems"])
        rows.append([escape(r["case"]), f"P{r['order']}", _status(r["status"]), checks,
                     f"{r['finest_dofs']:,}", f"{r['seconds']:.1f}",
                     f'<span class="small">{why}</span>'])
    parts = [f"<p>Status: {_status(doc['status'])}"
             + (" <b>(incomplete: interrupted)</b>" if doc["incomplete"] else "")
             + f" &mdash; {c['PASS']} passed, {c['FAIL']} failed, {c['INCONCLUSIVE']} "
             f"inconclusive, {c['not run']} not run, in {doc['seconds']:.1f} s with "
             f"{escape(doc['solver'])}; tolerance {doc['tol']} on norm orders, "
             f"{doc['qoi_tol']} on quantity orders.</p>",
             _caution(),
             "<p class='small'>Every case of the exact-solution catalogue is refined "
             "uniformly; the observed order (last pairwise) of each error norm and reference "
             "quantity is compared with the a-priori order for the element degree and the "
             "corner exponent (Strang &amp; Fix 1973; Grisvard 1985).</p>",
             "<h2>Cases</h2>",
             table(["case", "P", "status", "observed / expected order", "finest DOFs", "s",
                    "why not passed"], rows, left=4)]
    if figures:
        parts.append("<h2>Convergence and fields</h2>" + "".join(figure(f) for f in figures))
    parts.append(_software(doc))
    return page("lapsolve verification certificate", "".join(parts))


def gci_html(doc, figures):
    """The report of a quantity study with its GCI."""
    q = doc["quantity_study"]
    rows = [[str(lv["index"]), _f(lv["h"], ".4g"), f"{lv['dofs']:,}", _f(lv["value"], ".10g"),
             _f(lv["seconds"]["solve"], ".2f")] for lv in q["levels"]]
    parts = [f"<p>Problem file {escape(str(q['origin']))}; P{q['order']}, uniform refinement."
             + (" <b>Incomplete: interrupted.</b>" if doc["incomplete"] else "") + "</p>",
             _caution(), table(["level", "h", "DOFs", escape(q["quantity"]), "s"], rows)]
    g = q.get("gci")
    if g:
        f = g["finest"]
        gci = None if f["gci_fine21"] is None else 100 * f["gci_fine21"]
        parts += ["<h2>Grid convergence index (three finest levels)</h2>",
                  "<p class='small'>Celik, Ghia, Roache, Freitas, Coleman &amp; Raad, J. Fluids "
                  "Eng. 130 (2008) 078001; safety factor 1.25.</p>",
                  table(["apparent order p", "extrapolated", "GCI fine", "relative change",
                         "oscillatory"],
                        [[_o(f["p"]), _f(f["phi_ext21"], ".10g"), _f(gci, ".3g") + " %",
                          _f(f["e_a21"], ".2e"), str(f["oscillatory"])]])]
        if f["note"]:
            parts.append(f"<p>Note: {escape(f['note'])}</p>")
    else:
        parts.append("<p>Fewer than three levels finished: no GCI.</p>")
    parts.append("".join(figure(f) for f in figures))
    parts.append(_software(doc))
    return page(f"Grid convergence of {q['quantity']}: {q['problem']}", "".join(parts))
