"""Read a TOML file and find the line each key stands on.

:mod:`tomllib` gives values but no positions. Messages must name the line,
so :func:`load` also scans the text for table headers and ``key =`` lines
and keeps a map from dotted key path to line number. The scan follows the
TOML grammar only as far as locating keys needs (headers, bare / quoted /
dotted keys, multi-line strings and arrays are skipped over by tracking
brackets and quotes); when it cannot place a key it falls back to the
nearest enclosing table's line.

Examples
--------
>>> src = TomlSource.from_text("a.toml", '[parts.R1]\\nkind = "resistor"\\nvalue = "10k"\\n')
>>> src.data["parts"]["R1"]["value"]
'10k'
>>> src.line("parts.R1.value")
3
>>> src.line("parts.R1.package")   # missing key: the table's header line
1

Typed fields: every reader of a TOML file checks its values through the
helpers here (:meth:`TomlSource.number`, :meth:`TomlSource.text`,
:meth:`TomlSource.flag`), so a rule such as "a number is finite" has one
home. The pure checks :func:`number_problem` and :func:`text_problem` return
the reason a value is refused (or ``None``) for readers that locate their
errors their own way.

>>> src = TomlSource.from_text("p.toml", "[order]\\nspares_percent = nan\\n")
>>> src.number("order.spares_percent", src.data["order"]["spares_percent"], lo=0)
Traceback (most recent call last):
...
pipeline.errors.InputError: p.toml:2: order.spares_percent: expected a finite number, found nan
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import InputError

__all__ = ["TomlSource", "load", "number_problem", "text_problem"]

_BARE = r"[A-Za-z0-9_\-]+"
_QUOTED = r'"(?:[^"\\]|\\.)*"|\'[^\']*\''
_KEYPART = rf"(?:{_BARE}|{_QUOTED})"
_DOTTED = rf"{_KEYPART}(?:\s*\.\s*{_KEYPART})*"
_HEADER_RE = re.compile(rf"^\s*\[(\[)?\s*({_DOTTED})\s*\]?\]\s*(?:#.*)?$")
_KEY_RE = re.compile(rf"^\s*({_DOTTED})\s*=")
_PART_RE = re.compile(rf"\s*({_KEYPART})\s*(?:\.|$)")


def _split_dotted(text: str) -> list[str]:
    out = []
    pos = 0
    while pos < len(text):
        m = _PART_RE.match(text, pos)
        if not m:
            break
        k = m.group(1)
        if k[0] in "\"'":
            k = k[1:-1]
        out.append(k)
        pos = m.end()
    return out


_SIGNIFICANT_RE = re.compile(r"[#\"'\[\]{}]")
#: a value text that cannot change the scan's state: no significant character, or one plain basic string
_INERT_RE = re.compile(r"""[^#"'\[\]{}]*(?:"[^"\\]*"[^#"'\[\]{}]*)?""")
_BASIC_REST_RE = re.compile(r'(?:[^"\\]|\\.)*"')  # the rest of a basic string, through its closing quote


def _scan_value(rest: str, depth: int, array_key: str | None, elements: int, no: int,
                lines: dict[str, int]) -> tuple[int, int, str | None]:
    """Follow brackets and strings along the value text ``rest`` of line ``no``.

    Returns ``(depth, elements, in_ml)``: the bracket depth after the line,
    the inline tables counted so far in ``array_key``'s array (each one's
    line goes to ``lines`` as ``KEY[i]``) and the delimiter of a multi-line
    string left open, or None. Visits only the significant characters.
    """
    if _INERT_RE.fullmatch(rest):
        return depth, elements, None
    n = len(rest)
    find = _SIGNIFICANT_RE.search
    m = find(rest, 0)
    while m is not None:
        i = m.start()
        c = rest[i]
        if c == "#":
            break
        if c in "\"'":
            if rest.startswith(c * 3, i):
                j = rest.find(c * 3, i + 3)
                if j < 0:
                    return depth, elements, c * 3
                i = j + 3
            elif c == '"':
                s = _BASIC_REST_RE.match(rest, i + 1)
                if s is None:
                    break
                i = s.end()
            else:
                j = rest.find("'", i + 1)
                if j < 0:
                    break
                i = j + 1
        else:
            if c in "[{":
                if c == "{" and depth == 1 and array_key is not None:
                    lines.setdefault(f"{array_key}[{elements}]", no)  # KEY[i]: i-th inline table
                    elements += 1
                depth += 1
            else:
                depth = max(0, depth - 1)
            i += 1
        if i >= n:
            break
        m = find(rest, i)
    return depth, elements, None


#: a line the scan can take whole (:func:`_scan_lines`, outside any value): a plain ``[a.b]`` header,
#: ``key = value`` with a bare key and a value that leaves the scan's state as it was (as
#: ``_INERT_RE``, or an array of plain basic strings closed on the line), a comment or nothing
_PLAIN_LINE_RE = re.compile(
    r"[ \t]*(?:\[(?P<h>[A-Za-z0-9_\-]+(?:\.[A-Za-z0-9_\-]+)*)\][ \t]*(?:#.*)?"
    r"|(?P<k>[A-Za-z0-9_\-]+)[ \t]*=[^#\"'\[\]{}]*"
    r"(?:\"[^\"\\]*\"[^#\"'\[\]{}]*|\[(?:[^#\"'\[\]{}]|\"[^\"\\]*\")*\][^#\"'\[\]{}]*)?"
    r"|(?:#.*)?)")


def _scan_lines(text: str, plain: bool = True) -> dict[str, int]:
    """Map dotted key paths to 1-based line numbers (first occurrence).

    Cost: each line is read once, and within a value only the characters
    that matter (quotes, brackets, braces, ``#``) are visited, found by a
    compiled pattern (:func:`_scan_value`). A plain line outside any value
    (``_PLAIN_LINE_RE``: most lines of a design) is taken by that one
    pattern match; ``plain=False`` sends every line the general way (the
    tests compare the two).
    """
    lines: dict[str, int] = {}
    table: list[str] = []
    prefix = ""  # the table's path and a dot ("" at the top)
    depth = 0  # bracket / brace depth of an unfinished value
    in_ml: str | None = None  # inside a multi-line string: its delimiter
    array_counts: dict[str, int] = {}
    array_key: str | None = None  # the key whose multi-line array is open
    elements = 0  # inline tables seen so far in that array
    fast = _PLAIN_LINE_RE.fullmatch if plain else None
    for no, line in enumerate(text.splitlines(), start=1):
        if in_ml:
            if in_ml in line:
                in_ml = None
            continue
        if depth == 0:
            if fast is not None:
                m = fast(line)
                if m is not None:
                    key, head = m.group("k", "h")
                    if key is not None:
                        array_key, elements = prefix + key, 0
                        lines.setdefault(array_key, no)
                    elif head is not None:
                        table, prefix = head.split("."), head + "."
                        lines.setdefault(head, no)
                    continue
            h = _HEADER_RE.match(line)
            if h:
                keys = _split_dotted(h.group(2))
                path = ".".join(keys)
                if h.group(1):  # [[array of tables]]
                    n = array_counts.get(path, 0)
                    array_counts[path] = n + 1
                    path = f"{path}.{n}"
                    keys = path.split(".")
                table = keys
                prefix = ".".join(table) + "." if table else ""
                lines.setdefault(path, no)
                continue
            k = _KEY_RE.match(line)
            if k:
                keys = table + _split_dotted(k.group(1))
                lines.setdefault(".".join(keys), no)
                rest = line[k.end():]
                array_key, elements = ".".join(keys), 0
            else:
                rest = line
        else:
            rest = line
        # track multi-line strings and open brackets in the value part
        depth, elements, in_ml = _scan_value(rest, depth, array_key, elements, no, lines)
    return lines


def number_problem(v: Any, *, integer: bool = False, lo: float | None = None, hi: float | None = None,
                   lo_open: bool = False) -> str | None:
    """Why ``v`` is not an acceptable number, or ``None`` when it is.

    A number is an int or float (never a bool), finite (TOML allows
    ``nan`` and ``inf``, which no quantity here can be), a whole number when
    ``integer``, and within ``[lo, hi]`` (``(lo, hi]`` when ``lo_open``).

    >>> number_problem(2.5, lo=0), number_problem(float("inf"))
    (None, 'expected a finite number, found inf')
    >>> number_problem(1.5, integer=True), number_problem(0, lo=0, lo_open=True)
    ('expected a whole number, found 1.5', 'must be greater than 0, found 0')
    """
    if isinstance(v, bool) or not isinstance(v, (int, float)) or (integer and not isinstance(v, int)):
        return f"expected {'a whole number' if integer else 'a number'}, found {v!r}"
    if not math.isfinite(v):
        return f"expected a finite number, found {v!r}"
    if lo is not None and (v < lo or (lo_open and v == lo)):
        return f"must be {'greater than' if lo_open else 'at least'} {lo:g}, found {v!r}"
    if hi is not None and v > hi:
        return f"must be at most {hi:g}, found {v!r}"
    return None


def text_problem(v: Any, *, choices: tuple[str, ...] | None = None, path: bool = False) -> str | None:
    """Why ``v`` is not acceptable text, or ``None`` when it is.

    Text is a non-blank string; with ``choices`` one of them; a ``path``
    holds no NUL character (no file system accepts one).

    >>> text_problem("a\\x00b", path=True), text_problem("x", choices=("a", "b"))
    ('a path cannot hold a NUL character', "'x' is not one of: a, b")
    """
    if not isinstance(v, str) or not v.strip():
        return f"expected text, found {v!r}"
    if choices and v not in choices:
        return f"'{v}' is not one of: {', '.join(choices)}"
    if path and "\x00" in v:
        return "a path cannot hold a NUL character"
    return None


@dataclass(frozen=True)
class TomlSource:
    """A parsed TOML file with key-to-line lookup.

    ``display`` is the file name as shown to the user.
    """

    display: str
    data: dict[str, Any]
    lines: dict[str, int] = field(repr=False)

    @classmethod
    def from_text(cls, display: str, text: str, error: type[InputError] = InputError) -> "TomlSource":
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            msg = str(exc)
            m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
            line = int(m.group(1)) if m else None
            reason = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
            if m:
                reason += f" (column {m.group(2)})"
            raise error(display, f"not valid TOML: {reason}", line=line) from None
        return cls(display, data, _scan_lines(text))

    def line(self, key: str) -> int | None:
        """Line of ``key`` (dotted path), or of its nearest enclosing key."""
        parts = key.split(".")
        while parts:
            k = ".".join(parts)
            if k in self.lines:
                return self.lines[k]
            parts.pop()
        return None

    def error(self, key: str, reason: str, cls: type[InputError] = InputError, **kw: Any) -> InputError:
        """Build an error located at ``key`` (never raised here)."""
        return cls(self.display, reason, line=self.line(key), key=key, **kw)

    def number(self, key: str, v: Any, cls: type[InputError] = InputError, *, integer: bool = False,
               lo: float | None = None, hi: float | None = None, lo_open: bool = False) -> Any:
        """``v`` if it passes :func:`number_problem`, else raise ``cls`` located at ``key``."""
        problem = number_problem(v, integer=integer, lo=lo, hi=hi, lo_open=lo_open)
        if problem:
            raise self.error(key, problem, cls)
        return v

    def text(self, key: str, v: Any, cls: type[InputError] = InputError, *,
             choices: tuple[str, ...] | None = None, path: bool = False) -> str:
        """``v`` if it passes :func:`text_problem`, else raise ``cls`` located at ``key``."""
        problem = text_problem(v, choices=choices, path=path)
        if problem:
            raise self.error(key, problem, cls)
        return v

    def flag(self, key: str, v: Any, cls: type[InputError] = InputError) -> bool:
        """``v`` if it is ``true`` or ``false``, else raise ``cls`` located at ``key``."""
        if not isinstance(v, bool):
            raise self.error(key, f"expected true or false, found {v!r}", cls)
        return v


def load(path: Path, display: str | None = None, error: type[InputError] = InputError) -> TomlSource:
    """Read and parse ``path``; unreadable or malformed files raise ``error``."""
    shown = display or str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise error(shown, "file not found") from None
    except IsADirectoryError:
        raise error(shown, "is a folder, expected a file") from None
    except OSError as exc:
        raise error(shown, f"cannot read the file ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise error(shown, "not UTF-8 text", line=line) from None
    return TomlSource.from_text(shown, text, error)
