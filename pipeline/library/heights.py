"""Heights by kind: ``footprints/heights.csv``, a part kind's own seated height in a package.

A package's ``height_mm`` is the tallest any part in it may be (for chip sizes,
a ceramic capacitor, which may reach the body width). Some kinds are known to
be lower: a chip resistor is as thick as its size code's resistor thickness
(REFERENCES.md section 1). Millimetres.
"""

from __future__ import annotations

from pathlib import Path

from pipeline.errors import LibraryError

from ._data import check_header, csv_number, csv_rows

__all__ = ["HEIGHT_COLUMNS", "read_heights"]

HEIGHT_COLUMNS = ("package", "kind", "height_mm", "source")


def read_heights(path: Path) -> dict[tuple[str, str], tuple[float, str]]:
    """``(package, kind) -> (height mm, source)``, names folded to lower case."""
    header_line, header, rows = csv_rows(path)
    check_header(path, header_line, header, HEIGHT_COLUMNS)
    out: dict[tuple[str, str], tuple[float, str]] = {}
    for line, cells in rows:
        if len(cells) != len(HEIGHT_COLUMNS):
            raise LibraryError(str(path), f"row has {len(cells)} fields, expected "
                               f"{len(HEIGHT_COLUMNS)}", line=line)
        package, kind, height, source = cells
        key = f"{package}.{kind}"
        if not source:
            raise LibraryError(str(path), "source must not be empty", line=line, key=f"{key}.source")
        if (package.casefold(), kind.casefold()) in out:
            raise LibraryError(str(path), "given twice", line=line, key=key)
        out[(package.casefold(), kind.casefold())] = (
            csv_number(height, path, line, f"{key}.height_mm"), source)
    return out
