"""CSV text that is safe to open in a spreadsheet.

A cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return
is read as a formula by common spreadsheet programs (CSV / formula
injection, OWASP). :func:`inert` prefixes such a cell with an apostrophe so
it shows as text. Rows end in ``\\r\\n`` as RFC 4180 says.

>>> inert("=HYPERLINK(\\"x\\")")
'\\'=HYPERLINK("x")'
>>> inert("-INA"), inert("10k")
("'-INA", '10k')
>>> csv_bytes(["a", "b"], [["1", "=2"]])
b"a,b\\r\\n1,'=2\\r\\n"
"""

from __future__ import annotations

import csv
import io
from typing import Iterable, Sequence

__all__ = ["inert", "csv_bytes"]

_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def inert(cell: str) -> str:
    """Return ``cell`` made inert for spreadsheets (see module docstring)."""
    return "'" + cell if cell.startswith(_TRIGGERS) else cell


def csv_bytes(header: Sequence[str], rows: Iterable[Sequence[object]]) -> bytes:
    """UTF-8 CSV (RFC 4180 quoting, CRLF) with every cell made inert."""
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow([inert(h) for h in header])
    for r in rows:
        w.writerow([inert("" if c is None else str(c)) for c in r])
    return buf.getvalue().encode("utf-8")
