"""Mapping a SPICE element to a board part: its kind, package, board reference and pins."""

from __future__ import annotations

from typing import Iterable

from ..errors import DesignError
from ..model import PartKind, PinDef
from .lines import Line
from .tokens import REF_RE
from .partsmap import PART_LETTERS, Spec
from .state import Build, Cand

DEFAULTS = {
    "r": ("resistor", "0603"),
    "c": ("capacitor", "0603"),
    "l": ("inductor", "0603"),
    "d": ("diode", "SOD-123"),
}


#: Element letter -> terminal roles in SPICE node order, each with the pin
#: names (upper case) that role matches on a kind.
_ROLES: dict[str, tuple[tuple[str, tuple[str, ...]], ...]] = {
    "d": (("anode", ("A", "ANODE")), ("cathode", ("K", "CATHODE"))),
    "q": (("collector", ("C", "COLLECTOR")), ("base", ("B", "BASE")), ("emitter", ("E", "EMITTER"))),
    "m": (("drain", ("D", "DRAIN")), ("gate", ("G", "GATE")), ("source", ("S", "SOURCE"))),
    "j": (("drain", ("D", "DRAIN")), ("gate", ("G", "GATE")), ("source", ("S", "SOURCE"))),
}


#: Model type (and model names that are a type) -> candidate kind names.
POLARITY_KINDS = {
    "npn": ("npn",), "pnp": ("pnp",),
    "nmos": ("nmos",), "pmos": ("pmos",),
    "njf": ("njfet", "jfet-n", "njf"), "pjf": ("pjfet", "jfet-p", "pjf"),
}


LETTER_TYPES = {"q": ("npn", "pnp"), "m": ("nmos", "pmos"), "j": ("njf", "pjf"), "d": ("d",)}


def _lookup_specs(b: Build, names: Iterable[str]) -> Spec | None:
    for n in names:
        s = b.pm.refs.get(n.lower())
        if s is not None:
            b.pm.used.add(s.key)
            return s
    return None


def _record_spec(b: Build, spice_name: str, ln: Line) -> Spec | None:
    rec = b.records.get(spice_name.lower())
    if rec is None:
        return None
    pins = tuple(p for p in rec["pins"].split(",")) if rec.get("pins") else None
    return Spec("record", ln.file, f"record for {spice_name}", ln.line, rec.get("kind", ""), rec.get("package", ""),
                 pins, rec.get("ref", ""), ())


def resolve(b: Build, ln: Line, letter: str, spice_name: str, ref: str, model: str, subckt: str,
             auto_kind: tuple[str, ...]) -> tuple[PartKind | None, str, tuple[str, ...] | None, str, Spec | None, Spec | None]:
    """Kind, package, pins, board ref, the ``refs`` spec and the record spec."""
    ref_spec = _lookup_specs(b, (spice_name, spice_name.replace(".", "_"), ref))
    rec_spec = _record_spec(b, spice_name, ln)
    chain: list[Spec] = [s for s in (ref_spec, rec_spec) if s is not None]
    for table, name in ((b.pm.subckt, subckt), (b.pm.models, model)):  # the parts map's subckt, then models
        s = table.get(name.lower()) if name else None
        if s is not None:
            b.pm.used.add(s.key)
            chain.append(s)
    d = b.pm.defaults.get(letter)
    if d is not None:
        chain.append(d)
    kind_name = next((s.kind for s in chain if s.kind), "")
    package = next((s.package for s in chain if s.package), "")
    new_ref = next((s.ref for s in chain if s.ref), "")
    kind_spec = next((s for s in chain if s.kind), None)
    # a pins list belongs to the kind it was written for: only the table that
    # names the kind, or a more specific one, may give it
    upto = chain[: chain.index(kind_spec) + 1] if kind_spec is not None else chain
    pins = next((s.pins for s in upto if s.pins is not None), None)
    kind = None
    defaulted = False
    if kind_name:
        kind = lookup_kind(b, kind_name, kind_spec, ln)
    elif auto_kind:
        kind = next((b.library.kind(k) for k in auto_kind if b.library.has_kind(k)), None)
        if kind is None:
            raise DesignError(ln.file, f"{spice_name}: the library has no kind {' or '.join(auto_kind)}; "
                              f"name its kind in the parts map ([refs.{spice_name}] kind = ...)", line=ln.line)
        defaulted = True
    if kind is not None and not package:
        package = DEFAULTS.get(letter, ("", "SOT-23"))[1] if letter in PART_LETTERS else ""
        if not package:
            raise DesignError(ln.file, f"{spice_name}: give its package in the parts map "
                              f"([refs.{spice_name}] package = ...)", line=ln.line)
        defaulted = True
    if kind is not None and defaulted:
        b.defaulted.setdefault(f"{kind.name} in {package}", []).append(new_ref or ref)
    if kind is not None:
        src = next((s for s in chain if s.package), None)
        where = {"file": src.file, "line": src.line, "key": src.key + ".package"} if src else \
            {"file": ln.file, "line": ln.line}
        package = b.library.package(package, **where).name
    return kind, package, pins, new_ref, ref_spec, rec_spec


def lookup_kind(b: Build, name: str, spec: Spec | None, ln: Line) -> PartKind:
    if spec is not None and spec.origin != "record":
        return b.library.kind(name, file=spec.file, line=spec.line, key=spec.key + ".kind")
    return b.library.kind(name, file=ln.file, line=ln.line)


def map_pins(b: Build, ln: Line, spice_name: str, letter: str, kind: PartKind, package: str,
              n_nodes: int, pins: tuple[str, ...] | None, port_names: tuple[str, ...] = ()) -> tuple[str, ...]:
    """Kind pin number for each node, in node order ("" = none)."""
    kpins = kind_pins(b, kind, package)
    numbers = [p.number for p in kpins]
    if pins is not None:
        if len(pins) != n_nodes:
            raise DesignError(ln.file, f"{spice_name}: the parts map's pins list has {len(pins)} entries but the "
                              f"line has {n_nodes} nodes", line=ln.line)
        out = []
        for p in pins:
            if p == "":
                out.append("")
                continue
            if p in numbers:
                out.append(p)
                continue
            named = [q.number for q in kpins if q.name.lower() == p.lower()]
            if len(named) != 1:
                raise DesignError(ln.file, f"{spice_name}: kind {kind.name} has no pin '{p}' (pins: "
                                  f"{', '.join(f'{q.number} {q.name}' for q in kpins)})", line=ln.line)
            out.append(named[0])
        used = [p for p in out if p]
        if len(set(used)) != len(used):
            raise DesignError(ln.file, f"{spice_name}: the pins list names a kind pin twice", line=ln.line)
        return tuple(out)
    roles = _ROLES.get(letter)
    if roles and n_nodes == len(roles):
        out = []
        for role, names in roles:
            hit = [q.number for q in kpins if q.name.upper() in names]
            if len(hit) != 1:
                out = []
                break
            out.append(hit[0])
        if out:
            return tuple(out)
    if port_names and len(port_names) == n_nodes:
        hit = []
        for pn in port_names:
            m = [q.number for q in kpins if q.name.lower() == pn.lower()]
            if len(m) != 1:
                hit = []
                break
            hit.append(m[0])
        if hit and len(set(hit)) == len(hit):
            return tuple(hit)
    if len(kpins) == n_nodes:
        return tuple(numbers)
    what = " (" + ", ".join(r for r, _ in roles) + ")" if roles else ""
    raise DesignError(ln.file, f"{spice_name}: kind {kind.name} has {len(kpins)} pins but the line gives {n_nodes} "
                      f"nodes{what}; give pins = [...] for it in the parts map", line=ln.line)


def kind_pins(b: Build, kind: PartKind, package: str) -> tuple[PinDef, ...]:
    return tuple(b.library.pins_for(kind, b.library.package(package)))


def add_candidate(b: Build, ln: Line, letter: str, spice_name: str, ref: str, nodes: list[str], kind: PartKind,
         package: str, pins: tuple[str, ...], new_ref: str, ref_spec: Spec | None, rec_spec: Spec | None,
         value: float | None = None, value_text: str = "", model: str = "") -> None:
    explicit = bool(new_ref)
    final = new_ref or ref
    if not REF_RE.match(final):
        raise DesignError(ln.file, f"{spice_name}: '{final}' is not a usable board reference (a letter, then "
                          f"letters, digits or _); give ref = \"...\" for it in the parts map", line=ln.line)
    rec = b.records.get(spice_name.lower())
    b.cands.append(Cand(spice_name, final, letter, nodes, ln.file, ln.line, kind, package, pins, value, value_text,
                         model, ref_spec, rec, explicit))
