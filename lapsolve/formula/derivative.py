"""Symbolic differentiation of expression trees by the usual rules.

Sum, product, quotient and chain rules, with the function rules of
``lapsolve.formula.functions``; powers use ``a*u**(a - 1)*u'`` when the
exponent does not depend on the variable, ``a**v*log(a)*v'`` when the base does
not, and ``u**v*(v'*log(u) + v*u'/u)`` otherwise. Results pass through the
simplifying constructors of ``lapsolve.formula.build``.

The product rule turns an n-factor product into n products of n factors, so the
factor slots it creates are counted against ``MAX_DERIVATIVE_WORK``.
"""

from lapsolve.formula.build import ONE, ZERO, add, call, is_zero, mul, neg, power
from lapsolve.formula.limits import MAX_DERIVATIVE_WORK
from lapsolve.formula.nodes import Add, Call, Const, Mul, Neg, Pow, Var


class TooMuchWork(Exception):
    """The derivative would exceed ``MAX_DERIVATIVE_WORK``."""


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

    Raises
    ------
    TooMuchWork
        If the product rule would create more than ``MAX_DERIVATIVE_WORK``
        factor slots.
    """
    return _Differentiation(variable, functions).of(node)


class _Differentiation:
    def __init__(self, variable, functions):
        self.variable = variable
        self.functions = functions
        self.work = 0

    def of(self, node):
        if isinstance(node, Const):
            return ZERO
        if isinstance(node, Var):
            return ONE if node.name == self.variable else ZERO
        if isinstance(node, Add):
            return add([self.of(term) for term in node.terms])
        if isinstance(node, Neg):
            return neg(self.of(node.arg))
        if isinstance(node, Mul):
            return self.product(node)
        if isinstance(node, Pow):
            return self.power(node)
        if isinstance(node, Call):
            return self.chain(node)
        raise TypeError(f"not an expression-tree node: {node!r}")

    def spend(self, slots):
        self.work += slots
        if self.work > MAX_DERIVATIVE_WORK:
            raise TooMuchWork(f"the product rule would need more than {MAX_DERIVATIVE_WORK} "
                              f"factors")

    def product(self, node):
        num, den = node.num, node.den
        terms = []
        for i, factor in enumerate(num):
            d_factor = self.of(factor)
            if not is_zero(d_factor):
                self.spend(len(num) + len(den))
                terms.append(mul(num[:i] + (d_factor,) + num[i + 1:], den))
        for factor in den:
            d_factor = self.of(factor)
            if not is_zero(d_factor):
                self.spend(len(num) + len(den) + 2)
                terms.append(neg(mul(num + (d_factor,), den + (factor,))))
        return add(terms)

    def power(self, node):
        base, exponent = node.base, node.exponent
        d_base, d_exponent = self.of(base), self.of(exponent)
        if is_zero(d_exponent):
            if is_zero(d_base):
                return ZERO
            lowered = power(base, add((exponent, Const(-1.0))))
            return mul((exponent, lowered, d_base))
        log_base = call(self.functions["log"], (base,))
        if is_zero(d_base):
            return mul((node, log_base, d_exponent))
        inner = add((mul((d_exponent, log_base)), mul((exponent, d_base), (base,))))
        return mul((node, inner))

    def chain(self, node):
        d_args = [self.of(arg) for arg in node.args]
        if all(is_zero(d_arg) for d_arg in d_args):
            return ZERO
        partials = node.function.partials(self.functions, node.args)
        return add([mul((partial, d_arg))
                    for partial, d_arg in zip(partials, d_args) if not is_zero(d_arg)])
