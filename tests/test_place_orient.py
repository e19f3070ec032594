"""Half turns that shorten nets (pipeline/place_orient.py): closed-form cases and properties."""

import dataclasses

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.library import load_library, pads_on_board
from pipeline.model import Design, Net, Part, PinDef, PinRef, Placement
from pipeline.place_orient import orient_parts, pad_hpwl

LIB = load_library()
PINS = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))


def _design(n: int, nets: dict) -> Design:
    parts = tuple(Part(f"R{k + 1}", "resistor", "0603", PINS) for k in range(n))
    return Design("t", "", "", parts, tuple(Net(name, tuple(PinRef(*p.split(".")) for p in pins))
                                            for name, pins in nets.items()))


def _pitch(package: str = "0603") -> float:
    """Distance (mm) between the two pad centres of ``package`` at rotation 0, from the library's lands."""
    a, b = pads_on_board(LIB.package(package), 0.0, 0.0, 0, "top")
    return abs(b.x_mm - a.x_mm)


def _row(*rots):
    return tuple(Placement(f"R{k + 1}", 10.0 * k, 0.0, r, "top", None) for k, r in enumerate(rots))


@pytest.mark.parametrize("rots", [(0, 0), (180, 0), (0, 180), (180, 180)])
def test_two_resistors_face_their_shared_net(rots):
    # closed form: R1 and R2 10 mm apart on one axis, one net between their pins 1. Its span is the
    # centre distance minus half the pad pitch for each part whose pin 1 faces the other: the best is
    # 10 - pitch, with R1's pin 1 on its right (180 deg) and R2's on its left (0 deg)
    d = _design(2, {"A": ["R1.1", "R2.1"]})
    out = orient_parts(_row(*rots), d, LIB)
    assert [p.rotation_deg for p in out] == [180, 0]
    assert pad_hpwl(out, d, LIB) == pytest.approx(10.0 - _pitch(), abs=1e-9)


@pytest.mark.parametrize("rot", [90, 270])
def test_a_standing_part_turns_between_90_and_270(rot):
    # R2 stands (90 / 270) 10 mm above R1's pin 2: its pin 1 should point down, towards R1
    d = _design(2, {"A": ["R1.2", "R2.1"]})
    pl = (Placement("R1", 0.0, 0.0, 0, "top", None), Placement("R2", 0.0 + _pitch() / 2, 10.0, rot, "top", None))
    out = orient_parts(pl, d, LIB)
    down = min((0, 180), key=lambda extra: pads_on_board(LIB.package("0603"), 0, 0, (90 + extra) % 360, "top")[0].y_mm)
    assert out[1].rotation_deg == (90 + down) % 360 and out[0].rotation_deg == 0
    # closed form: pin 2 of R1 at x = pitch/2, pin 1 of R2 right above it, pitch/2 below R2's centre
    assert pad_hpwl(out, d, LIB) == pytest.approx(10.0 - _pitch() / 2, abs=1e-9)


def test_kept_parts_are_not_turned_and_the_rest_do_what_they_can():
    d = _design(2, {"A": ["R1.1", "R2.1"]})
    out = orient_parts(_row(0, 180), d, LIB, keep=["R1"])
    # R1 must stay at 0 (pin 1 on its left, away from R2); R2's pin 1 best faces left (0 deg).
    # closed form: 10 + pitch/2 (R1's pin away) - pitch/2 (R2's towards) = 10; before, 10 + pitch
    assert [p.rotation_deg for p in out] == [0, 0]
    assert pad_hpwl(_row(0, 180), d, LIB) == pytest.approx(10.0 + _pitch(), abs=1e-9)
    assert pad_hpwl(out, d, LIB) == pytest.approx(10.0, abs=1e-9)


def test_skipped_nets_count_for_nothing():
    d = _design(2, {"A": ["R1.1", "R2.1"]})
    assert pad_hpwl(_row(0, 0), d, LIB, skip_nets=["A"]) == 0.0
    assert [p.rotation_deg for p in orient_parts(_row(0, 0), d, LIB, skip_nets=["A"])] == [0, 0]


@pytest.mark.parametrize("rot", [0, 180])
def test_a_part_alone_on_its_nets_stays(rot):
    d = _design(2, {"A": ["R1.1"]})
    assert [p.rotation_deg for p in orient_parts(_row(rot, rot), d, LIB)] == [rot, rot]


@settings(max_examples=40, deadline=None)
@given(n=st.integers(2, 6), data=st.data())
def test_never_longer_never_moved_and_deterministic(n, data):
    pins = [f"R{k + 1}.{p}" for k in range(n) for p in (1, 2)]
    nets = {}
    for name in ("A", "B", "C"):
        nets[name] = data.draw(st.lists(st.sampled_from(pins), min_size=2, max_size=4, unique=True))
    used = set()
    nets = {k: [p for p in v if p not in used and not used.add(p)] for k, v in nets.items()}
    d = _design(n, {k: v for k, v in nets.items() if v})
    pl = tuple(Placement(f"R{k + 1}", data.draw(st.floats(0, 30)), data.draw(st.floats(0, 30)),
                         data.draw(st.sampled_from([0, 90, 180, 270])), "top", None) for k in range(n))
    out = orient_parts(pl, d, LIB)
    assert pad_hpwl(out, d, LIB) <= pad_hpwl(pl, d, LIB) + 1e-9
    for a, b in zip(pl, out):
        assert (a.ref, a.x_mm, a.y_mm, a.side) == (b.ref, b.x_mm, b.y_mm, b.side)
        assert (b.rotation_deg - a.rotation_deg) % 180 == 0
    assert orient_parts(pl, d, LIB) == out


@pytest.mark.parametrize("with_rule, expect", [(False, 180), (True, 0)])
def test_a_turn_that_would_break_a_met_near_rule_is_not_made(with_rule, expect):
    # R1's pads must stay within 1 mm of R2's pin 1 (a near rule). R2's pin 1 net runs to R3, 18 mm to
    # the right, so turning R2 shortens it by the pad pitch, but moves pin 1 2 mm from R1's nearest pad
    # (closed form: pads at x +-0.775 about the centres 0 and 2): the rule keeps R2 as it is
    from pipeline.model import NearRule, PlaceItem
    from pipeline.place_rules import near_distance

    d = _design(3, {"A": ["R2.1", "R3.1"]})
    pl = (Placement("R1", 0.0, 0.0, 0, "top", None), Placement("R2", 2.0, 0.0, 0, "top", None),
          Placement("R3", 20.0, 0.0, 0, "top", None))
    rule = NearRule("R2", ("1",), 1.0, "near", LIB.package("0603"), LIB.package("0603"))
    items = (PlaceItem("R1", 1.6, 0.8, 0.5, (), near=rule),) if with_rule else ()
    out = orient_parts(pl, d, LIB, items=items)
    assert out[1].rotation_deg == expect
    at = lambda p: (p.x_mm, p.y_mm, p.rotation_deg, p.side)  # noqa: E731
    assert near_distance(rule, at(pl[0]), at(pl[1])) == pytest.approx(2.0 - _pitch())       # met before
    turned = near_distance(rule, at(out[0]), at(out[1]))
    assert (turned <= 1.0) if with_rule else turned == pytest.approx(2.0)                   # 2 mm: broken


# -- open_gaps: shifts that open a track's way between facing pads -------------------------------------------

from shapely.geometry import box  # noqa: E402

from pipeline.place_orient import MOVES, open_gaps  # noqa: E402

#: the default copper rules' track and clearance (pipeline/route/rules.py): a track between two pads needs
#: 0.2 + 2 x 0.2 mm (common practice for small-batch fabrication, REFERENCES.md section 4)
GAP, STEP = 0.2 + 2 * 0.2, 0.2 + 0.2


def _land_w(package: str = "0603") -> float:
    """Width (mm) along x of one of ``package``'s pads at rotation 0, from the library's lands."""
    return pads_on_board(LIB.package(package), 0.0, 0.0, 0, "top")[0].width_mm


def _abutting(margin: float, n: int = 2):
    """``n`` 0603s in a row, courtyard against courtyard, whose facing pads are ``margin`` mm apart."""
    length, height = _pitch() + _land_w() + margin, 2.0
    return tuple(Placement(f"R{k + 1}", k * length, 0.0, 0, "top",
                           box(k * length - length / 2, -height / 2, k * length + length / 2, height / 2))
                 for k in range(n)), length


@pytest.mark.parametrize("margin", [0.1, 0.3, 0.5])
def test_facing_pads_closer_than_a_track_are_pulled_apart_by_whole_steps(margin):
    # closed form: the facing pads of R1 (pin 2) and R2 (pin 1) are ``margin`` apart; the first part in
    # natural order (R1) moves away from R2 by the fewest steps k with margin + k x STEP >= GAP
    # (moving towards R2 overlaps it; up or down keeps the gap, the pads being taller than a step)
    d = _design(2, {"A": ["R1.1"], "B": ["R1.2"], "C": ["R2.1"], "D": ["R2.2"]})
    row, length = _abutting(margin)
    out = open_gaps(row, d, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP)
    k = next(k for k in (1, 2) if margin + k * STEP >= GAP - 1e-9)
    assert out[0].x_mm == pytest.approx(-k * STEP) and out[0].y_mm == 0.0
    assert (out[1].x_mm, out[1].y_mm) == (length, 0.0)
    # the courtyard moved with it
    assert out[0].courtyard.bounds == pytest.approx(tuple(v - k * STEP * (i % 2 == 0)
                                                          for i, v in enumerate(row[0].courtyard.bounds)))


def test_a_shifted_courtyard_keeps_its_own_shape():
    # a courtyard that is not a rectangle (corners cut by 0.2 mm) moves whole: the shifted courtyard is
    # the original translated by the shift (shapely's translate as the reference), not its bounding box
    from shapely.affinity import translate
    d = _design(2, {"A": ["R1.1"], "B": ["R1.2"], "C": ["R2.1"], "D": ["R2.2"]})
    row, _ = _abutting(0.1)
    cut = row[0].courtyard.buffer(-0.2, join_style="mitre").buffer(0.2, join_style="bevel")
    assert len(cut.exterior.coords) > 5
    row = (dataclasses.replace(row[0], courtyard=cut),) + row[1:]
    out = open_gaps(row, d, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP)
    dx = out[0].x_mm - row[0].x_mm
    assert dx < 0
    assert out[0].courtyard.equals_exact(translate(cut, dx, 0.0), 1e-9)


def test_pads_a_track_apart_and_pads_of_one_net_stay():
    # nothing to open: 0.6 mm apart already, or the facing pads share a net (they may touch)
    apart, _ = _abutting(GAP)
    d = _design(2, {"A": ["R1.1"], "B": ["R1.2"], "C": ["R2.1"], "D": ["R2.2"]})
    assert open_gaps(apart, d, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP) == apart
    close, _ = _abutting(0.1)
    same = _design(2, {"A": ["R1.1"], "B": ["R1.2", "R2.1"], "D": ["R2.2"]})
    assert open_gaps(close, same, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP) == close


def test_kept_parts_stay_and_a_part_with_no_room_stays():
    d = _design(2, {"A": ["R1.1"], "B": ["R1.2"], "C": ["R2.1"], "D": ["R2.2"]})
    row, length = _abutting(0.3)
    # R1 kept: R2 moves away from it instead (+x, one step)
    out = open_gaps(row, d, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP, keep=["R1"])
    assert out[0] == row[0] and out[1].x_mm == pytest.approx(length + STEP)
    # both kept, or the area holding exactly the two courtyards: nothing moves
    assert open_gaps(row, d, LIB, box(-20, -20, 20, 20), gap_mm=GAP, step_mm=STEP, keep=["R1", "R2"]) == row
    tight_area = box(-length / 2, -1.0, 1.5 * length, 1.0)
    assert open_gaps(row, d, LIB, tight_area, gap_mm=GAP, step_mm=STEP) == row


@settings(max_examples=30, deadline=None)
@given(n=st.integers(2, 5), margins=st.lists(st.floats(0.0, 0.8), min_size=1, max_size=1), data=st.data())
def test_shifts_stay_legal_whole_and_never_add_tight_pairs(n, margins, data):
    # properties: every part stays in the area, no two courtyards overlap, each shift is a multiple of the
    # step within the largest move, and the count of pads closer than GAP never grows
    row, length = _abutting(margins[0], n)
    nets = {f"N{k}": [f"R{k // 2 + 1}.{k % 2 + 1}"] for k in range(2 * n)}
    d = _design(n, nets)
    area = box(-length, -3.0, n * length, 3.0)
    out = open_gaps(row, d, LIB, area, gap_mm=GAP, step_mm=STEP)
    big = max(abs(c) for m in MOVES for c in m) * STEP * 4   # PASSES moves at most
    for a, b in zip(row, out):
        assert area.buffer(1e-6).covers(b.courtyard)
        for c in (b.x_mm - a.x_mm, b.y_mm - a.y_mm):
            assert abs(c / STEP - round(c / STEP)) < 1e-6 and abs(c) <= big + 1e-9
    for i in range(n):
        for j in range(i + 1, n):
            assert out[i].courtyard.intersection(out[j].courtyard).area < 1e-9

    def tight(pls):
        pads = [(pl.ref, p) for pl in pls for p in pads_on_board(LIB.package("0603"), pl.x_mm, pl.y_mm, 0, "top")]
        from pipeline.route.pads import pad_polygon
        return sum(1 for i, (r, p) in enumerate(pads) for s, q in pads[i + 1:]
                   if r != s and pad_polygon(p).distance(pad_polygon(q)) < GAP - 1e-6)
    assert tight(out) <= tight(row)
