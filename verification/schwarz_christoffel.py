"""Schwarz-Christoffel map from the upper half-plane onto a polygon (public names).

The implementation lives in :mod:`verification.sc`; this module keeps the
import path ``verification.schwarz_christoffel`` that other code uses.

The map is

    f(w) = f(w_k) + C * integral from w_k to w of  prod_j (t - w_j)**beta_j  dt,

with ``beta_j = alpha_j - 1`` where ``alpha_j * pi`` is the interior angle at
vertex ``j``. One vertex is the image of ``w = infinity``; its prevertex is
dropped from the product. Powers use the branch with ``arg`` in ``[0, pi]`` on
the closed upper half-plane.

Modules: :mod:`verification.sc.polygon` (input checks, interior angles),
:mod:`verification.sc.integral` (compound Gauss-Jacobi quadrature),
:mod:`verification.sc.parameters` (the parameter problem),
:mod:`verification.sc.inverse` (ODE predictor and Newton corrector) and
:mod:`verification.sc.map` (:class:`SCMap`). The method and its limits are
described in ``docs/modulus.md``.
"""

from .sc.integral import NODES, SCIntegral
from .sc.map import SCMap
from .sc.parameters import RESIDUAL_LIMIT
from .sc.polygon import Polygon, as_complex, prepare_polygon, winding_number

__all__ = ["NODES", "RESIDUAL_LIMIT", "Polygon", "SCIntegral", "SCMap", "as_complex",
           "prepare_polygon", "winding_number"]
