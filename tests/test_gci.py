"""Tests for verification.gci: three-grid GCI, multi-grid studies and Richardson extrapolation."""

import json
import math

import numpy as np
import pytest

from lapsolve.errors import InputError
from verification.gci import (
    gci_multi_grid,
    gci_three_grid,
    representative_size,
    richardson,
)


def test_celik_worked_example():
    # Celik, Ghia, Roache, Freitas, Coleman & Raad, "Procedure for estimation and reporting
    # of uncertainty due to discretization in CFD applications", J. Fluids Eng. 130 (2008)
    # 078001, Table 1, first column (phi = dimensionless reattachment length):
    # N1, N2, N3 = 18000, 8000, 4500; phi = 6.063, 5.972, 5.863 -> r21 = 1.5, r32 = 1.333,
    # p = 1.53, phi_ext21 = 6.1685, e_a21 = 1.5 %, e_ext21 = 1.7 %, GCI_fine21 = 2.2 %.
    # r21 = (18000 / 8000)**(1/2) = 1.5, so the study is two-dimensional.
    result = gci_three_grid([18000, 8000, 4500], [6.063, 5.972, 5.863], dim=2,
                            size_kind="cells")
    assert result.r21 == pytest.approx(1.5, abs=1e-12)
    assert result.r32 == pytest.approx(1.333, abs=5e-4)
    assert result.p == pytest.approx(1.53, abs=0.01)
    assert result.phi_ext21 == pytest.approx(6.1685, abs=0.0005)
    assert 100 * result.e_a21 == pytest.approx(1.5, abs=0.05)
    assert 100 * result.e_ext21 == pytest.approx(1.7, abs=0.05)
    assert 100 * result.gci_fine21 == pytest.approx(2.2, abs=0.05)
    assert not result.oscillatory and not result.diverging and result.converged
    assert result.note == ""


def test_cells_and_sizes_agree():
    # h = (1/N)**(1/2) in 2D (Celik et al. 2008, eq. 1); the same study given by sizes.
    sizes = representative_size([18000, 8000, 4500], dim=2)
    np.testing.assert_allclose(sizes, np.array([18000, 8000, 4500.0]) ** -0.5, rtol=1e-15)
    by_cells = gci_three_grid([18000, 8000, 4500], [6.063, 5.972, 5.863], size_kind="cells")
    by_sizes = gci_three_grid(sizes, [6.063, 5.972, 5.863])
    assert by_sizes.p == pytest.approx(by_cells.p, abs=1e-12)
    # In 3D the same counts give r21 = (18000 / 8000)**(1/3).
    in_3d = gci_three_grid([18000, 8000, 4500], [6.063, 5.972, 5.863], dim=3,
                           size_kind="cells")
    assert in_3d.r21 == pytest.approx(2.25 ** (1 / 3), rel=1e-14)


@pytest.mark.parametrize("h", [[0.1, 0.2, 0.4], [0.1, 0.15, 0.2], [0.01, 0.03, 0.04]],
                         ids=["constant ratio", "ratios 1.5 and 1.33", "ratios 3 and 1.33"])
def test_exact_quadratic_sequence(h):
    # phi(h) = phi0 + C h**2 exactly: the order equation holds at p = 2 and Richardson
    # extrapolation returns phi0 (algebraic identity).
    phi0, constant = 3.25, -1.7
    phi = [phi0 + constant * x**2 for x in h]
    result = gci_three_grid(h, phi)
    assert result.p == pytest.approx(2.0, abs=1e-10)
    assert result.phi_ext21 == pytest.approx(phi0, abs=1e-10)
    assert result.phi_ext32 == pytest.approx(phi0, abs=1e-10)
    assert result.converged and not result.oscillatory and not result.diverging
    # GCI_fine21 = 1.25 |phi1 - phi2| / |phi1| / (r21**2 - 1) = 1.25 |C| h1**2 / |phi1|.
    assert result.gci_fine21 == pytest.approx(1.25 * abs(constant) * h[0] ** 2 / abs(phi[0]),
                                              rel=1e-9)


def test_oscillatory_sequence_flagged():
    # eps21 = +0.1, eps32 = -0.15: the sign changes, oscillatory by Celik et al. (2008).
    result = gci_three_grid([1.0, 2.0, 4.0], [1.0, 1.1, 0.95])
    assert result.oscillatory
    assert "oscillatory" in result.note
    # With s = -1 and a constant ratio, q = 0 and p = ln(1.5) / ln(2).
    assert result.p == pytest.approx(math.log(1.5) / math.log(2.0), abs=1e-12)


def test_equal_values_not_meaningful():
    result = gci_three_grid([1.0, 2.0, 4.0], [1.0, 1.0, 1.2])
    assert math.isnan(result.p) and math.isnan(result.gci_fine21)
    assert "not meaningful" in result.note
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    assert data["p"] is None


def test_diverging_sequence_noted():
    # Differences grow under refinement (|eps21| = 0.1 > |eps32| = 0.05, constant ratio).
    result = gci_three_grid([1.0, 2.0, 4.0], [1.0, 1.1, 1.15])
    assert result.diverging
    assert "diverging" in result.note


def test_multi_grid_reports_every_triple():
    h = [0.05, 0.1, 0.2, 0.4, 0.8]
    phi = [2.0 + 0.5 * x**3 for x in h]
    study = gci_multi_grid(h, phi)
    assert len(study.triples) == 3
    assert study.finest == study.triples[0]
    for triple in study.triples:
        assert triple.p == pytest.approx(3.0, abs=1e-10)
        assert triple.phi_ext21 == pytest.approx(2.0, abs=1e-10)
    assert study.triples[2].h == (0.2, 0.4, 0.8)
    json.dumps(study.to_dict(), allow_nan=False)


def test_richardson_of_trapezoid_is_simpson():
    # One Richardson step on the trapezoidal rule with r = 2, p = 2 is Simpson's rule
    # (Romberg's first column; Burden & Faires, Numerical Analysis, 9th ed., 2011, sec. 4.5).
    def trapezoid(n):
        x = np.linspace(0.0, 1.0, n + 1)
        y = np.exp(x)
        return (y.sum() - 0.5 * (y[0] + y[-1])) / n

    x = np.linspace(0.0, 1.0, 9)
    weights = np.array([1, 4, 2, 4, 2, 4, 2, 4, 1]) / 24.0
    simpson = float(weights @ np.exp(x))
    assert richardson(trapezoid(8), trapezoid(4), 2.0, 2.0) == pytest.approx(simpson, abs=1e-14)
    with pytest.raises(InputError):
        richardson(1.0, 2.0, 1.0, 2.0)


@pytest.mark.parametrize("sizes, phi, kind", [
    ([0.2, 0.1, 0.4], [1.0, 2.0, 3.0], "h"),          # not fine to coarse
    ([4500, 8000, 18000], [1.0, 2.0, 3.0], "cells"),  # counts must decrease
    ([0.1, 0.2], [1.0, 2.0], "h"),                    # too few grids
    ([0.1, 0.2, 0.4], [1.0, 2.0, 3.0], "volume"),     # unknown kind
    ([0.1, 0.2, 0.4], [1.0, math.nan, 3.0], "h"),     # non-finite value
])
def test_bad_input_raises(sizes, phi, kind):
    with pytest.raises(InputError):
        gci_three_grid(sizes, phi, size_kind=kind)
