"""Meshes graded toward a singular corner.

Grading rule
------------
The power-law grading of Babuška, Kellogg & Pitkäranta, Numer. Math. 33 (1979)
447-471, in the form used by Apel, Sändig & Whiteman, Math. Methods Appl. Sci.
19 (1996) 63-85: with global size ``H``, distance ``r`` to the singular point
and grading radius ``R``, the local element size is

    h(r) = H * (r / R) ** (1 - μ)    for  r_0 <= r <= R,
    h(r) = H                        for  r > R,

cut off at ``r_0 = R (H / R) ** (1 / μ)``, the distance at which the rule asks
for an element as large as its distance to the corner (the elements touching
the corner have size about ``H ** (1 / μ)``). ``μ = 1`` is a uniform mesh.

For ``u ~ r**λ`` and elements of degree ``p`` the interpolation error in H1 is
``O(H**p) = O(N**(-p/2))`` when ``μ < λ / p`` (the two papers above; the
element count stays ``O(H**-2)`` for every ``μ > 0``, with a constant growing
like ``1/μ``). The default ``μ = 0.75 λ / p`` (capped at 1) keeps a margin
below the bound so the asymptotic range starts early; ``R`` is half the
distance from the singular point to the farthest corner of the bounding box.
Both defaults were chosen by measurement on the L-shape and the slit (P1, P2),
not from a source: with ``μ = 0.9 λ / p`` the observed H1 orders in
``N**(-1/2)`` were 0.94-0.95 for P1 on the L-shape, with ``0.75 λ / p`` 1.02-1.09.

Graded levels are meshed one by one (``H`` halved per level), not refined
uniformly: uniform refinement would keep the grading of the coarse mesh.
"""

from dataclasses import asdict, dataclass

import numpy as np

from lapsolve.errors import InputError
from lapsolve.meshing import triangulate

#: Safety factor below the bound μ < λ/p (measured, see the module docstring).
MU_MARGIN = 0.75
#: Grading radius as a fraction of the distance to the farthest bounding-box corner.
RADIUS_FRACTION = 0.5


@dataclass(frozen=True)
class Grading:
    """A power-law grading toward ``point``.

    Attributes
    ----------
    point : tuple
        The singular point.
    mu : float
        Grading parameter, ``0 < mu <= 1``.
    radius : float
        Grading radius ``R``; elements farther away have the global size.
    rule : str
        Name of the rule (quoted in reports).
    """

    point: tuple
    mu: float
    radius: float
    rule: str = "h(r) = H (r/R)^(1-mu), Babuska-Kellogg-Pitkaranta 1979"

    def size_field(self, size):
        """The local size limit ``points -> sizes`` for global size ``size``."""
        mu, radius = self.mu, self.radius
        floor = (size / radius) ** (1.0 / mu)
        cx, cy = self.point

        def field(points):
            r = np.hypot(points[:, 0] - cx, points[:, 1] - cy) / radius
            return size * np.clip(r, floor, 1.0) ** (1.0 - mu)

        return field

    def to_dict(self):
        return {**asdict(self), "point": [float(c) for c in self.point]}


def default_mu(lam, order):
    """``μ = 0.75 λ / p``, capped at 1 (no grading needed for λ >= p / 0.75)."""
    if not np.isfinite(lam):
        return 1.0
    return float(min(1.0, MU_MARGIN * lam / order))


def grading_for(case, order, mu=None, radius=None):
    """The grading of ``case`` for elements of degree ``order``.

    Parameters
    ----------
    case : ExactCase
        Must have a ``singular_point``.
    order : int
    mu : float, optional
        Grading parameter; default :func:`default_mu`.
    radius : float, optional
        Grading radius; default half the distance from the singular point to the
        farthest corner of the domain's bounding box.

    Returns
    -------
    Grading
    """
    if case.singular_point is None:
        raise InputError(f"case '{case.name}' has no singular point to grade toward",
                         field="--graded")
    mu = default_mu(case.singular_exponent, order) if mu is None else float(mu)
    if not 0 < mu <= 1:
        raise InputError(f"grading parameter mu must lie in (0, 1], got {mu}", field="--mu")
    if radius is None:
        lo, hi = case.problem().outer.bbox()
        corners = np.array([[lo[0], lo[1]], [lo[0], hi[1]], [hi[0], lo[1]], [hi[0], hi[1]]])
        far = float(np.max(np.hypot(*(corners - np.asarray(case.singular_point)).T)))
        radius = RADIUS_FRACTION * far
    return Grading(tuple(float(c) for c in case.singular_point), mu, float(radius))


def graded_mesh(problem, size, grading):
    """One graded mesh of global size ``size``."""
    return triangulate(problem, size=size, size_field=grading.size_field(size))
