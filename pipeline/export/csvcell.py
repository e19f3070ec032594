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
import re
from typing import Callable, Iterable, Sequence

__all__ = ["inert", "inert_name", "csv_bytes"]

_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_SIGNED = re.compile(r"^[+-][A-Za-z0-9_]*$")


def inert(cell: str) -> str:
    """Return ``cell`` made inert for spreadsheets (see module docstring)."""
    return "'" + cell if cell.startswith(_TRIGGERS) else cell


def inert_name(cell: str) -> str:
    """Like :func:`inert`, but keeps the trade's signed pin names as they are.

    ``+``, ``-``, ``+IN``, ``-INA``: a sign followed only by letters, digits
    or ``_`` cannot call a function or reach another program, so a
    spreadsheet shows at worst an error value; anything else starting with a
    trigger is made inert.

    >>> inert_name("-INA"), inert_name("+"), inert_name("-1+cmd|x")
    ('-INA', '+', "'-1+cmd|x")
    """
    return cell if _PLAIN_SIGNED.match(cell) else inert(cell)


def csv_bytes(header: Sequence[str], rows: Iterable[Sequence[object]], *,
              cell: Callable[[str], str] = inert) -> bytes:
    """UTF-8 CSV (RFC 4180 quoting, CRLF) with every cell passed through ``cell``."""
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow([cell(h) for h in header])
    for r in rows:
        w.writerow([cell("" if c is None else str(c)) for c in r])
    return buf.getvalue().encode("utf-8")
