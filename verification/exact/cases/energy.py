"""Reference energies computed from the exact solutions (no published value exists).

``W = 1/2 int k |grad u|^2 dA = 1/2 (boundary integral of u k du/dn ds)`` by
Green's first identity (interfaces cancel). The values were computed with
``mpmath.quad`` at 20 digits; ``tests/test_exact_cases.py`` recomputes each one.
"""

from ..case import Reference

ENERGY_SOURCE = ("computed from the exact solution: W = 1/2 (boundary integral of u k du/dn) "
                 "by Green's first identity, mpmath.quad at 20 digits (recomputed in "
                 "tests/test_exact_cases.py); no published value")


def energy_reference(value):
    """A :class:`Reference` for the energy ``W`` computed as above."""
    return Reference("energy", value, ENERGY_SOURCE)
