"""Tests of pipeline.area: courtyards of a design, and the board-area estimate."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import box

from pipeline.area import ROUTING_K, estimate_area, items_from_design
from pipeline.library import load_library
from pipeline.errors import DesignError, ProjectError
from pipeline.model import Design, Net, Part, PinDef, PinRef, PlaceItem


def _item(ref, length, width, pins=2, height=0.5):
    return PlaceItem(ref, length, width, height, (), pins)


# --------------------------------------------------------------------------
# estimate_area: closed-form values of the stated rule
#   A(k) = A_c (1 + k sqrt(p/2) / (layers/2)),  k = 0.25 / 0.5 / 1.0
# (the rule of thumb is common practice, from memory; these are its values
#  worked by hand, and A_c is checked against shapely's polygon area)
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "items, layers, expected",
    [
        # four 2 x 1 mm two-terminal parts, two layers: A_c 8, factor 1 + k
        ([_item(f"R{i}", 2.0, 1.0) for i in range(4)], 2, (8.0, 10.0, 12.0, 16.0)),
        # one SOIC-8 courtyard 5.4 x 7.4 (p = 8: sqrt(4) = 2), four layers (f_layer 2): 1 + k
        ([_item("U1", 5.4, 7.4, pins=8)], 4, (39.96, 49.95, 59.94, 79.92)),
        # one 2 x 1 part on a single layer: f_layer 0.5, factor 1 + 2k
        ([_item("R1", 2.0, 1.0)], 1, (2.0, 3.0, 4.0, 6.0)),
        # mixed: 2 + 6 pins -> p = 4, sqrt(2); A_c = 1 + 4 = 5; two layers
        ([_item("R1", 1.0, 1.0, pins=2), _item("U1", 2.0, 2.0, pins=6)], 2,
         (5.0, 5 * (1 + 0.25 * math.sqrt(2)), 5 * (1 + 0.5 * math.sqrt(2)), 5 * (1 + math.sqrt(2)))),
        # six layers: f_layer 3
        ([_item("R1", 3.0, 1.0)], 6, (3.0, 3.25, 3.5, 4.0)),
    ],
)
def test_estimate_closed_form(items, layers, expected):
    e = estimate_area(items, layers)
    got = (e.courtyard_area_mm2, e.low_mm2, e.expected_mm2, e.high_mm2)
    assert got == pytest.approx(expected, rel=1e-12)
    # courtyard sum against shapely's area of the same rectangles (closed-form geometry)
    assert e.courtyard_area_mm2 == pytest.approx(sum(box(0, 0, i.length_mm, i.width_mm).area for i in items))
    assert "common practice" in e.rule


def test_estimate_empty():
    e = estimate_area([], 2)
    assert (e.courtyard_area_mm2, e.low_mm2, e.expected_mm2, e.high_mm2) == (0.0, 0.0, 0.0, 0.0)


@pytest.mark.parametrize("layers", [0, -2, 1.5, True, "2", None])
def test_estimate_bad_layers(layers):
    with pytest.raises(ProjectError) as ei:
        estimate_area([_item("R1", 1, 1)], layers)
    assert ei.value.key == "board.layers"


_sizes = st.floats(0.2, 20.0, allow_nan=False)
_items = st.lists(st.tuples(_sizes, _sizes, st.integers(1, 64)), min_size=1, max_size=30)


@settings(max_examples=60, deadline=None)
@given(_items, st.integers(1, 12), st.integers(1, 40), st.integers(0, 29))
def test_estimate_monotone(spec, layers, extra_pins, which):
    """Monotone in pins (up) and layers (down); ordered low <= expected <= high (the stated rule)."""
    items = [_item(f"P{n}", a, b, p) for n, (a, b, p) in enumerate(spec)]
    e = estimate_area(items, layers)
    assert e.courtyard_area_mm2 <= e.low_mm2 <= e.expected_mm2 <= e.high_mm2
    # more pins on one part: never less area
    k = which % len(items)
    more = list(items)
    more[k] = _item(items[k].ref, items[k].length_mm, items[k].width_mm, items[k].pin_count + extra_pins)
    e2 = estimate_area(more, layers)
    assert e2.expected_mm2 >= e.expected_mm2 - 1e-9
    assert e2.high_mm2 >= e.high_mm2 - 1e-9
    # more layers: never more area, never below the courtyard sum
    e3 = estimate_area(items, layers + 1)
    assert e3.expected_mm2 <= e.expected_mm2 + 1e-9
    assert e3.low_mm2 >= e3.courtyard_area_mm2 - 1e-9
    # the allowance is the stated k times the same factor for low / expected / high
    f = (e.expected_mm2 / e.courtyard_area_mm2 - 1) / ROUTING_K[1]
    assert e.low_mm2 == pytest.approx(e.courtyard_area_mm2 * (1 + ROUTING_K[0] * f))
    assert e.high_mm2 == pytest.approx(e.courtyard_area_mm2 * (1 + ROUTING_K[2] * f))


# --------------------------------------------------------------------------
# items_from_design (needs the footprint library)
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def lib():
    return load_library()


def _two(ref, kind, package, dnp=False):
    return Part(ref, kind, package, (PinDef("1", "1", "passive"), PinDef("2", "2", "passive")), dnp=dnp)


def _design(parts, nets):
    return Design("t", "A", "design.toml", tuple(parts), tuple(nets))


def test_items_from_design(lib):
    soic = tuple(PinDef(str(n), str(n), "passive") for n in range(1, 9))
    parts = [_two("R1", "resistor", "0603"), _two("C1", "capacitor", "0402", dnp=True),
             Part("U1", "opamp-dual", "SOIC-8", soic), _two("R2", "resistor", "0603")]
    nets = [Net("IN", (PinRef("R1", "1"), PinRef("U1", "3"))), Net("GND", (PinRef("R1", "2"), PinRef("C1", "2"))),
            Net("OUT", (PinRef("U1", "1"), PinRef("R2", "1"), PinRef("U1", "2")))]
    items = items_from_design(_design(parts, nets), lib, "nominal")
    assert [i.ref for i in items] == ["R1", "U1", "R2"]  # dnp left out, design order kept
    r1, u1, r2 = items
    assert r1.nets == ("GND", "IN") and u1.nets == ("IN", "OUT") and r2.nets == ("OUT",)
    assert u1.pin_count == 8 and r1.pin_count == 2
    for it in items:
        cy = lib.package(it.package).courtyard("nominal")
        assert (it.length_mm, it.width_mm) == (cy.length_mm, cy.width_mm)
        # heights by kind: chip resistors their resistor thickness (REFERENCES.md s1 + allowance,
        # footprints/heights.csv), other parts the package height
        assert it.height_mm == lib.part_height(("resistor" if it.ref.startswith("R") else "opamp-dual"),
                                               lib.package(it.package))[0]
    assert r1.height_mm < lib.package("0603").height_mm  # a 0603 resistor is thinner than a capacitor
    # EIA 0603 body 1.60 x 0.80 (REFERENCES.md s1) plus the IPC-7351B level B excess of 0.25 a side
    # (REFERENCES.md s3, memory): the courtyard can be no smaller than 2.10 x 1.30
    assert r1.length_mm >= 1.60 + 2 * 0.25 - 1e-9 and r1.width_mm >= 0.80 + 2 * 0.25 - 1e-9
    # density levels: most >= nominal >= least (IPC-7351B A/B/C excess 0.50/0.25/0.10, memory)
    most = items_from_design(_design(parts, nets), lib, "most")
    least = items_from_design(_design(parts, nets), lib, "least")
    for a, b, c in zip(most, items, least):
        assert a.length_mm * a.width_mm > b.length_mm * b.width_mm > c.length_mm * c.width_mm


def test_items_override(lib):
    parts = [_two("R1", "resistor", "0603"), _two("R2", "resistor", "0603")]
    items = items_from_design(_design(parts, []), lib, "nominal", {"R1": "1206"})
    cy = lib.package("1206").courtyard("nominal")
    assert (items[0].package, items[0].length_mm, items[0].width_mm) == ("1206", cy.length_mm, cy.width_mm)
    assert items[1].package == "0603"


@pytest.mark.parametrize("package, override", [("0604", None), ("0603", {"R1": "bogus-pkg"})])
def test_items_unknown_package(lib, package, override):
    parts = [Part("R1", "resistor", package, (), line=7)]
    with pytest.raises(DesignError) as ei:
        items_from_design(_design(parts, []), lib, "nominal", override)
    assert ei.value.key == "parts.R1.package" and ei.value.line == 7 and ei.value.file == "design.toml"


def test_items_bad_density(lib):
    with pytest.raises(ProjectError) as ei:
        items_from_design(_design([_two("R1", "resistor", "0603")], []), lib, "dense")
    assert ei.value.key == "board.density"
