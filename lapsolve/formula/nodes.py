"""Immutable nodes of a formula's expression tree: evaluation and printable text.

Every node records its depth; building a node deeper than ``MAX_TREE_DEPTH``
raises `TooDeep`, so the recursive walks (evaluation, printing,
differentiation) stay far from Python's recursion limit.

Nodes are built through the simplifying constructors of
``lapsolve.formula.build``, never directly, so that sums and products are flat
and constants are folded; the printer relies on that shape.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from lapsolve.formula.limits import MAX_TREE_DEPTH

# Binding strength of the printed form of a node, weakest first.
SUM, PRODUCT, UNARY, POWER, ATOM = 1, 2, 3, 4, 5


class TooDeep(Exception):
    """A node would be nested deeper than ``MAX_TREE_DEPTH``."""


def _depth(children):
    depth = 1 + max((child.depth for child in children), default=0)
    if depth > MAX_TREE_DEPTH:
        raise TooDeep(f"the expression is nested more than {MAX_TREE_DEPTH} levels deep")
    return depth


def _set_depth(node, children):
    object.__setattr__(node, "depth", _depth(children))


def format_real(value):
    """Shortest re-parsable text of a finite real number (integers without '.0')."""
    if value < 0:
        return "-" + format_real(-value)
    if float(value).is_integer() and value < 1e16:
        return str(int(value))
    return repr(float(value))


def format_value(value):
    """Re-parsable text of a finite real or complex constant (``i`` is the unit)."""
    if not isinstance(value, complex) or value.imag == 0:
        return format_real(value.real)
    imag = value.imag
    unit = "i" if abs(imag) == 1 else f"{format_real(abs(imag))}*i"
    if value.real == 0:
        return "-" + unit if imag < 0 else unit
    sign = " - " if imag < 0 else " + "
    return f"({format_real(value.real)}{sign}{unit})"


def _wrapped(node, weakest):
    text = node.text()
    return f"({text})" if node.prec < weakest else text


@dataclass(frozen=True, slots=True)
class Const:
    """A number; ``label`` keeps the name of a named constant (pi, e, i, or -pi...)."""

    value: float | complex
    label: str | None = None
    depth: int = field(default=1, init=False, repr=False, compare=False)

    children = ()

    def __post_init__(self):
        # Signed zeros would pick the other side of a branch cut after printing
        # and re-parsing (-0.0 prints as 0), so constants carry +0.0 only.
        value = self.value
        if isinstance(value, complex):
            value = complex(value.real + 0.0, value.imag + 0.0)
        else:
            value = float(value) + 0.0
        object.__setattr__(self, "value", value)

    @property
    def prec(self):
        if self.label:
            return UNARY if self.label.startswith("-") else ATOM
        value = self.value
        if isinstance(value, complex) and value.imag != 0:
            if value.real != 0 or value.imag == 1:
                return ATOM
            return UNARY if value.imag == -1 else PRODUCT
        return UNARY if value.real < 0 else ATOM

    def text(self):
        return self.label or format_value(self.value)

    def negated(self):
        """``-self``, keeping a named constant's name (pi -> -pi -> pi)."""
        label = self.label
        if label:
            label = label[1:] if label.startswith("-") else "-" + label
        return Const(-self.value, label)

    def evaluate(self, env):
        return self.value


@dataclass(frozen=True, slots=True)
class Var:
    """A variable, looked up by name at evaluation."""

    name: str
    depth: int = field(default=1, init=False, repr=False, compare=False)

    children = ()
    prec = ATOM

    def text(self):
        return self.name

    def evaluate(self, env):
        return env[self.name]


@dataclass(frozen=True, slots=True)
class Add:
    """A flat sum of two or more terms; subtraction is a `Neg` term."""

    terms: tuple
    depth: int = field(init=False, repr=False, compare=False)

    prec = SUM

    def __post_init__(self):
        _set_depth(self, self.terms)

    @property
    def children(self):
        return self.terms

    def text(self):
        parts = [self.terms[0].text()]
        for term in self.terms[1:]:
            if isinstance(term, Neg):
                parts.append(" - " + _wrapped(term.arg, PRODUCT))
                continue
            text = _wrapped(term, PRODUCT)
            # A leading '-' belongs to a constant (-2, -pi, -2*i), alone or leading
            # a product; the parser folds ' - 2*i*z' back into the same node.
            parts.append(" - " + text[1:] if text.startswith("-") else " + " + text)
        return "".join(parts)

    def evaluate(self, env):
        total = self.terms[0].evaluate(env)
        for term in self.terms[1:]:
            total = total + term.evaluate(env)
        return total


@dataclass(frozen=True, slots=True)
class Neg:
    """Negation of a non-constant node."""

    arg: object
    depth: int = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        _set_depth(self, (self.arg,))

    @property
    def children(self):
        return (self.arg,)

    @property
    def prec(self):
        return PRODUCT if self.arg.prec == PRODUCT else UNARY

    def text(self):
        return "-" + _wrapped(self.arg, PRODUCT)

    def evaluate(self, env):
        return -self.arg.evaluate(env)


@dataclass(frozen=True, slots=True)
class Mul:
    """A flat product ``num[0]*num[1]*.../den[0]/den[1]/...`` (``num`` may be empty)."""

    num: tuple
    den: tuple = ()
    depth: int = field(init=False, repr=False, compare=False)

    prec = PRODUCT

    def __post_init__(self):
        _set_depth(self, self.num + self.den)

    @property
    def children(self):
        return self.num + self.den

    def text(self):
        text = "*".join(_wrapped(factor, PRODUCT) for factor in self.num) or "1"
        return text + "".join("/" + _wrapped(factor, UNARY) for factor in self.den)

    def evaluate(self, env):
        result = 1.0
        for i, factor in enumerate(self.num):
            value = factor.evaluate(env)
            result = value if i == 0 else result * value
        for factor in self.den:
            result = result / factor.evaluate(env)
        return result


@dataclass(frozen=True, slots=True)
class Pow:
    """``base**exponent`` (numpy's ``power``; principal branch for complex values)."""

    base: object
    exponent: object
    depth: int = field(init=False, repr=False, compare=False)

    prec = POWER

    def __post_init__(self):
        _set_depth(self, (self.base, self.exponent))

    @property
    def children(self):
        return (self.base, self.exponent)

    def text(self):
        return _wrapped(self.base, ATOM) + "**" + _wrapped(self.exponent, UNARY)

    def evaluate(self, env):
        return np.power(self.base.evaluate(env), self.exponent.evaluate(env))


@dataclass(frozen=True, slots=True)
class Call:
    """A call of a whitelisted function (see ``lapsolve.formula.functions``)."""

    function: object
    args: tuple
    depth: int = field(init=False, repr=False, compare=False)

    prec = ATOM

    def __post_init__(self):
        _set_depth(self, self.args)

    @property
    def children(self):
        return self.args

    def text(self):
        return f"{self.function.name}({', '.join(arg.text() for arg in self.args)})"

    def evaluate(self, env):
        return self.function.ufunc(*(arg.evaluate(env) for arg in self.args))


def walk(tree):
    """Yield every distinct node object of ``tree`` once (iteratively, in no set order).

    Derivatives share subtrees, so visiting each object once keeps this linear
    in the number of objects.
    """
    stack, seen = [tree], set()
    while stack:
        node = stack.pop()
        if id(node) in seen:
            continue
        seen.add(id(node))
        yield node
        stack.extend(node.children)
