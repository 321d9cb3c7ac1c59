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


def error_norms(basis, uh, exact_u, exact_grad, coefficient=None, mean_free=False,
                singular_point=None):
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
    singular_point : (x, y), optional
        A mesh vertex where the exact gradient is unbounded (a corner with
        ``lambda < 1``): its triangles get a rule graded towards it
        (:func:`element_groups`).

    Returns
    -------
    ErrorNorms
    """
    q = quadrature_degree(basis.elem.maxdeg)
    groups = [cb for _, cb in element_groups(basis, singular_point)]
    fields = []
    for cb in groups:
        x = np.asarray(cb.global_coordinates())
        gx, gy = exact_grad(x[0], x[1])
        fields.append((cb, exact_u(x[0], x[1]), gx, gy, _coefficient_at(coefficient, x, cb)))

    def total(functional, values):
        return sum(functional.assemble(cb, **kw) for (cb, *_), kw in zip(fields, values))

    shift = 0.0
    if mean_free:
        area = total(_integral, [{"g": np.ones_like(f[1])} for f in fields])
        uh_int = total(_integral, [{"g": np.asarray(f[0].interpolate(uh))} for f in fields])
        shift = (total(_integral, [{"g": f[1]} for f in fields]) - uh_int) / area
        uh = uh + shift
    zero = np.zeros_like(uh)

    def norms(vec):
        parts = [(f[0].interpolate(vec), f) for f in fields]
        l2 = np.sqrt(total(_sq_error, [{"uh": i, "ue": f[1]} for i, f in parts]))
        h1 = np.sqrt(total(_sq_grad_error, [{"uh": i, "gx": f[2], "gy": f[3],
                                              "k": np.ones_like(f[1])} for i, f in parts]))
        en = np.sqrt(total(_sq_grad_error, [{"uh": i, "gx": f[2], "gy": f[3], "k": f[4]}
                                            for i, f in parts]))
        return l2, h1, en

    l2, h1, en = norms(uh)
    l2_ex, h1_ex, en_ex = norms(zero)
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
    values = np.asarray(coefficient, float)[basis.tind]  # per cell of this basis
    return np.repeat(values[:, None], x.shape[2], axis=1)


def element_groups(basis, singular_point=None, levels=16):
    """``[(elements, CellBasis)]`` covering every element of ``basis`` with a rule of
    degree :func:`quadrature_degree`; on triangles, those at ``singular_point`` (a
    mesh vertex) get :func:`graded_rule` towards it, of degree 4 higher.

    Near a corner with ``lambda < 1`` the squared gradient error grows like
    ``r**(2 lambda - 2)``: one Gauss rule misses a share of the corner triangles'
    part, and that part is a fixed share of the whole error under uniform
    refinement (with one rule the energy error of the L-shape at P2 came out 10 %
    low, of the slit at P2 also 10 %, at P1 2 %).
    """
    mesh = basis.mesh
    degree = quadrature_degree(basis.elem.maxdeg)
    everything = np.arange(mesh.t.shape[1])

    def cell_basis(elements, **rule):
        return CellBasis(mesh, basis.elem, elements=elements, dofs=basis.dofs, **rule)

    if singular_point is None or mesh.t.shape[0] != 3 or getattr(mesh, "dim", lambda: 2)() != 2:
        return [(everything, cell_basis(everything, intorder=degree))]
    p = mesh.p
    node = int(np.argmin(np.hypot(p[0] - singular_point[0], p[1] - singular_point[1])))
    corner = mesh.t == node
    if np.hypot(*(p[:, node] - np.asarray(singular_point, float))) > 1e-9 or not corner.any():
        return [(everything, cell_basis(everything, intorder=degree))]
    rest = np.flatnonzero(~corner.any(axis=0))
    groups = [(rest, cell_basis(rest, intorder=degree))] if len(rest) else []
    for v in range(3):
        elements = np.flatnonzero(corner[v])
        if len(elements):
            groups.append((elements, cell_basis(elements,
                                                quadrature=graded_rule(v, degree + 4, levels))))
    return groups


REFERENCE_VERTICES = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])


def graded_rule(vertex, degree, levels=16):
    """A composite rule on the reference triangle, graded towards one vertex.

    The triangle is split into four by its edge midpoints; the three children away
    from ``vertex`` get a Gauss rule of ``degree``, the corner child is split
    again, ``levels`` times (the last corner child keeps the plain rule). With 16
    levels and degree 10, ``r**(-2/3)`` and ``r**(-1)`` at the vertex (squared
    gradients at a re-entrant corner and a slit tip) come out within 3e-7 of the
    exact integrals (tests/test_stream.py), where one rule of degree 6 or 10 is
    1e-3 to 7e-3 off (and more on the error of a finite-element solution, whose
    polynomial part nearly cancels the singular one there). The nearest point is
    ``2**-16`` of the triangle away from the vertex, which keeps exact solutions
    given by inverse maps well defined.

    Returns
    -------
    X : ndarray (2, n_points)
    W : ndarray (n_points,)
    """
    from skfem.quadrature import get_quadrature
    from skfem.refdom import RefTri

    X0, W0 = get_quadrature(RefTri, degree)
    corner = np.roll(REFERENCE_VERTICES, -vertex, axis=0)  # the vertex first
    points, weights = [], []

    def add(tri):
        a, b, c = tri
        det = abs((b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]))
        points.append(a[:, None] + np.outer(b - a, X0[0]) + np.outer(c - a, X0[1]))
        weights.append(W0 * det)

    tri = corner
    for _ in range(levels):
        a, b, c = tri
        ab, ac, bc = (a + b) / 2, (a + c) / 2, (b + c) / 2
        add(np.array([ab, b, bc]))
        add(np.array([ac, bc, c]))
        add(np.array([ab, bc, ac]))
        tri = np.array([a, ab, ac])
    add(tri)
    return np.hstack(points), np.concatenate(weights)



def singular_point_of(case):
    """Where ``case``'s exact gradient is unbounded (``lambda < 1``), else None."""
    point = getattr(case, "singular_point", None)
    lam = getattr(case, "singular_exponent", np.inf)
    return point if point is not None and lam < 1 else None


def solution_norms(solution, case):
    """Error norms of a :class:`lapsolve.Solution` against an exact case."""
    kinds = {spec.kind for spec in case.conditions.values()}
    pure_neumann = "dirichlet" not in kinds
    return error_norms(solution.basis, solution.u, case.u, case.grad,
                       coefficient=solution.disc.k_cell / solution.problem.physics.scale,
                       mean_free=pure_neumann, singular_point=singular_point_of(case))
