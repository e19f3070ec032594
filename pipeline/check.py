"""Stage 3: connection checks over the connectivity graph.

Entry point: :func:`check_connections`. Each check is a small function
``(design, graph, categories) -> list[Finding]``; :data:`CHECKS` lists them
in the order they run, so adding a check is adding a function and a line
(DEVELOPERS.md, "Adding a check").

Severities: an *error* makes ``snugboard run`` exit 1 (CONTRACT section 4),
a *warning* or *info* does not.

========================  ========  ==================================================
code                      severity  what
========================  ========  ==================================================
connect.empty-net         error     a net with no pins
connect.single-pin-net    error     a net with one pin (a wire to nowhere)
connect.pin-on-two-nets   error     one pin listed on two nets (they are shorted)
connect.unconnected-part  error     a part with no connection at all
connect.unconnected-pin   error     an IC input or supply pin on no net
connect.floating-output   warning   an IC output pin on no net
connect.undriven-input    error     inputs on a net that nothing drives
connect.output-conflict   error     two push-pull outputs on one net
connect.supply-short      error     an IC whose supply pins are not on two nets
connect.no-decoupling     warning   no capacitor across an IC's supply nets
connect.case-clash        warning   net names that differ only in case
========================  ========  ==================================================

"Drives" means: an output, open-drain output or supply output pin, a
passive pin (a resistor, capacitor or connector brings the level from
elsewhere) or a connector's pin on the same net. Decoupling follows common
practice (REFERENCES.md section 7): a capacitor with one pin on each of two
of the IC's supply nets.
"""

from __future__ import annotations

from itertools import combinations
from typing import Callable, Mapping

import networkx as nx

from .graph import part_node, pin_count, pin_nets, pin_order, pins_on_net, unconnected_pins
from .model import Design, Finding
from .order import natural_key

__all__ = ["check_connections", "CHECKS", "decoupling_caps"]

Check = Callable[[Design, nx.MultiGraph, Mapping[str, str]], list[Finding]]

_DRIVERS = ("out", "open-drain", "supply-out", "terminal")
_PUSH_PULL = ("out", "supply-out")


def _nk(s: str) -> tuple:
    return natural_key(s)


def check_empty_and_single(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    for n in design.nets:
        c = pin_count(g, n.name)
        if c == 0:
            out.append(Finding("error", "connect.empty-net", (n.name,),
                               f"Net {n.name} has no pins: remove it or connect it."))
        elif c == 1:
            pr = n.pins[0]
            out.append(Finding("error", "connect.single-pin-net", (n.name, str(pr)),
                               f"Net {n.name} has only one pin ({pr}): connect it to something or remove the net."))
    return out


def check_pin_on_two_nets(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    for p in design.parts:
        for pin, nets in pin_nets(g, p.ref).items():
            if len(nets) > 1:
                out.append(Finding("error", "connect.pin-on-two-nets", (f"{p.ref}.{pin}", *nets),
                                   f"Pin {p.ref}.{pin} is on {len(nets)} nets ({', '.join(nets)}), which shorts them: "
                                   "keep it on one net or merge the nets."))
    return out


def check_unconnected(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    for p in design.parts:
        if g.degree(part_node(p.ref)) == 0:
            out.append(Finding("error", "connect.unconnected-part", (p.ref,),
                               f"{p.ref} ({p.kind}) is connected to nothing: add it to nets or remove it.",
                               kind="unconnected-part"))
            continue
        if cat.get(p.kind) != "ic":
            # passives, connectors and semiconductors with a free pin show up
            # as single-pin nets or do nothing; ICs get pin-level findings.
            free = unconnected_pins(g, p.ref)
            if free and cat.get(p.kind) != "connector":
                pins = ", ".join(f"{p.ref}.{n}" for n in free)
                out.append(Finding("error", "connect.unconnected-pin", tuple(f"{p.ref}.{n}" for n in free),
                                   f"{pins} of {p.ref} ({p.kind}) is on no net: connect it."))
            continue
        roles = {d.number: d for d in p.pins}
        for number in unconnected_pins(g, p.ref):
            pd = roles[number]
            if pd.role == "nc":
                continue
            subj = (f"{p.ref}.{number}",)
            label = f"{p.ref}.{number} ({pd.name})" if pd.name != number else f"{p.ref}.{number}"
            if pd.role in ("out", "open-drain", "supply-out"):
                out.append(Finding("warning", "connect.floating-output", subj,
                                   f"Output {label} is on no net; fine if unused, otherwise connect it."))
            else:
                what = "supply pin" if pd.role == "supply" else ("input" if pd.role == "in" else "pin")
                out.append(Finding("error", "connect.unconnected-pin", subj,
                                   f"IC {what} {label} is on no net: connect it (tie unused inputs to a defined level)."))
    return out


def _named(pins: list[tuple[str, str, str]]) -> list[str]:
    """``REF.PIN`` of ``pins`` (from :func:`pins_on_net`), in natural order."""
    return [f"{ref}.{pin}" for ref, pin, _ in sorted(pins, key=pin_order)]


def check_drivers(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    for n in design.nets:
        pins = pins_on_net(g, n.name, ordered=False)  # only the pins a message names are sorted
        if len(pins) < 2:
            continue
        roles = [r for _, _, r in pins]
        if not any(r in _DRIVERS for r in roles):
            sinks = _named([t for t in pins if t[2] in ("in", "supply")])
            if sinks:
                kind = "supply" if all(r == "supply" for r in roles if r != "nc") else "input"
                out.append(Finding("error", "connect.undriven-input", (n.name, *sinks),
                                   f"Net {n.name} has {kind} pins ({', '.join(sinks)}) but nothing drives it: "
                                   "connect an output, a supply or a resistor to it."))
        drivers = _named([t for t in pins if t[2] in _PUSH_PULL])
        if len(drivers) > 1:
            out.append(Finding("error", "connect.output-conflict", (n.name, *drivers),
                               f"Net {n.name} joins {len(drivers)} push-pull outputs ({', '.join(drivers)}): "
                               "they will fight; keep one driver or use open-collector outputs with a pull-up."))
    return out


def _supply_nets(g: nx.MultiGraph, ref: str, pins) -> tuple[list[str], list[str]]:
    supply = [p.number for p in pins if p.role == "supply"]
    nets = pin_nets(g, ref)
    on = sorted({net for num in supply for net in nets.get(num, [])}, key=_nk)
    return supply, on


def decoupling_caps(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> dict[str, tuple[str, ...]]:
    """The decoupling rule, written once: IC ref -> capacitors across two of its supply nets.

    Common practice (REFERENCES.md section 7): a capacitor with one pin on
    each of two of the IC's supply nets decouples it. Only ICs with two or
    more supply pins on two or more nets are keys; caps in design order.
    Cost O(parts + ICs x supply-net pairs + caps found once per distinct set of
    supply nets): the caps are indexed by their net pair, so an IC looks up its
    pairs instead of scanning the caps, and ICs on the same supply nets share one
    tuple (on shared rails every IC pairs with every cap: computing it per IC was
    O(ICs x caps), issue 11).
    """
    caps = [p for p in design.parts if p.kind in ("capacitor", "capacitor-polarized")]
    by_pair: dict[frozenset, list[tuple[int, str]]] = {}  # net pair -> (design position, ref)
    for k, c in enumerate(caps):
        nets = [ns[0] for ns in pin_nets(g, c.ref).values() if ns]
        if len(nets) == 2 and nets[0] != nets[1]:
            by_pair.setdefault(frozenset(nets), []).append((k, c.ref))
    out: dict[str, tuple[str, ...]] = {}
    shared: dict[tuple[str, ...], tuple[str, ...]] = {}  # an IC's supply nets -> its caps
    for p in design.parts:
        if cat.get(p.kind) != "ic":
            continue
        supply, nets = _supply_nets(g, p.ref, p.pins)
        if len(supply) >= 2 and len(nets) >= 2:
            found = shared.get(tuple(nets))
            if found is None:
                pairs = {frozenset(pair) for pair in combinations(nets, 2)}
                hits = sorted(hit for pair in pairs for hit in by_pair.get(pair, ()))
                found = shared[tuple(nets)] = tuple(ref for _k, ref in hits)
            out[p.ref] = found
    return out


def check_supplies(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    decoupled = decoupling_caps(design, g, cat)
    for p in design.parts:
        if cat.get(p.kind) != "ic":
            continue
        supply, nets = _supply_nets(g, p.ref, p.pins)
        if len(supply) < 2:
            continue
        if len(nets) < 2:
            where = f"all on {nets[0]}" if nets else "on no net"
            out.append(Finding("error", "connect.supply-short", (p.ref, *nets),
                               f"{p.ref} ({p.kind}) has its supply pins {where}: "
                               "its positive and ground supply must be on two different nets."))
            continue
        if not decoupled.get(p.ref):
            out.append(Finding("warning", "connect.no-decoupling", (p.ref, *nets),
                               f"{p.ref} ({p.kind}) has no capacitor across its supply nets ({', '.join(nets)}): "
                               "common practice is a 100 nF ceramic close to its supply pins.",
                               kind="no-decoupling"))
    return out


def check_case_clash(design: Design, g: nx.MultiGraph, cat: Mapping[str, str]) -> list[Finding]:
    out = []
    by_fold: dict[str, list[str]] = {}
    for n in design.nets:
        by_fold.setdefault(n.name.casefold(), []).append(n.name)
    for names in by_fold.values():
        if len(names) > 1:
            names = sorted(names)
            out.append(Finding("warning", "connect.case-clash", tuple(names),
                               f"Net names {', '.join(names)} differ only in case; many layout programs merge them: "
                               "rename one or merge them."))
    return out


CHECKS: tuple[Check, ...] = (
    check_empty_and_single,
    check_pin_on_two_nets,
    check_unconnected,
    check_drivers,
    check_supplies,
    check_case_clash,
)


def check_connections(design: Design, g: nx.MultiGraph, categories: Mapping[str, str]) -> tuple[Finding, ...]:
    """Run every connection check.

    Parameters
    ----------
    design : Design
    g : networkx.MultiGraph
        From :func:`pipeline.graph.build_graph`.
    categories : mapping of str to str
        Part-kind name -> :attr:`PartKind.category` for every kind used.

    Returns
    -------
    tuple of Finding
        In check order, each check's findings in design order. Cost
        O(parts + pins) apart from the decoupling test, O(ICs x caps).
    """
    out: list[Finding] = []
    for check in CHECKS:
        out.extend(check(design, g, categories))
    return tuple(out)
