"""Recursive-descent parser from tokens to an expression tree.

Grammar (Python's precedence; ``**`` is right-associative and binds tighter
than a leading sign, so ``-x**2`` is ``-(x**2)`` and ``2**-1`` is allowed)::

    sum     := product (('+' | '-') product)*
    product := factor (('*' | '/') factor)*
    factor  := ('+' | '-')* atom ('**' factor)?
    atom    := number | name | name '(' sum (',' sum)* ')' | '(' sum ')'

Recursion happens only through parentheses, calls and powers; the tokenizer
has already bounded the parentheses and the parser bounds their sum with
powers by ``MAX_DEPTH`` before descending.
"""

from lapsolve.errors import FormulaError
from lapsolve.formula import build
from lapsolve.formula.functions import NOT_ANALYTIC
from lapsolve.formula.limits import MAX_DEPTH, MAX_EXPONENT
from lapsolve.formula.nodes import Const, TooDeep, Var, format_value


class Parser:
    """Parse one token list (see ``lapsolve.formula.parse``, which drives it)."""

    def __init__(self, tokens, variables, functions, constants, analytic, source, field):
        self.tokens = tokens
        self.position = 0
        self.depth = 0
        self.variables = variables
        self.functions = functions
        self.constants = constants
        self.analytic = analytic
        self.source = source
        self.field = field

    # -- helpers ---------------------------------------------------------
    def error(self, message):
        return FormulaError(message, self.source, self.field)

    def peek(self):
        return self.tokens[self.position]

    def advance(self):
        token = self.tokens[self.position]
        self.position += 1
        return token

    def at_op(self, *texts):
        token = self.tokens[self.position]
        return token.kind == "op" and token.text in texts

    def enter(self, token):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise self.error(f"{token.text!r} at column {token.column} nests the formula more "
                             f"than {MAX_DEPTH} levels deep")

    def build(self, token, constructor, *args):
        """Call a simplifying constructor, reporting its refusals at ``token``."""
        try:
            return constructor(*args)
        except (build.ConstantError, TooDeep) as exc:
            raise self.error(f"{exc} (at column {token.column})") from None

    def unexpected(self, token):
        if token.kind in ("name", "number"):
            return self.error(f"missing operator before '{token.text}' at column "
                              f"{token.column} (write * for a product)")
        if token.text == ",":
            return self.error(f"',' at column {token.column} outside the arguments of a "
                              f"function call")
        if token.kind == "end":
            return self.error(f"formula ends unexpectedly at column {token.column} "
                              f"(expected a number, a name or '(')")
        return self.error(f"unexpected '{token.text}' at column {token.column} "
                          f"(expected a number, a name or '(')")

    # -- grammar ---------------------------------------------------------
    def formula(self):
        tree = self.sum()
        if self.peek().kind != "end":
            raise self.unexpected(self.peek())
        return tree

    def sum(self):
        terms = [self.product()]
        first_op = self.peek()
        while self.at_op("+", "-"):
            op = self.advance()
            term = self.product()
            terms.append(term if op.text == "+" else self.build(op, build.neg, term))
        return terms[0] if len(terms) == 1 else self.build(first_op, build.add, terms)

    def product(self):
        num, den = [self.factor()], []
        first_op = self.peek()
        while self.at_op("*", "/"):
            op = self.advance()
            (num if op.text == "*" else den).append(self.factor())
        if len(num) == 1 and not den:
            return num[0]
        return self.build(first_op, build.mul, num, den)

    def factor(self):
        signs = []
        while self.at_op("+", "-"):
            token = self.advance()
            if token.text == "-":
                signs.append(token)
        node = self.atom()
        if self.at_op("**"):
            op = self.advance()
            self.enter(op)
            exponent = self.factor()
            self.depth -= 1
            if isinstance(exponent, Const) and abs(exponent.value) > MAX_EXPONENT:
                raise self.error(f"exponent {format_value(exponent.value)} of '**' at column "
                                 f"{op.column} is too large (limit: |exponent| <= "
                                 f"{MAX_EXPONENT})")
            node = self.build(op, build.power, node, exponent)
        for token in reversed(signs):
            node = self.build(token, build.neg, node)
        return node

    def atom(self):
        token = self.advance()
        if token.kind == "number":
            value = float(token.text)
            if value == float("inf"):
                raise self.error(f"number '{token.text[:30]}' at column {token.column} is too "
                                 f"large")
            return Const(complex(value) if self.analytic else value)
        if token.kind == "name":
            if self.at_op("("):
                return self.function_call(token)
            return self.name(token)
        if token.text == "(":
            self.enter(token)
            node = self.sum()
            self.close()
            self.depth -= 1
            return node
        raise self.unexpected(token)

    def close(self):
        token = self.peek()
        if not (token.kind == "op" and token.text == ")"):
            raise self.unexpected(token)
        self.advance()

    def function_call(self, name):
        spec = self.functions.get(name.text)
        where = f"at column {name.column}"
        if spec is None:
            if self.analytic and name.text in NOT_ANALYTIC:
                raise self.error(self.not_analytic(name))
            if name.text in self.variables or name.text in self.constants:
                raise self.error(f"'{name.text}' {where} is not a function (write "
                                 f"{name.text}*(...) for a product)")
            raise self.error(f"unknown function '{name.text}' {where} (functions: "
                             f"{self.function_list()})")
        self.enter(self.advance())
        args = []
        if not self.at_op(")"):
            args.append(self.sum())
            while self.at_op(","):
                self.advance()
                args.append(self.sum())
        self.close()
        self.depth -= 1
        if len(args) != spec.arity:
            plural = "" if spec.arity == 1 else "s"
            raise self.error(f"function '{name.text}' {where} takes {spec.arity} "
                             f"argument{plural}, got {len(args)}")
        return self.build(name, build.call, spec, args)

    def name(self, token):
        name, where = token.text, f"at column {token.column}"
        if name in self.variables:
            return Var(name)
        if name in self.constants:
            return Const(self.constants[name], name)
        if name in self.functions:
            raise self.error(f"function '{name}' {where} needs its argument in parentheses, "
                             f"e.g. {name}(x)")
        if self.analytic and name in NOT_ANALYTIC:
            raise self.error(self.not_analytic(token))
        allowed = ", ".join(list(self.variables) + list(self.constants))
        hint = ("; the imaginary unit i exists in analytic formulas only"
                if name == "i" and not self.analytic else "")
        raise self.error(f"unknown name '{name}' {where} (allowed: {allowed}; functions: "
                         f"{self.function_list()}){hint}")

    def not_analytic(self, token):
        return (f"function '{token.text}' at column {token.column} is not analytic "
                f"(complex-differentiable), so it cannot define an exact harmonic solution")

    def function_list(self):
        return ", ".join(sorted({spec.name for spec in self.functions.values()}))
