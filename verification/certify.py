"""Certify an external solver from its result files and a benchmark manifest.

For every case and order of the manifest, the result files
``<results>/<case>/P<order>/level<k>.<ext>`` are read (any format meshio reads),
put on a scikit-fem basis of *their* element type and mesh, and compared with the
exact solution by quadrature (:func:`verification.norms.error_norms`). The error
sequence of each norm is judged against the expected order
(:func:`verification.rates.judge`). Optional ``quantities.json`` beside the results
lists quantities (e.g. ``capacitance``) per level; those with a reference value
in the case are judged against the quantity order too.

Status of one case and order ("slot"): PASS when every norm verdict is PASS and
no quantity check FAILs; FAIL otherwise (an INCONCLUSIVE norm cannot certify);
NOT SUBMITTED when no result file exists. The certificate passes when at least
one slot was submitted and every submitted slot passes (with ``require_all``,
every slot must be submitted).
"""

import datetime
import html
import json
import logging
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from lapsolve.errors import InputError
from verification.json_file import read_json_object

from .export import MANIFEST_SCHEMA
from .importer import ELEMENTS, build_basis, check_domain, read_result
from .mesh_certify import boundary_offsets
from .norms import error_norms, singular_point_of
from .rates import FAIL, INCONCLUSIVE, PASS, judge, roundoff_floor

log = logging.getLogger(__name__)

CERTIFICATE_SCHEMA = "lapsolve.certificate/1"
NOT_SUBMITTED = "NOT SUBMITTED"
#: Norms judged for an order; ``energy`` is the energy norm, judged like H1.
JUDGED_NORMS = ("L2", "H1", "energy")
#: Allowed shortfall of a quantity's order: functionals reach their order of twice
#: the H1 rate later than the norms do (common practice, no source).
QOI_TOL = 0.25
#: Extensions never taken for result files (companions and our own tables).
_NOT_RESULTS = {".json", ".csv", ".h5", ".hdf5", ".txt", ".md", ".part"}


@dataclass(frozen=True)
class Manifest:
    """A loaded ``lapsolve.manifest/1``."""

    path: str
    field: str
    levels: tuple
    orders: tuple
    cases: tuple  # of dict entries

    def case_entry(self, name):
        return next(c for c in self.cases if c["name"] == name)


def load_manifest(path):
    """Read and check a benchmark manifest.

    Raises
    ------
    InputError
        Unreadable file, not JSON, wrong schema or missing entries.
    """
    path = Path(path)
    data = read_json_object(path, "manifest")
    schema = data.get("schema")
    if schema != MANIFEST_SCHEMA:
        raise InputError(f"manifest schema is {schema!r}; this version reads "
                         f"'{MANIFEST_SCHEMA}' (re-export the benchmark)",
                         source=str(path), field="schema")
    cases = _checked_cases(data.get("cases"), path)
    levels = _int_list(data.get("levels"), "levels", path, lo=0)
    orders = _int_list(data.get("orders"), "orders", path, lo=1)
    fld = data.get("field", "u")
    if not isinstance(fld, str) or not fld:
        raise InputError("must be the name of a point field", source=str(path), field="field")
    return Manifest(str(path), fld, levels, orders, cases)


def _int_list(values, name, path, lo):
    if not isinstance(values, list) or not values or not all(
            isinstance(v, int) and not isinstance(v, bool) and v >= lo for v in values):
        raise InputError(f"manifest entry must be a non-empty list of integers >= {lo}",
                         source=str(path), field=name)
    return tuple(values)


def _checked_cases(cases, path):
    """The case entries, each with a name and expected orders per element order."""
    def fail(field, message):
        raise InputError(message, source=str(path), field=field)

    if not isinstance(cases, list) or not cases:
        fail("cases", "manifest entry must be a non-empty list of cases")
    for i, entry in enumerate(cases):
        where = f"cases[{i}]"
        if not isinstance(entry, dict):
            fail(where, "a case entry is a JSON object")
        if not isinstance(entry.get("name"), str) or not entry["name"]:
            fail(f"{where}.name", "missing: every case entry needs a name")
        orders = entry.get("orders")
        if not isinstance(orders, dict) or not orders:
            fail(f"{where}.orders", "must map element orders to expected orders")
        for key, spec in orders.items():
            if not (isinstance(key, str) and key.isdigit() and int(key) >= 1):
                fail(f"{where}.orders", f"order {key!r} is not a positive integer")
            expected = spec.get("expected_orders") if isinstance(spec, dict) else None
            if not isinstance(expected, dict):
                fail(f"{where}.orders.{key}.expected_orders", "missing")
            for norm, value in expected.items():
                if value is not None and not (isinstance(value, (int, float))
                                              and not isinstance(value, bool)
                                              and math.isfinite(value)):
                    fail(f"{where}.orders.{key}.expected_orders.{norm}",
                         f"must be a finite number, got {value!r}")
            for norm in ("L2", "H1"):
                if expected.get(norm) is None:
                    fail(f"{where}.orders.{key}.expected_orders.{norm}", "missing")
    return tuple(cases)


@dataclass
class LevelRecord:
    level: int
    file: str
    element: str
    cells: int
    nodes: int
    dofs: int
    h: float
    h_max: float
    curved: bool
    norms: dict
    boundary_offset: float = 0.0
    notes: list = field(default_factory=list)


@dataclass
class QuantityRecord:
    """A reported quantity: ``per_level`` rows ``{level, value, rel_error}``."""

    name: str
    per_level: list
    reference: float = None
    source: str = ""
    scope: str = ""
    verdict: dict = None
    status: str = "LISTED"


@dataclass
class SlotRecord:
    case: str
    order: int
    status: str
    expected_orders: dict
    levels: list = field(default_factory=list)
    verdicts: dict = field(default_factory=dict)
    quantities: list = field(default_factory=list)
    missing_levels: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    diagnosis: str = ""

    @property
    def submitted(self):
        return self.status != NOT_SUBMITTED


@dataclass
class Certificate:
    manifest: str
    results: str
    field: str
    slots: list
    status: str
    settings: dict
    created: str = ""
    version: str = ""

    @property
    def passed(self):
        return self.status == PASS

    def to_dict(self):
        out = {"schema": CERTIFICATE_SCHEMA}
        out.update(asdict(self))
        return _jsonable(out)


def _jsonable(obj):
    if isinstance(obj, dict):
        return {k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj) if math.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def find_result(folder, level):
    """The single result file ``level<k>.*`` in ``folder``, or None."""
    if not folder.is_dir():
        return None
    found = sorted(p for p in folder.glob(f"level{level}.*")
                   if p.is_file() and not p.name.startswith(".")
                   and p.suffix.lower() not in _NOT_RESULTS
                   and p.name[len(f"level{level}"):].count(".") == 1)
    if len(found) > 1:
        raise InputError(f"more than one result file for level {level}: "
                         f"{', '.join(p.name for p in found)}", source=str(folder))
    return found[0] if found else None


def certify(manifest, results, field=None, case_lookup=None, tol=0.1, qoi_tol=QOI_TOL,
            domain_tol=0.1, require_all=False):
    """Certify the result files under ``results`` against ``manifest``.

    Parameters
    ----------
    manifest : Manifest or path
    results : path
        Folder holding ``<case>/P<order>/level<k>.<ext>``.
    field : str, optional
        Point field to read; default the manifest's.
    case_lookup : callable, optional
        ``name -> ExactCase``; default :func:`verification.exact.catalogue.get_case`.
    tol : float
        Allowed shortfall of an observed order (norms).
    qoi_tol : float
        Allowed shortfall of a quantity's observed order.
    domain_tol : float
        Relative tolerance of the wrong-case check (bounding box and area).
    require_all : bool
        Fail when a case or order of the manifest has no results.

    Returns
    -------
    Certificate
    """
    if not isinstance(manifest, Manifest):
        manifest = load_manifest(manifest)
    if case_lookup is None:
        from .exact.catalogue import get_case as case_lookup
    results = Path(results)
    if not results.is_dir():
        raise InputError("results folder not found", source=str(results))
    name = field or manifest.field
    slots = []
    for entry in manifest.cases:
        case = case_lookup(entry["name"])
        for order_key, spec in sorted(entry["orders"].items()):
            slots.append(certify_slot(case, int(order_key), spec["expected_orders"],
                                      manifest.levels, results, name, tol, qoi_tol,
                                      domain_tol))
    submitted = [s for s in slots if s.submitted]
    if not submitted:
        raise InputError("no result files found; expected names like "
                         f"{results}/<case>/P<order>/level<k>.vtu", source=str(results))
    ok = all(s.status == PASS for s in submitted) and (
        not require_all or len(submitted) == len(slots))
    from lapsolve import __version__

    return Certificate(manifest.path, str(results), name, slots, PASS if ok else FAIL,
                       {"order_tol": tol, "qoi_tol": qoi_tol, "domain_tol": domain_tol,
                        "require_all": require_all},
                       datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
                       __version__)


def certify_slot(case, order, expected, levels, results, field, tol=0.1, qoi_tol=QOI_TOL,
                 domain_tol=0.1):
    """Import, measure and judge one case at one order."""
    folder = Path(results) / case.name / f"P{order}"
    slot = SlotRecord(case.name, order, NOT_SUBMITTED, dict(expected))
    files = {k: find_result(folder, k) for k in levels}
    if not any(files.values()):
        return slot
    problem = case.problem()
    kinds = {spec.kind for spec in case.conditions.values()}
    floors = []
    for level, path in files.items():
        if path is None:
            slot.missing_levels.append(level)
            continue
        record, floor = _measure(case, problem, path, level, order, field, domain_tol,
                                 mean_free="dirichlet" not in kinds)
        slot.levels.append(record)
        floors.append(floor)
    if slot.missing_levels:
        slot.notes.append(f"no result for level(s) {slot.missing_levels}")
    _judge_norms(slot, case, order, tol, floors)
    slot.quantities = _quantities(case, slot, folder, expected, qoi_tol, max(levels) + 1)
    failed = [v for v in slot.verdicts.values() if v.status != PASS]
    failed += [q for q in slot.quantities if q.status == FAIL]
    slot.status = FAIL if failed else PASS
    if failed:
        slot.diagnosis = diagnosis(slot, case)
    return slot


def _measure(case, problem, path, level, order, field, domain_tol, mean_free):
    mesh, values = read_result(path, field)
    check_domain(mesh, problem, domain_tol)
    imported = build_basis(mesh)
    offset = boundary_offsets(mesh, problem)["max_distance_over_h"]
    u = imported.dofs(values)
    norms = error_norms(imported.basis, u, case.u, case.grad, coefficient=case.coefficient,
                        mean_free=mean_free, singular_point=singular_point_of(case))
    record = LevelRecord(level, str(path), mesh.cell_type, len(mesh.cells),
                         int(len(mesh.used)), int(imported.basis.N), mesh.h(), mesh.h_max(),
                         imported.curved, norms.to_dict(), offset, list(mesh.notes))
    if ELEMENTS[mesh.cell_type][1] != order:
        record.notes.append(f"element type {mesh.cell_type} has degree "
                            f"{ELEMENTS[mesh.cell_type][1]}, judged as P{order}")
    if mean_free:
        record.notes.append("compared up to a constant (pure Neumann case)")
    lo, hi = mesh.bbox()
    p = mesh.points[mesh.corners]
    h_min = float(np.min(np.linalg.norm(p - np.roll(p, -1, axis=1), axis=2)))
    h_min /= float(np.linalg.norm(hi - lo))
    floor = {}
    for norm in JUDGED_NORMS:
        err, rel = norms.to_dict()[norm], norms.to_dict()[f"{norm}_rel"]
        scale = err / rel if rel and rel > 0 else None
        floor[norm] = (roundoff_floor(record.dofs, h_min, scale) if scale else 0.0)
    return record, floor


def _judge_norms(slot, case, order, tol, floors):
    lam = case.singular_exponent
    levels = sorted(range(len(slot.levels)), key=lambda i: slot.levels[i].level)
    slot.levels = [slot.levels[i] for i in levels]
    floors = [floors[i] for i in levels]
    h = [r.h for r in slot.levels]
    for norm in JUDGED_NORMS:
        expected = slot.expected_orders["H1" if norm == "energy" else norm]
        err = [r.norms[norm] for r in slot.levels]
        try:
            slot.verdicts[norm] = judge(h, err, expected, tol, floor=[f[norm] for f in floors],
                                        norm_name=norm, degree=order, lam=lam)
        except InputError as exc:
            raise InputError(f"cannot judge the {norm} sequence of {slot.case} P{order}: "
                             f"{exc.message}", source=str(slot.levels[0].file)) from None


def read_quantities(path, n_levels):
    """``quantities.json``: quantity name -> list of values per level (null = none)."""
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"unreadable quantities file ({exc})", source=str(path)) from None
    except RecursionError:
        raise InputError("unreadable quantities file (nested too deeply)",
                         source=str(path)) from None
    if not isinstance(data, dict):
        raise InputError("quantities.json must map a quantity name to a list of values, "
                         "one per level", source=str(path))
    out = {}
    for name, values in data.items():
        if not isinstance(values, list) or len(values) > n_levels:
            raise InputError(f"'{name}' must be a list of at most {n_levels} values (one per "
                             "level, null for none)", source=str(path), field=name)
        clean = []
        for v in values:
            if v is None:
                clean.append(None)
            elif isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v):
                clean.append(float(v))
            else:
                raise InputError(f"'{name}' holds {v!r}; values must be finite numbers or "
                                 "null", source=str(path), field=name)
        out[str(name)] = clean
    return out


def _quantities(case, slot, folder, expected, tol, n_levels):
    path = folder / "quantities.json"
    if not path.exists():
        return []
    h_of = {r.level: r.h for r in slot.levels}
    data = read_quantities(path, n_levels)
    refs = {r.quantity: r for r in case.references}
    records = []
    for name, values in data.items():
        levels = [k for k, v in enumerate(values) if v is not None and k in h_of]
        ref = refs.get(name)
        rows = [{"level": k, "value": values[k], "rel_error": None} for k in levels]
        record = QuantityRecord(name, rows)
        if ref is not None and levels and expected.get("qoi") is not None:
            record.reference, record.source, record.scope = ref.value, ref.source, ref.scope
            errs = [abs(values[k] - ref.value) for k in levels]
            for row, err in zip(rows, errs):
                row["rel_error"] = err / abs(ref.value) if ref.value else err
            verdict = judge([h_of[k] for k in levels], errs, expected["qoi"], tol,
                            norm_name=name, degree=slot.order, lam=case.singular_exponent)
            record.verdict = verdict.to_dict()
            record.status = verdict.status
        records.append(record)
    return records


def diagnosis(slot, case):
    """A plain-language guess at what a failed slot's pattern usually means."""
    v = slot.verdicts
    short = {n: v[n].expected - v[n].observed for n in v
             if v[n].status == FAIL and math.isfinite(v[n].observed)}
    curved = any(getattr(lp, "radius", None) for lp in case.problem().loops())
    hints = []
    offset = max((r.boundary_offset for r in slot.levels), default=0.0)
    if slot.order == 2 and curved and "L2" in short and 0.6 <= short["L2"] <= 1.4:
        where = (f"; here boundary nodes lie up to {offset:.2g} h off the true boundary"
                 if offset > 1e-3 else "")
        hints.append("quadratic elements whose boundary edges are straight (mid-edge nodes "
                     "on the chord, not on the circle) lose one order in L2 and half an "
                     f"order in H1: place boundary mid-edge nodes on the curve{where}")
    if short and all(0.6 <= s <= 1.4 for s in short.values()):
        hints.append("every failing norm is about one order short: a consistency error, "
                     "typically a wrong boundary integral (Neumann load), boundary data at the "
                     "wrong place, or a quadrature rule too weak for the element")
    if any(s > 1.4 for s in short.values()):
        hints.append("errors fall far more slowly than theory (more than one order short): "
                     "typical of a wrong boundary load (e.g. Neumann edge integrals given to "
                     "the wrong nodes), boundary values at the wrong nodes, or results that do "
                     "not belong to each level's mesh")
    inconclusive = [n for n in v if v[n].status == INCONCLUSIVE]
    if inconclusive:
        hints.append(f"{', '.join(inconclusive)}: too few levels or an erratic sequence; "
                     "submit at least three levels")
    if not short and any(q.status == FAIL for q in slot.quantities):
        hints.append("a reported quantity converges more slowly than theory: check how it is "
                     "computed (e.g. charge from the flux of the discrete solution)")
    return "; ".join(hints)


def certificate_junit(cert):
    """JUnit XML: one test case per case x order x norm, plus quantity checks."""
    from .junit import JUnitCase, junit_xml

    cases = []
    for slot in cert.slots:
        group = f"certify.{slot.case}.P{slot.order}"
        if not slot.submitted:
            cases += [JUnitCase(group, f"{n} order", skipped="no results submitted")
                      for n in JUDGED_NORMS]
            continue
        for norm, verdict in slot.verdicts.items():
            props = {"observed": verdict.observed, "fitted": verdict.fitted,
                     "expected": verdict.expected, "status": verdict.status,
                     "element": slot.levels[-1].element, "levels": len(slot.levels)}
            failure = None if verdict.status == PASS else verdict.reason
            cases.append(JUnitCase(group, f"{norm} order", failure=failure, properties=props,
                                   system_out=verdict.reason))
        for q in slot.quantities:
            if q.status == FAIL:
                cases.append(JUnitCase(group, f"quantity {q.name}", failure=q.verdict["reason"]))
            elif q.status == PASS:
                cases.append(JUnitCase(group, f"quantity {q.name}",
                                       system_out=q.verdict["reason"]))
            else:
                why = q.verdict["reason"] if q.verdict else "no reference value in the case"
                cases.append(JUnitCase(group, f"quantity {q.name}", skipped=why))
    return junit_xml("lapsolve certify", cases,
                     properties={"manifest": cert.manifest, "results": cert.results,
                                 "status": cert.status})


def write_certificate(cert, folder):
    """Write ``certificate.json``, ``certificate.html`` and ``junit.xml`` together."""
    from lapsolve.atomic import OutputSet

    with OutputSet(folder) as out:
        out.text("certificate.json", json.dumps(cert.to_dict(), indent=1))
        out.text("certificate.html", certificate_html(cert))
        out.text("junit.xml", certificate_junit(cert))
        return out.commit()


_STYLE = ("body{font-family:sans-serif;max-width:70em;margin:2em auto;color:#222}"
          "table{border-collapse:collapse;margin:.5em 0 1.5em}"
          "td,th{border:1px solid #bbb;padding:.25em .6em;text-align:right}"
          "th{background:#eee}td.l{text-align:left}"
          ".PASS{color:#060;font-weight:bold}.FAIL{color:#b00;font-weight:bold}"
          ".INCONCLUSIVE,.NOT{color:#a60;font-weight:bold}")


def _e(value):
    return html.escape(str(value))


def _num(value, fmt=".3e"):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    return format(value, fmt)


def _status(text):
    return f'<span class="{_e(text.split()[0])}">{_e(text)}</span>'


def certificate_html(cert):
    """A self-contained HTML page of the certificate."""
    rows = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
            f"<title>lapsolve certificate: {_e(cert.status)}</title>",
            f"<style>{_STYLE}</style></head><body>",
            f"<h1>Solver certificate: {_status(cert.status)}</h1>",
            f"<p>Manifest <code>{_e(cert.manifest)}</code>, results <code>{_e(cert.results)}"
            f"</code>, field <code>{_e(cert.field)}</code>; order tolerance "
            f"{_e(cert.settings['order_tol'])}; lapsolve {_e(cert.version)}, {_e(cert.created)}."
            "</p>", "<table><tr><th>case</th><th>order</th><th>status</th>"
            + "".join(f"<th>{n} observed / expected</th>" for n in JUDGED_NORMS) + "</tr>"]
    for slot in cert.slots:
        cells = "".join(
            f"<td>{_num(slot.verdicts[n].observed, '.2f')} / "
            f"{_num(slot.verdicts[n].expected, '.2f')}</td>" if n in slot.verdicts
            else "<td>–</td>" for n in JUDGED_NORMS)
        rows.append(f'<tr><td class="l">{_e(slot.case)}</td><td>P{slot.order}</td>'
                    f"<td>{_status(slot.status)}</td>{cells}</tr>")
    rows.append("</table>")
    for slot in cert.slots:
        if slot.submitted:
            rows += _slot_html(slot)
    rows.append("</body></html>")
    return "\n".join(rows) + "\n"


def _slot_html(slot):
    rows = [f"<h2>{_e(slot.case)}, P{slot.order}: {_status(slot.status)}</h2>"]
    if slot.diagnosis:
        rows.append(f"<p><b>What this usually means:</b> {_e(slot.diagnosis)}.</p>")
    rows.append("<ul>" + "".join(f"<li>{_status(v.status)} {_e(v.reason)}</li>"
                                  for v in slot.verdicts.values()) + "</ul>")
    rows.append("<table><tr><th>level</th><th>element</th><th>cells</th><th>DOFs</th>"
                "<th>h</th>" + "".join(f"<th>{n}</th>" for n in (*JUDGED_NORMS, "max_nodal"))
                + "</tr>")
    for r in slot.levels:
        rows.append(f"<tr><td>{r.level}</td><td>{_e(r.element)}{' (curved)' if r.curved else ''}"
                    f"</td><td>{r.cells}</td><td>{r.dofs}</td><td>{_num(r.h, '.4g')}</td>"
                    + "".join(f"<td>{_num(r.norms[n])}</td>"
                              for n in (*JUDGED_NORMS, "max_nodal")) + "</tr>")
    rows.append("</table>")
    for q in slot.quantities:
        ref = (f"reference {_num(q.reference, '.10g')} ({_e(q.scope)}; {_e(q.source)})"
               if q.reference is not None else "no reference value")
        vals = ", ".join(f"level {row['level']}: {_num(row['value'], '.10g')}"
                         for row in q.per_level)
        reason = _e(q.verdict["reason"]) if q.verdict else ""
        rows.append(f"<p>Quantity <b>{_e(q.name)}</b> {_status(q.status)}: {vals}; {ref}. "
                    f"{reason}</p>")
    notes = slot.notes + sorted({n for r in slot.levels for n in r.notes})
    if notes:
        rows.append("<p>Notes: " + "; ".join(_e(n) for n in notes) + ".</p>")
    return rows
