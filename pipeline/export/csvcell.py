"""CSV text that is safe to open in a spreadsheet.

A cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return
is read as a formula by common spreadsheet programs (CSV / formula
injection: OWASP, "CSV Injection"). :func:`inert` prefixes such a cell with
an apostrophe, as OWASP advises, so that it shows as text. That holds for
every cell: a net named ``+A1`` would otherwise show the value of cell A1,
and a pin named ``-IN1`` the negated value of cell IN1, so the trade's signed
names get the apostrophe too (``netlist.json`` keeps them exact). A lone
``+`` or ``-`` (the pins of a polarized capacitor) refers to nothing and is
kept as it is. Quoting
follows RFC 4180: a cell holding a comma, a double quote, CR or LF is
enclosed in double quotes, inner double quotes doubled; rows end in
``\\r\\n``.

>>> inert("=HYPERLINK(\\"x\\")")
'\\'=HYPERLINK("x")'
>>> inert("-INA"), inert("+A1"), inert("10k"), inert("-")
("'-INA", "'+A1", '10k', '-')
>>> csv_bytes(["a", "b"], [["1", "=2"]])
b"a,b\\r\\n1,'=2\\r\\n"
"""

from __future__ import annotations

import csv
import io
from typing import Callable, Iterable, Sequence

__all__ = ["inert", "csv_bytes"]

#: first characters that make a spreadsheet evaluate a cell (OWASP CSV Injection)
_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
#: cells that start with a trigger yet hold nothing a spreadsheet could evaluate
_LONE_SIGNS = ("+", "-")


def inert(cell: str) -> str:
    """Return ``cell`` made inert for spreadsheets (see module docstring)."""
    return "'" + cell if cell.startswith(_TRIGGERS) and cell not in _LONE_SIGNS else cell


def csv_bytes(header: Sequence[str], rows: Iterable[Sequence[object]], *,
              cell: Callable[[str], str] = inert) -> bytes:
    """UTF-8 CSV (RFC 4180 quoting, CRLF) with every cell passed through ``cell``."""
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow([cell(h) for h in header])
    for r in rows:
        w.writerow([cell("" if c is None else str(c)) for c in r])
    return buf.getvalue().encode("utf-8")
