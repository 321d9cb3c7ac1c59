"""`Formula`, a parsed user formula, and `parse`, the only way to make one."""

import keyword
import re
from dataclasses import dataclass
from dataclasses import field as dataclass_field

import numpy as np

from lapsolve.errors import FormulaError
from lapsolve.formula.build import ConstantError
from lapsolve.formula.derivative import TooMuchWork, differentiate
from lapsolve.formula.functions import (
    ANALYTIC_CONSTANTS,
    ANALYTIC_FUNCTIONS,
    NOT_ANALYTIC,
    REAL_CONSTANTS,
    REAL_FUNCTIONS,
)
from lapsolve.formula.nodes import Call, Const, TooDeep, Var, walk
from lapsolve.formula.parser import Parser
from lapsolve.formula.tokens import tokenize

_IDENTIFIER = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")


@dataclass(frozen=True, eq=False)
class Formula:
    """A parsed formula: call it on arrays, differentiate it, print it.

    Make one with `parse`; the fields describe it.

    Attributes
    ----------
    text : str
        The formula as written (for a derivative: the printed tree).
    variables : tuple of str
        The variables the formula may use, in the order given to `parse`.
    analytic : bool
        True for a complex-analytic formula evaluated on complex arrays.
    names : frozenset of str
        Every name the formula uses: variables, constants and functions.
    tree : node
        The immutable expression tree (``lapsolve.formula.nodes``).
    source, field : str or None
        Where the formula came from; repeated in error messages.
    """

    text: str
    variables: tuple
    analytic: bool
    names: frozenset
    tree: object = dataclass_field(repr=False)
    source: str | None = None
    field: str | None = None

    def __str__(self):
        return self.tree.text()

    @property
    def is_constant(self):
        """True when the (simplified) formula uses no variable."""
        return not any(isinstance(node, Var) for node in walk(self.tree))

    def __call__(self, **values):
        """Evaluate at arrays of variable values.

        Parameters
        ----------
        **values : array_like
            One array per variable, by name; they broadcast together. Variables
            that the formula does not use may be left out.

        Returns
        -------
        numpy.ndarray
            Float (real formulas) or complex (analytic formulas) array of the
            inputs' broadcast shape, also for a constant formula. Values outside
            a function's domain are NaN or inf, as numpy computes them.

        Raises
        ------
        TypeError
            On an unknown variable, a missing used variable, or complex values
            given to a real formula.
        """
        unknown = sorted(set(values) - set(self.variables))
        if unknown:
            raise TypeError(f"unknown variable(s) {', '.join(unknown)}; this formula takes "
                            f"{', '.join(self.variables)}")
        missing = [name for name in self.variables if name in self.names and name not in values]
        if missing:
            raise TypeError(f"formula {self.text!r} needs a value for {', '.join(missing)}")
        dtype = complex if self.analytic else float
        env = {}
        for name, value in values.items():
            if not self.analytic and np.iscomplexobj(value):
                raise TypeError(f"complex values given for {name} to a real formula")
            env[name] = np.asarray(value, dtype=dtype)
        shape = np.broadcast_shapes(*(array.shape for array in env.values()))
        with np.errstate(all="ignore"):
            result = self.tree.evaluate(env)
        return np.array(np.broadcast_to(result, shape), dtype=dtype)

    def derivative(self, variable):
        """Symbolic derivative with respect to ``variable``, as a new `Formula`.

        In an analytic formula this is the complex derivative d/dz, valid on the
        same principal branches that evaluation uses.

        Raises
        ------
        FormulaError
            If ``variable`` is not one of the formula's variables, or the
            derivative would be nested more than ``MAX_TREE_DEPTH`` levels deep or
            need more than ``MAX_DERIVATIVE_WORK`` product-rule factors.
        """
        if variable not in self.variables:
            raise FormulaError(f"cannot differentiate with respect to {variable!r}: the "
                               f"variables are {', '.join(self.variables)}",
                               self.source, self.field)
        functions = ANALYTIC_FUNCTIONS if self.analytic else REAL_FUNCTIONS
        try:
            tree = differentiate(self.tree, variable, functions)
        except (TooDeep, TooMuchWork, ConstantError) as exc:
            shown = self.text if len(self.text) <= 60 else self.text[:57] + "..."
            raise FormulaError(f"the derivative by {variable} of {shown!r} cannot be "
                               f"built: {exc}", self.source, self.field) from None
        return Formula(tree.text(), self.variables, self.analytic, _names_in(tree), tree,
                       self.source, self.field)


def _names_in(tree):
    names = set()
    for node in walk(tree):
        if isinstance(node, Var):
            names.add(node.name)
        elif isinstance(node, Const) and node.label:
            names.add(node.label)
        elif isinstance(node, Call):
            names.add(node.function.name)
    return frozenset(names)


def _checked_variables(variables, functions, constants):
    variables = tuple(variables)
    for name in variables:
        if not isinstance(name, str) or not _IDENTIFIER.match(name) or "__" in name or (
                name in functions or name in constants or name in NOT_ANALYTIC
                or keyword.iskeyword(name)):
            raise ValueError(f"{name!r} cannot be a formula variable")
    if len(set(variables)) != len(variables):
        raise ValueError(f"repeated formula variable in {variables!r}")
    return variables


def parse(text, variables=None, *, analytic=False, source=None, field=None):
    """Parse a user formula into a `Formula`, refusing anything outside the grammar.

    Parameters
    ----------
    text : str or int or float
        The formula, e.g. ``"x**2 - y**2 + sin(pi*x)"``; a number read from a
        file is accepted as its own formula.
    variables : sequence of str, optional
        Names the formula may use as variables; default ``("x", "y")``, or
        ``("z",)`` when ``analytic``.
    analytic : bool, optional
        Parse a complex-analytic formula: only complex-differentiable functions
        (`ANALYTIC_FUNCTIONS`), the imaginary unit ``i``, complex evaluation on
        numpy's principal branches.
    source, field : str, optional
        The file and dotted field the formula came from, for error messages.

    Returns
    -------
    Formula

    Raises
    ------
    FormulaError
        For every refused formula, with a one-line message naming the offending
        token and its column. Limits (``MAX_LENGTH``, ``MAX_DEPTH``,
        ``MAX_EXPONENT``) are checked before the work they guard.
    ValueError
        If ``variables`` holds a name that cannot be a variable.
    """
    functions = ANALYTIC_FUNCTIONS if analytic else REAL_FUNCTIONS
    constants = ANALYTIC_CONSTANTS if analytic else REAL_CONSTANTS
    if variables is None:
        variables = ("z",) if analytic else ("x", "y")
    variables = _checked_variables(variables, functions, constants)
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        text = repr(text)
    if not isinstance(text, str):
        raise FormulaError(f"a formula must be text, not {type(text).__name__}", source, field)
    tokens = tokenize(text, source, field)
    tree = Parser(tokens, variables, functions, constants, analytic, source, field).formula()
    names = frozenset(token.text for token in tokens if token.kind == "name")
    return Formula(text, variables, analytic, names, tree, source, field)
