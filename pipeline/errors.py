"""The one exception tree of snugboard.

Every error a user can cause is an :class:`InputError`. It carries the file,
the place inside it (a line, a key, a ref or pin, a DXF entity, a point in
drawing units) and the reason, and builds its message once, here. The CLI
shows ``str(error)`` and exits with :attr:`SnugboardError.exit_status`; no
other module formats error text or chooses exit codes.

Examples
--------
>>> str(InputError("design.toml", "value '4x7' is not a number", line=12, key="parts.R1.value"))
"design.toml:12: parts.R1.value: value '4x7' is not a number"
>>> str(InputError("bay.dxf", "chain does not close", entity="LINE #2F", at=(10.0, 4.5)))
'bay.dxf: LINE #2F at (10, 4.5): chain does not close'

Text taken from input files (names, keys, values) may hold terminal control
characters; every message is passed through :func:`shown`, which writes
them as escapes, so a message can never move the cursor, clear the screen
or reverse the text around it:

>>> print(str(InputError("d.toml", "no net 'A\\x1b[2J\\u202eB'", line=3)))
d.toml:3: no net 'A\\x1b[2J\\u202eB'
"""

from __future__ import annotations

import unicodedata
from dataclasses import dataclass

__all__ = [
    "limit_hint",
    "shown",
    "SnugboardError",
    "InputError",
    "ProjectError",
    "DesignError",
    "CavityError",
    "LibraryError",
    "UnknownNameError",
    "OutputError",
    "ValueTextError",
    "Where",
]


def _num(v: float) -> str:
    return f"{v:.6g}"


#: Unicode categories shown escaped: controls (C0, DEL, C1: ESC, CR, BEL...), format characters
#: (right-to-left and left-to-right overrides and isolates, zero-width characters), line and paragraph
#: separators, and lone surrogates (undecodable bytes). Unicode Standard, chapter 4 (General Category).
_ESCAPED = frozenset({"Cc", "Cf", "Zl", "Zp", "Cs"})


def shown(text: str) -> str:
    """``text`` with every control or format character written as an escape.

    ``\\xNN`` below U+0100, ``\\uNNNN`` up to U+FFFF, ``\\UNNNNNNNN`` above (the
    forms of Python string literals); everything else is kept, non-ASCII
    letters and symbols included. Cost: one pass over the text.

    >>> shown("a\\tb\\rc\\x1bd\\u202ee\\u2066 \\u00b1 \\u00e9")
    'a\\\\tb\\\\rc\\\\x1bd\\\\u202ee\\\\u2066 ± é'
    """
    if text.isprintable():
        return text
    out = []
    for c in text:
        if unicodedata.category(c) not in _ESCAPED:
            out.append(c)
        elif c in "\t\r\n":
            out.append({"\t": "\\t", "\r": "\\r", "\n": "\\n"}[c])
        else:
            n = ord(c)
            out.append(f"\\x{n:02x}" if n < 0x100 else f"\\u{n:04x}" if n < 0x10000 else f"\\U{n:08x}")
    return "".join(out)


class SnugboardError(Exception):
    """Base of every error snugboard raises on purpose.

    ``exit_status`` is the process status the CLI uses (CONTRACT section 4:
    2 = bad input).
    """

    exit_status = 2

    @property
    def message(self) -> str:
        return str(self)


class InputError(SnugboardError):
    """Bad input: names the file, where in it, and why.

    Parameters
    ----------
    file : str
        The file as the user named it (relative where possible, never
        made absolute here).
    reason : str
        One sentence the user can act on.
    line : int, optional
        1-based line number in a text file.
    key : str, optional
        Dotted key path in a TOML file, e.g. ``parts.R1.value``.
    ref : str, optional
        A part reference or ``REF.PIN``.
    entity : str, optional
        A DXF entity description, e.g. ``"LINE #2F on layer Outline"``.
    at : (float, float), optional
        A point in drawing units.
    """

    def __init__(
        self,
        file: str,
        reason: str,
        *,
        line: int | None = None,
        key: str | None = None,
        ref: str | None = None,
        entity: str | None = None,
        at: tuple[float, float] | None = None,
    ) -> None:
        self.file = str(file)
        self.reason = reason
        self.line = line
        self.key = key
        self.ref = ref
        self.entity = entity
        self.at = at
        super().__init__(self._build())

    def _build(self) -> str:
        head = self.file
        if self.line is not None:
            head += f":{self.line}"
        parts = [head]
        if self.key:
            parts.append(self.key)
        if self.ref:
            parts.append(self.ref)
        where = self.entity or ""
        if self.at is not None:
            pt = f"at ({_num(self.at[0])}, {_num(self.at[1])})"
            where = f"{where} {pt}" if where else pt
        if where:
            parts.append(where)
        return shown(": ".join(parts) + ": " + self.reason)


class ProjectError(InputError):
    """Bad ``project.toml`` or command-line combination."""


class DesignError(InputError):
    """Bad design file (TOML or SPICE)."""


class CavityError(InputError):
    """Bad cavity drawing (DXF)."""


class LibraryError(InputError):
    """Bad footprint or part-kind data under ``footprints/``."""


class UnknownNameError(LibraryError, DesignError):
    """A package, kind or density level the library does not know.

    Raised where the name was written (a design file and key, the command
    line); ``name`` is what was asked for, ``suggestions`` the closest known
    names, already part of the message. It is a design error as much as a
    library one, so callers need not translate it.
    """

    def __init__(self, file: str, reason: str, *, name: str = "",
                 suggestions: tuple[str, ...] = (), **where: object) -> None:
        self.name = name
        self.suggestions = tuple(suggestions)
        super().__init__(file, reason, **where)  # type: ignore[arg-type]


class ValueTextError(InputError):
    """Text that is not a valid value, tolerance, rating, target or number.

    Raised by the parsers of :mod:`pipeline.values` (and the SPICE and target
    parsers built on them) when they are given no :class:`Where`: the message
    is then the reason alone. Given a ``Where``, they raise the located error
    it builds instead, so no caller translates errors by hand.

    >>> str(ValueTextError("'4x7' is not a value"))
    "'4x7' is not a value"
    """

    def __init__(self, reason: str) -> None:
        super().__init__("", reason)

    def _build(self) -> str:
        return shown(self.reason)


@dataclass(frozen=True)
class Where:
    """Where a piece of value text stands in the user's input, for a parser to raise a located error.

    ``reason`` (optional) replaces the parser's reason where the caller's
    wording says more (e.g. that a key takes a voltage or a net name).

    >>> w = Where("design.toml", 12, "parts.R1.value")
    >>> str(w.error("'4x7' is not a value"))
    "design.toml:12: parts.R1.value: '4x7' is not a value"
    >>> type(w.error("x")).__name__, type(Where("p.toml", kind=ProjectError).error("x")).__name__
    ('DesignError', 'ProjectError')
    """

    file: str
    line: int | None = None
    key: str | None = None
    reason: str = ""
    kind: type[InputError] = DesignError

    def error(self, reason: str) -> InputError:
        """The located error (of class ``kind``) for ``reason``."""
        return self.kind(self.file, self.reason or reason, line=self.line, key=self.key)


class OutputError(SnugboardError):
    """An output could not be written (never overwrites the user's own files)."""

    def __init__(self, path: str, reason: str) -> None:
        self.path = str(path)
        self.reason = reason
        super().__init__(shown(f"{self.path}: {reason}"))


def limit_hint(key: str) -> str:
    """How to raise the limit ``key``: a clause for the end of a message.

    Examples
    --------
    >>> limit_hint("expression_depth")
    'this is the expression_depth limit; raise it in project.toml with [limits] expression_depth = ...'
    """
    return f"this is the {key} limit; raise it in project.toml with [limits] {key} = ..."
