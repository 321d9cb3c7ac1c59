"""Regression baselines: store the numbers of a run, check a later run against them.

A run is any JSON report (``lapsolve.study/1``, ``lapsolve.verify/1``,
``lapsolve.certificate/1``, ...). It is read in a generic *flattened* form, so a
new report layout needs no code here.

Flattening rule (``lapsolve.flatten/1``)
----------------------------------------
Walk the JSON. A path is the list of keys from the root; a list element is named
by its identity keys (``case``, ``name``, ``quantity``, ``norm``, ``order``,
``degree``, ``level``, ``index``, joined as ``case=coax,order=2``) when it has
any, else by its index ``[i]``. Subtrees under a key in :data:`SKIPPED_KEYS`
(expected orders, tolerances, references, pairwise rates, timings, settings,
mesh sizes and counts) and the identity keys themselves are not read. A finite
number (not a boolean) is kept when

- its key is ``observed``, ``fitted``, ``observed_order`` or ``fitted_order``, or
  it lies under a key in :data:`ORDER_CONTAINERS` (``orders``, ``dof_orders``, ...):
  an **order**;
- else its key is a norm name (:data:`NORM_KEYS`: ``L2``, ``H1``, ``energy``,
  ``max_nodal`` and their ``_rel`` forms), or it is an element of a list held by
  such a key: a **norm**;
- else some key on its path is in :data:`QUANTITY_KEYS` (``quantities``,
  ``quantity``, ``qoi``, ``capacity``, ``references_measured``): a **quantity**.

Everything else is ignored. Paths print as keys joined by ``/`` (``[i]`` is
appended without one).

Check rule
----------
With ``rtol``, ``atol``, ``order_drop`` and ``qtol`` (default ``rtol``):

- a norm regresses when ``current > baseline * (1 + rtol) + atol``;
- an order regresses when ``current < baseline - order_drop``;
- a quantity drifts when ``|current - baseline| > qtol * |baseline| + atol``;
- an entry of the baseline missing from the run fails; a new entry is listed.
"""

import datetime
import json
import math
import re
from dataclasses import asdict, dataclass
from pathlib import Path

from lapsolve.atomic import write_text
from lapsolve.errors import InputError
from verification.json_file import read_json_object

BASELINE_SCHEMA = "lapsolve.baseline/1"
FLATTEN_RULE = "lapsolve.flatten/1"
NORM_KEYS = {"L2", "H1", "energy", "max_nodal"}
NORM_KEYS |= {f"{k}_rel" for k in NORM_KEYS}
ORDER_KEYS = {"observed", "fitted", "observed_order", "fitted_order"}
QUANTITY_KEYS = {"quantities", "quantity", "qoi", "capacity", "references_measured"}
#: Containers whose numbers are all orders (e.g. per-check lists of pairwise DOF orders).
ORDER_CONTAINERS = {"orders", "dof_orders", "observed_orders", "fitted_orders"}
SKIPPED_KEYS = {"expected", "expected_orders", "expected_order", "tol", "tolerance",
                "tolerances", "settings", "reference", "references", "pairwise", "seconds",
                "timings", "time", "floor", "source", "schema", "used_levels",
                "plateau_levels", "fitted_levels", "h", "h_max", "h_min", "h_mean", "dofs",
                "cells", "nodes", "elements", "triangles"}
IDENTITY_KEYS = ("case", "name", "quantity", "norm", "order", "degree", "level", "index")
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$")

OK, REGRESSED, IMPROVED, MISSING, NEW = "OK", "REGRESSED", "IMPROVED", "MISSING", "NEW"


def _is_number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool) \
        and math.isfinite(value)


def _label(item, index):
    if isinstance(item, dict):
        ident = [f"{k}={item[k]}" for k in IDENTITY_KEYS
                 if isinstance(item.get(k), (str, int)) and not isinstance(item.get(k), bool)]
        if ident:
            return ",".join(ident)
    return f"[{index}]"


def _joined(path):
    text = ""
    for part in path:
        text += part if part.startswith("[") or not text else "/" + part
    return text


def flatten(data):
    """The numbers of a run: ``{path: (kind, value)}`` by the module's rule."""
    out = {}
    _walk(data, (), None, out)
    return out


def _walk(node, path, context, out):
    """``context`` is ``"order"`` or ``"quantity"`` below such a container, else None."""
    if isinstance(node, dict):
        for key, value in node.items():
            key = str(key)
            if key in SKIPPED_KEYS or key in IDENTITY_KEYS:
                continue
            inner = ("order" if key in ORDER_CONTAINERS else
                     context or ("quantity" if key in QUANTITY_KEYS else None))
            _visit(value, path + (key,), key, inner, out)
    elif isinstance(node, list):
        seen = {}
        for i, item in enumerate(node):
            label = _label(item, i)
            if label in seen:  # two items with the same identity: fall back to indices
                label = f"{label}[{i}]"
            seen[label] = True
            if isinstance(item, (dict, list)):
                _walk(item, path + (label,), context, out)
            elif _is_number(item) and context:
                out[_joined(path + (label,))] = (context, float(item))


def _visit(value, path, key, context, out):
    name = _joined(path)
    if _is_number(value):
        kind = ("order" if key in ORDER_KEYS or context == "order" else
                "norm" if key in NORM_KEYS else context)
        if kind:
            out[name] = (kind, float(value))
    elif isinstance(value, list) and key in NORM_KEYS and context != "order":
        for i, item in enumerate(value):
            if _is_number(item):
                out[f"{name}[{i}]"] = ("norm", float(item))
    elif isinstance(value, (dict, list)):
        _walk(value, path, context, out)


def read_run(path):
    """A run report as JSON data, with a clear error for anything else."""
    path = Path(path)
    data = read_json_object(path, "run report")
    if data.get("schema") == BASELINE_SCHEMA:
        raise InputError("this is a baseline, not a run report", source=str(path))
    return data


def make_baseline(data, name, source=""):
    """A baseline (``lapsolve.baseline/1``) of run data ``data``."""
    entries = flatten(data)
    if not entries:
        raise InputError("the run holds no norms, orders or quantities to keep (see the "
                         "flattening rule in docs/certification.md)", source=source or None)
    from lapsolve import __version__

    return {"schema": BASELINE_SCHEMA, "name": name, "rule": FLATTEN_RULE,
            "created": datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
            "lapsolve": __version__,
            "run": {"file": str(source), "schema": data.get("schema")},
            "entries": {path: {"kind": kind, "value": value}
                        for path, (kind, value) in sorted(entries.items())}}


def baseline_path(name, folder="baselines"):
    """``folder/name.json`` after checking the name is a plain label."""
    if not _NAME.match(str(name)):
        raise InputError(f"baseline name '{name}' must be letters, digits, '.', '_' or '-'",
                         field="--name")
    return Path(folder) / f"{name}.json"


def save_baseline(run_path, name, folder="baselines", force=False):
    """Store the numbers of the run at ``run_path`` as baseline ``name``.

    Returns
    -------
    Path, dict
        Where it was written and the baseline.
    """
    target = baseline_path(name, folder)
    data = read_run(run_path)
    baseline = make_baseline(data, name, str(run_path))
    if target.exists() and not force:
        raise InputError(f"baseline '{name}' exists already; use --force to replace it",
                         source=str(target))
    write_text(target, json.dumps(baseline, indent=1))
    return target, baseline


def load_baseline(against, folder="baselines"):
    """A stored baseline by name (``folder/NAME.json``) or by file path."""
    path = Path(against)
    if not (path.suffix == ".json" and path.exists()):
        path = baseline_path(against, folder)
    if not path.exists():
        raise InputError(f"no baseline '{against}'", source=str(path))
    data = read_json_object(path, "baseline")
    schema = data.get("schema")
    if schema != BASELINE_SCHEMA:
        raise InputError(f"not a baseline: schema {schema!r}, expected '{BASELINE_SCHEMA}'",
                         source=str(path), field="schema")
    _check_entries(data.get("entries"), path)
    if not isinstance(data.get("name", ""), str):
        raise InputError("must be a string", source=str(path), field="name")
    data.setdefault("name", path.stem)
    return data


def _check_entries(entries, path):
    if not isinstance(entries, dict):
        raise InputError("must map entry paths to {kind, value}", source=str(path),
                         field="entries")
    for key, entry in entries.items():
        if not (isinstance(entry, dict) and entry.get("kind") in ("norm", "order", "quantity")
                and _is_number(entry.get("value"))):
            raise InputError("each entry needs a kind (norm, order or quantity) and a finite "
                             "value", source=str(path), field=f"entries.{key}")


@dataclass(frozen=True)
class Comparison:
    """One entry compared: ``status`` is OK, REGRESSED, IMPROVED, MISSING or NEW."""

    path: str
    kind: str
    baseline: float
    current: float
    status: str
    reason: str

    @property
    def failed(self):
        return self.status in (REGRESSED, MISSING)

    def to_dict(self):
        return asdict(self)


def compare(baseline, data, rtol=0.02, order_drop=0.1, atol=1e-12, qtol=None):
    """Compare run data with a baseline entry by entry (rule in the module docstring).

    Returns
    -------
    list of Comparison
    """
    if not (rtol >= 0 and order_drop >= 0 and atol >= 0 and (qtol is None or qtol >= 0)):
        raise InputError("tolerances must be non-negative", field="--rtol")
    qtol = rtol if qtol is None else qtol
    current = flatten(data)
    rows = []
    for path, entry in baseline["entries"].items():
        kind, old = entry["kind"], float(entry["value"])
        if path not in current:
            rows.append(Comparison(path, kind, old, math.nan, MISSING,
                                   "in the baseline but not in this run"))
            continue
        rows.append(_compare_one(path, kind, old, current[path][1], rtol, order_drop,
                                 atol, qtol))
    for path, (kind, value) in current.items():
        if path not in baseline["entries"]:
            rows.append(Comparison(path, kind, math.nan, value, NEW, "not in the baseline"))
    return rows


def _compare_one(path, kind, old, new, rtol, order_drop, atol, qtol):
    if kind == "norm":
        limit = old * (1 + rtol) + atol
        if new > limit:
            return Comparison(path, kind, old, new, REGRESSED,
                              f"error grew by {_pct(new, old)} (limit {rtol:.1%})")
        status = IMPROVED if new < old * (1 - rtol) - atol else OK
        return Comparison(path, kind, old, new, status, _pct(new, old))
    if kind == "order":
        if new < old - order_drop:
            return Comparison(path, kind, old, new, REGRESSED,
                              f"order dropped by {old - new:.3f} (limit {order_drop})")
        status = IMPROVED if new > old + order_drop else OK
        return Comparison(path, kind, old, new, status, f"{new - old:+.3f}")
    if abs(new - old) > qtol * abs(old) + atol:
        return Comparison(path, kind, old, new, REGRESSED,
                          f"drifted by {_pct(new, old)} (limit {qtol:.1%})")
    return Comparison(path, kind, old, new, OK, _pct(new, old))


def _pct(new, old):
    if old == 0:
        return f"{new - old:+.3e}"
    return f"{(new - old) / abs(old):+.2%}"


def diff_table(rows, show_all=False):
    """A plain-text table of the comparisons (failures first)."""
    picked = [r for r in rows if show_all or r.status != OK]
    picked.sort(key=lambda r: (not r.failed, r.status, r.path))
    if not picked:
        return f"all {len(rows)} entries within tolerance"
    width = min(max(len(r.path) for r in picked), 90)
    lines = [f"{'status':<10} {'kind':<8} {'entry':<{width}} {'baseline':>12} "
             f"{'current':>12}  change"]
    for r in picked:
        path = r.path if len(r.path) <= width else "…" + r.path[-(width - 1):]
        lines.append(f"{r.status:<10} {r.kind:<8} {path:<{width}} {_g(r.baseline):>12} "
                     f"{_g(r.current):>12}  {r.reason}")
    counts = {s: sum(r.status == s for r in rows) for s in (OK, IMPROVED, REGRESSED,
                                                           MISSING, NEW)}
    lines.append(", ".join(f"{v} {k.lower()}" for k, v in counts.items() if v))
    return "\n".join(lines)


def _g(value):
    return "–" if not math.isfinite(value) else f"{value:.5g}"


def comparison_junit(rows, name):
    """JUnit XML with one test case per compared entry."""
    from .junit import JUnitCase, junit_xml

    cases = []
    for r in rows:
        props = {"baseline": r.baseline, "current": r.current, "status": r.status}
        if r.failed:
            cases.append(JUnitCase(f"baseline.{r.kind}", r.path,
                                   failure=f"{r.status}: {r.reason}", properties=props))
        elif r.status == NEW:
            cases.append(JUnitCase(f"baseline.{r.kind}", r.path, skipped=r.reason,
                                   properties=props))
        else:
            cases.append(JUnitCase(f"baseline.{r.kind}", r.path, properties=props))
    return junit_xml(f"lapsolve baseline check against {name}", cases)
