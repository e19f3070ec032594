"""``* snugboard:`` records that the SPICE writer leaves for this reader."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

from ..blocktables import OLD_RECORD, RECORD, TABLE, old_name_note
from ..errors import DesignError
from ..model import PartKind, PinDef, PIN_ROLES, RawTable
from .lines import Line, Reader
from .tokens import REF_RE
from .state import Build, Cand, Ctx, global_scope
from .mapping import lookup_kind, map_pins
from .elaborate import net_key

#: Comment prefix of the records the SPICE writer leaves for this reader.
RECORD_PREFIX = "snugboard:"


def record_kinds(rd: Reader) -> list[PartKind]:
    out = []
    for rtype, kv, file, line in rd.records:
        if rtype != "kind":
            continue
        try:
            pins = tuple(PinDef(str(n), str(nm), str(r)) for n, nm, r in json.loads(kv.get("pins", "[]")))
        except (json.JSONDecodeError, TypeError, ValueError):
            raise DesignError(file, "the kind record's pins are not a JSON list of [number, name, role]",
                              line=line) from None
        for p in pins:
            if p.role not in PIN_ROLES:
                raise DesignError(file, f"kind record: unknown pin role '{p.role}'", line=line)
        if not kv.get("name") or not pins:
            raise DesignError(file, "the kind record needs name=... and pins=...", line=line)
        out.append(PartKind(name=kv["name"], category=kv.get("category", "ic"), pins=pins,
                            value_unit=kv.get("value_unit", ""), description=kv.get("description", ""),
                            source=kv.get("source", f"defined in {file}")))
    return out


def float_or_none(text: str | None, file: str, line: int, key: str) -> float | None:
    if text is None or text == "":
        return None
    try:
        v = float(text)
    except ValueError:
        raise DesignError(file, f"snugboard record: {key}={text} is not a number", line=line) from None
    if not math.isfinite(v):
        raise DesignError(file, f"snugboard record: {key}={text} is not finite", line=line)
    return v


def loose_part(b: Build, kv: dict[str, str], file: str, line: int) -> None:
    """A part the writer left as a comment (connector, unfitted): rebuild it."""
    ln = Line(file, line, "")
    ref = kv["ref"]
    if not REF_RE.match(ref):
        raise DesignError(file, f"part record: '{ref}' is not a usable reference", line=line)
    kind = lookup_kind(b, kv.get("kind", ""), None, ln)
    package = b.library.package(kv.get("package", ""), file=file, line=line).name
    pins = tuple(kv["pins"].split(",")) if kv.get("pins") else None
    node_list = kv["nodes"].split(",")
    if pins is None and node_list == [""]:
        node_list = []
    ctx = Ctx(path=(), ports={}, scope=global_scope(b), stack=())
    nodes = [net_key(b, ctx, n, ln) if n else "" for n in node_list]
    mapped = map_pins(b, ln, ref, "x", kind, package, len(nodes), pins)
    key = ref.lower()
    if key in b.elements:
        raise DesignError(file, f"part record {ref} clashes with element {ref}", line=line)
    b.elements[key] = (file, line)
    b.cands.append(Cand(ref, ref, "x", nodes, file, line, kind, package, mapped, record=kv, explicit_ref=True))


@dataclass
class RecordSet:
    """The ``* snugboard:`` records of one reading, sorted by type.

    Part and net records carry ``_file`` and ``_line``: where they stand,
    for messages about their values.
    """

    parts: dict[str, dict[str, str]] = field(default_factory=dict)  # lower element name -> record
    nets: dict[str, dict[str, str]] = field(default_factory=dict)  # lower node -> record
    loose: list[tuple[dict[str, str], str, int]] = field(default_factory=list)  # parts with nodes, no element
    design: dict[str, str] = field(default_factory=dict)
    stages: list[tuple[dict[str, str], str, int]] = field(default_factory=list)


def sort_records(rd: Reader) -> RecordSet:
    """Sort ``rd.records`` by type; an unknown type is a warning, a record missing its key an error."""
    out = RecordSet()
    for rtype, kv, file, line in rd.records:
        if rtype in ("part", "net"):
            kv = dict(kv, _file=file, _line=str(line))
        if rtype == "part":
            if kv.get("element"):
                out.parts[kv["element"].lower()] = kv
            elif kv.get("nodes") is not None and kv.get("ref"):
                out.loose.append((kv, file, line))
            else:
                raise DesignError(file, "a part record needs element=... or ref=... with nodes=...", line=line)
        elif rtype == "net":
            if not kv.get("node"):
                raise DesignError(file, "a net record needs node=...", line=line)
            out.nets[kv["node"].lower()] = kv
        elif rtype == "design":
            out.design = kv
        elif rtype in (RECORD, OLD_RECORD):
            out.stages.append((kv, file, line))
            if rtype == OLD_RECORD:
                rd.findings.append(old_name_note(f"{file}:{line}", f"* snugboard: {OLD_RECORD}",
                                                 f"* snugboard: {RECORD}"))
        elif rtype != "kind":
            rd.note("warning", "spice.record", (file,), f"{file}:{line}: unknown snugboard record '{rtype}'; ignored.")
    return out


def stage_tables(mapped: tuple[RawTable, ...], recs: RecordSet) -> tuple[RawTable, ...]:
    """The parts map's blocks, then those of block records the map does not name.

    A block read from a record is located in the SPICE file at the record's
    line (its key stays the original ``blocks.NAME``), so that a message
    about it names the file the user gave.
    """
    stages = list(mapped)
    known = {s.name for s in stages}
    for kv, file, line in recs.stages:
        try:
            items = json.loads(kv.get("items", "{}"))
        except json.JSONDecodeError:
            raise DesignError(file, "the block record's items are not JSON", line=line) from None
        if not isinstance(items, dict) or not kv.get("name"):
            raise DesignError(file, "a block record needs name=... and items={...}", line=line)
        if kv["name"] not in known:
            stages.append(RawTable(name=kv["name"], items=tuple(items.items()), file=file,
                                   key=kv.get("key", f"{TABLE}.{kv['name']}"), line=line))
    return tuple(stages)
