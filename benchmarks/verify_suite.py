"""Time of the standard verification suite (``lapsolve verify``), per study and in total.

Runs what ``lapsolve verify --out DIR`` runs, in this process: the planning (one
coarse mesh per case and degree), every study of the suite, and the certificate
(plots and files, into a temporary folder unless ``--report DIR``). Prints one row
per case and degree (levels, finest DOFs, seconds, status, observed/expected L2 and
H1 orders) and the totals against the 180 s target on two cores. Wall-clock and
CPU seconds are both given: the machine may be shared, and the load average
(``os.getloadavg``) before and after is recorded beside the figures.

Usage: python3 benchmarks/verify_suite.py [--quick] [--cases A B] [--orders 1 2]
       [--no-pictures] [--report DIR] [--json FILE]
"""

import argparse
import json
import os
import sys
import tempfile
import time

from lapsolve.atomic import write_text
from verification.report.provenance import machine_info, software_versions
from verification.report.write import write_verify_report
from verification.suite import run_suite, standard_plans

TARGET_SECONDS = 180.0


def _clock():
    return time.perf_counter(), time.process_time()


def _since(start):
    wall, cpu = _clock()
    return wall - start[0], cpu - start[1]


def measure(cases=None, orders=None, quick=False, pictures=True, report=None):
    """Run and time the suite; returns plain data."""
    load_before = os.getloadavg()
    start = _clock()
    plans = standard_plans(cases, orders, quick=quick)
    plan_wall, plan_cpu = _since(start)
    t_suite = _clock()
    suite = run_suite(plans, keep_finest=pictures)
    suite_wall, suite_cpu = _since(t_suite)
    t_report = _clock()
    if report:
        write_verify_report(report, suite, pictures=pictures)
    else:
        with tempfile.TemporaryDirectory() as folder:
            write_verify_report(folder, suite, pictures=pictures)
    report_wall, report_cpu = _since(t_report)
    total_wall, total_cpu = _since(start)
    rows = []
    for s in suite.studies:
        row = {"case": s.case, "order": s.order, "levels": len(s.levels),
               "finest_dofs": s.levels[-1].dofs, "seconds": round(s.seconds, 3),
               "status": s.status}
        for name in ("L2", "H1"):
            v = s.checks.get(name)
            row[name] = None if v is None else {"observed": round(v.observed, 3),
                                                "expected": round(v.expected, 3)}
        rows.append(row)
    return {
        "schema": "lapsolve.bench.verify/1",
        "quick": quick, "pictures": pictures, "passed": suite.passed,
        "seconds": {"planning": plan_wall, "suite": suite_wall, "report": report_wall,
                    "total": total_wall},
        "cpu_seconds": {"planning": plan_cpu, "suite": suite_cpu, "report": report_cpu,
                        "total": total_cpu},
        "target_seconds": TARGET_SECONDS,
        "load_average_before": [round(v, 2) for v in load_before],
        "load_average_after": [round(v, 2) for v in os.getloadavg()],
        "machine": machine_info(), "software": software_versions(), "rows": rows,
    }


def _pair(cell):
    return "–" if cell is None else f"{cell['observed']:.2f}/{cell['expected']:.2f}"


def print_table(data, stream=sys.stdout):
    print(f"{'case':22s} {'P':>2s} {'levels':>6s} {'finest DOFs':>11s} {'s':>6s} "
          f"{'L2 obs/exp':>11s} {'H1 obs/exp':>11s}  status", file=stream)
    for r in data["rows"]:
        print(f"{r['case']:22s} {r['order']:2d} {r['levels']:6d} {r['finest_dofs']:11,d} "
              f"{r['seconds']:6.2f} {_pair(r['L2']):>11s} {_pair(r['H1']):>11s}  {r['status']}",
              file=stream)
    s, c = data["seconds"], data["cpu_seconds"]
    met = "met" if s["total"] < data["target_seconds"] else "MISSED"
    print(f"planning {s['planning']:.1f} s, suite {s['suite']:.1f} s, report {s['report']:.1f} s;"
          f" total {s['total']:.1f} s wall ({c['total']:.1f} s CPU), target "
          f"{data['target_seconds']:.0f} s: {met}"
          f"; load average {data['load_average_before']} -> {data['load_average_after']}; "
          f"suite {'PASS' if data['passed'] else 'FAIL'}", file=stream)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--cases", nargs="+")
    parser.add_argument("--orders", type=int, nargs="+")
    parser.add_argument("--no-pictures", action="store_true")
    parser.add_argument("--report", metavar="DIR", help="keep the certificate here")
    parser.add_argument("--json", metavar="FILE", help="write the figures as JSON")
    args = parser.parse_args(argv)
    data = measure(args.cases, args.orders, args.quick, not args.no_pictures, args.report)
    print_table(data)
    if args.json:
        write_text(args.json, json.dumps(data, indent=2) + "\n")
    return 0 if data["passed"] else 1


if __name__ == "__main__":
    sys.exit(main())
