"""The whitelisted functions and constants of formulas, with their derivative rules.

Real formulas (`REAL_FUNCTIONS`) evaluate with numpy on float arrays; values
outside a function's domain give NaN. Analytic formulas (`ANALYTIC_FUNCTIONS`)
evaluate with numpy on complex arrays and so use numpy's principal branches:
``log`` and ``sqrt`` cut along the negative real axis, ``arccosh`` along
``(-inf, 1]``, ``arcsinh`` along the imaginary axis beyond ``+-i``,
``arctanh`` along the real axis beyond ``+-1``. Each derivative rule below is
written so that it holds on the same branch, e.g. d/dz arccosh z =
1/(sqrt(z - 1)*sqrt(z + 1)) rather than 1/sqrt(z**2 - 1), which is wrong by a
sign in the left half-plane.

A rule maps ``(table, args)`` to the partial derivatives with respect to each
argument; ``table`` supplies the functions of the same mode.
"""

import math
from collections.abc import Callable
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from lapsolve.formula.build import add, call, mul, neg, power
from lapsolve.formula.nodes import Const


@dataclass(frozen=True)
class FunctionSpec:
    """One whitelisted function.

    Attributes
    ----------
    name : str
        Canonical name, used when printing a tree.
    arity : int
        Number of arguments.
    ufunc : callable
        The numpy function that evaluates it.
    partials : callable
        ``partials(table, args)`` -> tuple of partial-derivative nodes.
    complex : bool
        True in the analytic table: constant arguments fold as complex numbers.
    """

    name: str
    arity: int
    ufunc: Callable
    partials: Callable
    complex: bool = False


def _f(table, name, arg):
    return call(table[name], (arg,))


def _recip(node):
    return mul((), (node,))


def _square(node):
    return power(node, Const(2.0))


def _one_minus_square(u):
    return add((Const(1.0), neg(_square(u))))


def _one_plus_square(u):
    return add((Const(1.0), _square(u)))


_RULES = {
    "sin": lambda t, u: _f(t, "cos", u),
    "cos": lambda t, u: neg(_f(t, "sin", u)),
    "tan": lambda t, u: _recip(_square(_f(t, "cos", u))),
    "exp": lambda t, u: _f(t, "exp", u),
    "log": lambda t, u: _recip(u),
    "log10": lambda t, u: _recip(mul((u, Const(math.log(10.0))))),
    "sqrt": lambda t, u: _recip(mul((Const(2.0), _f(t, "sqrt", u)))),
    "abs": lambda t, u: mul((u,), (_f(t, "abs", u),)),
    "sinh": lambda t, u: _f(t, "cosh", u),
    "cosh": lambda t, u: _f(t, "sinh", u),
    "tanh": lambda t, u: _recip(_square(_f(t, "cosh", u))),
    "arcsin": lambda t, u: _recip(_f(t, "sqrt", _one_minus_square(u))),
    "arccos": lambda t, u: neg(_recip(_f(t, "sqrt", _one_minus_square(u)))),
    "arctan": lambda t, u: _recip(_one_plus_square(u)),
    "arcsinh": lambda t, u: _recip(_f(t, "sqrt", _one_plus_square(u))),
    "arccosh": lambda t, u: _recip(mul((_f(t, "sqrt", add((u, Const(-1.0)))),
                                        _f(t, "sqrt", add((u, Const(1.0))))))),
    "arctanh": lambda t, u: _recip(_one_minus_square(u)),
}


def _one_argument(rule):
    return lambda table, args: (rule(table, args[0]),)


def _atan2_partials(table, args):
    y, x = args
    radius2 = add((_square(x), _square(y)))
    return mul((x,), (radius2,)), neg(mul((y,), (radius2,)))


_UFUNCS = {
    "sin": np.sin, "cos": np.cos, "tan": np.tan, "exp": np.exp, "log": np.log,
    "log10": np.log10, "sqrt": np.sqrt, "abs": np.abs, "sinh": np.sinh, "cosh": np.cosh,
    "tanh": np.tanh, "arcsin": np.arcsin, "arccos": np.arccos, "arctan": np.arctan,
    "arcsinh": np.arcsinh, "arccosh": np.arccosh, "arctanh": np.arctanh,
}

ALIASES = MappingProxyType({
    "asin": "arcsin", "acos": "arccos", "atan": "arctan", "asinh": "arcsinh",
    "acosh": "arccosh", "atanh": "arctanh", "arctan2": "atan2",
})

#: Functions refused in analytic formulas because they are not complex-differentiable.
NOT_ANALYTIC = frozenset({
    "conj", "conjugate", "abs", "absolute", "real", "imag", "re", "im", "arg", "angle",
    "atan2", "arctan2",
})


def _table(names, as_complex, extra=()):
    table = {name: FunctionSpec(name, 1, _UFUNCS[name], _one_argument(_RULES[name]), as_complex)
             for name in names}
    table.update({spec.name: spec for spec in extra})
    table.update({alias: table[name] for alias, name in ALIASES.items() if name in table})
    return MappingProxyType(table)


#: Functions of real formulas, by name (aliases included).
REAL_FUNCTIONS = _table(
    _UFUNCS, False, extra=(FunctionSpec("atan2", 2, np.arctan2, _atan2_partials),))

#: Functions of analytic formulas, by name (aliases included); all complex-differentiable.
ANALYTIC_FUNCTIONS = _table((name for name in _UFUNCS if name not in NOT_ANALYTIC), True)

#: Named constants of real formulas.
REAL_CONSTANTS = MappingProxyType({"pi": math.pi, "e": math.e})

#: Named constants of analytic formulas: ``i`` is the imaginary unit.
ANALYTIC_CONSTANTS = MappingProxyType({"pi": complex(math.pi), "e": complex(math.e), "i": 1j})
