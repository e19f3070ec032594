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

import json
from typing import Any

import numpy as np

from ..order import natural_key
from ..graph import pin_net_map
from ..model import Design
from ..values import format_value
from .csvcell import csv_bytes

__all__ = ["netlist_csv", "netlist_json", "netlist_dict", "dump_json"]


def dump_json(obj: Any) -> bytes:
    """Deterministic, readable JSON bytes (2-space indent, UTF-8, final newline).

    The same text as ``json.dumps(obj, indent=2, ensure_ascii=False,
    allow_nan=False)`` (the tests compare the two), made in two fast steps:
    the standard library's C encoder writes the compact text (it falls back
    to its pure-Python encoder whenever ``indent`` is set, which took
    seconds on a 16,000-part netlist), then :func:`_indent` breaks it into
    lines with numpy. Cost O(size of the text), no Python step per value.
    """
    compact = json.dumps(obj, ensure_ascii=False, allow_nan=False, separators=(",", ": "))
    return _indent(compact.encode("utf-8")) + b"\n"


_QUOTE, _BACKSLASH, _COMMA = ord('"'), ord("\\"), ord(",")
_OPENS, _CLOSES = (ord("["), ord("{")), (ord("]"), ord("}"))


def _indent(text: bytes) -> bytes:
    """Compact JSON (item separator ``,``, key separator ``: ``) as json's ``indent=2`` writes it.

    Outside strings, a line break and the indent of the depth there follow
    each ``,`` and each ``[`` or ``{`` that opens a non-empty container, and
    come before each ``]`` or ``}`` that closes one (``[]`` and ``{}`` stay
    as they are). A ``"`` opens or closes a string unless an odd number of
    backslashes precede it (JSON's escapes). UTF-8 bytes of other characters
    never equal these ASCII ones. Cost O(len(text)) numpy work.
    """
    a = np.frombuffer(text, dtype=np.uint8)
    quotes = np.flatnonzero(a == _QUOTE)
    slashes = np.flatnonzero(a == _BACKSLASH)
    if len(quotes) and len(slashes):
        quotes = quotes[~_escaped(quotes, slashes)]
    marks = np.flatnonzero((a == _COMMA) | np.isin(a, _OPENS + _CLOSES))
    marks = marks[np.searchsorted(quotes, marks) % 2 == 0]  # an even number of quotes before: outside
    if not len(marks):
        return text
    c = a[marks]
    opens, closes = np.isin(c, _OPENS), np.isin(c, _CLOSES)
    depth = np.cumsum(opens.astype(np.int64) - closes)
    empty = np.zeros(len(marks), dtype=bool)  # an opening mark followed at once by its closing one
    empty[:-1] = opens[:-1] & closes[1:] & (marks[1:] == marks[:-1] + 1)
    empty[1:] |= empty[:-1].copy()
    at = np.where(closes, marks, marks + 1)[~empty]  # the line break goes before this byte of text
    size = 1 + 2 * depth[~empty]  # "\n" and two spaces a level
    start = at + np.cumsum(size) - size  # where each break begins in the output
    out = np.full(len(a) + int(size.sum()), ord(" "), dtype=np.uint8)
    edge = np.zeros(len(out) + 1, dtype=np.int8)
    edge[start] = 1
    edge[start + size] = -1
    out[np.cumsum(edge[:-1], dtype=np.int8) == 0] = a
    out[start] = ord("\n")
    return out.tobytes()


def _escaped(quotes: np.ndarray, slashes: np.ndarray) -> np.ndarray:
    """Whether each quote (sorted byte positions) follows an odd run of backslashes (``slashes``, sorted)."""
    first = np.ones(len(slashes), dtype=bool)
    first[1:] = slashes[1:] != slashes[:-1] + 1
    run_start = slashes[first][np.cumsum(first) - 1]  # each backslash's run begins here
    j = np.maximum(np.searchsorted(slashes, quotes) - 1, 0)  # the last backslash before each quote
    touching = slashes[j] == quotes - 1
    return touching & ((slashes[j] - run_start[j] + 1) % 2 == 1)


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
