"""The standard verification suite: every catalogue case at P1 and P2, plus P3 for smooth ones.

Level sizes are chosen per case so that the whole suite runs in about two
minutes on two cores: four uniform levels, with the coarsest mesh made coarse
enough that the finest level has about :data:`FINEST_DOFS` unknowns
(:func:`plan_for`). A few cases whose asymptotic range starts late get their
own budget in :data:`SETTINGS`, each with the reason.

Status: a case and degree PASS when every check passes; anything else
(a FAIL, or an INCONCLUSIVE check) fails the certificate.
"""

import time
from dataclasses import asdict, dataclass, field

from lapsolve.errors import InputError, Interrupted

from . import rates
from .exact.catalogue import CASES, get_case
from .junit import JUnitCase
from .study import DEFAULT_QOI_TOL, DEFAULT_TOL, StudyInterrupted, coarsest_size, run_study

SCHEMA = "lapsolve.verify/1"
LEVELS = 4
QUICK_LEVELS = 3
#: Unknowns aimed at on the finest level (sets the coarsest size; common practice, no source).
FINEST_DOFS = 20_000


@dataclass(frozen=True)
class Setting:
    """A case's own budget: ``finest_dofs`` per degree, or orders left out, and why."""

    finest_dofs: dict = field(default_factory=dict)
    skip_orders: tuple = ()
    reason: str = ""


#: Cases that need more than the default budget (measured; see docs/verification.md).
SETTINGS = {
    "near-singular": Setting(
        finest_dofs={1: 50_000, 2: 50_000, 3: 110_000},
        reason="the pole at distance 0.099 from the corner keeps uniform meshes "
               "pre-asymptotic until h is about 0.02 (P1/P2 functional orders 1.93/3.92 at "
               "h = 0.033 -> 0.017)"),
    "coax-eccentric": Setting(
        finest_dofs={3: 40_000},
        reason="at P3 the capacitance error mixes the O(h^4) error of the quadratic circle "
               "edges with the O(h^6) discretisation error, and settles late (last orders "
               "3.48 at 29k DOFs, 3.90 at 37k)"),
    "sc-lhexagon": Setting(
        finest_dofs={1: 6_000, 2: 10_000},
        reason="its exact potential comes through the inverse Schwarz-Christoffel map "
               "(about 40 microseconds a point), so norms at every quadrature point cost "
               "more than the solve; the singular rates are already clear at this size"),
}


@dataclass(frozen=True)
class Plan:
    """One study of the suite."""

    case: str
    order: int
    levels: int
    size: float

    def to_dict(self):
        return asdict(self)


def suite_orders(case):
    return (1, 2, 3) if case.smooth else (1, 2)


def plan_for(case, order, levels=LEVELS, finest_dofs=None):
    """Coarsest size for ``case`` at ``order`` so the finest level has about the budget.

    The budget is ``finest_dofs``, else the case's :data:`SETTINGS`, else
    :data:`FINEST_DOFS`.
    """
    setting = SETTINGS.get(case.name, Setting())
    budget = finest_dofs or setting.finest_dofs.get(order, FINEST_DOFS)
    return Plan(case.name, order, levels, coarsest_size(case, order, levels, budget))


def standard_plans(cases=None, orders=None, quick=False):
    """The plans of the standard suite, optionally restricted to some cases and degrees.

    ``quick``: P1 and P2 studies keep the same coarsest mesh and drop the finest level
    (about four times faster); P3 keeps all levels, because on curved boundaries its
    asymptotic range starts late (at three levels, orders 3.30-3.89 where 4 is due).
    """
    names = list(cases) if cases else list(CASES)
    plans = []
    for name in names:
        case = get_case(name)
        setting = SETTINGS.get(name, Setting())
        for order in suite_orders(case):
            if orders and order not in orders:
                continue
            if order in setting.skip_orders:
                continue
            plan = plan_for(case, order)
            levels = QUICK_LEVELS if quick and order < 3 else LEVELS
            plans.append(Plan(plan.case, order, levels, plan.size))
    if not plans:
        raise InputError("no case and degree left to verify (check --cases and --orders)",
                         field="--orders")
    return plans


@dataclass
class SuiteResult:
    """Studies of a suite run, in plan order."""

    plans: list
    studies: list = field(default_factory=list)
    seconds: float = 0.0
    incomplete: bool = False
    tol: float = DEFAULT_TOL
    qoi_tol: float = DEFAULT_QOI_TOL
    solver_name: str = "lapsolve.solve"

    @property
    def passed(self):
        return (not self.incomplete and len(self.studies) == len(self.plans)
                and all(s.status == rates.PASS for s in self.studies))

    def counts(self):
        out = {"PASS": 0, "FAIL": 0, "INCONCLUSIVE": 0}
        for s in self.studies:
            out[s.status] += 1
        out["not run"] = len(self.plans) - len(self.studies)
        return out

    def rows(self):
        """One row per case and degree: status, and per check observed vs expected."""
        rows = []
        for s in self.studies:
            checks = {name: {"observed": _num(v.observed), "fitted": _num(v.fitted),
                             "expected": v.expected, "status": v.status}
                      for name, v in s.checks.items()}
            rows.append({"case": s.case, "order": s.order, "status": _pass_fail(s),
                         "detail": s.status, "levels": len(s.levels),
                         "finest_dofs": s.levels[-1].dofs if s.levels else 0,
                         "seconds": s.seconds, "checks": checks,
                         "problems": [f"{c}: {r}" for c, r in s.problems()]})
        return rows

    def junit_cases(self):
        """One JUnit test case per case x degree x check."""
        out = []
        for s in self.studies:
            share = s.seconds / max(len(s.checks), 1)
            for name, v in s.checks.items():
                failure = None
                if v.status == rates.FAIL:
                    failure = v.reason
                elif v.status != rates.PASS:
                    failure = f"inconclusive: {v.reason}"
                out.append(JUnitCase(
                    classname=f"{s.case}.P{s.order}", name=f"{name} order", time=share,
                    failure=failure,
                    properties={"observed": _num(v.observed), "fitted": _num(v.fitted),
                                "expected": v.expected, "tol": v.tol, "status": v.status,
                                "rate_axis": s.rate_axis}))
            if not s.checks:
                out.append(JUnitCase(classname=f"{s.case}.P{s.order}", name="levels",
                                     failure="; ".join(r for _, r in s.problems())))
        return out

    def to_dict(self):
        return {"schema": SCHEMA, "status": "PASS" if self.passed else "FAIL",
                "incomplete": self.incomplete, "seconds": self.seconds, "tol": self.tol,
                "qoi_tol": self.qoi_tol,
                "solver": self.solver_name, "counts": self.counts(),
                "plans": [p.to_dict() for p in self.plans],
                "settings": {k: asdict(v) for k, v in SETTINGS.items()},
                "rows": self.rows(),
                "studies": [s.to_dict() for s in self.studies]}


def _num(value):
    value = float(value)
    return value if value == value and abs(value) != float("inf") else None


def _pass_fail(study):
    return "PASS" if study.status == rates.PASS else "FAIL"


class SuiteInterrupted(Interrupted):
    """Ctrl-C during the suite; ``partial`` is the :class:`SuiteResult` so far."""

    def __init__(self, partial):
        self.partial = partial
        super().__init__("interrupted; finished studies were kept and marked incomplete")


def run_suite(plans, solver=None, tol=DEFAULT_TOL, qoi_tol=DEFAULT_QOI_TOL, progress=None,
              keep_finest=True):
    """Run every plan in order.

    Parameters
    ----------
    plans : list of Plan
    solver : callable, optional
        ``(problem, order, mesh) -> solution`` (default :func:`lapsolve.solve`).
    tol, qoi_tol : float
        Allowed shortfall of each norm order and each quantity order.
    progress : callable, optional
        ``progress(done_levels, total_levels, text)``.
    keep_finest : bool
        Keep each study's finest solution (for pictures).

    Returns
    -------
    SuiteResult

    Raises
    ------
    SuiteInterrupted
        On Ctrl-C, with the finished studies.
    """
    from .study import default_solver, solver_name

    solver = solver or default_solver
    result = SuiteResult(list(plans), tol=tol, qoi_tol=qoi_tol, solver_name=solver_name(solver))
    total = sum(p.levels for p in plans)
    done = [0]
    t0 = time.perf_counter()

    def step(i, n, text):
        if progress is not None:
            progress(done[0] + i, total, text)

    try:
        for plan in plans:
            case = get_case(plan.case)
            study = run_study(case, plan.order, plan.levels, plan.size, solver=solver,
                              tol=tol, qoi_tol=qoi_tol, progress=step,
                              keep_finest=keep_finest)
            result.studies.append(study)
            done[0] += plan.levels
    except (StudyInterrupted, KeyboardInterrupt) as exc:
        partial = getattr(exc, "partial", None)
        if partial is not None and partial.levels:
            result.studies.append(partial)
        result.incomplete = True
        result.seconds = time.perf_counter() - t0
        raise SuiteInterrupted(result) from None
    result.seconds = time.perf_counter() - t0
    return result
