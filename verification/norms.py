"""Error norms by quadrature, written once for every solution on any mesh.

Works with any scikit-fem basis (triangles or quadrilaterals, any Lagrange
degree, straight or curved), so imported results go through the same code as
our own. The rule is at least degree ``max(6, 2p + 2)``: with the default rule
of a P1 basis, L2 errors come out noticeably low.
"""

from dataclasses import asdict, dataclass

import numpy as np
from skfem import CellBasis, Functional


@dataclass
class ErrorNorms:
    L2: float
    H1: float
    energy: float
    max_nodal: float
    L2_rel: float
    H1_rel: float
    energy_rel: float
    max_nodal_rel: float
    quadrature_degree: int
    mean_shift: float = 0.0

    def to_dict(self):
        return asdict(self)


@Functional
def _sq_error(w):
    du = w.uh - w.ue
    return du * du


@Functional
def _sq_grad_error(w):
    gx = w.uh.grad[0] - w.gx
    gy = w.uh.grad[1] - w.gy
    return w.k * (gx * gx + gy * gy)


@Functional
def _integral(w):
    return w.g


def quadrature_degree(degree):
    return max(6, 2 * degree + 2)


def error_norms(basis, uh, exact_u, exact_grad, coefficient=None, mean_free=False):
    """L2, H1-seminorm, energy and max nodal errors of ``uh`` against an exact solution.

    Parameters
    ----------
    basis : skfem.CellBasis
        The basis ``uh`` lives in (its quadrature is replaced by a finer one).
    uh : ndarray
        Degrees of freedom.
    exact_u : callable ``(x, y) -> ndarray``
    exact_grad : callable ``(x, y) -> (gx, gy)``
    coefficient : callable ``(x, y) -> k`` or ndarray of k per cell, optional
        The energy norm is ``sqrt(int k |grad e|^2)``; default k = 1.
    mean_free : bool
        Compare up to a constant (pure Neumann problems): the mean of the error
        is removed first.

    Returns
    -------
    ErrorNorms
    """
    q = quadrature_degree(basis.elem.maxdeg)
    fine = CellBasis(basis.mesh, basis.elem, intorder=q)
    x = np.asarray(fine.global_coordinates())
    ue = exact_u(x[0], x[1])
    gx, gy = exact_grad(x[0], x[1])
    k = _coefficient_at(coefficient, x, fine)
    ones = np.ones_like(ue)
    uh_field = fine.interpolate(uh)
    shift = 0.0
    if mean_free:
        area = _integral.assemble(fine, g=ones)
        uh_int = _integral.assemble(fine, g=np.asarray(uh_field))
        shift = (_integral.assemble(fine, g=ue) - uh_int) / area
        uh = uh + shift
        uh_field = fine.interpolate(uh)
    l2 = np.sqrt(_sq_error.assemble(fine, uh=uh_field, ue=ue))
    h1 = np.sqrt(_sq_grad_error.assemble(fine, uh=uh_field, gx=gx, gy=gy, k=ones))
    en = np.sqrt(_sq_grad_error.assemble(fine, uh=uh_field, gx=gx, gy=gy, k=k))
    zero = fine.interpolate(np.zeros_like(uh))
    l2_ex = np.sqrt(_sq_error.assemble(fine, uh=zero, ue=ue))
    h1_ex = np.sqrt(_sq_grad_error.assemble(fine, uh=zero, gx=gx, gy=gy, k=ones))
    en_ex = np.sqrt(_sq_grad_error.assemble(fine, uh=zero, gx=gx, gy=gy, k=k))
    nodal = basis.nodal_dofs[0]
    p = basis.doflocs[:, nodal]
    ue_nodes = exact_u(p[0], p[1])
    max_err = float(np.max(np.abs(uh[nodal] - ue_nodes)))
    max_ex = float(np.max(np.abs(ue_nodes)))
    return ErrorNorms(float(l2), float(h1), float(en), max_err,
                      _rel(l2, l2_ex), _rel(h1, h1_ex), _rel(en, en_ex), _rel(max_err, max_ex),
                      q, float(shift))


def _rel(err, ref):
    return float(err / ref) if ref > 0 else float("nan")


def _coefficient_at(coefficient, x, basis):
    if coefficient is None:
        return np.ones(x.shape[1:])
    if callable(coefficient):
        return np.broadcast_to(coefficient(x[0], x[1]), x.shape[1:]).astype(float)
    values = np.asarray(coefficient, float)
    return np.repeat(values[:, None], x.shape[2], axis=1)


def solution_norms(solution, case):
    """Error norms of a :class:`lapsolve.Solution` against an exact case."""
    kinds = {spec.kind for spec in case.conditions.values()}
    pure_neumann = "dirichlet" not in kinds
    return error_norms(solution.basis, solution.u, case.u, case.grad,
                       coefficient=solution.disc.k_cell / solution.problem.physics.scale,
                       mean_free=pure_neumann)
