"""The part-net graph's helpers against networkx's own edge views (the reference library)."""

import pytest

from pipeline.graph import build_graph, net_node, part_node, pin_nets, pins_on_net, unconnected_pins
from pipeline.model import Design, Net, Part, PinDef, PinRef
from pipeline.order import natural_key

_PINS = tuple(PinDef(str(i), f"P{i}", "passive") for i in range(1, 12))


def _design():
    parts = tuple(Part(r, "resistor", "0603", _PINS) for r in ("U10", "U2", "R1"))
    nets = (Net("N10", (PinRef("U10", "10"), PinRef("U2", "2"), PinRef("U2", "1"), PinRef("R1", "1"))),
            Net("N2", (PinRef("U10", "10"), PinRef("U10", "9"), PinRef("R1", "2"))),   # U10.10 on two nets
            Net("n1", (PinRef("U2", "11"),)))
    return Design("t", "", "", parts, nets)


@pytest.mark.parametrize("ref", ["U10", "U2", "R1"])
def test_part_helpers_match_edge_views(ref):
    g = build_graph(_design())
    edges = list(g.edges(part_node(ref), data=True))
    want: dict[str, list[str]] = {}
    for _, net, d in edges:
        want.setdefault(d["pin"], []).append(net[1])
    got = pin_nets(g, ref)
    assert list(got) == sorted(want, key=natural_key)
    assert all(got[k] == sorted(v, key=natural_key) for k, v in want.items())
    used = {d["pin"] for _, _, d in edges}
    assert unconnected_pins(g, ref) == [p.number for p in _PINS if p.number not in used]


@pytest.mark.parametrize("net", ["N10", "N2", "n1"])
def test_pins_on_net_match_edge_views(net):
    g = build_graph(_design())
    want = sorted(((v[1], d["pin"], d["role"]) for _, v, d in g.edges(net_node(net), data=True)),
                  key=lambda t: (natural_key(t[0]), natural_key(t[1])))
    assert pins_on_net(g, net) == want
