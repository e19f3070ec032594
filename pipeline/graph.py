"""Stage 2: the connectivity graph, built once and queried by later stages.

Entry point: :func:`build_graph`. The graph is a bipartite
:class:`networkx.MultiGraph`: one node per part, ``("part", ref)``, one
node per net, ``("net", name)``, and one edge per connected pin, keyed by
the pin number, carrying ``pin``, ``pin_name`` and ``role``. A pin listed on
two nets gives two edges from its part (that is a check finding, not a
reader error, so the graph must be able to hold it).

The graph of a design is built once: :func:`build_graph` keeps the last
graph it built with a weak reference to its design and hands the same,
frozen graph (:func:`networkx.freeze`: it refuses changes) to every later
caller with that design object (the checks and the placement rules both ask
for it, issue 11); :func:`pin_net_map` keeps its index the same way (the
value checks, the block analysis and two writers ask for it).

The queries are plain functions over the graph, in the manner of networkx
algorithms; each costs O(degree) of the node it starts from except
:func:`connected_groups`, O(V + E). They read the graph's adjacency dicts
(``g._adj``, networkx's documented data structure, as its own algorithms do)
rather than its views, which build a view object per step (a tenth of the
cost at 16,000 parts).

Examples
--------
>>> from pipeline.model import Design, Part, PinDef, Net, PinRef
>>> pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
>>> d = Design("x", "A", "x.toml",
...     parts=(Part("R1", "resistor", "0603", pins), Part("R2", "resistor", "0603", pins)),
...     nets=(Net("IN", (PinRef("R1", "1"),)), Net("MID", (PinRef("R1", "2"), PinRef("R2", "1")))))
>>> g = build_graph(d)
>>> parts_on_net(g, "MID")
['R1', 'R2']
>>> nets_of_part(g, "R1")
['IN', 'MID']
>>> pin_count(g, "IN")
1
>>> unconnected_pins(g, "R2")
['2']
"""

from __future__ import annotations

import weakref
from typing import TYPE_CHECKING, Callable, TypeVar

from .gcpause import paused_gc
from .model import Design, Net, PinRef
from .order import natural_key

T = TypeVar("T")

if TYPE_CHECKING:  # pragma: no cover - networkx is imported where a graph is built (it is heavy)
    import networkx as nx

__all__ = [
    "build_graph",
    "part_node",
    "net_node",
    "parts_on_net",
    "nets_of_part",
    "pins_on_net",
    "pin_count",
    "pin_nets",
    "unconnected_pins",
    "connected_groups",
    "GROUND_NAMES",
    "is_ground",
    "SPICE_GROUND_NODES",
    "SPICE_GROUND_NET",
    "pin_net_map",
    "pin_order",
]

#: Net names that mean ground (0 V when a net declares no voltage), compared
#: without regard to case; ``0`` is the SPICE ground node (ngspice manual,
#: "circuit description": node 0 is ground).
GROUND_NAMES = frozenset({"GND", "AGND", "DGND", "PGND", "0"})

#: SPICE's own ground: the node names a simulator takes as ground (node ``0``;
#: ``gnd`` in any case is its alias in ngspice and most simulators, from memory),
#: and the one design net the SPICE reader and writer put on that node. Only
#: this net, not every :data:`GROUND_NAMES` net: AGND and DGND stay separate
#: nodes in a netlist, as they are separate nets in the design.
SPICE_GROUND_NODES = frozenset({"0", "gnd"})
SPICE_GROUND_NET = "GND"


def is_ground(name: str) -> bool:
    """True for a ground net name (:data:`GROUND_NAMES`, any case).

    >>> is_ground("agnd"), is_ground("0"), is_ground("VCC")
    (True, True, False)
    """
    return name.upper() in GROUND_NAMES


#: per builder function, the last value built and a weak reference to its design (:func:`_once`)
_LAST: dict[Callable, tuple] = {}


def _once(design: Design, build: Callable[[Design], T]) -> T:
    """``build(design)``, kept for the same design object (held weakly) until another is asked
    for: the checks, the placement rules and the writers ask for the same index of one design."""
    hit = _LAST.get(build)
    if hit is not None and hit[0]() is design:
        return hit[1]
    value = build(design)
    _LAST[build] = (weakref.ref(design), value)
    return value


def pin_net_map(design: Design) -> dict[PinRef, list[Net]]:
    """Every connected pin -> the nets it is on, in design order; shared by every caller with the
    same design object: do not change it. Cost O(pins) the first time, O(1) after.

    A pin listed on two nets (a check finding) maps to both; callers that
    want one take the first.
    """
    return _once(design, _pin_net_map)


def _pin_net_map(design: Design) -> dict[PinRef, list[Net]]:
    """Build :func:`pin_net_map`'s index. Cost O(pins)."""
    out: dict[PinRef, list[Net]] = {}
    for net in design.nets:
        for p in net.pins:
            out.setdefault(p, []).append(net)
    return out


def part_node(ref: str) -> tuple[str, str]:
    return ("part", ref)


def net_node(name: str) -> tuple[str, str]:
    return ("net", name)


def build_graph(design: Design) -> nx.MultiGraph:
    """The part-net graph of ``design``, built once per design object.

    Part nodes carry ``kind``, ``package``, ``dnp`` and ``pins`` (the
    kind's :class:`~pipeline.model.PinDef` tuple); net nodes carry
    ``voltage``. The graph is frozen (:func:`networkx.freeze`); a second
    call with the same design object returns the same graph. Cost
    O(parts + pins) the first time, O(1) after.
    """
    return _once(design, _build)


def _build(design: Design) -> nx.MultiGraph:
    """Build the graph of :func:`build_graph` (module notes), frozen. Cost O(parts + pins)."""
    import networkx as nx

    g = nx.MultiGraph(design=design.name)
    with paused_gc():  # many long-lived dicts and no cycles (pipeline.gcpause)
        for p in design.parts:
            g.add_node(part_node(p.ref), kind=p.kind, package=p.package, dnp=p.dnp, pins=p.pins)
        parts = design.by_ref
        for n in design.nets:
            g.add_node(net_node(n.name), voltage=n.voltage)
            for pr in n.pins:
                pd = parts[pr.ref].pin(pr.pin)
                g.add_edge(part_node(pr.ref), net_node(n.name), key=pr.pin, pin=pr.pin,
                           pin_name=pd.name, role=pd.role)
    return nx.freeze(g)


def parts_on_net(g: nx.MultiGraph, net: str) -> list[str]:
    """Refs of the parts with a pin on ``net``, natural order, each once."""
    return sorted({n[1] for n in g._adj[net_node(net)]}, key=natural_key)


def nets_of_part(g: nx.MultiGraph, ref: str) -> list[str]:
    """Names of the nets ``ref`` touches, natural order, each once."""
    return sorted({n[1] for n in g._adj[part_node(ref)]}, key=natural_key)


def pin_order(t: tuple[str, ...]) -> tuple:
    """Sort key of a ``(ref, pin, ...)`` tuple: natural order of the ref, then of the pin."""
    return natural_key(t[0]), natural_key(t[1])


def pins_on_net(g: nx.MultiGraph, net: str, ordered: bool = True) -> list[tuple[str, str, str]]:
    """``(ref, pin, role)`` of every pin on ``net``, natural order (``ordered=False``: the graph's
    order, for a caller that only counts or tests them; saves the sort)."""
    out = [(part[1], d["pin"], d["role"]) for part, keyed in g._adj[net_node(net)].items() for d in keyed.values()]
    return sorted(out, key=pin_order) if ordered and len(out) > 1 else out


def pin_count(g: nx.MultiGraph, net: str) -> int:
    """Number of pins on ``net``."""
    return sum(len(keyed) for keyed in g._adj[net_node(net)].values())


def pin_nets(g: nx.MultiGraph, ref: str) -> dict[str, list[str]]:
    """Pin number -> nets it is on, for every connected pin of ``ref``."""
    out: dict[str, list[str]] = {}
    for net, keyed in g._adj[part_node(ref)].items():
        for d in keyed.values():
            pin = d["pin"]
            if pin in out:
                out[pin].append(net[1])
                out[pin].sort(key=natural_key)
            else:
                out[pin] = [net[1]]
    if len(out) < 2:
        return out
    return {k: out[k] for k in sorted(out, key=natural_key)}


def unconnected_pins(g: nx.MultiGraph, ref: str) -> list[str]:
    """Pin numbers of ``ref`` on no net, natural order."""
    node = part_node(ref)
    connected = {d["pin"] for keyed in g._adj[node].values() for d in keyed.values()}
    return [p.number for p in g._node[node]["pins"] if p.number not in connected]


def connected_groups(g: nx.MultiGraph) -> list[list[str]]:
    """Groups of part refs joined through nets, largest first then by first ref.

    Method: connected components of the bipartite graph (breadth-first
    search), O(V + E); net nodes are dropped from the result.
    """
    groups = []
    import networkx as nx

    for comp in nx.connected_components(g):
        refs = sorted((n[1] for n in comp if n[0] == "part"), key=natural_key)
        if refs:
            groups.append(refs)
    return sorted(groups, key=lambda r: (-len(r), natural_key(r[0])))
