"""Convergence studies: solve an exact case level by level, measure errors, judge the orders.

A study takes a ``solver`` callable ``(problem, order, mesh) -> solution`` (default
:func:`lapsolve.solve`) so any solver, including a deliberately broken one, goes
through the same path. The solution only needs ``basis`` (a scikit-fem basis on
the given mesh) and ``u`` (its degrees of freedom); ``fluxes``, ``energy``,
``capacity`` and ``solver`` (a SolveInfo) are used when present.

Levels
------
Uniform studies mesh once and refine uniformly (:meth:`lapsolve.mesh.Mesh.refined`),
so ``h`` halves exactly; orders are measured against ``h`` (largest edge).
Graded studies (:mod:`verification.grading`) mesh each level anew with the global
size halved; orders are measured against ``N**(-1/2)``, ``N`` the number of DOFs.

Expected orders
---------------
From :func:`verification.rates.expected_orders` (H1 ``min(p, λ)``, L2
``min(p+1, 2λ)``, functionals ``2 min(p, λ)``; Strang & Fix 1973, Grisvard 1985),
with three refinements, each quoted in the report:

* L2 for ``1 < λ < p``: ``λ + 1`` (the sharper bound stated in
  :func:`~verification.rates.expected_orders`' own notes);
* the energy *norm* of the error converges like the H1 seminorm; the energy
  *functional* ``W`` is a quantity of interest (order ``2 min(p, λ)``);
* functional orders limited by the discrete geometry and boundary data
  (:func:`verification.qoi.order_caps`).
"""

import logging
import math
import time
from dataclasses import asdict, dataclass, field

import numpy as np

from lapsolve.errors import Interrupted
from lapsolve.geometry import CircleLoop

from . import rates
from .grading import graded_mesh, grading_for
from .norms import error_norms, singular_point_of
from .qoi import measure_qoi, neumann_data_vanish, order_caps

log = logging.getLogger(__name__)

SCHEMA = "lapsolve.study/1"
#: Default allowed shortfall of an observed norm order (common practice, no source).
DEFAULT_TOL = 0.1
#: Default allowed shortfall of a quantity's order: functionals (order 2 min(p, λ)) are
#: sums of terms of both signs and settle later than the norms (common practice, no source).
DEFAULT_QOI_TOL = 0.25
NORMS = ("L2", "H1")


@dataclass
class Level:
    """Results of one refinement level."""

    index: int
    h: float
    h_min: float
    dofs: int
    elements: int
    errors: dict
    qoi: list
    seconds: dict
    solver: dict = None

    def to_dict(self):
        return {**asdict(self), "qoi": [q.to_dict() for q in self.qoi]}


@dataclass
class Expectation:
    """An expected order and why (formula, caps applied)."""

    order: float
    basis: str


@dataclass
class Study:
    """A convergence study of one case at one element degree.

    ``checks`` maps a check name (``"L2"``, ``"H1"``, ``"energy norm"`` or a
    quantity-of-interest measure) to its :class:`~verification.rates.Verdict`.
    ``finest`` keeps the finest solution for pictures; it is not serialised.
    """

    case: str
    order: int
    lam: float
    graded: bool
    grading: dict
    rate_axis: str
    tol: float
    qoi_tol: float
    solver_name: str
    levels: list = field(default_factory=list)
    expected: dict = field(default_factory=dict)
    checks: dict = field(default_factory=dict)
    incomplete: bool = False
    seconds: float = 0.0
    finest: object = None

    @property
    def status(self):
        """PASS when every check passes; FAIL when any fails; else INCONCLUSIVE."""
        statuses = [v.status for v in self.checks.values()]
        if rates.FAIL in statuses:
            return rates.FAIL
        if statuses and all(s == rates.PASS for s in statuses) and not self.incomplete:
            return rates.PASS
        return rates.INCONCLUSIVE

    def problems(self):
        """``[(check name, one-sentence reason)]`` of every check that did not pass."""
        out = [(name, v.reason) for name, v in self.checks.items() if not v.passed]
        if self.incomplete:
            out.append(("levels", f"interrupted after {len(self.levels)} level(s); the "
                                  "study is incomplete"))
        elif not self.checks:
            out.append(("levels", f"only {len(self.levels)} level(s) finished; no order "
                                  "can be measured"))
        return out

    def series(self, name):
        """Errors of one check per level (a norm or a quantity measure)."""
        if name in NORMS or name == "energy norm":
            key = "energy" if name == "energy norm" else name
            return np.array([lv.errors[key] for lv in self.levels])
        return np.array([next(q.error for q in lv.qoi if q.name == name) for lv in self.levels])

    def axis(self):
        """The size each order is measured against: ``h``, or ``N**(-1/2)`` when graded."""
        if self.graded:
            return rates.h_equivalent([lv.dofs for lv in self.levels])
        return np.array([lv.h for lv in self.levels])

    def dof_orders(self):
        """Pairwise orders in ``N`` (slope of ``-log err`` against ``log N``) per check."""
        dofs = [lv.dofs for lv in self.levels]
        if len(dofs) < 2:
            return {}
        return {name: [_finite(v) for v in rates.dof_orders(dofs, self.series(name))]
                for name in self.checks}

    def to_dict(self):
        return {
            "case": self.case, "order": self.order,
            "lambda": _finite(self.lam), "graded": self.graded, "grading": self.grading,
            "rate_axis": self.rate_axis, "tol": self.tol, "qoi_tol": self.qoi_tol,
            "solver": self.solver_name,
            "status": self.status, "incomplete": self.incomplete, "seconds": self.seconds,
            "expected": {k: asdict(v) for k, v in self.expected.items()},
            "checks": {k: v.to_dict() for k, v in self.checks.items()},
            "dof_orders": self.dof_orders(),
            "problems": [{"check": c, "reason": r} for c, r in self.problems()],
            "levels": [lv.to_dict() for lv in self.levels],
        }


class StudyInterrupted(Interrupted):
    """Ctrl-C during a study; ``partial`` holds what finished (marked incomplete)."""

    def __init__(self, partial, message=None):
        self.partial = partial
        super().__init__(message or "interrupted; the finished levels were kept and "
                                    "marked incomplete")


def _finite(value):
    value = float(value)
    return value if math.isfinite(value) else None


def default_solver(problem, order, mesh):
    """The built-in solver, :func:`lapsolve.solve` (direct below 150,000 unknowns)."""
    from lapsolve import solve

    return solve(problem, order=order, mesh=mesh)


def solver_name(solver):
    if solver is default_solver:
        return "lapsolve.solve"
    return getattr(solver, "__qualname__", None) or type(solver).__name__


# --- expected orders ----------------------------------------------------------------------


def is_curved(problem):
    loops = list(problem.loops()) + [r.loop for r in problem.regions]
    return any(isinstance(lp, CircleLoop) for lp in loops)


def has_interpolated_dirichlet(case):
    return any(s.kind == "dirichlet" and s.electrode is None for s in case.conditions.values())


def expectations(case, order, graded, problem, qoi_names=()):
    """Expected order of every check (see the module docstring)."""
    lam = case.singular_exponent
    base = rates.expected_orders(order, lam, graded=graded)
    lam_eff = math.inf if graded else lam
    src = ("graded mesh, orders in N^(-1/2) (Babuska, Kellogg & Pitkaranta 1979)"
           if graded else f"lambda = {'inf' if math.isinf(lam) else f'{lam:.4g}'}")
    out = {"H1": Expectation(base["H1"], f"min(p, lambda) = {base['H1']:.4g}; {src}")}
    l2, l2_basis = base["L2"], f"min(p+1, 2 lambda) = {base['L2']:.4g}"
    if 1 < lam_eff < order:
        l2, l2_basis = lam_eff + 1, f"lambda + 1 = {lam_eff + 1:.4g} (1 < lambda < p)"
    out["L2"] = Expectation(l2, f"{l2_basis}; {src}")
    if case.coefficient is not None:
        out["energy norm"] = Expectation(base["H1"], "energy norm converges like H1: "
                                                     f"{base['H1']:.4g}")
    caps = order_caps(order, is_curved(problem), has_interpolated_dirichlet(case))
    for name in qoi_names:
        value, basis = base["qoi"], f"2 min(p, lambda) = {base['qoi']:.4g}"
        for cap, why in caps:
            if cap < value:
                value, basis = cap, f"{basis}, capped at {cap:.4g}: {why}"
        out[name] = Expectation(value, f"{basis}; {src}")
    return out


# --- levels -------------------------------------------------------------------------------

#: Unknowns aimed at on the finest level when a study is given no size: the direct
#: solver's range (lapsolve.linear.DIRECT_LIMIT), so a long study stays affordable.
STUDY_FINEST_DOFS = 150_000


def estimated_dofs(mesh, order):
    """Lagrange DOFs of degree ``order`` on ``mesh``: vertex, edge and interior nodes."""
    n_vertices = len(mesh.points)
    holes = max(len({t.loop for t in mesh.tags if t.boundary}) - 1, 0)
    n_edges = n_vertices + mesh.n_triangles - 1 + holes  # Euler: V - E + T = 1 - holes
    return (n_vertices + (order - 1) * n_edges
            + (order - 1) * (order - 2) // 2 * mesh.n_triangles)


def coarsest_size(case, order, levels, finest_dofs):
    """Level-0 size whose uniform refinement has about ``finest_dofs`` on the last level."""
    from lapsolve.meshing import triangulate

    size = case.default_size
    for _ in range(3):  # DOFs scale like size**-2; two corrections are plenty
        mesh = triangulate(case.problem(size), size=size)
        factor = (estimated_dofs(mesh, order) * 4 ** (levels - 1) / finest_dofs) ** 0.5
        if 0.85 < factor < 1.18:
            break
        size *= factor
    return float(size)


def level_meshes(problem, levels, size=None, grading=None):
    """Meshes of the levels, made lazily: refined uniformly, or graded level by level."""
    size = size or problem.mesh.max_size
    if grading is not None:
        for i in range(levels):
            yield graded_mesh(problem, size / 2**i, grading)
        return
    from lapsolve.meshing import triangulate

    mesh = triangulate(problem, size=size)
    for i in range(levels):
        yield mesh
        if i + 1 < levels:
            mesh = mesh.refined()


def _diameter(problem):
    lo, hi = problem.outer.bbox()
    return float(np.max(np.asarray(hi) - np.asarray(lo)))


def _cell_coefficient(problem, mesh, solution):
    """k per cell for the energy norm, from the problem's regions (None when k = 1)."""
    k = problem.coefficients()[mesh.regions] / problem.physics.scale
    if np.all(k == 1.0) or solution.basis.mesh.t.shape[1] != mesh.n_triangles:
        return None
    return k


def solve_level(case, problem, order, mesh, solver, index, energy_stationary=True):
    """Solve one level and measure errors and quantities."""
    t0 = time.perf_counter()
    solution = solver(problem, order, mesh)
    t1 = time.perf_counter()
    pure_neumann = all(s.kind != "dirichlet" for s in case.conditions.values())
    norms = error_norms(solution.basis, solution.u, case.u, case.grad,
                        coefficient=_cell_coefficient(problem, mesh, solution),
                        mean_free=pure_neumann, singular_point=singular_point_of(case))
    qoi = measure_qoi(solution, case, energy_stationary)
    t2 = time.perf_counter()
    info = getattr(solution, "solver", None)
    edges = mesh.points[mesh.triangles] - mesh.points[np.roll(mesh.triangles, -1, axis=1)]
    level = Level(index, mesh.h(), float(np.min(np.linalg.norm(edges, axis=2))),
                  len(solution.u), mesh.n_triangles, norms.to_dict(), qoi,
                  {"solve": t1 - t0, "measure": t2 - t1},
                  info.to_dict() if hasattr(info, "to_dict") else None)
    return level, solution


# --- verdicts -----------------------------------------------------------------------------


def _floors(study, diameter, scale):
    """Round-off floor per level (:func:`verification.rates.roundoff_floor`).

    Uniform levels use the smallest edge. On graded meshes ``h_min**-2`` grossly
    overstates the loss: the diagonally scaled stiffness matrix has condition
    O(N) on any shape-regular mesh (Bank & Scott, SIAM J. Numer. Anal. 26 (1989)
    1383-1394, from memory), and a direct solve is insensitive to that scaling,
    so ``h_min = N**(-1/2)`` is used there.
    """
    dofs = np.array([lv.dofs for lv in study.levels], float)
    if study.graded:
        h_min = dofs ** -0.5
    else:
        h_min = np.array([lv.h_min / diameter for lv in study.levels])
    return rates.roundoff_floor(dofs, h_min, scale)


def _not_finite(name, err, expected, study):
    level = int(np.flatnonzero(~np.isfinite(err))[0])
    reason = (f"{name} error is NaN or infinite at level {level}: the solution returned by "
              f"the solver is not a finite field.")
    tol = study.tol if name in NORMS + ("energy norm",) else study.qoi_tol
    return rates.Verdict(rates.FAIL, math.nan, float(expected), [], math.nan,
                         list(range(level)), [], reason, norm=name, tol=tol)


def judge_study(study, case, problem):
    """Fill ``study.expected`` and ``study.checks`` from the levels."""
    if not study.levels:
        return study
    judged_qoi = [q.name for q in study.levels[0].qoi if q.judged]
    study.expected = expectations(case, study.order, study.graded, problem, judged_qoi)
    if len(study.levels) < 2:
        return study
    axis = study.axis()
    diameter = _diameter(problem)
    last = study.levels[-1]
    for name, exp in study.expected.items():
        err = study.series(name)
        if not np.all(np.isfinite(err)):
            study.checks[name] = _not_finite(name, err, exp.order, study)
            continue
        if name in NORMS + ("energy norm",):
            key = "energy" if name == "energy norm" else name
            exact = last.errors[key] / last.errors[f"{key}_rel"] if last.errors[key] else 1.0
        else:
            exact = abs(next(q.reference for q in last.qoi if q.name == name))
        floor = _floors(study, diameter, exact)
        tol = study.tol if name in NORMS + ("energy norm",) else study.qoi_tol
        study.checks[name] = rates.judge(axis, err, exp.order, tol=tol, floor=floor,
                                         norm_name=name, degree=study.order,
                                         lam=math.inf if study.graded else study.lam)
    return study


def run_study(case, order, levels=4, size=None, *, solver=None, graded=False, mu=None,
              tol=DEFAULT_TOL, qoi_tol=DEFAULT_QOI_TOL, progress=None, meshes=None,
              keep_finest=True):
    """Refine ``case`` level by level at degree ``order`` and judge the observed orders.

    Parameters
    ----------
    case : ExactCase
    order : int
        Element degree.
    levels : int
        Number of levels (at least 2 for a verdict).
    size : float, optional
        Global size of level 0; default ``case.default_size``, made coarser when the
        finest level would exceed :data:`STUDY_FINEST_DOFS` unknowns.
    solver : callable, optional
        ``(problem, order, mesh) -> solution``; default :func:`default_solver`.
    graded : bool
        Grade toward ``case.singular_point`` (:mod:`verification.grading`).
    mu : float, optional
        Grading parameter (default ``0.75 λ / p``).
    tol : float
        Allowed shortfall of each observed norm order.
    qoi_tol : float
        Allowed shortfall of each quantity-of-interest order.
    progress : callable, optional
        ``progress(done_levels, total_levels, text)`` after each level.
    meshes : sequence of Mesh, optional
        Precomputed level meshes (shared between degrees by the suite).
    keep_finest : bool
        Keep the finest solution in ``Study.finest``.

    Returns
    -------
    Study

    Raises
    ------
    StudyInterrupted
        On Ctrl-C; ``partial`` is the study so far, marked incomplete.
    """
    solver = solver or default_solver
    if size is None:
        size = max(case.default_size, coarsest_size(case, order, levels, STUDY_FINEST_DOFS))
    problem = case.problem(size)
    grading = grading_for(case, order, mu) if graded else None
    study = Study(case.name, order, float(case.singular_exponent), bool(graded),
                  grading.to_dict() if grading else None, "N^(-1/2)" if graded else "h",
                  float(tol), float(qoi_tol), solver_name(solver))
    t_start = time.perf_counter()
    total = len(meshes) if meshes is not None else levels
    try:
        source = meshes if meshes is not None else level_meshes(problem, levels, size, grading)
        t0 = time.perf_counter()
        stationary = None
        for index, mesh in enumerate(source):
            t_mesh = time.perf_counter() - t0
            if stationary is None:
                stationary = neumann_data_vanish(case, problem, mesh)
            level, solution = solve_level(case, problem, order, mesh, solver, index,
                                          stationary)
            level.seconds["mesh"] = t_mesh
            level.seconds["total"] = time.perf_counter() - t0
            study.levels.append(level)
            log.debug("%s P%d level %d: %d DOFs, L2 %.3e, H1 %.3e", case.name, order, index,
                      level.dofs, level.errors["L2"], level.errors["H1"])
            if keep_finest:
                study.finest = solution
            if progress is not None:
                progress(index + 1, total,
                         f"{case.name} P{order} level {index}: {level.dofs:,} DOFs")
            t0 = time.perf_counter()
    except KeyboardInterrupt:
        study.incomplete = True
        study.seconds = time.perf_counter() - t_start
        raise StudyInterrupted(judge_study(study, case, problem)) from None
    study.seconds = time.perf_counter() - t_start
    return judge_study(study, case, problem)


def run_studies(case, orders, levels=4, size=None, **options):
    """One :func:`run_study` per degree; on Ctrl-C ``partial`` is the list so far."""
    done = []
    for order in orders:
        try:
            done.append(run_study(case, order, levels, size, **options))
        except StudyInterrupted as exc:
            raise StudyInterrupted(done + [exc.partial]) from None
    return done


# --- quantities without an exact solution: Richardson extrapolation and GCI ---------------


@dataclass
class QuantityStudy:
    """A quantity computed on uniformly refined levels, with its GCI (Celik et al. 2008)."""

    problem: str
    origin: str
    quantity: str
    order: int
    levels: list = field(default_factory=list)  # dicts: index, h, dofs, elements, value, seconds
    gci: dict = None
    extrapolated: float = None
    incomplete: bool = False
    seconds: float = 0.0
    solver_name: str = "lapsolve.solve"
    finest: object = None

    def to_dict(self):
        return {"problem": self.problem, "origin": self.origin, "quantity": self.quantity,
                "order": self.order, "levels": self.levels, "gci": self.gci,
                "extrapolated": self.extrapolated, "incomplete": self.incomplete,
                "seconds": self.seconds, "solver": self.solver_name}


def _quantity_gci(study):
    """Fill the GCI from the levels (needs three; grids fine to coarse for gci)."""
    from .gci import gci_multi_grid

    if len(study.levels) < 3:
        return study
    h = [lv["h"] for lv in study.levels][::-1]
    phi = [lv["value"] for lv in study.levels][::-1]
    result = gci_multi_grid(h, phi)
    study.gci = result.to_dict()
    study.extrapolated = study.gci["finest"]["phi_ext21"]
    return study


def run_quantity_study(problem, quantity, levels=4, order=2, *, solver=None, size=None,
                       progress=None, keep_finest=True):
    """Refine ``problem`` uniformly and estimate the discretisation error of a quantity.

    Parameters
    ----------
    problem : Problem
    quantity : str
        ``capacitance``, ``energy`` or ``flux:<part>`` (:func:`verification.qoi.quantity_value`).
    levels : int
        At least 3 for a GCI.
    order : int
    solver : callable, optional
        ``(problem, order, mesh) -> solution``.
    size : float, optional
        Coarsest size (default the problem's ``mesh.max_size``).
    progress : callable, optional

    Returns
    -------
    QuantityStudy
        ``gci`` is the three-grid study of the three finest levels plus every triple
        (:func:`verification.gci.gci_multi_grid`, safety factor 1.25).
    """
    from lapsolve.errors import InputError

    from .qoi import quantity_value

    if levels < 3:
        raise InputError("a GCI needs at least 3 levels", field="--levels")
    solver = solver or default_solver
    study = QuantityStudy(problem.name, problem.origin, quantity, order,
                          solver_name=solver_name(solver))
    t_start = time.perf_counter()
    try:
        t0 = time.perf_counter()
        for index, mesh in enumerate(level_meshes(problem, levels, size)):
            t1 = time.perf_counter()
            solution = solver(problem, order, mesh)
            value = quantity_value(solution, quantity)
            study.levels.append({"index": index, "h": mesh.h(), "dofs": len(solution.u),
                                 "elements": mesh.n_triangles, "value": value,
                                 "seconds": {"mesh": t1 - t0,
                                             "solve": time.perf_counter() - t1}})
            if keep_finest:
                study.finest = solution
            if progress is not None:
                progress(index + 1, levels, f"{problem.name} P{order} level {index}: "
                                            f"{quantity} = {value:.8g}")
            t0 = time.perf_counter()
    except KeyboardInterrupt:
        study.incomplete = True
        study.seconds = time.perf_counter() - t_start
        raise StudyInterrupted(_quantity_gci(study)) from None
    study.seconds = time.perf_counter() - t_start
    return _quantity_gci(study)
