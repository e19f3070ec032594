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

from ..order import natural_key
from ..graph import pin_net_map
from ..model import Design, PinRef
from ..values import format_value
from .csvcell import csv_bytes

__all__ = ["netlist_csv", "netlist_json", "netlist_dict", "dump_json"]


def dump_json(obj: Any) -> bytes:
    """Deterministic, readable JSON bytes (2-space indent, UTF-8, final newline)."""
    return (json.dumps(obj, indent=2, ensure_ascii=False, allow_nan=False) + "\n").encode("utf-8")


def netlist_csv(design: Design) -> bytes:
    """One row per connected pin (module notes). Cost O(pins log pins): one part lookup table."""
    parts = design.by_ref
    rows = []
    for n in sorted(design.nets, key=lambda n: natural_key(n.name)):
        for pr in sorted(n.pins, key=lambda p: (natural_key(p.ref), natural_key(p.pin))):
            rows.append((n.name, pr.ref, pr.pin, parts[pr.ref].pin(pr.pin).name))
    return csv_bytes(("net", "ref", "pin", "pin_name"), rows)


def netlist_dict(design: Design) -> dict[str, Any]:
    pin_nets = pin_net_map(design)
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
                 "nets": sorted((n.name for n in pin_nets.get(PinRef(p.ref, d.number), [])), key=natural_key)}
                for d in p.pins
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
