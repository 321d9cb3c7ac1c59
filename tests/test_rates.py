"""Tests for verification.rates: observed orders, expected orders and the verdict rule."""

import json
import math

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lapsolve.errors import InputError
from verification.rates import (
    FAIL,
    INCONCLUSIVE,
    PASS,
    asymptotic_levels,
    dof_orders,
    expected_orders,
    fitted_order,
    h_equivalent,
    judge,
    pairwise_orders,
    plateau_level,
    roundoff_floor,
)


def trapezoid(f, a, b, n):
    x = np.linspace(a, b, n + 1)
    y = f(x)
    return (b - a) / n * (y.sum() - 0.5 * (y[0] + y[-1]))


def trapezoid_sqrt_errors(levels):
    """Errors of the composite trapezoidal rule for the integral of sqrt(x) on [0, 1] = 2/3."""
    n = 2 ** np.arange(2, 2 + levels)
    return 1.0 / n, np.array([abs(trapezoid(np.sqrt, 0.0, 1.0, k) - 2.0 / 3.0) for k in n])


def trapezoid_exp_errors(levels):
    """Errors of the composite trapezoidal rule for the integral of exp(x) on [0, 1] = e - 1."""
    n = 2 ** np.arange(2, 2 + levels)
    return 1.0 / n, np.array([abs(trapezoid(np.exp, 0.0, 1.0, k) - math.expm1(1.0)) for k in n])


# --- pairwise and fitted orders -------------------------------------------------------------


@settings(max_examples=200, deadline=None)
@given(
    constant=st.floats(1e-3, 1e3),
    order=st.floats(0.5, 4.0),
    ratio=st.floats(1.2, 3.0),
    coarsest=st.floats(0.05, 1.0),
    levels=st.integers(3, 8),
)
def test_exact_power_law_orders(constant, order, ratio, coarsest, levels):
    # err = C h**q exactly: every pairwise order and every least-squares slope is q
    # (algebraic identity log(C h1^q / C h2^q) / log(h1/h2) = q).
    h = coarsest * ratio ** -np.arange(levels, dtype=float)
    err = constant * h**order
    np.testing.assert_allclose(pairwise_orders(h, err), order, rtol=0, atol=1e-9)
    assert fitted_order(h, err) == pytest.approx(order, abs=1e-9)
    assert fitted_order(h, err, levels=slice(None)) == pytest.approx(order, abs=1e-9)
    verdict = judge(h, err, expected=order)
    assert verdict.status == PASS
    assert verdict.observed == pytest.approx(order, abs=1e-9)
    assert verdict.fitted == pytest.approx(order, abs=1e-9)


def test_trapezoid_sqrt_sequence_has_order_three_halves():
    # Navot, "An extension of the Euler-Maclaurin summation formula to functions with a
    # branch singularity", J. Math. Phys. 40 (1961) 271-276: for sqrt(x) on [0, 1] the
    # trapezoidal error is zeta(-1/2) h**1.5 + h**2/24 + O(h**4); zeta from mpmath.
    h, err = trapezoid_sqrt_errors(9)
    leading = float(mpmath.zeta(-0.5))
    signed = trapezoid(np.sqrt, 0.0, 1.0, 1024) - 2.0 / 3.0
    assert (signed - (1 / 1024) ** 2 / 24) / (1 / 1024) ** 1.5 == pytest.approx(leading, abs=1e-8)
    rates = pairwise_orders(h, err)
    assert rates[-1] == pytest.approx(1.5, abs=0.01)
    assert fitted_order(h, err, levels=slice(-3, None)) == pytest.approx(1.5, abs=0.01)
    # The default fit spans every level whose order is within 0.1 of the last one, here all
    # nine, so the slowly fading h**0.5 correction pulls it a little lower.
    assert fitted_order(h, err) == pytest.approx(1.5, abs=0.02)


def test_fitted_order_levels_argument():
    # Synthetic: a pre-asymptotic level (order 1 between levels 0 and 1), then order 2.
    h = np.array([1.0, 0.5, 0.25, 0.125])
    err = np.array([1.0, 0.5, 0.125, 0.03125])
    assert fitted_order(h, err, levels=[1, 2, 3]) == pytest.approx(2.0, abs=1e-12)
    assert fitted_order(h, err, levels=slice(2, None)) == pytest.approx(2.0, abs=1e-12)
    # Over all four levels: slope of log2 err = (0, -1, -3, -5) on log2 h = (0, -1, -2, -3)
    # is sum(x y) / sum(x x) = 8.5 / 5 = 1.7 with centred x.
    assert fitted_order(h, err, levels=slice(None)) == pytest.approx(1.7, abs=1e-12)
    with pytest.raises(InputError):
        fitted_order(h, err, levels=[3])


def test_asymptotic_levels_rule():
    # Build errors whose pairwise orders are exactly (1.0, 1.5, 1.95, 2.0, 2.0) on halving h:
    # the last three levels, extended while an order is within 0.1 of the last one (2.0).
    orders = [1.0, 1.5, 1.95, 2.0, 2.0]
    h = 0.5 ** np.arange(6, dtype=float)
    err = np.exp(-np.cumsum([0.0] + orders) * math.log(2.0))
    np.testing.assert_allclose(pairwise_orders(h, err), orders, atol=1e-12)
    assert asymptotic_levels(h, err) == [2, 3, 4, 5]
    assert asymptotic_levels(h, err, settle=0.01) == [3, 4, 5]
    assert asymptotic_levels(h[:3], err[:3]) == [0, 1, 2]


def test_dof_orders_relation_in_2d():
    # P1 in H1 on uniform 2D meshes: h ~ N**(-1/2), error ~ h, so the order in N is 1/2
    # and order_h = 2 * order_N (definition of h_equivalent).
    dofs = 4.0 ** np.arange(3, 8)
    err = 3.0 * dofs**-0.5
    np.testing.assert_allclose(dof_orders(dofs, err), 0.5, atol=1e-12)
    np.testing.assert_allclose(pairwise_orders(h_equivalent(dofs), err), 1.0, atol=1e-12)
    np.testing.assert_allclose(h_equivalent([100.0], dim=2), [0.1], rtol=1e-15)
    with pytest.raises(InputError):
        h_equivalent([100.0], dim=4)


def test_pairwise_orders_input_errors():
    with pytest.raises(InputError):
        pairwise_orders([1.0, 0.5], [1.0])
    with pytest.raises(InputError):
        pairwise_orders([1.0, -0.5], [1.0, 0.5])
    with pytest.raises(InputError):
        pairwise_orders([1.0, 0.5], [1.0, math.nan])
    with pytest.raises(InputError):
        judge([0.5, 1.0], [1.0, 0.5], expected=1.0)  # not coarse to fine


# --- expected orders ------------------------------------------------------------------------

# Singular exponents lam = pi / omega for the re-entrant corner of angle omega
# (Grisvard, Elliptic Problems in Nonsmooth Domains, 1985): L-shape omega = 3 pi / 2 gives
# lam = 2/3, slit omega = 2 pi gives lam = 1/2. Orders per Strang & Fix, An Analysis of the
# Finite Element Method (1973): H1 min(p, lam), L2 min(p + 1, 2 lam), energy 2 min(p, lam).
EXPECTED_TABLE = [
    (1, math.inf, {"H1": 1.0, "L2": 2.0, "energy": 2.0, "qoi": 2.0}),
    (2, math.inf, {"H1": 2.0, "L2": 3.0, "energy": 4.0, "qoi": 4.0}),
    (1, math.pi / (1.5 * math.pi), {"H1": 2 / 3, "L2": 4 / 3, "energy": 4 / 3, "qoi": 4 / 3}),
    (2, math.pi / (1.5 * math.pi), {"H1": 2 / 3, "L2": 4 / 3, "energy": 4 / 3, "qoi": 4 / 3}),
    (1, math.pi / (2 * math.pi), {"H1": 0.5, "L2": 1.0, "energy": 1.0, "qoi": 1.0}),
    (3, math.inf, {"H1": 3.0, "L2": 4.0, "energy": 6.0, "qoi": 6.0}),
]


@pytest.mark.parametrize("degree, lam, orders", EXPECTED_TABLE)
def test_expected_orders_table(degree, lam, orders):
    got = expected_orders(degree, lam)
    assert got.keys() == orders.keys()
    for norm, value in orders.items():
        assert got[norm] == pytest.approx(value, abs=1e-14), (norm, got[norm], value)


def test_expected_orders_graded():
    # Babuska, Kellogg & Pitkaranta, Numer. Math. 33 (1979) 447-471: optimal grading gives
    # H1 error ~ N**(-p/2), i.e. order p in h = N**(-1/2), even for the slit (lam = 1/2).
    assert expected_orders(2, 0.5, graded=True)["H1"] == 2.0
    assert expected_orders(1, 2 / 3, graded=True)["H1"] == 1.0


@pytest.mark.parametrize("degree, lam", [(0, math.inf), (1.5, math.inf), (True, 1.0),
                                         ("2", 1.0), (1, 0.0), (1, -1.0)])
def test_expected_orders_rejects_bad_input(degree, lam):
    with pytest.raises(InputError):
        expected_orders(degree, lam)


# --- round-off floor and plateau ------------------------------------------------------------


def test_roundoff_floor_bounds_five_point_condition_number():
    # The P1 stiffness matrix of the uniform right-triangle mesh of the unit square is the
    # 5-point Laplacian; its condition number is cot(pi h / 2)**2 ~ 4 / (pi h)**2 (LeVeque,
    # Finite Difference Methods for Ordinary and Partial Differential Equations, 2007, sec. 3.4).
    # So constant = 1 bounds it, and is within a factor 3 of it.
    eps = float(np.finfo(float).eps)
    for cells in (8, 64, 512):
        h = 1.0 / cells
        condition = 1.0 / math.tan(math.pi * h / 2) ** 2
        floor = roundoff_floor((cells - 1) ** 2, h, scale=1.0)
        assert eps * condition <= floor <= 3.0 * eps * condition
    # The closed form itself, checked against a dense eigenvalue computation.
    cells = 8
    main = 2.0 * np.eye(cells - 1) - np.eye(cells - 1, k=1) - np.eye(cells - 1, k=-1)
    laplace = np.kron(main, np.eye(cells - 1)) + np.kron(np.eye(cells - 1), main)
    eigen = np.linalg.eigvalsh(laplace)
    assert eigen[-1] / eigen[0] == pytest.approx(1 / math.tan(math.pi / 16) ** 2, rel=1e-12)


def test_roundoff_floor_per_level_and_scale():
    h = np.array([0.1, 0.01])
    floor = roundoff_floor([100, 10000], h, scale=2.0, eps=1e-16)
    np.testing.assert_allclose(floor, [2e-14, 2e-12], rtol=1e-12)
    with pytest.raises(InputError):
        roundoff_floor(10, 0.0, 1.0)


def test_plateau_level():
    err = [1e-2, 1e-5, 1e-12, 3e-12]
    assert plateau_level(err, floor=1e-13) == 2
    assert plateau_level(err, floor=[1e-13, 1e-13, 1e-14, 1e-12]) == 3
    assert plateau_level(err, floor=1e-20) is None
    assert plateau_level([1e-2, 0.0, 1e-5], floor=None) == 1


# --- verdicts -------------------------------------------------------------------------------

# (name, sequence builder, expected order, status); the sequences are outside references:
# trapezoidal errors on sqrt (order 3/2, Navot 1961) and exp (order 2, Euler-Maclaurin,
# e.g. Atkinson, An Introduction to Numerical Analysis, 2nd ed., 1989, sec. 5.4).
VERDICT_TABLE = [
    ("sqrt meets 1.5", trapezoid_sqrt_errors, 1.5, PASS),
    ("sqrt misses 2", trapezoid_sqrt_errors, 2.0, FAIL),
    ("exp meets 2", trapezoid_exp_errors, 2.0, PASS),
    ("exp beats 1", trapezoid_exp_errors, 1.0, PASS),
    ("exp misses 3", trapezoid_exp_errors, 3.0, FAIL),
]


@pytest.mark.parametrize("name, sequence, expected, status", VERDICT_TABLE)
def test_verdict_table(name, sequence, expected, status):
    h, err = sequence(7)
    verdict = judge(h, err, expected, tol=0.1, norm_name="quadrature")
    assert verdict.status == status, (name, verdict.observed, verdict.reason)
    assert verdict.used_levels == list(range(7))
    assert verdict.plateau_levels == []
    assert verdict.superconvergent == (verdict.observed > expected + 0.5)


def test_fail_reason_is_one_sentence_with_numbers():
    h = 0.5 ** np.arange(1, 6)
    verdict = judge(h, 0.3 * h**0.61, 1.0, norm_name="H1", degree=1, lam=math.inf)
    assert verdict.status == FAIL
    assert verdict.observed == pytest.approx(0.61, abs=1e-12)
    reason = verdict.reason
    assert reason.startswith("H1 error fell at order 0.61")
    assert "expected 1.00 ± 0.10 for P1 with λ = ∞" in reason
    assert reason.endswith(".") and reason.count(". ") == 0


def test_growing_error_fails_with_reason():
    h = 0.5 ** np.arange(4)
    verdict = judge(h, [1e-2, 1e-3, 1e-4, 2e-4], expected=2.0, norm_name="L2")
    assert verdict.status == FAIL
    assert verdict.observed == pytest.approx(-1.0, abs=1e-12)
    assert "did not fall" in verdict.reason


def test_rising_and_falling_errors_are_inconclusive():
    h = 0.5 ** np.arange(5)
    verdict = judge(h, [1e-2, 1e-3, 2e-3, 1e-4, 3e-4], expected=2.0)
    assert verdict.status == INCONCLUSIVE
    assert "no single order fits" in verdict.reason


def test_too_few_levels_inconclusive():
    assert judge([0.1], [1e-3], expected=2.0).status == INCONCLUSIVE
    # Plateau after the first level but errors far above atol: not a pass.
    verdict = judge([0.1, 0.05], [1e-3, 1e-3], expected=2.0, floor=1e-3)
    assert verdict.status == INCONCLUSIVE
    assert verdict.plateau_levels == [0, 1]


def test_exact_zero_errors_pass():
    verdict = judge([0.5, 0.25, 0.125], [0.0, 0.0, 0.0], expected=2.0)
    assert verdict.status == PASS
    assert "exact to round-off" in verdict.reason
    assert verdict.plateau_levels == [0, 1, 2]


def test_roundoff_plateau_excluded_from_rate():
    # Synthetic O(h**4) errors plus a round-off part of twice the floor, which grows as
    # h**-2: the finest levels sit within 10x of the floor and must be left out.
    h = 0.5 ** np.arange(1, 10)
    floor = roundoff_floor(h**-2.0, h, scale=1.0)
    err = 0.3 * h**4 + 2.0 * floor
    verdict = judge(h, err, expected=4.0, floor=floor)
    assert verdict.status == PASS, verdict.reason
    assert verdict.plateau_levels == [7, 8]  # 0.3 h**4 <= 8 floor from h = 2**-8 on
    assert verdict.used_levels == list(range(7))
    assert verdict.observed == pytest.approx(4.0, abs=0.05)
    # Without the floor the same data fails: the plateau masquerades as stagnation.
    assert judge(h, err, expected=4.0).status == FAIL


def test_plateau_with_too_few_levels_passes():
    verdict = judge([0.5, 0.25, 0.125], [1e-14, 2e-14, 1e-14], expected=2.0, floor=1e-15)
    assert verdict.status == PASS
    assert verdict.reason.startswith("round-off plateau")
    assert verdict.used_levels == []


def test_superconvergence_flagged_not_failed():
    # The trapezoidal rule for a periodic analytic integrand converges geometrically
    # (Trefethen & Weideman, "The exponentially convergent trapezoidal rule", SIAM Review 56
    # (2014) 385-458); here integral of exp(cos x) over [0, 2 pi] = 2 pi I0(1) (mpmath).
    exact = 2 * math.pi * float(mpmath.besseli(0, 1))
    n = np.array([2, 3, 4, 5])
    err = [abs(2 * math.pi / k * np.exp(np.cos(2 * math.pi * np.arange(k) / k)).sum() - exact)
           for k in n]
    verdict = judge(2 * math.pi / n, err, expected=2.0)
    assert verdict.status == PASS
    assert verdict.superconvergent
    assert verdict.observed > 5.0
    assert "super-convergence" in verdict.reason


def test_verdict_to_dict_is_strict_json():
    verdict = judge([0.5, 0.25, 0.125], [0.0, 0.0, 0.0], expected=2.0)
    data = json.loads(json.dumps(verdict.to_dict(), allow_nan=False))
    assert data["status"] == "PASS"
    assert data["observed"] is None
    h = 0.5 ** np.arange(4)
    data = judge(h, h**2, expected=2.0).to_dict()
    assert data["pairwise"] == pytest.approx([2.0, 2.0, 2.0], abs=1e-12)
    json.dumps(data, allow_nan=False)
