"""Documented limits of the formula parser, each checked before the work it guards.

``MAX_LENGTH``
    Longest accepted formula, in characters; checked before anything else.
``MAX_DEPTH``
    Deepest accepted nesting of parentheses, function calls and powers; checked
    while tokenizing (parentheses) and while parsing (powers), before recursion
    can grow.
``MAX_EXPONENT``
    Largest accepted absolute value of a constant exponent, as in ``x**1000``.
``MAX_TREE_DEPTH``
    Deepest expression tree that parsing or differentiation may build; it keeps
    evaluation, printing and differentiation far from Python's recursion limit.
``MAX_DERIVATIVE_WORK``
    Most factors the product rule may write while differentiating once (an
    n-factor product needs about n*n).
"""

MAX_LENGTH = 10_000
MAX_DEPTH = 100
MAX_EXPONENT = 1000
MAX_TREE_DEPTH = 2 * MAX_DEPTH
MAX_DERIVATIVE_WORK = 200_000
