"""The ``[blocks.NAME]`` tables of a design file or parts map, passed on as :class:`RawTable` values.

Each table declares a circuit block (read later by :mod:`pipeline.circuit`).
The previous release called them ``[stages.NAME]``; that spelling (and the
SPICE record ``* snugboard: stage``) is still read, for one more release, with
a ``design.old-table-name`` warning. A table keeps the key the user wrote
(``stages.lp`` or ``blocks.lp``) so that messages name what is in the file.

Examples
--------
>>> from pipeline.tomlsrc import TomlSource
>>> src = TomlSource.from_text("d.toml", '[blocks.lp]\\ntype = "rc-lowpass"\\n')
>>> tables, notes = block_tables(src, InputError)
>>> (tables[0].name, tables[0].key, tables[0].line, notes)
('lp', 'blocks.lp', 1, [])
>>> src = TomlSource.from_text("d.toml", '[stages.lp]\\ntype = "rc-lowpass"\\n')
>>> tables, notes = block_tables(src, InputError)
>>> (tables[0].key, notes[0].check)
('stages.lp', 'design.old-table-name')
"""

from __future__ import annotations

from typing import Any

from .errors import InputError
from .model import Finding, RawTable
from .tomlsrc import TomlSource

__all__ = ["TABLE", "OLD_TABLE", "RECORD", "OLD_RECORD", "block_tables", "old_name_note"]

#: the table name of a declared block, and its previous release's spelling
TABLE, OLD_TABLE = "blocks", "stages"
#: the ``* snugboard:`` record type of a declared block, and its previous spelling
RECORD, OLD_RECORD = "block", "stage"


def old_name_note(file: str, old: str, new: str) -> Finding:
    """The warning for a block declared under its previous release's name."""
    return Finding("warning", "design.old-table-name", (file,),
                   f"{file}: '{old}' is the previous release's name for '{new}'; read as '{new}' for one "
                   f"more release. Rename it.")


def block_tables(src: TomlSource, error: type[InputError]) -> tuple[tuple[RawTable, ...], list[Finding]]:
    """The declared blocks of ``src`` in file order, and a warning if any use the old table name.

    Parameters
    ----------
    src : TomlSource
        The design file or parts map, read.
    error : type[InputError]
        The error class a malformed table raises (located at its key).

    Returns
    -------
    tuple of RawTable, list of Finding
    """
    if TABLE in src.data and OLD_TABLE in src.data:
        raise src.error(OLD_TABLE, f"give [{TABLE}.NAME] tables only ([{OLD_TABLE}.NAME] is their old "
                                   "name; the file has both)", error)
    top = TABLE if TABLE in src.data else OLD_TABLE
    body = _table(src, top, src.data.get(top, {}), error)
    tables = tuple(
        RawTable(name=name, items=tuple(_table(src, f"{top}.{name}", b, error).items()), file=src.display,
                 key=f"{top}.{name}", line=src.line(f"{top}.{name}") or 0)
        for name, b in body.items()
    )
    notes = [old_name_note(src.display, f"[{OLD_TABLE}.NAME]", f"[{TABLE}.NAME]")] if OLD_TABLE in src.data else []
    return tables, notes


def _table(src: TomlSource, key: str, value: Any, error: type[InputError]) -> dict:
    if not isinstance(value, dict):
        raise src.error(key, f"expected a table, found {type(value).__name__}", error)
    return value
