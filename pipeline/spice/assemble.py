"""Assembly: candidates grouped into board parts, and the nets they form."""

from __future__ import annotations

import json

from .. import values as _values
from ..errors import DesignError
from ..model import Net, Part, PinRef
from .numbers import fmt
from .partsmap import PASSTHROUGH
from .state import Build, Cand
from .mapping import POLARITY_KINDS, kind_pins
from .records import float_or_none

def assemble(b: Build, net_records: dict[str, dict[str, str]]) -> tuple[tuple[Part, ...], tuple[Net, ...]]:
    groups: dict[str, list[Cand]] = {}
    order: list[str] = []
    for c in b.cands:
        k = c.ref.lower()
        if k not in groups:
            groups[k] = []
            order.append(k)
        else:
            first = groups[k][0]
            if not (c.explicit_ref and first.explicit_ref):
                raise DesignError(c.file, f"{c.spice_name} becomes board part {c.ref}, which {first.spice_name} "
                                  f"({first.file}:{first.line}) already is; rename one", line=c.line)
            if (c.kind.name, c.package) != (first.kind.name, first.package):
                raise DesignError(c.file, f"{c.spice_name} is a section of {c.ref} but its kind or package "
                                  f"({c.kind.name}, {c.package}) differs from {first.spice_name}'s "
                                  f"({first.kind.name}, {first.package})", line=c.line)
        groups[k].append(c)

    net_pins: dict[str, list[PinRef]] = {}
    pin_net: dict[tuple[str, str], tuple[str, Cand]] = {}
    parts: list[Part] = []
    for k in order:
        cands = groups[k]
        first = cands[0]
        for c in cands:
            for node, pin in zip(c.nodes, c.pins):
                if not pin or not node:
                    continue
                rec = net_records.get(node)
                if rec is not None and rec.get("unconnected") == "true":
                    continue
                prev = pin_net.get((first.ref, pin))
                if prev is not None:
                    if prev[0] != node:
                        raise DesignError(c.file, f"{c.spice_name} puts pin {first.ref}.{pin} on "
                                          f"{b.net_names.get(node, node)} but {prev[1].spice_name} puts it on "
                                          f"{b.net_names.get(prev[0], prev[0])}", line=c.line)
                    continue
                pin_net[(first.ref, pin)] = (node, c)
                net_pins.setdefault(node, []).append(PinRef(first.ref, pin))
        parts.append(_part(b, cands))

    voltages: dict[str, float] = {}
    for name, node, sign, v, ln in b.sources:
        if node in net_pins and node not in voltages:
            voltages[node] = v
            b.rd.note("info", "spice.net-voltage", (b.net_names.get(node, node),),
                      f"{ln.file}:{ln.line}: {name} sets net {b.net_names.get(node, node)} to {fmt(v)} V; "
                      f"taken as its declared voltage.")
    nets: list[Net] = []
    for node, pins in net_pins.items():
        rec = net_records.get(node, {})
        name = rec.get("name") or b.net_names.get(node, node)
        if node == "0":
            name = "GND"
        file, line = rec.get("_file", b.rd.shown), int(rec.get("_line", "0") or 0)
        v = float_or_none(rec.get("voltage"), file, line, "voltage") if "voltage" in rec else voltages.get(node)
        vmax = float_or_none(rec.get("voltage_max"), file, line, "voltage_max")
        nets.append(Net(name=name, pins=tuple(pins), voltage=v, voltage_max=vmax,
                        battery=rec.get("battery") == "true", line=b.net_lines.get(node, 0)))
    seen: set[str] = set()
    for n in nets:
        if n.name in seen:
            raise DesignError(b.rd.shown, f"two different nodes both end up named {n.name} (check the snugboard "
                              f"net records)", line=n.line or None)
        seen.add(n.name)
    return tuple(parts), tuple(nets)


def _part(b: Build, cands: list[Cand]) -> Part:
    c = cands[0]
    spec = next((x.spec for x in cands if x.spec is not None), None)
    rec = c.record
    kind, package = c.kind, c.package
    pins = kind_pins(b, kind, package)
    pkg = b.library.package(package)
    if not kind.pins_from_package and pkg.pin_count and pkg.pin_count != len(pins):
        where = (spec.file, spec.line) if spec else (c.file, c.line)
        raise DesignError(where[0], f"{c.ref}: package {pkg.name} has {pkg.pin_count} pins but kind {kind.name} has "
                          f"{len(pins)}", line=where[1])
    value, value_text = c.value, c.value_text
    tol = rv = rw = None
    tol_text = rating_text = manufacturer = mpn = note = ""
    dnp = False
    extra: dict[str, str] = {}
    if c.model and c.model.lower() not in POLARITY_KINDS and rec is None:
        extra["spice_model"] = c.model
    if rec is not None:
        file, line = rec.get("_file", c.file), int(rec.get("_line", "0") or 0)
        rv_val = float_or_none(rec.get("value"), file, line, "value")
        if c.letter in "rcl" and c.value is not None:
            if rv_val is not None and rv_val == c.value:
                value_text = rec.get("value_text", "")
        elif rv_val is not None or "value_text" in rec:
            value = rv_val if kind.value_unit else None
            value_text = rec.get("value_text", "")
        tol = float_or_none(rec.get("tolerance"), file, line, "tolerance")
        tol_text = rec.get("tolerance_text", "")
        rv = float_or_none(rec.get("rating_v"), file, line, "rating_v")
        rw = float_or_none(rec.get("rating_w"), file, line, "rating_w")
        rating_text = rec.get("rating_text", "")
        manufacturer, mpn, note = rec.get("manufacturer", ""), rec.get("mpn", ""), rec.get("note", "")
        dnp = rec.get("dnp") == "true"
        if rec.get("extra"):
            try:
                pairs = json.loads(rec["extra"])
                extra = {str(k): str(v) for k, v in pairs}
            except (json.JSONDecodeError, TypeError, ValueError):
                raise DesignError(file, "the part record's extra is not a JSON list of pairs", line=line) from None
    if spec is not None and spec.origin == "refs":
        where_err = lambda k, msg: DesignError(spec.file, msg, line=spec.line, key=f"{spec.key}.{k}")  # noqa: E731
        if spec.get("value") is not None:
            value_text = spec.get("value")
            if kind.value_unit:
                try:
                    value = _values.parse_value(value_text, kind.value_unit)
                except ValueError as exc:
                    raise where_err("value", str(exc)) from None
        if spec.get("tolerance") is not None:
            tol_text = spec.get("tolerance")
            try:
                tol = _values.parse_tolerance(tol_text)
            except ValueError as exc:
                raise where_err("tolerance", str(exc)) from None
        if spec.get("rating") is not None:
            rating_text = spec.get("rating")
            try:
                rv, rw = _values.parse_rating(rating_text)
            except ValueError as exc:
                raise where_err("rating", str(exc)) from None
        manufacturer = spec.get("manufacturer", manufacturer)
        mpn = spec.get("mpn", mpn)
        note = spec.get("note", note)
        dnp = spec.get("dnp", dnp)
        for k in PASSTHROUGH:
            if spec.get(k) is not None:
                extra[k] = spec.get(k)
    if kind.value_unit and value is None and c.letter == "x" and rec is None:
        where = (spec.file, spec.line) if spec else (c.file, c.line)
        raise DesignError(where[0], f"{c.ref}: a {kind.name} needs a value; give value = \"...\" in the parts map",
                          line=where[1])
    return Part(ref=c.ref, kind=kind.name, package=package, pins=pins, value=value, value_text=value_text,
                tolerance=tol, tolerance_text=tol_text, rating_v=rv, rating_w=rw, rating_text=rating_text,
                manufacturer=manufacturer, mpn=mpn, note=note, dnp=dnp, extra=tuple(sorted(extra.items())),
                line=c.line)
