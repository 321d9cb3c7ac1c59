"""Exact cases from an analytic function: u = Re f, v = Im f, grad u = (Re f', -Im f').

Every case that comes from an analytic ``f(z)`` is written once, as ``f`` and
``f'`` on complex numpy arrays, plus the same ``f`` as formula text (what
``lapsolve cases export`` writes as ``exact = "..."``) and ``Re f`` as a real
formula in ``x, y`` (the Dirichlet data of the exported file). The tests check
that the three agree.
"""

import numpy as np

from ..case import ExactCase


def complex_points(x, y):
    """``x + i y`` as a complex array (keeps the sign of a zero imaginary part)."""
    x, y = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
    z = np.empty(x.shape, complex)
    z.real, z.imag = x, y
    return z


def from_analytic(f, fprime):
    """The harmonic pair and gradient of an analytic function.

    Parameters
    ----------
    f, fprime : callable
        ``f(z)`` and its complex derivative ``f'(z)`` on complex arrays.

    Returns
    -------
    u, v : callable
        ``(x, y) -> Re f``, ``(x, y) -> Im f``.
    grad : callable
        ``(x, y) -> (du/dx, du/dy) = (Re f', -Im f')`` (Cauchy-Riemann).
    """
    def u(x, y):
        return np.real(f(complex_points(x, y)))

    def v(x, y):
        return np.imag(f(complex_points(x, y)))

    def grad(x, y):
        d = fprime(complex_points(x, y))
        return np.real(d), -np.imag(d)

    return u, v, grad


def analytic_case(name, description, f, fprime, formula, u_xy, domain, **fields):
    """An :class:`ExactCase` whose solution is ``Re f``.

    Parameters
    ----------
    name, description : str
    f, fprime : callable
        ``f`` and ``f'`` on complex arrays.
    formula : str
        ``f`` in the analytic formula syntax (variable ``z``).
    u_xy : str
        ``Re f`` as a real formula in ``x`` and ``y``.
    domain : str
        A short description of the domain for listings.
    **fields
        The other :class:`ExactCase` fields (build_geometry, conditions, ...).
    """
    u, v, grad = from_analytic(f, fprime)
    extras = dict(fields.pop("extras", {}))
    extras.update(f=f, fprime=fprime, formula=formula, u_xy=u_xy, domain=domain)
    return ExactCase(name=name, description=description, u=u, v=v, grad=grad,
                     extras=extras, **fields)
