"""Long fuzzing run of every input path: counts of outcomes per target.

Runs the fuzz targets of the test suite (``FUZZ_TARGETS`` in ``tests/test_fuzz_*.py``)
with many more examples than the suite's bounded profile (default 10,000 per
target) and counts, per target: examples, successes, typed errors by class, and
tracebacks (any exception that is not a ``LapsolveError``, or a failed check of
the target; each one is a bug). Prints a table, or JSON with ``--json``, and
exits 1 when there was any traceback.

Usage::

    python benchmarks/fuzz_long.py                      # all targets, 10,000 each
    python benchmarks/fuzz_long.py --examples 2000 --targets polygon importer
    python benchmarks/fuzz_long.py --json > fuzz.json
"""

import argparse
import collections
import contextlib
import importlib
import io
import json
import logging
import sys
import time
import traceback
import warnings
from pathlib import Path

TESTS = Path(__file__).resolve().parents[1] / "tests"
MODULES = ("test_fuzz_problem_file", "test_fuzz_polygons", "test_fuzz_importer")


def load_targets():
    """name -> (strategy, function) from the fuzz test modules."""
    sys.path.insert(0, str(TESTS))
    targets = {}
    for name in MODULES:
        targets.update(importlib.import_module(name).FUZZ_TARGETS)
    return targets


def run_target(strategy, function, examples, seed):
    """Run ``function`` on ``examples`` drawn examples; returns the outcome record."""
    from hypothesis import given, settings
    from hypothesis import seed as fixed_seed

    counts = collections.Counter()
    failures = []

    @fixed_seed(seed)
    @settings(settings.get_profile("lapsolve-fuzz-long"), max_examples=examples)
    @given(strategy)
    def drive(example):
        try:
            sink = io.StringIO()  # meshio writes notes on stdout and stderr
            with contextlib.redirect_stdout(sink), contextlib.redirect_stderr(sink):
                label = function(example)
        except Exception as exc:  # noqa: BLE001 - a traceback is what we count
            label = "TRACEBACK"
            if len(failures) < 5:
                failures.append({"example": repr(example)[:500],
                                 "error": f"{type(exc).__name__}: {exc}"[:500],
                                 "traceback": traceback.format_exc()[-3000:]})
        counts[label] += 1

    start = time.perf_counter()
    drive()
    seconds = time.perf_counter() - start
    typed = {k: v for k, v in counts.items() if k not in ("ok", "exit 2", "TRACEBACK")}
    return {"examples": sum(counts.values()), "successes": counts["ok"],
            "exit_2": counts["exit 2"], "typed_errors": dict(sorted(typed.items())),
            "tracebacks": counts["TRACEBACK"], "seconds": round(seconds, 1),
            "failures": failures}


def table(results):
    lines = [f"{'target':18s} {'examples':>8s} {'ok':>7s} {'exit 2':>7s} {'tracebacks':>10s} "
             f"{'seconds':>8s}  typed errors"]
    for name, r in results.items():
        typed = ", ".join(f"{k} {v}" for k, v in r["typed_errors"].items()) or "-"
        lines.append(f"{name:18s} {r['examples']:8d} {r['successes']:7d} {r['exit_2']:7d} "
                     f"{r['tracebacks']:10d} {r['seconds']:8.1f}  {typed}")
    for name, r in results.items():
        for failure in r["failures"]:
            lines += [f"--- {name}: {failure['error']}", failure["example"],
                      failure["traceback"]]
    return "\n".join(lines)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=10_000,
                        help="examples per target (default 10,000)")
    parser.add_argument("--targets", nargs="+", help="only these targets")
    parser.add_argument("--seed", type=int, default=20240611, help="hypothesis seed")
    parser.add_argument("--json", action="store_true", help="print the results as JSON")
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore")  # numpy's RuntimeWarnings on hostile values
    logging.disable(logging.CRITICAL)
    targets = load_targets()
    unknown = sorted(set(args.targets or ()) - set(targets))
    if unknown:
        parser.error(f"unknown target(s) {', '.join(unknown)}; known: {', '.join(targets)}")
    results = {}
    for name, (strategy, function) in targets.items():
        if args.targets and name not in args.targets:
            continue
        results[name] = run_target(strategy, function, args.examples, args.seed)
        print(f"{name}: {results[name]['examples']} examples in {results[name]['seconds']} s, "
              f"{results[name]['tracebacks']} tracebacks", file=sys.stderr, flush=True)
    if args.json:
        print(json.dumps({"examples_per_target": args.examples, "seed": args.seed,
                          "targets": results}, indent=1))
    else:
        print(table(results))
    return 1 if any(r["tracebacks"] for r in results.values()) else 0


if __name__ == "__main__":
    sys.exit(main())
