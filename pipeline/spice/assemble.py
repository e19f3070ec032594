"""Assembly: candidates grouped into board parts, and the nets they form."""

from __future__ import annotations

import json
from typing import Any

from .. import values as _values
from ..errors import DesignError, Where
from ..graph import SPICE_GROUND_NET
from ..model import Net, Part, PartKind, PinRef
from .mapping import POLARITY_KINDS, kind_pins
from .numbers import fmt
from .partsmap import PASSTHROUGH, Spec
from .records import float_or_none
from .state import Build, Cand


def assemble(b: Build, net_records: dict[str, dict[str, str]]) -> tuple[tuple[Part, ...], tuple[Net, ...]]:
    """Board parts (sections merged) in order of first appearance, and the nets their pins form.

    Cost: linear in the candidates' pins (dict lookups per pin).
    """
    groups = _group(b.cands)
    net_pins: dict[str, list[PinRef]] = {}
    pin_net: dict[tuple[str, str], tuple[str, Cand]] = {}
    parts: list[Part] = []
    for cands in groups.values():
        for c in cands:
            _connect(b, c, cands[0].ref, net_records, net_pins, pin_net)
        parts.append(_part(b, cands))
    return tuple(parts), _nets(b, net_pins, net_records)


def _group(cands: list[Cand]) -> dict[str, list[Cand]]:
    """Candidates by board reference (lower case), in order; only explicit refs of one kind may share one."""
    groups: dict[str, list[Cand]] = {}
    for c in cands:
        k = c.ref.lower()
        if k in groups:
            first = groups[k][0]
            if not (c.explicit_ref and first.explicit_ref):
                raise DesignError(c.file, f"{c.spice_name} becomes board part {c.ref}, which {first.spice_name} "
                                  f"({first.file}:{first.line}) already is; rename one", line=c.line)
            if (c.kind.name, c.package) != (first.kind.name, first.package):
                raise DesignError(c.file, f"{c.spice_name} is a section of {c.ref} but its kind or package "
                                  f"({c.kind.name}, {c.package}) differs from {first.spice_name}'s "
                                  f"({first.kind.name}, {first.package})", line=c.line)
        groups.setdefault(k, []).append(c)
    return groups


def _connect(b: Build, c: Cand, ref: str, net_records: dict[str, dict[str, str]],
             net_pins: dict[str, list[PinRef]], pin_net: dict[tuple[str, str], tuple[str, Cand]]) -> None:
    """Put ``c``'s pins (as pins of part ``ref``) on their nets; a pin two sections put on two nets is an error."""
    for node, pin in zip(c.nodes, c.pins):
        if not pin or not node:
            continue
        rec = net_records.get(node)
        if rec is not None and rec.get("unconnected") == "true":
            continue
        prev = pin_net.get((ref, pin))
        if prev is not None:
            if prev[0] != node:
                raise DesignError(c.file, f"{c.spice_name} puts pin {ref}.{pin} on {b.net_names.get(node, node)} "
                                  f"but {prev[1].spice_name} puts it on {b.net_names.get(prev[0], prev[0])}",
                                  line=c.line)
            continue
        pin_net[(ref, pin)] = (node, c)
        net_pins.setdefault(node, []).append(PinRef(ref, pin))


def _nets(b: Build, net_pins: dict[str, list[PinRef]], net_records: dict[str, dict[str, str]]) -> tuple[Net, ...]:
    """Nets in order of first use: names and voltages from records, else from DC sources to ground."""
    voltages: dict[str, float] = {}
    for name, node, _sign, v, ln in b.sources:
        if node in net_pins and node not in voltages:
            voltages[node] = v
            b.rd.note("info", "spice.net-voltage", (b.net_names.get(node, node),),
                      f"{ln.file}:{ln.line}: {name} sets net {b.net_names.get(node, node)} to {fmt(v)} V; "
                      f"taken as its declared voltage.")
    nets: list[Net] = []
    seen: set[str] = set()
    for node, pins in net_pins.items():
        rec = net_records.get(node, {})
        name = SPICE_GROUND_NET if node == "0" else (rec.get("name") or b.net_names.get(node, node))
        file, line = rec.get("_file", b.rd.shown), int(rec.get("_line", "0") or 0)
        v = float_or_none(rec.get("voltage"), file, line, "voltage") if "voltage" in rec else voltages.get(node)
        vmax = float_or_none(rec.get("voltage_max"), file, line, "voltage_max")
        nets.append(Net(name=name, pins=tuple(pins), voltage=v, voltage_max=vmax,
                        battery=rec.get("battery") == "true", line=b.net_lines.get(node, 0)))
    for n in nets:
        if n.name in seen:
            raise DesignError(b.rd.shown, f"two different nodes both end up named {n.name} (check the snugboard "
                              f"net records)", line=n.line or None)
        seen.add(n.name)
    return tuple(nets)


def _part(b: Build, cands: list[Cand]) -> Part:
    """One board part from its candidates (one, or several sections)."""
    c = cands[0]
    spec = next((x.spec for x in cands if x.spec is not None), None)
    kind, package = c.kind, c.package
    pins = kind_pins(b, kind, package)
    pkg = b.library.package(package)
    where = (spec.file, spec.line) if spec else (c.file, c.line)
    if not kind.pins_from_package and pkg.pin_count and pkg.pin_count != len(pins):
        raise DesignError(where[0], f"{c.ref}: package {pkg.name} has {pkg.pin_count} pins but kind {kind.name} has "
                          f"{len(pins)}", line=where[1])
    # Part fields as the element, then its record, then its parts-map entry give them.
    f: dict[str, Any] = {"value": c.value, "value_text": c.value_text}
    extra: dict[str, str] = {}
    if c.model and c.model.lower() not in POLARITY_KINDS and c.record is None:
        extra["spice_model"] = c.model
    if c.record is not None:
        extra = _from_record(f, c, c.record, kind) or extra
    if spec is not None and spec.origin == "refs":
        _from_map(f, extra, spec, kind)
    if kind.value_unit and f["value"] is None and c.letter == "x" and c.record is None:
        raise DesignError(where[0], f"{c.ref}: a {kind.name} needs a value; give value = \"...\" in the parts map",
                          line=where[1])
    return Part(ref=c.ref, kind=kind.name, package=package, pins=pins, **f, extra=tuple(sorted(extra.items())),
                line=c.line)


def _from_record(f: dict[str, Any], c: Cand, rec: dict[str, str], kind: PartKind) -> dict[str, str]:
    """What a ``* snugboard: part`` record adds to ``f`` (the element's own value stays when they agree).

    Returns the record's pass-through data (empty when it has none).
    """
    file, line = rec.get("_file", c.file), int(rec.get("_line", "0") or 0)
    rv_val = float_or_none(rec.get("value"), file, line, "value")
    if c.letter in "rcl" and c.value is not None:
        if rv_val is not None and rv_val == c.value:
            f["value_text"] = rec.get("value_text", "")
    elif rv_val is not None or "value_text" in rec:
        f["value"] = rv_val if kind.value_unit else None
        f["value_text"] = rec.get("value_text", "")
    for key in ("tolerance", "rating_v", "rating_w"):
        f[key] = float_or_none(rec.get(key), file, line, key)
    for key in ("tolerance_text", "rating_text", "manufacturer", "mpn", "note"):
        f[key] = rec.get(key, "")
    f["dnp"] = rec.get("dnp") == "true"
    if not rec.get("extra"):
        return {}
    try:
        return {str(k): str(v) for k, v in json.loads(rec["extra"])}
    except (json.JSONDecodeError, TypeError, ValueError):
        raise DesignError(file, "the part record's extra is not a JSON list of pairs", line=line) from None


def _from_map(f: dict[str, Any], extra: dict[str, str], spec: Spec, kind: PartKind) -> None:
    """What a ``[refs.NAME]`` table adds to ``f`` and ``extra``; values in TOML design notation (pipeline.values)."""
    def parsed(key: str, parse: Any, *args: Any) -> Any:
        return parse(spec.get(key), *args, at=Where(spec.file, spec.line, f"{spec.key}.{key}"))

    if spec.get("value") is not None:
        f["value_text"] = spec.get("value")
        if kind.value_unit:
            f["value"] = parsed("value", _values.parse_value, kind.value_unit)
    if spec.get("tolerance") is not None:
        f["tolerance_text"] = spec.get("tolerance")
        f["tolerance"] = parsed("tolerance", _values.parse_tolerance)
    if spec.get("rating") is not None:
        f["rating_text"] = spec.get("rating")
        f["rating_v"], f["rating_w"] = parsed("rating", _values.parse_rating)
    for key in ("manufacturer", "mpn", "note", "dnp"):
        if spec.get(key) is not None:
            f[key] = spec.get(key)
    for k in PASSTHROUGH:
        if spec.get(k) is not None:
            extra[k] = spec.get(k)
