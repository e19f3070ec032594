"""Reading the files under ``footprints/``: CSV rows and TOML tables, checked, with places.

Every malformed cell or key raises :class:`~pipeline.errors.LibraryError` naming
the file and the line and key. TOML files are read through
:mod:`pipeline.tomlsrc`, the project's one key-to-line locator.
"""

from __future__ import annotations

import csv
import math
import re
from pathlib import Path
from typing import Any, Iterable, Mapping

from pipeline.errors import LibraryError
from pipeline.tomlsrc import TomlSource, load, number_problem

#: Package, family and alias names: a letter or digit, then letters, digits, ``.+-``.
NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9.+\-]*$")
#: Family and other lower-case tokens.
TOKEN_RE = re.compile(r"^[a-z0-9][a-z0-9\-]*$")


def fmt_number(value: float) -> str:
    """A short text for a number: ``0.5``, ``12``."""
    return f"{round(value, 6):g}"


def compact(text: str) -> str:
    """``text`` folded and without ``-``, ``_`` or spaces (``SOT23-5`` ~ ``SOT-23-5``)."""
    return re.sub(r"[\s_\-]+", "", text.casefold())


def read_toml(path: Path) -> TomlSource:
    """Parse ``path`` with key-to-line lookup; bad files raise LibraryError."""
    return load(path, str(path), LibraryError)


def read_text(path: Path) -> str:
    """The UTF-8 text of ``path``; unreadable files raise LibraryError."""
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError as e:
        raise LibraryError(str(path), f"not UTF-8 text ({e.reason})") from None
    except OSError as e:
        raise LibraryError(str(path), f"cannot be read ({e.strerror})") from None


class Fields:
    """Checked reads of the keys of one TOML table, each error at its key's line."""

    def __init__(self, src: TomlSource, prefix: str) -> None:
        self.src = src
        self.prefix = prefix

    def key(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name

    def error(self, name: str, reason: str) -> LibraryError:
        key = self.key(name)
        return LibraryError(self.src.display, reason, line=self.src.line(key), key=key)

    def here(self, reason: str) -> LibraryError:
        """An error about the table itself, at its header line."""
        return LibraryError(self.src.display, reason, line=self.src.line(self.prefix) if self.prefix
                            else None, key=self.prefix or None)

    def check_keys(self, table: Mapping[str, Any], allowed: Iterable[str],
                   required: Iterable[str]) -> None:
        """Unknown keys and missing required keys are errors."""
        allowed = set(allowed)
        for k in sorted(table):
            if k not in allowed:
                raise self.error(k, f"unknown key '{k}' (allowed: {', '.join(sorted(allowed))})")
        for k in required:
            if k not in table:
                raise LibraryError(self.src.display, f"missing key '{k}'",
                                   line=self.src.line(self.prefix) if self.prefix else None,
                                   key=self.key(k))

    def number(self, name: str, value: Any, *, minimum: float | None = 0.0,
               strict: bool = False) -> float:
        """A finite number, at least (``strict``: above) ``minimum`` unless that is None."""
        problem = number_problem(value, lo=minimum, lo_open=strict)  # the one rule for TOML numbers
        if problem:
            raise self.error(name, problem)
        return float(value)

    def text(self, name: str, value: Any, *, required: bool = True) -> str:
        """A text; an empty one is an error when ``required``."""
        if not isinstance(value, str):
            raise self.error(name, f"expected text, got {value!r}")
        if required and not value.strip():
            raise self.error(name, "must not be empty")
        return value.strip()

    def flag(self, name: str, value: Any) -> bool:
        if not isinstance(value, bool):
            raise self.error(name, f"expected true or false, got {value!r}")
        return value


def csv_rows(path: Path) -> tuple[int, list[str], list[tuple[int, list[str]]]]:
    """Header line number, header cells and (line, cells) rows of a CSV file.

    Blank lines and lines starting with ``#`` are skipped; each record must
    sit on one line.
    """
    text = read_text(path)
    header: list[str] | None = None
    header_line = 0
    rows: list[tuple[int, list[str]]] = []
    for number, line in enumerate(text.splitlines(), start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        try:
            cells = next(csv.reader([line], strict=True))
        except (csv.Error, StopIteration) as e:
            raise LibraryError(str(path), f"not a valid CSV row ({e})", line=number) from None
        cells = [c.strip() for c in cells]
        if header is None:
            header, header_line = cells, number
        else:
            rows.append((number, cells))
    if header is None:
        raise LibraryError(str(path), "no header row")
    return header_line, header, rows


def check_header(path: Path, header_line: int, header: list[str],
                 columns: tuple[str, ...]) -> None:
    """The header must be exactly ``columns``, in order."""
    if tuple(header) == columns:
        return
    missing = [c for c in columns if c not in header]
    extra = [c for c in header if c not in columns]
    detail = []
    if missing:
        detail.append("missing " + ", ".join(missing))
    if extra:
        detail.append("unknown " + ", ".join(extra))
    if not detail:
        detail.append("columns out of order")
    raise LibraryError(str(path), f"header must be {','.join(columns)} ({'; '.join(detail)})",
                       line=header_line)


def csv_number(cell: str, path: Path, line: int, key: str, *, minimum: float = 0.0,
               strict: bool = True) -> float:
    """The number in a CSV cell, above (``strict``) or at least ``minimum``."""
    try:
        v = float(cell)
    except ValueError:
        raise LibraryError(str(path), f"'{cell}' is not a number", line=line, key=key) from None
    if not math.isfinite(v):
        raise LibraryError(str(path), f"'{cell}' is not a finite number", line=line, key=key)
    if v < minimum or (strict and v == minimum):
        rel = "greater than" if strict else "at least"
        raise LibraryError(
            str(path), f"must be {rel} {fmt_number(minimum)}, got '{cell}'", line=line, key=key
        )
    return v
