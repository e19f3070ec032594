"""Ordering BOM and neutral netlist: grouping, quantities, injection safety, round trip."""

from __future__ import annotations

import csv
import io
import json
from fractions import Fraction
from math import ceil

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.export.bom import BOM_COLUMNS, bom_files, bom_lines, order_quantity
from pipeline.export.csvcell import inert
from pipeline.export.netlist import netlist_csv, netlist_dict, netlist_json
from pipeline.graph import build_graph
from pipeline.order import natural_key
from pipeline.model import Design, Net, OrderOptions, Part, PinDef, PinRef

TWO = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))


def _part(ref, value=1000.0, kind="resistor", package="0603", **kw):
    return Part(ref=ref, kind=kind, package=package, pins=TWO, value=value, value_text=str(value), **kw)


def _rows(data: bytes) -> list[dict]:
    return list(csv.DictReader(io.StringIO(data.decode("utf-8"), newline="")))


def test_contract_columns_present():
    # CONTRACT.md section 4 names these columns; ours extend them.
    for col in ("qty", "refs", "kind", "value", "package", "tolerance", "rating",
                "manufacturer", "mpn", "note", "qty_order"):
        assert col in BOM_COLUMNS


def test_grouping_natural_order_and_dnp():
    d = Design("t", "A", "t.toml", parts=(
        _part("R10"), _part("R2"), _part("R1", value=4700.0), _part("R3", value=4700.0),
        _part("C1", 1e-7, kind="capacitor"), _part("R4", dnp=True),
    ), nets=())
    lines = bom_lines(d, OrderOptions(boards=10))
    assert [l.refs for l in lines] == [("C1",), ("R1", "R3"), ("R2", "R10")]
    assert [l.value for l in lines] == ["100n", "4.7k", "1k"]
    files = bom_files(d, OrderOptions(boards=10))
    rows = _rows(files["bom.csv"])
    assert [r["refs"] for r in rows] == ["C1", "R1 R3", "R2 R10"]
    assert [r["qty_order"] for r in rows] == ["10", "20", "20"]
    assert _rows(files["bom-unfitted.csv"])[0]["ref"] == "R4"
    totals = {r["item"]: r["count"] for r in _rows(files["bom-totals.csv"])}
    assert totals["fitted_parts_per_board"] == "5" and totals["unfitted_parts_per_board"] == "1"
    assert totals["parts_to_order"] == "50"


# Hand-computed order quantities: qty per board, boards, spares %, min spares, multiple -> (spares, order).
ORDER_CASES = [
    (1, 1, 0, 0, 1, (0, 1)),
    (3, 10, 5, 0, 1, (2, 32)),      # 30 parts, 5 % = 1.5 -> 2 spares
    (3, 10, 10, 0, 1, (3, 33)),     # exactly 3.0: no rounding up past it
    (7, 3, 10, 0, 1, (3, 24)),      # 21 x 0.1 = 2.1 -> 3
    (1, 10, 0, 5, 1, (5, 15)),      # minimum spares wins over 0 %
    (2, 10, 10, 1, 1, (2, 22)),     # 10 % = 2 beats minimum 1
    (1, 10, 0, 5, 10, (10, 20)),    # 15 rounded up to a multiple of 10
    (4, 25, 0, 0, 100, (0, 100)),   # exactly one reel step
    (1, 1, 0.1, 0, 1, (1, 2)),      # any fraction of a part is a whole part
]


@pytest.mark.parametrize("qty, boards, pct, mins, mult, expected", ORDER_CASES)
def test_order_quantity_hand_cases(qty, boards, pct, mins, mult, expected):
    assert order_quantity(qty, OrderOptions(boards=boards, spares_percent=pct, min_spares=mins,
                                            multiple=mult)) == expected


@st.composite
def designs(draw):
    n = draw(st.integers(1, 40))
    values = draw(st.lists(st.sampled_from([100.0, 1e3, 4.7e3, 10e3, 1e-7]), min_size=n, max_size=n))
    pkgs = draw(st.lists(st.sampled_from(["0402", "0603"]), min_size=n, max_size=n))
    dnps = draw(st.lists(st.booleans(), min_size=n, max_size=n))
    prefixes = draw(st.lists(st.sampled_from(["R", "C", "L"]), min_size=n, max_size=n))
    nums = draw(st.lists(st.integers(1, 300), min_size=n, max_size=n, unique=True))
    parts = tuple(_part(f"{p}{k}", value=v, package=pk, dnp=dn)
                  for p, k, v, pk, dn in zip(prefixes, nums, values, pkgs, dnps))
    return Design("gen", "", "gen.toml", parts=parts, nets=())


@settings(max_examples=60, deadline=None)
@given(designs(), st.integers(1, 50), st.floats(0, 50), st.integers(0, 5), st.integers(1, 10))
def test_bom_invariants(design, boards, pct, mins, mult):
    order = OrderOptions(boards=boards, spares_percent=pct, min_spares=mins, multiple=mult)
    lines = bom_lines(design, order)
    fitted = sorted(p.ref for p in design.parts if not p.dnp)
    # quantities sum to the fitted parts, refs partition them
    assert sum(l.qty for l in lines) == len(fitted)
    assert sorted(r for l in lines for r in l.refs) == fitted
    for l in lines:
        assert list(l.refs) == sorted(l.refs, key=natural_key)           # natural order within a line
        n = l.qty * boards
        assert l.qty_order % mult == 0 and l.qty_order >= n + mins        # never short
        assert l.qty_order >= n * (1 + pct / 100) - 1e-9
        # ...but not a step too many: the least count meeting both rules, in exact decimal arithmetic
        least = n + max(mins, ceil(Fraction(n) * Fraction(str(pct)) / 100))
        assert l.qty_order - mult < least <= l.qty_order
    firsts = [l.refs[0] for l in lines]
    assert firsts == sorted(firsts, key=natural_key)


@pytest.mark.parametrize("evil", ["=1+1", "+SUM(A1)", "-2+3", "@cmd", "\tx", "\rx", "=HYPERLINK(\"http://x\")"])
def test_csv_cells_are_inert(evil):
    # OWASP "CSV Injection": prefix cells starting with = + - @ tab CR so spreadsheets show text.
    d = Design("t", "A", "t.toml", parts=(_part("R1", note=evil, manufacturer=evil, mpn=evil),), nets=())
    row = _rows(bom_files(d, OrderOptions())["bom.csv"])[0]
    for col in ("note", "manufacturer", "mpn"):
        assert row[col] == "'" + evil
        assert not row[col].startswith(("=", "+", "-", "@", "\t", "\r"))
    assert inert("10k") == "10k"


def _net_design():
    parts = (_part("R1"), _part("R2"), _part("R10"),
             Part("U1", "opamp-single", "SOT-23-5", (PinDef("1", "OUT", "output"), PinDef("2", "V-", "power-in"),
                                                     PinDef("3", "+IN", "input"), PinDef("4", "-IN", "input"),
                                                     PinDef("5", "V+", "power-in"))))
    nets = (Net("IN", (PinRef("R1", "1"), PinRef("U1", "3"))),
            Net("FB", (PinRef("U1", "4"), PinRef("R2", "1"), PinRef("R10", "1"))),
            Net("GND", (PinRef("R2", "2"), PinRef("U1", "2"), PinRef("R1", "2"))),
            Net("OUT", (PinRef("U1", "1"), PinRef("R10", "2"))))
    return Design("n", "B", "n.toml", parts=parts, nets=nets)


def test_netlist_csv_rows():
    rows = _rows(netlist_csv(_net_design()))
    assert list(rows[0]) == ["net", "ref", "pin", "pin_name"]
    assert len(rows) == 10
    fb = [(r["ref"], r["pin"], r["pin_name"]) for r in rows if r["net"] == "FB"]
    # OWASP "CSV Injection": a signed name is made inert too (issue 13 item 22); netlist.json keeps it exact
    assert fb == [("R2", "1", "1"), ("R10", "1", "1"), ("U1", "4", "'-IN")]


def test_netlist_json_round_trip_gives_same_graph():
    d = _net_design()
    data = json.loads(netlist_json(d))
    # Rebuild a bipartite multigraph from the JSON alone and compare with networkx.
    g2 = nx.MultiGraph()
    for p in data["parts"]:
        g2.add_node(("part", p["ref"]))
    for n in data["nets"]:
        g2.add_node(("net", n["name"]))
        for pin in n["pins"]:
            ref, num = pin.split(".", 1)
            g2.add_edge(("part", ref), ("net", n["name"]), key=num)
    g1 = build_graph(d)
    assert sorted(g1.nodes) == sorted(g2.nodes)
    assert sorted(g1.edges(keys=True)) == sorted(g2.edges(keys=True)) or \
        sorted((tuple(sorted((u, v))), k) for u, v, k in g1.edges(keys=True)) == \
        sorted((tuple(sorted((u, v))), k) for u, v, k in g2.edges(keys=True))
    # pins of each part carry their nets
    u1 = next(p for p in data["parts"] if p["ref"] == "U1")
    assert {pin["number"]: pin["nets"] for pin in u1["pins"]} == {"1": ["OUT"], "2": ["GND"], "3": ["IN"],
                                                                  "4": ["FB"], "5": []}


def test_netlists_are_deterministic():
    d = _net_design()
    assert netlist_json(d) == netlist_json(d) and netlist_csv(d) == netlist_csv(d)
    assert netlist_dict(d)["parts"][0]["ref"] == "R1"
    assert [p["ref"] for p in netlist_dict(d)["parts"]] == ["R1", "R2", "R10", "U1"]


# --------------------------------------------------------------------------
# Board features (issue 8 item 5): never ordered, still in the netlists, listed apart
# --------------------------------------------------------------------------
FEATURES = frozenset({"wire-pad", "test-point", "mounting-hole", "fiducial"})


def test_library_marks_the_board_features():
    from pipeline.library import load_library
    # CONTRACT.md: wire pads, test points, mounting holes and fiducials are not parts to order
    assert frozenset(k.name for k in load_library().kinds() if k.board_feature) == FEATURES


def _feature_design():
    one = (PinDef("1", "1", "terminal"),)
    parts = (_part("R1"), _part("R2"),
             Part("J1", "wire-pad", "pad-1.5mm", one), Part("J2", "wire-pad", "pad-1.5mm", one),
             Part("TP1", "test-point", "pad-1mm", one, note="probe here"),
             Part("H1", "mounting-hole", "hole-3.2mm", one))
    nets = (Net("A", (PinRef("R1", "1"), PinRef("J1", "1"), PinRef("TP1", "1"))),
            Net("B", (PinRef("R1", "2"), PinRef("R2", "1"))),
            Net("C", (PinRef("R2", "2"), PinRef("J2", "1"), PinRef("H1", "1"))))
    return Design(name="f", revision="", source="f.toml", parts=parts, nets=nets)


def test_board_features_are_listed_apart_never_ordered():
    d = _feature_design()
    files = bom_files(d, OrderOptions(boards=5), FEATURES)
    ordered = " ".join(r["refs"] for r in _rows(files["bom.csv"]))
    assert ordered == "R1 R2"
    feats = _rows(files["board-features.csv"])
    assert [(r["ref"], r["kind"]) for r in feats] == [("H1", "mounting-hole"), ("J1", "wire-pad"),
                                                     ("J2", "wire-pad"), ("TP1", "test-point")]
    assert feats[3]["note"] == "probe here"
    totals = {r["item"]: int(r["count"]) for r in _rows(files["bom-totals.csv"])}
    assert totals["board_features_per_board"] == 4 and totals["fitted_parts_per_board"] == 2
    # still in the netlist: every feature's pin is a connected row
    net_refs = {r["ref"] for r in _rows(netlist_csv(d))}
    assert {"J1", "J2", "TP1", "H1"} <= net_refs


def test_without_feature_kinds_everything_is_ordered():
    files = bom_files(_feature_design(), OrderOptions())
    assert len(_rows(files["bom.csv"])) == 4 and _rows(files["board-features.csv"]) == []  # J1, J2 grouped


def test_demo_order_loses_exactly_the_pad_lines():
    from pathlib import Path

    from pipeline.design import read_design
    from pipeline.library import load_library

    root = Path(__file__).resolve().parents[1] / "demo_project"
    lib = load_library()
    design, _ = read_design(root / "design.toml", lib)
    order = OrderOptions(boards=10, spares_percent=5)
    old = bom_lines(design, order)                 # before: pads were ordered as parts
    new = bom_lines(design, order, FEATURES)
    pad_lines = [l for l in old if l.kind in FEATURES]
    assert pad_lines, "the demo has wire pads"
    # closed form: the new order is the old one minus the pad lines, line for line
    assert len(new) == len(old) - len(pad_lines)
    assert sum(l.qty_order for l in new) == sum(l.qty_order for l in old) - sum(l.qty_order for l in pad_lines)
    assert all(l.kind not in FEATURES for l in new)
