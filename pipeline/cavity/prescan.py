"""A cheap look at an ASCII DXF file's tags before ezdxf builds the document.

Building a document costs about 140 microseconds and 800 bytes per entity
(measured with ezdxf 1.4.5: one million LINEs took 141 s and 800 MiB), so
the entity count limit is checked here, on the raw bytes, where counting
costs a regular-expression match per record and stops at the limit. The same
pass finds two things ezdxf would hide: whether the file has a HEADER
section at all (without one it declares no units, whatever defaults ezdxf
fills in), and coordinates written with a decimal comma (which ezdxf's
repair would cut off at the comma).

The DXF tag stream is pairs of lines, a group code then a value (DXF
reference, "ASCII DXF files"). A line ``0`` followed by a name is a record
start; value lines are always followed by code lines (integers), so a
pattern of a code line and its value line cannot match across a pair
boundary.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from pipeline.errors import CavityError

from .limits import Limits

__all__ = ["Prescan", "prescan"]

# A record start: code line "0", then the record's name. The pattern starts with the newline
# before the code line (a literal prefix the regular-expression engine searches for quickly);
# _FIRST matches a record at the very start of the file.
_RECORD = re.compile(rb"\n[ \t]*0[ \t]*\r?\n[ \t]*([A-Za-z_$][A-Za-z0-9_$]*)[ \t]*\r?(?=\n)")
_FIRST = re.compile(rb"[ \t]*0[ \t]*\r?\n[ \t]*([A-Za-z_$][A-Za-z0-9_$]*)[ \t]*\r?(?=\n)")
_SECTION_NAME = re.compile(rb"\r?\n[ \t]*2[ \t]*\r?\n[ \t]*([A-Za-z_]+)")
_COUNTED_SECTIONS = (b"ENTITIES", b"BLOCKS")
#: Group codes whose values are floating-point numbers (DXF reference, "Group code value types").
_FLOAT_CODE = rb"(?:1[0-9]|[2-5][0-9]|1[1-4][0-9]|2[1-3][0-9]|46[0-9]|10[1-5][0-9])"
_DECIMAL_COMMA = re.compile(rb"\n[ \t]*" + _FLOAT_CODE + rb"[ \t]*\r?\n[ \t]*([-+]?[0-9]*,[0-9]+(?:[eE][-+]?[0-9]+)?)"
                            rb"[ \t]*\r?(?=\n)")
_HANDLE = re.compile(rb"^[ \t]*5[ \t]*\r?\n[ \t]*([0-9A-Fa-f]+)[ \t]*\r?$", re.MULTILINE)


@dataclass(frozen=True)
class Prescan:
    """What the raw bytes say: a HEADER section present, and records in ENTITIES and BLOCKS."""

    has_header: bool
    entities: int


def prescan(data: bytes, name: str, limits: Limits) -> Prescan | None:
    """Scan an ASCII DXF file's bytes; ``None`` for a binary DXF file (not scanned).

    Raises
    ------
    CavityError
        More records in the ENTITIES and BLOCKS sections than
        ``limits.dxf_entities`` (naming the first record over the limit and
        its line), or a coordinate with a decimal comma (naming its entity
        and line).

    Examples
    --------
    >>> scan = prescan(b"  0\\nSECTION\\n  2\\nENTITIES\\n  0\\nLINE\\n 10\\n1.5\\n  0\\nENDSEC\\n", "a.dxf", Limits())
    >>> scan.has_header, scan.entities
    (False, 1)
    """
    if data.startswith(b"AutoCAD Binary DXF"):
        return None
    _refuse_decimal_commas(data, name)
    has_header = False
    counting = False
    count = 0
    for m in _records(data):
        kind = m.group(1)
        if kind == b"SECTION":
            sm = _SECTION_NAME.match(data, m.end())
            section = sm.group(1).upper() if sm else b""
            has_header = has_header or section == b"HEADER"
            counting = section in _COUNTED_SECTIONS
        elif kind == b"ENDSEC":
            counting = False
        elif counting:
            count += 1
            if count > limits.dxf_entities:
                raise CavityError(
                    name, f"the drawing has more than {limits.dxf_entities} entities (counted before "
                    f"reading it; this is the first one over): save a drawing with only the cavity "
                    f"layers; {Limits.how_to_raise('dxf_entities')}",
                    line=_line_of(data, m.start(1)), entity=kind.decode("ascii"))
    return Prescan(has_header=has_header, entities=count)


def _records(data: bytes):
    """Every record start, in file order."""
    first = _FIRST.match(data)
    if first:
        yield first
    yield from _RECORD.finditer(data)


def _refuse_decimal_commas(data: bytes, name: str) -> None:
    if b"," not in data:
        return
    m = _DECIMAL_COMMA.search(data)
    if m is None:
        return
    entity = _entity_before(data, m.start())
    value = m.group(1).decode("ascii")
    raise CavityError(
        name, f"the coordinate {value!r} is written with a decimal comma, which a DXF reader cuts "
        "off at the comma: save the drawing with a decimal point (check the CAD program's or the "
        "system's number format)", line=_line_of(data, m.start(1)) + 1, entity=entity)


def _entity_before(data: bytes, pos: int) -> str:
    """``TYPE #handle`` of the record holding position ``pos``."""
    start = max(0, pos - 20000)
    last = None
    for last in _RECORD.finditer(data, start, pos):
        pass
    if last is None:
        last = _FIRST.match(data, 0, pos)
    if last is None:
        return "an entity"
    handle = _HANDLE.search(data, last.end(), pos)
    kind = last.group(1).decode("ascii")
    return f"{kind} #{handle.group(1).decode('ascii')}" if handle else kind


def _line_of(data: bytes, pos: int) -> int:
    """0-based line number of byte ``pos``."""
    return data.count(b"\n", 0, pos)
