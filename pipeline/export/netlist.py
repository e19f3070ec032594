"""The neutral netlist: ``netlist.csv`` and ``netlist.json``.

Entry points: :func:`netlist_csv`, :func:`netlist_json`, :func:`netlist_dict`.

``netlist.csv`` has one row per connected pin, columns ``net``, ``ref``,
``pin``, ``pin_name`` (CONTRACT section 4), rows in natural order of net,
then ref, then pin. Cells that a spreadsheet would run as a formula are
made inert (:mod:`~pipeline.export.csvcell`), signed names such as ``-INA``
or ``+A1`` included: ``'-INA``. ``netlist.json`` is the exact form:

.. code-block:: json

    {"format": "snugboard-netlist", "version": 1,
     "design": {"name": "...", "revision": "..."},
     "parts": [{"ref": "R1", "kind": "resistor", "value": "10k", "value_si": 10000.0,
                "package": "0603", "dnp": false,
                "pins": [{"number": "1", "name": "1", "role": "passive", "nets": ["IN"]}]}],
     "nets": [{"name": "IN", "pins": ["R1.1", "U1.3"]}]}

Parts and nets are in natural order; a net's pins keep the design's order.
Same design, same bytes.
"""

from __future__ import annotations

import math
from json.encoder import encode_basestring as _json_string
from typing import Any

from ..order import natural_key
from ..graph import pin_net_map
from ..model import Design
from ..values import format_value
from .csvcell import csv_bytes

__all__ = ["netlist_csv", "netlist_json", "netlist_dict", "dump_json"]


def dump_json(obj: Any) -> bytes:
    """Deterministic, readable JSON bytes (2-space indent, UTF-8, final newline).

    The same text as ``json.dumps(obj, indent=2, ensure_ascii=False,
    allow_nan=False)`` (the tests compare the two), written by
    :func:`_indented`: the standard library falls back to its pure-Python
    encoder whenever ``indent`` is set, which took seconds on a 16,000-part
    netlist. Cost O(size of the text).
    """
    out: list[str] = []
    _indented(obj, "\n", out)
    out.append("\n")
    return "".join(out).encode("utf-8")


def _scalar(o: Any) -> str | None:
    """JSON text of a string, number, boolean or null (json's own rules and order of checks), else None."""
    if isinstance(o, str):
        return _json_string(o)
    if o is None:
        return "null"
    if o is True:
        return "true"
    if o is False:
        return "false"
    if isinstance(o, int):
        return int.__repr__(o)
    if isinstance(o, float):
        if o != o or o in (math.inf, -math.inf):
            raise ValueError(f"Out of range float values are not JSON compliant: {o!r}")
        return float.__repr__(o)
    return None


def _key(k: Any) -> str:
    """A dict key as json writes it: text keys as they are, numbers, booleans and null as their JSON text."""
    if isinstance(k, str):
        return _json_string(k)
    text = _scalar(k)
    if text is None:
        raise TypeError(f"keys must be str, int, float, bool or None, not {type(k).__name__}")
    return _json_string(text)


def _indented(o: Any, nl: str, out: list[str]) -> None:
    """Append the JSON text of ``o`` to ``out``; ``nl`` is a newline and the current indent.

    Plain dicts, lists and tuples (the exact types, the common case) go
    straight to :func:`_members`; anything else takes json's order of
    checks (a ``str`` subclass is text, not a container).
    """
    t = type(o)
    if t is dict:
        _members(o, "{}", nl, out)
        return
    if t is list or t is tuple:
        _members(o, "[]", nl, out)
        return
    text = _scalar(o)
    if text is not None:
        out.append(text)
    elif isinstance(o, (list, tuple)):
        _members(o, "[]", nl, out)
    elif isinstance(o, dict):
        _members(o, "{}", nl, out)
    else:
        raise TypeError(f"Object of type {type(o).__name__} is not JSON serializable")


def _members(o: Any, brackets: str, nl: str, out: list[str]) -> None:
    """Append a dict's (``brackets`` ``"{}"``) or list's items, one a line, indented two more."""
    if not o:
        out.append(brackets)
        return
    inner = nl + "  "
    out.append(brackets[0])
    sep = inner
    pairs = (((_json_string(k) if type(k) is str else _key(k)) + ": ", v) for k, v in o.items()) \
        if brackets == "{}" else (("", v) for v in o)
    for head, v in pairs:
        tv = type(v)
        if tv is str:  # the common leaf, without a call
            out.append(sep + head + _json_string(v))
        elif tv is dict or tv is list or tv is tuple:
            out.append(sep + head)
            _members(v, "{}" if tv is dict else "[]", inner, out)
        else:
            out.append(sep + head)
            _indented(v, inner, out)
        sep = "," + inner
    out.append(nl + brackets[1])


def netlist_csv(design: Design) -> bytes:
    """One row per connected pin (module notes). Cost O(pins log pins): one part lookup table."""
    parts = design.by_ref
    rows = []
    for n in sorted(design.nets, key=lambda n: natural_key(n.name)):
        for pr in sorted(n.pins, key=lambda p: (natural_key(p.ref), natural_key(p.pin))):
            rows.append((n.name, pr.ref, pr.pin, parts[pr.ref].pin(pr.pin).name))
    return csv_bytes(("net", "ref", "pin", "pin_name"), rows)


def _natural_sorted(names: list[str]) -> list[str]:
    """``names`` in natural order; a list of 0 or 1 names as is (sorted() would still key it)."""
    return sorted(names, key=natural_key) if len(names) > 1 else list(names)


def netlist_dict(design: Design) -> dict[str, Any]:
    pin_nets: dict[str, dict[str, list]] = {}  # ref -> pin -> nets, read off the map without new keys
    for pr, on in pin_net_map(design).items():
        pin_nets.setdefault(pr.ref, {})[pr.pin] = on
    parts = []
    for p in sorted(design.parts, key=lambda p: natural_key(p.ref)):
        parts.append({
            "ref": p.ref,
            "kind": p.kind,
            "value": format_value(p.value) if p.value is not None else p.value_text,
            "value_si": p.value,
            "package": p.package,
            "dnp": p.dnp,
            "pins": [
                {"number": d.number, "name": d.name, "role": d.role,
                 "nets": _natural_sorted([n.name for n in mine.get(d.number, ())])}
                for mine in (pin_nets.get(p.ref, {}),) for d in p.pins
            ],
        })
    nets = [{"name": n.name, "pins": [str(pr) for pr in n.pins]}
            for n in sorted(design.nets, key=lambda n: natural_key(n.name))]
    return {
        "format": "snugboard-netlist",
        "version": 1,
        "design": {"name": design.name, "revision": design.revision},
        "parts": parts,
        "nets": nets,
    }


def netlist_json(design: Design) -> bytes:
    return dump_json(netlist_dict(design))
