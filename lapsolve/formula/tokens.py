"""Tokenizer of formulas: the first line of defence.

It checks the length limit before anything else, refuses every character that
cannot occur in the grammar (naming it, its column and, for non-ASCII
characters, its code point), refuses Python keywords and names containing
``__``, and checks parenthesis balance and depth as it goes -- iteratively, so
that ``((((...))))`` a hundred thousand deep costs one linear scan.
"""

import keyword
import re
import unicodedata
from dataclasses import dataclass

from lapsolve.errors import FormulaError
from lapsolve.formula.limits import MAX_DEPTH, MAX_LENGTH

# Every character belongs to exactly one piece; the last alternative catches the
# characters the grammar refuses. Pieces are classified by their first character.
_PIECES = re.compile(r"""
    [ \t\r\n]+
  | (?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?
  | [A-Za-z_][A-Za-z0-9_]*
  | \*\*|//|[-+*/(),]
  | .
""", re.VERBOSE | re.DOTALL)
_OPERATORS = frozenset(["**", "//", "-", "+", "*", "/", "(", ")", ","])

_NON_ASCII = re.compile(r"[^\x00-\x7f]")

_CHARACTER_HINTS = {
    "^": "write ** for powers, e.g. x**2",
    ".": "attribute access is not allowed",
    "[": "brackets, indexing and lists are not allowed",
    "]": "brackets, indexing and lists are not allowed",
    "{": "braces are not allowed",
    "}": "braces are not allowed",
    "'": "strings are not allowed",
    '"': "strings are not allowed",
    ";": "a formula is a single expression",
    "=": "assignments and comparisons are not allowed",
    ":": "lambdas, slices and ':=' are not allowed",
    "<": "comparisons are not allowed",
    ">": "comparisons are not allowed",
    "!": "comparisons are not allowed",
    "#": "comments are not allowed",
    "\\": "backslashes are not allowed",
}

_UNICODE_HINTS = {
    "\u2212": "-", "\u2013": "-", "\u00d7": "*", "\u00b7": "*", "\u22c5": "*",
    "\u00f7": "/", "\u03c0": "pi", "\u00b2": "**2", "\u00b3": "**3",
}


@dataclass(frozen=True, slots=True)
class Token:
    """One token: ``kind`` is 'number', 'name', 'op' or 'end'; ``column`` counts from 1."""

    kind: str
    text: str
    column: int


def tokenize(text, source=None, field=None):
    """Split ``text`` into tokens, refusing anything outside the grammar.

    Parameters
    ----------
    text : str
        The formula.
    source, field : str, optional
        Where the formula came from, for error messages.

    Returns
    -------
    list of Token
        The tokens, ending with an 'end' token.

    Raises
    ------
    FormulaError
        On a formula that is too long, empty, nested too deeply, unbalanced, or
        contains a character, keyword or name the grammar refuses.
    """
    def fail(message):
        return FormulaError(message, source, field)

    if len(text) > MAX_LENGTH:
        raise fail(f"formula is {len(text)} characters long; the limit is {MAX_LENGTH}")
    if not text.isascii():
        raise fail(_non_ascii_message(text))
    if not text.strip():
        raise fail("empty formula")
    tokens, open_columns, position = [], [], 0
    for value in _PIECES.findall(text):
        start, position = position, position + len(value)
        first, column = value[0], start + 1
        if first in " \t\r\n":
            continue
        if value in _OPERATORS:
            kind = "op"
            if value == "(":
                open_columns.append(column)
                if len(open_columns) > MAX_DEPTH:
                    raise fail(f"'(' at column {column} nests parentheses more than "
                               f"{MAX_DEPTH} levels deep")
            elif value == ")":
                if not open_columns:
                    raise fail(f"unmatched ')' at column {column}")
                open_columns.pop()
            elif value == "//":
                raise fail(f"'//' at column {column} is not allowed (floor division); use /")
        elif first.isdigit() or (first == "." and len(value) > 1):
            kind = "number"
            _check_after_number(text, position, value, column, fail)
        elif first.isalpha() or first == "_":
            kind = "name"
            _check_name(value, column, fail)
        else:
            raise fail(_character_message(text, start))
        tokens.append(Token(kind, value, column))
    if open_columns:
        raise fail(f"unclosed '(' at column {open_columns[-1]}")
    tokens.append(Token("end", "", len(text) + 1))
    return tokens


def _non_ascii_message(text):
    match = _NON_ASCII.search(text)
    char = match.group()
    name = unicodedata.name(char, "unnamed character")
    hint = _UNICODE_HINTS.get(char)
    advice = (f"write {hint!r} instead" if hint else
              "formulas are ASCII only; look-alike letters from other alphabets are refused")
    return (f"non-ASCII character U+{ord(char):04X} ({name}) at column {match.start() + 1}; "
            f"{advice}")


def _character_message(text, position):
    char = text[position]
    column = position + 1
    if ord(char) < 32 or ord(char) == 127:
        return f"control character U+{ord(char):04X} at column {column} is not allowed"
    pair = text[position:position + 2]
    if pair in (":=", "==", "<=", ">=", "!="):
        return f"{pair!r} at column {column} is not allowed (assignments and comparisons)"
    following = text[position + 1:position + 2]
    if char == "." and not (following.isalpha() or following == "_"):
        return f"stray '.' at column {column}"
    hint = _CHARACTER_HINTS.get(char, "use only + - * / ** ( ) , numbers and names")
    return f"{char!r} at column {column} is not allowed ({hint})"


def _check_after_number(text, position, value, column, fail):
    following = text[position:position + 1]
    if not following or not (following.isalnum() or following in "._"):
        return
    after = text[position + 1:position + 2]
    if following in "jJ" and not (after.isalnum() or after == "_"):
        raise fail(f"imaginary literal '{value}{following}' at column {column} is not "
                   f"supported; write {value}*i (analytic formulas only)")
    if following in "eE":
        raise fail(f"malformed number '{value}{following}' at column {column} (an exponent "
                   f"needs digits, e.g. 1e-3; write {value}*e for a multiple of e)")
    if following == ".":
        raise fail(f"malformed number '{value}.' at column {column}")
    raise fail(f"number '{value}' at column {column} is directly followed by {following!r}; "
               f"write {value}*{following}... for a product")


def _check_name(name, column, fail):
    if "__" in name:
        raise fail(f"name '{name}' at column {column} is not allowed (names containing '__' "
                   f"are refused)")
    if keyword.iskeyword(name):
        raise fail(f"keyword '{name}' at column {column} is not allowed in a formula")
