"""Symbolic differentiation of expression trees by the usual rules.

Sum, product, quotient and chain rules, with the function rules of
``lapsolve.formula.functions``; powers use ``a*u**(a - 1)*u'`` when the
exponent does not depend on the variable, ``a**v*log(a)*v'`` when the base does
not, and ``u**v*(v'*log(u) + v*u'/u)`` otherwise. Results pass through the
simplifying constructors of ``lapsolve.formula.build``.
"""

from lapsolve.formula.build import ONE, ZERO, add, call, is_zero, mul, neg, power
from lapsolve.formula.nodes import Add, Call, Const, Mul, Neg, Pow, Var


def differentiate(node, variable, functions):
    """Return the derivative of ``node`` with respect to ``variable``.

    Parameters
    ----------
    node : expression-tree node
        The tree to differentiate.
    variable : str
        Name of the variable.
    functions : Mapping[str, FunctionSpec]
        The function table of the tree's mode (real or analytic).

    Returns
    -------
    expression-tree node
    """
    if isinstance(node, Const):
        return ZERO
    if isinstance(node, Var):
        return ONE if node.name == variable else ZERO
    if isinstance(node, Add):
        return add([differentiate(term, variable, functions) for term in node.terms])
    if isinstance(node, Neg):
        return neg(differentiate(node.arg, variable, functions))
    if isinstance(node, Mul):
        return _product(node, variable, functions)
    if isinstance(node, Pow):
        return _power(node, variable, functions)
    if isinstance(node, Call):
        return _chain(node, variable, functions)
    raise TypeError(f"not an expression-tree node: {node!r}")


def _product(node, variable, functions):
    num, den = node.num, node.den
    terms = []
    for i, factor in enumerate(num):
        d_factor = differentiate(factor, variable, functions)
        if not is_zero(d_factor):
            terms.append(mul(num[:i] + (d_factor,) + num[i + 1:], den))
    for factor in den:
        d_factor = differentiate(factor, variable, functions)
        if not is_zero(d_factor):
            terms.append(neg(mul(num + (d_factor,), den + (factor,))))
    return add(terms)


def _power(node, variable, functions):
    base, exponent = node.base, node.exponent
    d_base = differentiate(base, variable, functions)
    d_exponent = differentiate(exponent, variable, functions)
    if is_zero(d_exponent):
        if is_zero(d_base):
            return ZERO
        lowered = power(base, add((exponent, Const(-1.0))))
        return mul((exponent, lowered, d_base))
    log_base = call(functions["log"], (base,))
    if is_zero(d_base):
        return mul((node, log_base, d_exponent))
    inner = add((mul((d_exponent, log_base)), mul((exponent, d_base), (base,))))
    return mul((node, inner))


def _chain(node, variable, functions):
    d_args = [differentiate(arg, variable, functions) for arg in node.args]
    if all(is_zero(d_arg) for d_arg in d_args):
        return ZERO
    partials = node.function.partials(functions, node.args)
    return add([mul((partial, d_arg))
                for partial, d_arg in zip(partials, d_args) if not is_zero(d_arg)])
