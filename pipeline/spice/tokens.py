"""Splitting a logical line into tokens, nodes and ``key=value`` parameters."""

from __future__ import annotations

import re
from typing import Callable

from ..errors import DesignError
from .lines import Line

REF_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")


_TOKEN_RE = re.compile(r"\{[^}]*\}|'[^']*'|\"[^\"]*\"|=|[^\s=]+")


def split_tokens(text: str, *, drop_brackets: bool = False) -> list[str]:
    if drop_brackets:
        text = debracket(text)
    raw = _TOKEN_RE.findall(text)
    out: list[str] = []
    i = 0
    while i < len(raw):
        t = raw[i]
        if t == "=" and out and i + 1 < len(raw):
            out[-1] = out[-1] + "=" + raw[i + 1]
            i += 2
            continue
        if t.endswith("=") and len(t) > 1 and i + 1 < len(raw):
            out.append(t + raw[i + 1])
            i += 2
            continue
        out.append(t)
        i += 1
    # "a =b" style: token "=b" glued to the one before
    merged: list[str] = []
    for t in out:
        if t.startswith("=") and merged:
            merged[-1] += t
        else:
            merged.append(t)
    return merged


def debracket(text: str) -> str:
    """Turn ``( ) ,`` outside braces and quotes into blanks."""
    out = []
    depth = 0
    quote = ""
    for ch in text:
        if quote:
            out.append(ch)
            if ch == quote:
                quote = ""
            continue
        if ch in "'\"":
            quote = ch
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth = max(0, depth - 1)
        elif depth == 0 and ch in "(),":
            out.append(" ")
            continue
        out.append(ch)
    return "".join(out)


def is_kv(token: str) -> bool:
    return "=" in token and not token.startswith(("{", "'", '"'))


def nodes_and_params(
    toks: list[str], ln: Line, *, prefix: str, after: Callable[[str], str]
) -> tuple[list[str], dict[str, tuple[str, str, int]]]:
    """Split a ``.subckt`` header's or an X line's tokens into nodes and ``key=value`` parameters.

    An optional ``params:`` marker is skipped; parameters come last, so a
    node after one is an error (``after(token)`` gives its message).
    Parameter values keep their file and line for later messages.
    """
    nodes: list[str] = []
    params: dict[str, tuple[str, str, int]] = {}
    for t in toks:
        if t.lower() in ("params:", "param:"):
            continue
        if is_kv(t):
            k, v = t.split("=", 1)
            if not k or not v:
                raise DesignError(ln.file, f"{prefix}cannot read the parameter '{t}'", line=ln.line)
            params[k.lower()] = (v, ln.file, ln.line)
        elif params:
            raise DesignError(ln.file, after(t), line=ln.line)
        else:
            nodes.append(t)
    return nodes, params
