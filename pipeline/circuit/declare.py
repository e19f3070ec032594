"""Declarations: a ``[blocks.NAME]`` table of the design checked and resolved into a :class:`Decl`.

:func:`declare` reads one table in named steps: the block type, its keys,
its options, the parts playing its roles, their values and tolerances, the
voltages it needs, its targets and its retune series. Every mistake raises
a :class:`~pipeline.errors.DesignError` naming the table's key.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from .. import values as _values
from ..errors import DesignError, Where
from ..graph import is_ground, pin_net_map
from ..model import Design, Net, Part, PinRef, RawTable, Target
from .blocktype import BlockType, RoleRules, SettingsContext
from .targets import parse_target, quantity
from .types import BLOCK_TYPES

__all__ = ["Decl", "declare", "declare_all", "DEFAULT_TOLERANCE", "DEFAULT_SERIES"]

#: Tolerance assumed for a block part that states none (fraction; common practice).
DEFAULT_TOLERANCE = {"resistor": 0.05, "capacitor": 0.10}
#: Series searched by retune unless the block's ``series`` table says otherwise.
DEFAULT_SERIES = {"resistor": "E24", "capacitor": "E12"}

_COMMON_KEYS = ("type", "parts", "targets", "series", "note")
_PinNets = Mapping[PinRef, list[Net]]


@dataclass(frozen=True)
class Decl:
    """A checked declaration: the type, the parts per role, settings, targets."""

    table: RawTable
    btype: BlockType
    roles: tuple[tuple[str, Part], ...]        # every role used, spec order
    numeric: tuple[str, ...]                   # roles with values (R, C)
    kinds: tuple[str, ...]                     # "resistor"/"capacitor" per numeric role
    values: np.ndarray
    tols: np.ndarray
    assumed: tuple[bool, ...]
    settings: tuple[tuple[str, float], ...]
    options: tuple[tuple[str, str], ...]
    targets: tuple[Target, ...]
    series: tuple[tuple[str, str], ...]
    assumptions: tuple[str, ...]
    note: str

    @property
    def name(self) -> str:
        return self.table.name

    def ref(self, role: str) -> str:
        return dict(self.roles)[role].ref

    def unit(self, figure: str) -> str:
        for f in self.btype.figures:
            if f.name == figure:
                return f.unit
        return ""


def _where(table: RawTable, sub: str, reason: str = "") -> Where:
    """Where in ``table`` a key stands (``reason``: see :class:`~pipeline.errors.Where`)."""
    return Where(table.file, table.line or None, f"{table.key}.{sub}" if sub else table.key, reason)


def _err(table: RawTable, sub: str, reason: str) -> DesignError:
    key = f"{table.key}.{sub}" if sub else table.key
    return DesignError(table.file, reason, key=key, line=table.line or None)


# --------------------------------------------------------------------------
# Nets and voltages
# --------------------------------------------------------------------------
def net_volts(net: Net) -> float | None:
    """A net's declared voltage; 0 V for an undeclared ground net (:func:`pipeline.graph.is_ground`)."""
    if net.voltage is not None:
        return net.voltage
    return 0.0 if is_ground(net.name) else None


def _part_nets(design: Design, pin_nets: _PinNets, ref: str) -> dict[str, Net]:
    found = {}
    for p in design.part(ref).pins:
        nets = pin_nets.get(PinRef(ref, p.number))
        if nets:
            found[nets[0].name] = nets[0]
    return found


def _far_net(design: Design, pin_nets: _PinNets, ref: str, other: str) -> Net | None:
    """The net of two-terminal ``ref`` that ``other`` is not on (None if not exactly one)."""
    mine, theirs = _part_nets(design, pin_nets, ref), _part_nets(design, pin_nets, other)
    far = sorted(k for k in mine if k not in theirs)
    return mine[far[0]] if len(far) == 1 else None


def _amp_supply(design: Design, pin_nets: _PinNets, ref: str) -> float | None:
    volts = []
    for p in design.part(ref).pins:
        if p.role == "supply":
            nets = pin_nets.get(PinRef(ref, p.number))
            v = net_volts(nets[0]) if nets else None
            if v is not None:
                volts.append(v)
    return max(volts) if volts and max(volts) > 0 else None


def _volts(table: RawTable, key: str, spec: Any, design: Design) -> float:
    if isinstance(spec, bool) or not isinstance(spec, (str, int, float)):
        raise _err(table, key, "expected a voltage such as \"3.3V\" or a net name")
    if isinstance(spec, (int, float)):
        v = float(spec)
    else:
        names = {n.name: n for n in design.nets}
        if spec.strip() in names:
            v = net_volts(names[spec.strip()])
            if v is None:
                raise _err(table, key, f"net '{spec.strip()}' has no declared voltage: declare it "
                                       f"under [voltages] or give a voltage such as \"3.3V\"")
            return v
        v = quantity(spec, "V", at=_where(table, key, f"'{spec}' is neither a voltage such as \"3.3V\" nor a "
                                                      "net of the design"))
    if not math.isfinite(v):
        raise _err(table, key, "the voltage must be a finite number")
    return v


# --------------------------------------------------------------------------
# The steps of a declaration
# --------------------------------------------------------------------------
def _block_type(table: RawTable, items: Mapping[str, Any]) -> BlockType:
    tname = items.get("type")
    if tname is None:
        raise _err(table, "type", f"a block needs a type; one of {', '.join(sorted(BLOCK_TYPES))}")
    if not isinstance(tname, str) or tname not in BLOCK_TYPES:
        raise _err(table, "type", f"unknown block type {tname!r}; known types: "
                                  f"{', '.join(sorted(BLOCK_TYPES))}")
    return BLOCK_TYPES[tname]


def _check_keys(table: RawTable, items: Mapping[str, Any], bt: BlockType) -> str:
    """Refuse unknown keys; return the note."""
    allowed = _COMMON_KEYS + tuple(k for k, _ in bt.keys)
    for k in sorted(items):
        if k not in allowed:
            raise _err(table, k, f"unknown key for a {bt.name} block; keys are {', '.join(allowed)}")
    note = items.get("note", "")
    if not isinstance(note, str):
        raise _err(table, "note", "note must be text")
    return note


def _check_role_names(table: RawTable, bt: BlockType, parts_spec: Any, rules: RoleRules) -> None:
    """Unknown, forbidden, missing and unpaired roles."""
    if not isinstance(parts_spec, dict):
        raise _err(table, "parts", "give parts = { ROLE = \"REF\", ... }; roles: "
                                   + ", ".join(r.name for r in bt.roles))
    role_names = [r.name for r in bt.roles]
    forbidden = dict(rules.forbidden)
    for role in sorted(parts_spec):
        if role not in role_names:
            raise _err(table, f"parts.{role}", f"unknown role for a {bt.name} block; roles are "
                                               f"{', '.join(role_names)}")
        if role in forbidden:
            raise _err(table, f"parts.{role}", f"role {role} does not apply to this block's "
                                               f"{forbidden[role]} setting")
    for role in rules.required:
        if role not in parts_spec:
            raise _err(table, f"parts.{role}", f"missing role {role} ({bt.role(role).where})")
    for a, b in rules.pairs:
        if a in parts_spec and b not in parts_spec:
            raise _err(table, f"parts.{b}", f"missing role {b}: {a} and {b} go together "
                                            f"({bt.role(b).where})")


def _kind_unit(design: Design, kind: str) -> tuple[str, str]:
    for k in design.kinds:
        if k.name == kind:
            return k.category, k.value_unit
    return "", ""


def _part_fits(design: Design, part: Part, want: str) -> bool:
    cat, unit = _kind_unit(design, part.kind)
    if want == "resistor":
        return part.kind == "resistor" or unit == "ohm"
    if want == "capacitor":
        return part.kind in ("capacitor", "capacitor-polarized") or unit == "F"
    if want == "amp":
        return part.kind.startswith(("opamp", "comparator")) or cat == "ic"
    if want == "led":
        return part.kind == "led" or cat == "semiconductor"
    return False


def _role_parts(design: Design, table: RawTable, bt: BlockType, parts_spec: Mapping[str, Any]
                ) -> list[tuple[str, Part]]:
    """The design part of each given role, checked for kind, fitting and value."""
    roles: list[tuple[str, Part]] = []
    seen: dict[str, str] = {}
    for spec in bt.roles:
        if spec.name not in parts_spec:
            continue
        k = f"parts.{spec.name}"
        ref = parts_spec[spec.name]
        if not isinstance(ref, str) or not ref.strip():
            raise _err(table, k, "expected a part reference such as \"R3\"")
        ref = ref.strip()
        try:
            part = design.part(ref)
        except KeyError:
            raise _err(table, k, f"no part {ref} in the design") from None
        if ref in seen:
            raise _err(table, k, f"{ref} already plays role {seen[ref]}; each role needs its own part")
        seen[ref] = spec.name
        if not _part_fits(design, part, spec.kind):
            want = {"amp": "an op-amp or comparator", "led": "an LED"}.get(spec.kind, f"a {spec.kind}")
            raise _err(table, k, f"{ref} is a {part.kind}, but role {spec.name} needs {want}")
        if part.dnp:
            raise _err(table, k, f"{ref} is marked dnp (not fitted) but plays role {spec.name}")
        if spec.kind in ("resistor", "capacitor"):
            if part.value is None or not math.isfinite(part.value) or part.value <= 0:
                raise _err(table, k, f"{ref} needs a value above zero to play role {spec.name}")
        roles.append((spec.name, part))
    return roles


def _settings(design: Design, table: RawTable, bt: BlockType, items: Mapping[str, Any],
              byrole: Mapping[str, Part], options: Mapping[str, str], pin_nets: _PinNets
              ) -> tuple[tuple[tuple[str, float], ...], tuple[str, ...]]:
    """The voltages the type asks for, sorted by key, and the notes on how they were found."""
    ctx = SettingsContext(
        items=items, byrole=byrole, options=options,
        given=lambda k: _volts(table, k, items[k], design) if k in items else None,
        far_net=lambda role, other: _far_net(design, pin_nets, byrole[role].ref, byrole[other].ref),
        net_volts=net_volts,
        amp_supply=lambda role: _amp_supply(design, pin_nets, byrole[role].ref),
        error=lambda k, reason: _err(table, k, reason),
    )
    out = bt.settings(ctx)
    return tuple(sorted(out)), tuple(ctx.notes)


def _targets(table: RawTable, bt: BlockType, items: Mapping[str, Any],
             settings: Mapping[str, float]) -> tuple[Target, ...]:
    figs = {f.name: f for f in bt.figures}
    available, why_not = bt.available(settings)
    targets_spec = items.get("targets", {})
    if not isinstance(targets_spec, dict):
        raise _err(table, "targets", "give targets = { FIGURE = \"VALUE ±ERROR\", ... }; figures: "
                                     + ", ".join(figs))
    targets = []
    for fname in [f.name for f in bt.figures] + sorted(set(targets_spec) - set(figs)):
        if fname not in targets_spec:
            continue
        k = f"targets.{fname}"
        if fname not in figs:
            raise _err(table, k, f"unknown figure for a {bt.name} block; figures are {', '.join(figs)}")
        if fname not in available:
            raise _err(table, k, why_not)
        targets.append(parse_target(targets_spec[fname], fname, figs[fname].unit, at=_where(table, k)))
    return tuple(targets)


def _series(table: RawTable, items: Mapping[str, Any]) -> tuple[tuple[str, str], ...]:
    series_spec = items.get("series", {})
    if not isinstance(series_spec, dict):
        raise _err(table, "series", "give series = { resistor = \"E24\", capacitor = \"E12\" }")
    series = dict(DEFAULT_SERIES)
    for kk in sorted(series_spec):
        if kk not in series:
            raise _err(table, f"series.{kk}", "series are given for resistor and capacitor")
        sv = series_spec[kk]
        if not isinstance(sv, str) or sv.strip().upper() not in _values.SERIES:
            raise _err(table, f"series.{kk}", f"unknown series {sv!r}; one of "
                                              f"{', '.join(_values.SERIES)}")
        series[kk] = sv.strip().upper()
    return tuple(sorted(series.items()))


def declare(design: Design, table: RawTable, pin_nets: _PinNets | None = None) -> Decl:
    """Check one ``[blocks.NAME]`` table against ``design`` and resolve it.

    Steps: the type; its keys and note; its options (they decide which
    roles are needed); the role names; the part of each role; values and
    tolerances of the R and C roles (:data:`DEFAULT_TOLERANCE` where none
    is stated); the voltages; the targets; the retune series.
    """
    if pin_nets is None:
        pin_nets = pin_net_map(design)
    items = dict(table.items)
    bt = _block_type(table, items)
    note = _check_keys(table, items, bt)
    options = bt.read_options(items, lambda k, reason: _err(table, k, reason))
    parts_spec = items.get("parts")
    _check_role_names(table, bt, parts_spec, bt.role_rules(dict(options)))
    roles = _role_parts(design, table, bt, parts_spec)
    byrole = dict(roles)
    numeric = tuple(r for r, _ in roles if bt.role(r).kind in ("resistor", "capacitor"))
    kinds = tuple(bt.role(r).kind for r in numeric)
    given = [byrole[r].tolerance for r in numeric]
    tols = [DEFAULT_TOLERANCE[k] if t is None else float(t) for t, k in zip(given, kinds)]
    settings, assumptions = _settings(design, table, bt, items, byrole, dict(options), pin_nets)
    return Decl(
        table=table, btype=bt, roles=tuple(roles), numeric=numeric, kinds=kinds,
        values=np.array([byrole[r].value for r in numeric], dtype=float),
        tols=np.array(tols, dtype=float), assumed=tuple(t is None for t in given),
        settings=settings, options=options, targets=_targets(table, bt, items, dict(settings)),
        series=_series(table, items), assumptions=assumptions, note=note,
    )


def declare_all(design: Design) -> list[Decl]:
    """Every declaration of ``design``, in design order."""
    pin_nets = pin_net_map(design)
    return [declare(design, t, pin_nets) for t in design.stages]
