"""Simplifying constructors of expression-tree nodes.

They keep sums and products flat, fold constants and drop neutral elements
(``0*a -> 0``, ``1*a -> a``, ``a + 0 -> a``, ``a**1 -> a``, ``a**0 -> 1``).
Constants are folded with numpy float64/complex128 scalars inside
``np.errstate(all='ignore')`` -- the same arithmetic as evaluation, and never
Python integers, so ``9**9**9`` costs nothing. A fold that is not finite raises
`ConstantError`.
"""

import numpy as np

from lapsolve.formula.nodes import Add, Call, Const, Mul, Neg, Pow

ZERO = Const(0.0)
ONE = Const(1.0)


class ConstantError(Exception):
    """Constant folding gave an infinite or undefined value."""


def _scalar(value, as_complex=False):
    if as_complex or isinstance(value, complex):
        return np.complex128(value)
    return np.float64(value)


def _const(value, what):
    """Return a `Const` of numpy scalar ``value``, refusing inf and NaN."""
    if not np.isfinite(value):
        raise ConstantError(f"{what} is not a finite number (it evaluates to {value})")
    if np.iscomplexobj(value):
        return Const(complex(value))
    return Const(float(value))


def is_zero(node):
    """True when ``node`` is the constant 0."""
    return isinstance(node, Const) and node.value == 0


def is_negative(value):
    """True for a real (or zero-imaginary complex) constant below zero."""
    return value.imag == 0 and value.real < 0


def neg(node):
    """``-node``, folding constants and double negation."""
    if isinstance(node, Const):
        return node.negated()
    if isinstance(node, Neg):
        return node.arg
    if isinstance(node, Mul) and node.num and _is_non_real_const(node.num[0]):
        return Mul((node.num[0].negated(),) + node.num[1:], node.den)
    return Neg(node)


def _is_non_real_const(node):
    return isinstance(node, Const) and node.value.imag != 0


def add(terms):
    """Flat sum of ``terms``; constants folded into one trailing term."""
    flat, consts = [], []
    for term in terms:
        for item in term.terms if isinstance(term, Add) else (term,):
            (consts if isinstance(item, Const) else flat).append(item)
    consts = [item for item in consts if not is_zero(item)]
    if not consts:
        constant = ZERO
    elif len(consts) == 1:
        constant = consts[0]
    else:
        with np.errstate(all="ignore"):
            total = _scalar(0.0)
            for item in consts:
                total = total + _scalar(item.value)
        constant = _const(total, "the constant sum " + " + ".join(c.text() for c in consts))
    if not flat or not is_zero(constant):
        flat.append(constant)
    return flat[0] if len(flat) == 1 else Add(tuple(flat))


def _fold_product(consts, what):
    if len(consts) == 1:
        return consts[0]
    with np.errstate(all="ignore"):
        product = _scalar(1.0)
        for item in consts:
            product = product * _scalar(item.value)
    return _const(product, what + "*".join(c.text() for c in consts))


def mul(num, den=()):
    """Flat product ``num[0]*.../den[0]/...`` with constants folded and signs pulled out.

    Constant factors of the numerator and of the denominator are folded
    separately (so ``x/3`` stays ``x/3``); a negative constant becomes a `Neg`
    around the product.
    """
    negative = False
    parts = {True: ([], []), False: ([], [])}  # in numerator? -> (factors, constants)

    def take(node, upper):
        nonlocal negative
        if isinstance(node, Mul):
            for factor in node.num:
                take(factor, upper)
            for factor in node.den:
                take(factor, not upper)
        elif isinstance(node, Neg):
            negative = not negative
            take(node.arg, upper)
        elif isinstance(node, Const):
            if node.value == 1:
                return
            if is_negative(node.value):
                negative = not negative
                node = node.negated()
            parts[upper][1].append(node)
        else:
            parts[upper][0].append(node)

    for factor in num:
        take(factor, True)
    for factor in den:
        take(factor, False)
    (top, top_consts), (bottom, bottom_consts) = parts[True], parts[False]
    c_top = _fold_product(top_consts, "the constant product ") if top_consts else ONE
    c_bottom = _fold_product(bottom_consts, "the constant product ") if bottom_consts else ONE
    if is_zero(c_bottom):
        raise ConstantError("division by the constant 0")
    if is_zero(c_top):
        return ZERO
    if not top and not bottom:
        if c_bottom is ONE:
            return neg(c_top) if negative else c_top
        with np.errstate(all="ignore"):
            value = _scalar(c_top.value) / _scalar(c_bottom.value)
        result = _const(value, f"the constant quotient {c_top.text()}/{c_bottom.text()}")
        return neg(result) if negative else result
    if negative and c_top.value.imag != 0:
        negative, c_top = False, c_top.negated()  # -(2*i)*z is kept as -2*i*z
    top = ([] if c_top.value == 1 else [c_top]) + top
    bottom = ([] if c_bottom.value == 1 else [c_bottom]) + bottom
    if not top and not bottom:
        result = ONE
    elif len(top) == 1 and not bottom:
        result = top[0]
    else:
        result = Mul(tuple(top), tuple(bottom))
    return neg(result) if negative else result


def power(base, exponent):
    """``base**exponent``, folding constants and the exponents 0 and 1."""
    if isinstance(exponent, Const):
        if exponent.value == 0:
            return ONE
        if exponent.value == 1:
            return base
        if isinstance(base, Const):
            with np.errstate(all="ignore"):
                value = np.power(_scalar(base.value), _scalar(exponent.value))
            return _const(value, f"the constant power ({base.text()})**({exponent.text()})")
    return Pow(base, exponent)


def call(function, args):
    """``function(*args)``, folded when every argument is constant."""
    args = tuple(args)
    if all(isinstance(arg, Const) for arg in args):
        with np.errstate(all="ignore"):
            value = function.ufunc(*(_scalar(arg.value, function.complex) for arg in args))
        text = ", ".join(arg.text() for arg in args)
        return _const(value, f"{function.name}({text})")
    return Call(function, args)
