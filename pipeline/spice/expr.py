"""Parameter expressions (``{...}`` and ``'...'``) and the scopes that hold ``.param`` values.

Both the expression evaluator and the parameter lookup are iterative (an
explicit operator stack; an explicit stack of parameters waiting for the
ones they use), so no input can exhaust Python's call stack. Their depth is
still bounded by :data:`pipeline.spice.limits.EXPRESSION_DEPTH`, with a
message naming the limit: nesting that deep is a generated or broken file.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Callable

from ..errors import ValueTextError, limit_hint
from .limits import EXPRESSION_DEPTH
from .numbers import parse_number

_EXPR_TOKEN = re.compile(
    r"\s*(?:(?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*)"
    r"|(?P<name>[A-Za-z_][\w.]*)|(?P<op>\*\*|[-+*/^()]))"
)

#: Binary operators: precedence and right-associativity. Unary signs bind
#: between ``* /`` and ``^`` (``-2^2`` is -4, ``-a*b`` is ``(-a)*b``), as the
#: recursive grammar this replaces did: add := mul {+- mul}; mul := power
#: {*/ power}; power := atom [^ power]; atom := ( add ) | +- power | value.
_BINARY = {"+": (1, False), "-": (1, False), "*": (2, False), "/": (2, False), "^": (4, True), "**": (4, True)}
_UNARY_PREC = 3


class ExprError(Exception):
    """A bad expression; ``where`` is ``(file, line)`` when the fault lies in a ``.param`` line."""

    def __init__(self, reason: str, where: tuple[str, int] | None = None) -> None:
        super().__init__(reason)
        self.reason = reason
        self.where = where


def _tokenize(text: str) -> list[tuple[str, str]]:
    tokens: list[tuple[str, str]] = []
    pos = 0
    while pos < len(text):
        m = _EXPR_TOKEN.match(text, pos)
        if not m or m.end() == pos:
            if text[pos:].strip() == "":
                break
            raise ExprError(f"cannot read '{text[pos:].strip()}' in the expression '{text}'")
        kind = m.lastgroup
        tokens.append((kind, m.group(kind)))
        pos = m.end()
    if not tokens:
        raise ExprError("the expression is empty")
    return tokens


def names_in(text: str) -> list[str]:
    """The parameter names an expression uses, in order (empty when it cannot be read)."""
    try:
        return [v for k, v in _tokenize(text.strip()) if k == "name"]
    except ExprError:
        return []


def _apply(op: str, vals: list[float], text: str) -> None:
    """Pop the operands of ``op`` from ``vals`` and push its result."""
    if op in ("u-", "u+"):
        v = vals.pop()
        vals.append(-v if op == "u-" else v)
        return
    r = vals.pop()
    v = vals.pop()
    if op in ("^", "**"):
        try:
            vals.append(float(v ** r))
        except (OverflowError, ZeroDivisionError, TypeError):
            raise ExprError(f"'{text}' is out of range or not a real number") from None
    elif op == "*":
        vals.append(v * r)
    elif op == "/":
        if r == 0:
            raise ExprError(f"'{text}' divides by zero")
        vals.append(v / r)
    else:
        vals.append(v + r if op == "+" else v - r)


def _operand(tok: tuple[str, str], nxt: tuple[str, str] | None, lookup: Callable[[str], float]) -> float:
    if tok[0] == "num":
        try:
            return parse_number(tok[1])
        except ValueTextError as exc:
            raise ExprError(exc.reason) from None
    if nxt == ("op", "("):
        raise ExprError(f"function '{tok[1]}(...)' is not supported; use a plain value")
    return lookup(tok[1])


def evaluate(text: str, lookup: Callable[[str], float], *, depth: int = EXPRESSION_DEPTH) -> float:
    """Evaluate a parameter expression: numbers, names, ``+ - * / ^ **`` and brackets.

    Method: operator precedence with an explicit operator stack (Dijkstra's
    shunting-yard, evaluating as it reduces); cost linear in the length.
    More than ``depth`` pending operators (brackets, signs, ``^`` chains)
    is an :class:`ExprError` naming the limit.
    """
    text = text.strip()
    tokens = _tokenize(text)
    vals: list[float] = []
    ops: list[str] = []
    want_operand = True
    for i, (kind, tok) in enumerate(tokens):
        if len(ops) > depth:
            raise ExprError(f"the expression nests deeper than {depth} levels; {limit_hint('expression_depth')}")
        if want_operand:
            if (kind, tok) == ("op", "("):
                ops.append("(")
            elif kind == "op" and tok in "+-":
                ops.append("u" + tok)
            elif kind in ("num", "name"):
                vals.append(_operand((kind, tok), tokens[i + 1] if i + 1 < len(tokens) else None, lookup))
                want_operand = False
            else:
                raise ExprError(f"unexpected '{tok}' in '{text}'")
            continue
        if (kind, tok) == ("op", ")"):
            while ops and ops[-1] != "(":
                _apply(ops.pop(), vals, text)
            if not ops:
                raise ExprError(f"unexpected ')' in '{text}'")
            ops.pop()
            continue
        if kind != "op" or tok not in _BINARY:
            raise ExprError(f"unexpected '{tok}' in '{text}'")
        prec, right = _BINARY[tok]
        while ops and ops[-1] != "(":
            top = _UNARY_PREC if ops[-1] in ("u-", "u+") else _BINARY[ops[-1]][0]
            if top > prec or (top == prec and not right):
                _apply(ops.pop(), vals, text)
            else:
                break
        ops.append(tok)
        want_operand = True
    if want_operand:
        raise ExprError(f"the expression '{text}' ends too early")
    while ops:
        op = ops.pop()
        if op == "(":
            raise ExprError(f"a ')' is missing in '{text}'")
        _apply(op, vals, text)
    value = vals[-1]
    if isinstance(value, complex) or not math.isfinite(value):
        raise ExprError(f"'{text}' is not a finite number")
    return float(value)


@dataclass
class Scope:
    """Parameter names (lower case) -> expression text, evaluated lazily, once.

    A name not defined here is looked up in ``parent``. :meth:`get`
    resolves a chain of parameters each defined by the next with an
    explicit stack (depth at most ``depth``), so a long chain costs time
    linear in its length and never the call stack.
    """

    raw: dict[str, tuple[str, str, int]]  # name -> (text, file, line)
    parent: "Scope | None" = None
    cache: dict[str, float] = field(default_factory=dict)
    depth: int = EXPRESSION_DEPTH

    def owner(self, name: str) -> "Scope | None":
        """The scope that defines ``name`` (this one or an ancestor), or ``None``."""
        key = name.lower()
        s: Scope | None = self
        while s is not None and key not in s.raw:
            s = s.parent
        return s

    def get(self, name: str) -> float:
        key = name.lower()
        scope = self.owner(key)
        if scope is None:
            raise ExprError(f"no parameter '{name}' (define it with .param {name}=...)")
        if key not in scope.cache:
            _resolve(scope, key, name, self.depth)
        return scope.cache[key]


def _resolve(scope: Scope, key: str, name: str, depth: int) -> None:
    """Evaluate ``scope``'s parameter ``key`` after every parameter it uses (explicit DFS)."""
    stack: list[tuple[Scope, str, str]] = [(scope, key, name)]
    busy: set[tuple[int, str]] = {(id(scope), key)}
    while stack:
        sc, k, shown = stack[-1]
        text, file, line = sc.raw[k]
        pending = None
        for used in names_in(strip_braces(text)):
            owner = sc.owner(used)
            if owner is not None and used.lower() not in owner.cache:
                pending = (owner, used.lower(), used)
                break
        if pending is not None:
            mark = (id(pending[0]), pending[1])
            if mark in busy:
                raise ExprError(f"parameter '{shown}': parameter '{pending[2]}' is defined in terms of itself",
                                (file, line))
            if len(stack) >= depth:
                raise ExprError(f"parameter '{shown}': parameters refer to each other more than {depth} deep; "
                                f"{limit_hint('expression_depth')}", (file, line))
            busy.add(mark)
            stack.append(pending)
            continue
        try:
            sc.cache[k] = evaluate(strip_braces(text), sc.get, depth=depth)
        except ExprError as exc:
            if exc.where is not None:
                raise
            raise ExprError(f"parameter '{shown}': {exc.reason}", (file, line)) from None
        busy.discard((id(sc), k))
        stack.pop()


def strip_braces(text: str) -> str:
    t = text.strip()
    if len(t) >= 2 and ((t[0] == "{" and t[-1] == "}") or (t[0] == "'" and t[-1] == "'")):
        return t[1:-1]
    return t
