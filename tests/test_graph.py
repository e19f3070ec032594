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


def test_the_graph_is_built_once_per_design_and_frozen():
    import networkx as nx

    from pipeline import graph

    d = _design()
    g = build_graph(d)
    assert build_graph(d) is g and nx.is_frozen(g)
    with pytest.raises(nx.NetworkXError):  # shared between callers, so nobody may change it
        g.add_node(("part", "X1"))
    other = build_graph(_design())  # an equal design but another object: its own graph
    assert other is not g and nx.utils.graphs_equal(other, g)
    assert graph._LAST[graph._build][0]() is not d


def test_a_run_builds_the_graph_once(monkeypatch, tmp_path):
    """Cost guard (issue 11): the checks and the placement rules share one graph, and the value checks,
    block analysis and writers one pin-to-net index; counted, not timed."""
    from pathlib import Path

    from pipeline import graph
    from pipeline.project import load_project, run

    calls = []
    for name in ("_build", "_pin_net_map"):
        real = getattr(graph, name)
        monkeypatch.setattr(graph, name, lambda design, real=real, name=name: calls.append(name) or real(design))
    demo = Path(__file__).resolve().parents[1] / "demo_project"
    run(load_project(demo, out=tmp_path / "out"), route=False)
    assert sorted(calls) == ["_build", "_pin_net_map"]  # each once, though several stages ask


def test_pin_net_map_is_kept_for_its_design():
    from pipeline.graph import pin_net_map

    d = _design()
    m = pin_net_map(d)
    assert pin_net_map(d) is m and pin_net_map(_design()) is not m
    assert [n.name for n in m[PinRef("U10", "10")]] == ["N10", "N2"]  # design order, read off _design()
