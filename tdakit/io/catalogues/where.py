"""A small, safe language for row filters such as ``"parallax > 2"`` or ``"0.01 < z < 0.1 and not (mag_r >= 19)"``.

The text is split into tokens and parsed by a recursive-descent parser into a tree of comparisons joined by
``and``, ``or`` and ``not``; nothing is ever passed to :func:`eval`. Grammar (keywords in any case)::

    filter     := or_expr
    or_expr    := and_expr ("or" and_expr)*
    and_expr   := not_expr ("and" not_expr)*
    not_expr   := "not" not_expr | "(" or_expr ")" | comparison
    comparison := operand (op operand)+          chained like Python: a < b < c means a < b and b < c
    operand    := column name | number
    op         := "<" | "<=" | ">" | ">=" | "==" | "!="

A column name is an identifier (letters, digits, ``_``, ``.``, not starting with a digit) or any text between
backticks (```name with spaces```). Numbers are decimal, with an optional sign and exponent.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tdakit.errors import InvalidParameterError

__all__ = ["RowFilter", "parse_where", "MAX_WHERE_LENGTH"]

MAX_WHERE_LENGTH = 2000
_MAX_DEPTH = 50
_OPERATORS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal,
              "==": np.equal, "!=": np.not_equal}
_KEYWORDS = ("and", "or", "not")
_TOKEN = re.compile(r"""
    (?P<space>\s+)
  | (?P<number>[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?(?![A-Za-z_.\d]))
  | (?P<op><=|>=|==|!=|<|>)
  | (?P<paren>[()])
  | (?P<name>[A-Za-z_][A-Za-z0-9_.]*)
  | (?P<quoted>`[^`]+`)
""", re.VERBOSE)
_HELP = ("A filter holds comparisons (<, <=, >, >=, ==, !=) between column names and numbers, joined by and, or, "
         "not and parentheses, e.g. 'z < 0.1 and mag_r < 19'; write names with other characters between backticks.")


@dataclass(frozen=True)
class RowFilter:
    """A parsed row filter: evaluate it on columns of values to get the rows that pass.

    Attributes
    ----------
    text : str
        The filter as written.
    tree : tuple
        The parsed expression: ``("cmp", op, left, right)``, ``("and", a, b)``, ``("or", a, b)``,
        ``("not", a)``; operands are ``("column", name)`` or ``("number", value)``.
    columns : tuple of str
        The column names the filter reads, in order of first appearance.
    """

    text: str
    tree: tuple
    columns: tuple[str, ...]

    def evaluate(self, values: Mapping[str, NDArray]) -> NDArray[np.bool_]:
        """Boolean mask of the rows that pass, given one array per column in :attr:`columns`.

        Parameters
        ----------
        values : mapping of str to ndarray
            Equal-length 1-D arrays (any numeric or boolean dtype, either byte order).

        Returns
        -------
        ndarray of bool
            True where the row passes. NaN compares false, as in numpy (``not (x > 1)`` is then true).
        """
        lengths = {np.shape(values[name])[0] for name in self.columns}
        if len(lengths) != 1:
            raise InvalidParameterError(
                f"The columns given to RowFilter.evaluate must have one length; got lengths {sorted(lengths)}.",
                parameter="values")
        return np.asarray(_evaluate(self.tree, values), dtype=bool)


def parse_where(text: str, *, function: str = "load_cloud") -> RowFilter:
    """Parse a row filter without evaluating any code.

    Parameters
    ----------
    text : str
        Comparisons between column names and numbers joined by ``and``/``or``/``not`` and parentheses,
        e.g. ``"parallax > 2"``, ``"z < 0.1 and mag_r < 19"``, ``"0.01 < z <= 0.1"``, ``"not (flag == 1)"``.
    function : str, default="load_cloud"
        The public function named in error messages.

    Returns
    -------
    RowFilter

    Raises
    ------
    InvalidParameterError
        Anything outside the grammar (arithmetic, function calls, strings, attribute access, a bare
        column without a comparison, a comparison of two numbers), with the position of the problem.

    Examples
    --------
    >>> import numpy as np
    >>> rows = parse_where("0 < z < 0.1 and not mag > 19")
    >>> rows.columns
    ('z', 'mag')
    >>> rows.evaluate({"z": np.array([0.05, 0.2, 0.05]), "mag": np.array([18.0, 18.0, 20.0])})
    array([ True, False, False])
    """
    if not isinstance(text, str) or not text.strip():
        raise InvalidParameterError(
            f"The 'where' parameter of {function} must be a non-empty string such as 'parallax > 2'. "
            f"Got {text!r} (type {type(text).__name__}) instead.", parameter="where")
    if len(text) > MAX_WHERE_LENGTH:
        raise InvalidParameterError(
            f"The 'where' parameter of {function} must be at most {MAX_WHERE_LENGTH} characters long. "
            f"Got {len(text)} characters instead.", parameter="where")
    parser = _Parser(text, _tokenize(text, function), function)
    tree = parser.parse()
    return RowFilter(text, tree, tuple(dict.fromkeys(parser.names)))


def _error(text: str, function: str, position: int, problem: str) -> InvalidParameterError:
    shown = text if len(text) <= 120 else text[:117] + "..."
    return InvalidParameterError(
        f"The 'where' parameter of {function} could not be read: {problem} at character {position + 1} of "
        f"{shown!r}. {_HELP}", parameter="where")


def _tokenize(text: str, function: str) -> list[tuple[str, object, int]]:
    tokens, position = [], 0
    while position < len(text):
        match = _TOKEN.match(text, position)
        if match is None:
            raise _error(text, function, position, f"unexpected {text[position]!r}")
        kind, raw = match.lastgroup, match.group()
        if kind == "number":
            tokens.append(("number", _number(raw), position))
        elif kind == "name" and raw.lower() in _KEYWORDS:
            tokens.append((raw.lower(), raw, position))
        elif kind in ("name", "quoted"):
            tokens.append(("name", raw.strip("`") if kind == "quoted" else raw, position))
        elif kind != "space":
            tokens.append((raw, raw, position))
        position = match.end()
    tokens.append(("end", "", len(text)))
    return tokens


def _number(raw: str) -> int | float:
    body = raw.lstrip("+-")
    if body.isdigit():
        return int(raw)
    return float(raw)


class _Parser:
    def __init__(self, text: str, tokens: list, function: str) -> None:
        self.text, self.tokens, self.function = text, tokens, function
        self.index, self.depth, self.names = 0, 0, []

    def peek(self) -> tuple:
        return self.tokens[self.index]

    def take(self) -> tuple:
        token = self.tokens[self.index]
        self.index += 1
        return token

    def fail(self, problem: str, token: tuple | None = None):
        token = token or self.peek()
        return _error(self.text, self.function, token[2], problem)

    def parse(self) -> tuple:
        tree = self.or_expr()
        if self.peek()[0] != "end":
            raise self.fail(f"unexpected {_show(self.peek())} (expected 'and', 'or' or the end)")
        return tree

    def or_expr(self) -> tuple:
        tree = self.and_expr()
        while self.peek()[0] == "or":
            self.take()
            tree = ("or", tree, self.and_expr())
        return tree

    def and_expr(self) -> tuple:
        tree = self.not_expr()
        while self.peek()[0] == "and":
            self.take()
            tree = ("and", tree, self.not_expr())
        return tree

    def not_expr(self) -> tuple:
        self.depth += 1
        if self.depth > _MAX_DEPTH:
            raise self.fail(f"more than {_MAX_DEPTH} nested 'not' or parentheses")
        kind = self.peek()[0]
        if kind == "not":
            self.take()
            tree = ("not", self.not_expr())
        elif kind == "(":
            opening = self.take()
            tree = self.or_expr()
            if self.peek()[0] != ")":
                raise self.fail(f"the parenthesis opened at character {opening[2] + 1} is not closed before "
                                f"{_show(self.peek())}")
            self.take()
        else:
            tree = self.comparison()
        self.depth -= 1
        return tree

    def comparison(self) -> tuple:
        left = self.operand()
        if self.peek()[0] not in _OPERATORS:
            raise self.fail(f"expected a comparison operator (<, <=, >, >=, ==, !=) after {_show_operand(left)}, "
                            f"found {_show(self.peek())}")
        parts = []
        while self.peek()[0] in _OPERATORS:
            operator = self.take()
            right = self.operand()
            if left[0] == "number" and right[0] == "number":
                raise self.fail("a comparison between two numbers (name a column)", operator)
            parts.append(("cmp", operator[0], left, right))
            left = right
        tree = parts[0]
        for part in parts[1:]:
            tree = ("and", tree, part)
        return tree

    def operand(self) -> tuple:
        token = self.take()
        if token[0] == "number":
            return ("number", token[1])
        if token[0] == "name":
            self.names.append(token[1])
            return ("column", token[1])
        raise self.fail(f"expected a column name or a number, found {_show(token)}", token)


def _show(token: tuple) -> str:
    return "the end of the filter" if token[0] == "end" else repr(str(token[1]))


def _show_operand(operand: tuple) -> str:
    return f"column {operand[1]!r}" if operand[0] == "column" else f"number {operand[1]!r}"


def _evaluate(tree: tuple, values: Mapping[str, NDArray]):
    """The mask of ``tree``; a run of one operator (``a and b and c``, a chained comparison) is walked in a loop,
    so recursion goes only as deep as the parentheses and ``not`` (at most ``_MAX_DEPTH``), whatever the length.
    """
    kind = tree[0]
    if kind == "cmp":
        _, operator, left, right = tree
        return _OPERATORS[operator](_operand(left, values), _operand(right, values))
    if kind == "not":
        return np.logical_not(_evaluate(tree[1], values))
    combine = np.logical_and if kind == "and" else np.logical_or
    rights = []
    while tree[0] == kind:  # the parser nests a run to the left: ((a and b) and c) and d
        rights.append(tree[2])
        tree = tree[1]
    result = _evaluate(tree, values)
    for right in reversed(rights):
        result = combine(result, _evaluate(right, values))
    return result


def _operand(operand: tuple, values: Mapping[str, NDArray]):
    return values[operand[1]] if operand[0] == "column" else operand[1]
