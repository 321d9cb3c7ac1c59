"""Point evaluation of a finite-element field and its gradient."""

import numpy as np
from skfem import CellBasis

from .errors import InputError


def locate(skmesh, points):
    """Index of the triangle that holds each point (vertices' straight triangles)."""
    finder = skmesh.element_finder()
    try:
        cells = finder(points[:, 0], points[:, 1])
    except ValueError:
        cells = None
    if cells is None or np.any(cells < 0):
        raise InputError("probe point lies outside the meshed domain", field="probe")
    return np.asarray(cells)


def evaluate(disc, u, points):
    """Values and gradients of the field ``u`` (degrees of freedom) at ``points``.

    Parameters
    ----------
    disc : lapsolve.fem.Discretization
    u : ndarray
    points : array_like (n, 2)

    Returns
    -------
    values : ndarray (n,)
    grads : ndarray (n, 2)
    """
    points = np.atleast_2d(np.asarray(points, float))
    cells = locate(disc.straight, points)
    mapping = disc.skmesh.mapping()
    values = np.empty(len(points))
    grads = np.empty((len(points), 2))
    for i, (cell, pt) in enumerate(zip(cells, points)):
        local = mapping.invF(pt[:, None, None], tind=np.array([cell]))[:, 0, :]
        cb = CellBasis(disc.skmesh, disc.basis.elem, elements=np.array([cell]),
                       quadrature=(local, np.ones(1)))
        field = cb.interpolate(u)
        values[i] = np.asarray(field)[0, 0]
        grads[i] = field.grad[:, 0, 0]
    return values, grads
