"""Connectivity graph and connection checks, each check triggered by a small design."""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import pytest

from pipeline.check import check_connections
from pipeline.graph import build_graph, connected_groups, nets_of_part, parts_on_net, pin_count, pin_nets, pins_on_net
from pipeline.order import natural_key

ROOT = Path(__file__).resolve().parents[1]


def _run(design_from, library, text):
    d, _ = design_from(text)
    lib = library.with_kinds(d.kinds)
    g = build_graph(d)
    cats = {p.kind: lib.kind(p.kind).category for p in d.parts}
    return d, g, check_connections(d, g, cats)


# A clean buffered divider: an op-amp follower with decoupling, fed by a divider from a pad.
CLEAN = """
[parts.P1]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.P2]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.P3]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.R1]
kind = "resistor"
value = "10k"
package = "0603"
[parts.R2]
kind = "resistor"
value = "10k"
package = "0603"
[parts.C1]
kind = "capacitor"
value = "100n"
package = "0603"
[parts.U1]
kind = "opamp-single"
package = "SOT-23-5"
[nets]
VCC = ["P1.1", "R1.1", "U1.V+", "C1.1"]
GND = ["P2.1", "R2.2", "U1.V-", "C1.2"]
MID = ["R1.2", "R2.1", "U1.+IN"]
OUT = ["U1.OUT", "U1.-IN", "P3.1"]
"""


def test_clean_design_has_no_findings(design_from, library):
    _, _, f = _run(design_from, library, CLEAN)
    assert f == ()


def test_graph_queries(design_from, library):
    d, g, _ = _run(design_from, library, CLEAN)
    assert parts_on_net(g, "MID") == ["R1", "R2", "U1"]
    assert nets_of_part(g, "U1") == ["GND", "MID", "OUT", "VCC"]
    assert pin_count(g, "VCC") == 4
    assert pins_on_net(g, "OUT") == [("P3", "1", "terminal"), ("U1", "1", "out"), ("U1", "4", "in")]
    assert connected_groups(g) == [["C1", "P1", "P2", "P3", "R1", "R2", "U1"]]
    # Independent check of the bipartite structure with networkx's own algorithm.
    assert nx.is_bipartite(g)
    assert g.number_of_edges() == sum(len(n.pins) for n in d.nets)


def _variant(old: str, new: str) -> str:
    assert old in CLEAN
    return CLEAN.replace(old, new)


CASES = [
    # (design text, expected check code, severity, subject that must appear)
    (_variant('OUT = ["U1.OUT", "U1.-IN", "P3.1"]', 'OUT = ["U1.OUT", "U1.-IN"]\nLONE = ["P3.1"]'),
     "connect.single-pin-net", "error", "LONE"),
    (_variant('MID = ["R1.2", "R2.1", "U1.+IN"]', 'MID = ["R1.2", "R2.1"]'),
     "connect.unconnected-pin", "error", "U1.3"),
    (_variant('OUT = ["U1.OUT", "U1.-IN", "P3.1"]', 'OUT = ["U1.-IN", "P3.1"]'),
     "connect.floating-output", "warning", "U1.1"),
    (_variant('MID = ["R1.2", "R2.1", "U1.+IN"]', 'MID = ["R1.2", "R2.1"]\nX = ["U1.+IN", "U1.-IN"]')
     .replace('"U1.OUT", "U1.-IN", "P3.1"', '"U1.OUT", "P3.1"'),
     "connect.undriven-input", "error", "X"),
    (_variant('OUT = ["U1.OUT", "U1.-IN", "P3.1"]', 'OUT = ["U1.OUT", "U1.-IN", "P3.1", "U2.OUT"]')
     + '[parts.U2]\nkind = "opamp-single"\npackage = "SOT-23-5"\n',
     "connect.output-conflict", "error", "U2.1"),
    (_variant('GND = ["P2.1", "R2.2", "U1.V-", "C1.2"]', 'GND = ["P2.1", "R2.2", "C1.2"]')
     .replace('"U1.V+", "C1.1"', '"U1.V+", "U1.V-", "C1.1"'),
     "connect.supply-short", "error", "U1"),
    (_variant('GND = ["P2.1", "R2.2", "U1.V-", "C1.2"]', 'GND = ["P2.1", "R2.2", "U1.V-", "C1.1"]')
     .replace('"U1.V+", "C1.1"', '"U1.V+", "C1.2"'),
     None, None, None),  # capacitor reversed is still across the supply: no finding
    (_variant('GND = ["P2.1", "R2.2", "U1.V-", "C1.2"]', 'GND = ["P2.1", "R2.2", "U1.V-"]\nCX = ["C1.2", "R2.1"]'),
     "connect.no-decoupling", "warning", "U1"),
    (CLEAN + '[parts.R9]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\n',
     "connect.unconnected-part", "error", "R9"),
    (_variant('OUT = ["U1.OUT", "U1.-IN", "P3.1"]', 'OUT = ["U1.OUT", "U1.-IN", "P3.1"]\nout = ["R3.1", "R3.2"]')
     + '[parts.R3]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\n',
     "connect.case-clash", "warning", "out"),
    (_variant('MID = ["R1.2", "R2.1", "U1.+IN"]', 'MID = ["R1.2", "R2.1", "U1.+IN"]\nSHORT = ["R1.2", "P3.1"]'),
     "connect.pin-on-two-nets", "error", "R1.2"),
    (_variant('OUT = ["U1.OUT", "U1.-IN", "P3.1"]', 'OUT = ["U1.OUT", "U1.-IN", "P3.1"]\nEMPTY = []'),
     "connect.empty-net", "error", "EMPTY"),
]


@pytest.mark.parametrize("text, code, severity, subject", CASES)
def test_each_check_fires(design_from, library, text, code, severity, subject):
    _, _, found = _run(design_from, library, text)
    if code is None:
        assert found == ()
        return
    hits = [f for f in found if f.check == code]
    assert hits, [f.check for f in found]
    hit = next((f for f in hits if subject in f.subject), None)
    assert hit is not None, hits
    assert hit.severity == severity
    assert hit.message.endswith(".")


def test_pin_on_two_nets_in_graph(design_from, library):
    _, g, _ = _run(design_from, library, CASES[-2][0])
    assert pin_nets(g, "R1")["2"] == ["MID", "SHORT"]


def test_natural_order():
    # Common practice for reference designators: numeric parts compare as numbers.
    assert sorted(["R10", "R2", "R1", "C10", "C9", "U1"], key=natural_key) == ["C9", "C10", "R1", "R2", "R10", "U1"]


def test_demo_design_is_clean(library):
    from pipeline.design import read_design

    d, w = read_design(ROOT / "demo_project" / "design.toml", library)
    lib = library.with_kinds(d.kinds)
    g = build_graph(d)
    found = check_connections(d, g, {p.kind: lib.kind(p.kind).category for p in d.parts})
    # clean: no warning or error; the reader's only note says which height the chip capacitors take
    assert [x for x in w if x.severity != "info"] == [] and found == (), found
    assert {x.check for x in w} <= {"design.height-default"}
    assert 20 <= len(d.parts) <= 35


def test_per_pin_lookups_never_scan_the_parts(monkeypatch):
    """Cost guard (issue 11): build_graph and netlist_csv look parts up in O(1) per pin, never
    through Design.part (a per-pin call made the run quadratic); counted, not timed."""
    from pipeline.export.netlist import netlist_csv
    from pipeline.model import Design, Net, Part, PinDef, PinRef

    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = tuple(Part(f"R{i}", "resistor", "0603", pins) for i in range(1, 41))
    nets = tuple(Net(f"N{i}", (PinRef(f"R{i}", "2"), PinRef(f"R{i + 1}", "1"))) for i in range(1, 40))
    design = Design("x", "A", "x.toml", parts, nets)
    calls = []
    real = Design.part
    monkeypatch.setattr(Design, "part", lambda self, ref: (calls.append(ref), real(self, ref))[1])
    g = build_graph(design)
    out = netlist_csv(design)
    assert calls == []
    assert g.number_of_edges() == 78 and out.count(b"\n") == 79
    assert design.part("R7") is parts[6] and calls == ["R7"]  # the counter can fail


def test_decoupling_caps_index_caps_by_net_pair(monkeypatch, library):
    """Cost guard (issue 11): decoupling_caps looks an IC's supply-net pairs up among the caps
    instead of scanning every cap per IC (O(ICs x caps) at 16,000 parts); net-pair hashes are
    counted, not timed. The result is checked against the plain scan of the rule (every cap with
    one pin on each of two of the IC's supply nets, in design order)."""
    import pipeline.check as check
    from pipeline.model import Design, Net, Part, PinDef, PinRef

    op = (PinDef("4", "V-", "supply"), PinDef("8", "V+", "supply"), PinDef("1", "OUT", "output"))
    cap = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    ics = [Part(f"U{k}", "opamp-dual", "SOIC-8", op) for k in range(1, 31)]
    caps = [Part(f"C{k}", "capacitor", "0603", cap) for k in range(1, 61)]
    nets = {}
    for k in range(1, 31):  # three supply rails, ten ICs each; two caps per IC, one of them on the wrong rail
        rail = f"V{k % 3}"
        nets.setdefault(rail, []).append(PinRef(f"U{k}", "8"))
        nets.setdefault("GND", []).append(PinRef(f"U{k}", "4"))
        nets[rail].append(PinRef(f"C{2 * k - 1}", "1"))
        nets.setdefault(f"V{(k + 1) % 3}", []).append(PinRef(f"C{2 * k}", "1"))
        nets["GND"] += [PinRef(f"C{2 * k - 1}", "2"), PinRef(f"C{2 * k}", "2")]
        nets[f"O{k}"] = [PinRef(f"U{k}", "1")]
    design = Design("x", "A", "x.toml", tuple(ics + caps), tuple(Net(n, tuple(p)) for n, p in nets.items()))
    g = build_graph(design)
    cats = {"opamp-dual": "ic", "capacitor": "passive"}
    hashes = []

    class Pair(frozenset):
        def __hash__(self):
            hashes.append(1)
            return frozenset.__hash__(self)

    monkeypatch.setattr(check, "frozenset", Pair, raising=False)
    found = check.decoupling_caps(design, g, cats)
    # the plain scan, written here: caps whose two nets are the IC's rail and GND
    rail_of = {f"U{k}": f"V{k % 3}" for k in range(1, 31)}
    cap_nets = {c.ref: {ns[0] for ns in pin_nets(g, c.ref).values()} for c in caps}
    want = {u: tuple(c.ref for c in caps if cap_nets[c.ref] == {rail, "GND"}) for u, rail in rail_of.items()}
    assert found == want and all(len(v) == 20 for v in found.values())
    assert 0 < len(hashes) < 5 * (len(ics) + len(caps))  # a scan per IC would hash 30 x 60 = 1,800 times


def test_decoupling_caps_share_one_tuple_per_supply_net_set(monkeypatch):
    """Cost guard (issue 11): ICs on the same supply nets get one tuple of caps, found once, not a
    list built per IC (every IC pairs with every cap on shared rails: O(ICs x caps)); counted by the
    sorts of found caps, not timed. The tuple is the plain scan's (caps across VCC and GND, design order)."""
    import builtins

    import pipeline.check as check
    from pipeline.model import Design, Net, Part, PinDef, PinRef

    op = (PinDef("4", "V-", "supply"), PinDef("8", "V+", "supply"))
    cap = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    ics = [Part(f"U{k}", "opamp-dual", "SOIC-8", op) for k in range(1, 21)]
    caps = [Part(f"C{k}", "capacitor", "0603", cap) for k in range(1, 21)]
    vcc = [PinRef(p.ref, "8") for p in ics] + [PinRef(c.ref, "1") for c in caps]
    gnd = [PinRef(p.ref, "4") for p in ics] + [PinRef(c.ref, "2") for c in caps]
    design = Design("x", "A", "x.toml", tuple(ics + caps), (Net("VCC", tuple(vcc)), Net("GND", tuple(gnd))))
    g = build_graph(design)
    sorts: list[int] = []
    real = builtins.sorted
    monkeypatch.setattr(check, "sorted", lambda it, **k: (sorts.append(1), real(it, **k))[1], raising=False)
    found = check.decoupling_caps(design, g, {"opamp-dual": "ic", "capacitor": "passive"})
    monkeypatch.undo()
    assert found["U1"] == tuple(c.ref for c in caps) and all(found[u.ref] is found["U1"] for u in ics)
    assert len(sorts) <= len(ics) + 2  # one sort of each IC's supply nets, one of the caps found
