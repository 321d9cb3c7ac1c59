"""Safe parsing, evaluation and differentiation of user formulas.

This package is the only way formulas from problem files and exact-solution
definitions are evaluated. A hand-written tokenizer and recursive-descent
parser build a small immutable expression tree; nothing here uses ``eval``,
``exec``, ``compile`` or ``ast``. See ``docs/formulas.md`` for the grammar.

>>> f = parse("x**2 - y**2", variables=("x", "y"))
>>> float(f(x=2.0, y=1.0))
3.0
>>> str(f.derivative("x"))
'2*x'
"""

from lapsolve.formula.formula import Formula, parse
from lapsolve.formula.functions import (
    ANALYTIC_CONSTANTS,
    ANALYTIC_FUNCTIONS,
    NOT_ANALYTIC,
    REAL_CONSTANTS,
    REAL_FUNCTIONS,
    FunctionSpec,
)
from lapsolve.formula.limits import (
    MAX_DEPTH,
    MAX_DERIVATIVE_WORK,
    MAX_EXPONENT,
    MAX_LENGTH,
    MAX_TREE_DEPTH,
)

__all__ = [
    "ANALYTIC_CONSTANTS",
    "ANALYTIC_FUNCTIONS",
    "MAX_DEPTH",
    "MAX_DERIVATIVE_WORK",
    "MAX_EXPONENT",
    "MAX_LENGTH",
    "MAX_TREE_DEPTH",
    "NOT_ANALYTIC",
    "REAL_CONSTANTS",
    "REAL_FUNCTIONS",
    "Formula",
    "FunctionSpec",
    "parse",
]
