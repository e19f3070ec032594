"""Tests of pipeline/library/lands.py: IPC-7351B land patterns, pad positions, placement on a board.

The expected lands are worked here by hand from the IPC-7351B equations (REFERENCES.md section 8)
with the component ranges and goals written out below; the goals are IPC-7351B Tables 3-2, 3-3,
3-5, 3-6 and 3-15 as remembered (marked "memory"), F = 0.05 and P = 0.025 mm the figures of common
calculators (REFERENCES.md s8, memory).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.library import load_library
from pipeline.library.lands import land_equations, pads_on_board
from pipeline.model import DENSITY_LEVELS

F, P = 0.05, 0.025  # fabrication, placement tolerance (REFERENCES.md s8; memory)

# goals (toe, heel, side) per level most / nominal / least (IPC-7351B; memory)
CHIP = {"most": (0.55, 0.0, 0.05), "nominal": (0.35, 0.0, 0.0), "least": (0.15, 0.0, -0.05)}  # T3-5
SMALL = {"most": (0.30, 0.0, 0.05), "nominal": (0.20, 0.0, 0.0), "least": (0.10, 0.0, -0.05)}  # 3-6
GULL = {"most": (0.55, 0.45, 0.05), "nominal": (0.35, 0.35, 0.03), "least": (0.15, 0.25, 0.01)}  # 3-2
QFN = {"most": (0.40, 0.0, -0.04), "nominal": (0.30, 0.0, -0.04), "least": (0.20, 0.0, -0.04)}  # 3-15

# package: (L range, T range, W range, goals, pitch, published source of the ranges)
CASES = {
    "0402": ((0.95, 1.05), (0.15, 0.35), (0.45, 0.55), SMALL, 0.0),    # EIA 0402, memory
    "0603": ((1.50, 1.70), (0.20, 0.50), (0.70, 0.90), CHIP, 0.0),     # EIA 0603, memory
    "0805": ((1.80, 2.20), (0.25, 0.75), (1.05, 1.45), CHIP, 0.0),     # EIA 0805, memory
    "SOT-23": ((2.10, 2.64), (0.30, 0.60), (0.30, 0.50), GULL, 0.95),  # JEDEC TO-236AB, memory
    "SOT-23-5": ((2.60, 3.00), (0.30, 0.60), (0.30, 0.50), GULL, 0.95),  # JEDEC MO-178AA, memory
    "SOIC-8": ((5.80, 6.20), (0.40, 1.27), (0.31, 0.51), GULL, 1.27),  # JEDEC MS-012AA, memory
    "TSSOP-14": ((6.20, 6.60), (0.45, 0.75), (0.19, 0.30), GULL, 0.65),  # JEDEC MO-153, memory
    "QFN-16-3x3": ((2.90, 3.10), (0.30, 0.50), (0.18, 0.30), QFN, 0.50),  # JEDEC MO-220, memory
    "TO-252": ((9.40, 10.41), (1.40, 1.78), (0.64, 0.89), GULL, 2.28),  # JEDEC TO-252AA, memory
}


def _hand(L, T, W, goals):
    """Z, G, X unrounded, written out term by term (IPC-7351B section 3; REFERENCES.md s8)."""
    toe, heel, side = goals
    cl, ct, cw = L[1] - L[0], T[1] - T[0], W[1] - W[0]
    smin, smax = L[0] - 2 * T[1], L[1] - 2 * T[0]
    cs = math.sqrt(cl * cl + 2 * ct * ct)  # statistical S tolerance (IPC-7351B; memory)
    smax = smax - ((smax - smin) - cs) / 2
    z = L[0] + 2 * toe + math.sqrt(cl * cl + F * F + P * P)
    g = smax - 2 * heel - math.sqrt(cs * cs + F * F + P * P)
    x = W[0] + 2 * side + math.sqrt(cw * cw + F * F + P * P)
    return z, g, x


@pytest.fixture(scope="module")
def lib():
    return load_library()


def _pair(pkg, level):
    """Z, G, X of a package's lands: across the two ends (chips) or the two rows (ICs)."""
    pads = [p for p in pkg.pads_at(level) if p.number != "EP"]
    if pkg.pitch_mm == 0:  # two ends along x
        a = pads[0]
        return (2 * (abs(a.x_mm) + a.width_mm / 2), 2 * (abs(a.x_mm) - a.width_mm / 2), a.height_mm)
    a = next(p for p in pads if p.number == "1")  # lower row / lower side: depth along y
    return (2 * (abs(a.y_mm) + a.height_mm / 2), 2 * (abs(a.y_mm) - a.height_mm / 2), a.width_mm)


@pytest.mark.parametrize("level", DENSITY_LEVELS)
@pytest.mark.parametrize("name", sorted(CASES))
def test_lands_follow_ipc_equations(lib, name, level):
    L, T, W, goals, _ = CASES[name]
    z, g, x = _hand(L, T, W, goals[level])
    gz, gg, gx = _pair(lib.package(name), level)
    # IPC-7351B land equations worked by hand above; rounding to 0.05 (0.02 for chips below
    # 1608) moves Z and X up and G down by less than one step (IPC-7351B; memory)
    assert 0 <= gz - z < 0.05 + 1e-9, (gz, z)
    assert 0 <= g - gg < 0.05 + 1e-9, (gg, g)
    assert 0 <= gx - x < 0.05 + 1e-9, (gx, x)


def test_0603_example_by_hand():
    # Z = 1.50 + 0.70 + sqrt(0.04 + 0.0025 + 0.000625) = 2.4077 -> 2.45;
    # Smin = 0.50, Smax = 1.30, CS = sqrt(0.04 + 2 x 0.09) = 0.4690, Smax' = 1.30 - 0.1655 = 1.1345,
    # G = 1.1345 - sqrt(0.22 + 0.003125) = 0.6621 -> 0.65; X = 0.70 + 0.2077 -> 0.95
    assert land_equations((1.5, 1.7), (0.2, 0.5), (0.7, 0.9), toe=0.35, heel=0.0, side=0.0,
                          f=F, p=P, round_mm=0.05) == (2.45, 0.65, 0.95)


@pytest.mark.parametrize("name", sorted(CASES))
def test_pad_count_pitch_and_pin1(lib, name):
    pkg = lib.package(name)
    pitch = CASES[name][4]
    pads = pkg.pads
    numbers = [p.number for p in pads if p.number != "EP"]
    assert sorted(numbers, key=int) == [str(i) for i in range(1, pkg.pin_count + 1)]
    one = next(p for p in pads if p.number == "1")
    if pitch == 0:
        # chips: pin 1 at -x (IPC-7351B zero orientation, memory)
        assert one.x_mm < 0 and one.y_mm == 0
        return
    # pin 1 at the left end of the lower row (IPC-7351B zero orientation turned a quarter;
    # pins counted anticlockwise seen from the top: JEDEC outlines, memory)
    lower = [p for p in pads if p.y_mm < 0 and abs(p.y_mm) >= abs(one.y_mm) - 1e-9]
    assert one.y_mm < 0 and one.x_mm == min(p.x_mm for p in lower)
    # neighbours in a row sit one published pitch apart (JEDEC outline pitch e)
    xs = sorted(p.x_mm for p in lower)
    gaps = {round(b - a, 6) for a, b in zip(xs, xs[1:])}
    assert gaps <= {pitch, 2 * pitch}, gaps  # SOT-23 pins 1 and 2 stand two pitches apart


@pytest.mark.parametrize("name,E,T_nom", [("SOIC-8", 6.00, 0.835), ("TSSOP-14", 6.40, 0.60),
                                          ("SOT-23-5", 2.80, 0.45)])
def test_lands_cover_the_nominal_foot(lib, name, E, T_nom):
    # the nominal foot lies from E/2 - T to E/2 from the centre line (JEDEC MS-012 / MO-153 /
    # MO-178 nominal span and foot length, memory): every level's land must cover it
    for level in DENSITY_LEVELS:
        one = next(p for p in lib.package(name).pads_at(level) if p.number == "1")
        lo, hi = abs(one.y_mm) - one.height_mm / 2, abs(one.y_mm) + one.height_mm / 2
        assert lo <= E / 2 - T_nom and hi >= E / 2, (level, lo, hi)


def test_qfn_exposed_pad_and_sides(lib):
    pkg = lib.package("QFN-16-3x3")
    ep = [p for p in pkg.pads if p.number == "EP"]
    # exposed pad 1.55 square at the centre (MO-220 variant, memory)
    assert len(ep) == 1 and (ep[0].x_mm, ep[0].y_mm, ep[0].width_mm) == (0.0, 0.0, 1.55)
    by = {p.number: p for p in pkg.pads}
    # four pins a side, anticlockwise: 1-4 lower, 5-8 right, 9-12 upper, 13-16 left
    assert all(by[str(i)].y_mm < 0 for i in range(1, 5))
    assert all(by[str(i)].x_mm > 0 for i in range(5, 9))
    assert all(by[str(i)].y_mm > 0 for i in range(9, 13))
    assert all(by[str(i)].x_mm < 0 for i in range(13, 17))


def test_dip8_holes(lib):
    pads = lib.package("DIP-8").pads
    # rows 7.62 apart at 2.54 (JEDEC MS-001, REFERENCES.md s2); hole = 0.56 + 0.25 -> 0.85
    # (IPC-2222 allowance, memory); land = 0.85 + 2 x 0.35 = 1.55 (common practice)
    assert {round(abs(p.y_mm) * 2, 6) for p in pads} == {7.62}
    assert all(p.drill_mm == 0.85 and p.width_mm == 1.55 for p in pads)
    assert [p.shape for p in pads][:2] == ["rect", "circle"]  # pin 1 square (common practice)


def _inside_courtyard(pkg):
    for level in DENSITY_LEVELS:
        cy = pkg.courtyard(level)
        for p in pkg.pads_at(level):
            assert abs(p.x_mm) + p.width_mm / 2 <= cy.length_mm / 2 + 1e-9, (pkg.name, level, p)
            assert abs(p.y_mm) + p.height_mm / 2 <= cy.width_mm / 2 + 1e-9, (pkg.name, level, p)


def test_every_pad_inside_its_courtyard(lib):
    names = [p.name for p in lib.packages()] + ["header-1x7-2.54", "header-2x5", "pad-2mm"]
    for name in names:
        pkg = lib.package(name)
        assert pkg.pads, name
        _inside_courtyard(pkg)


@settings(max_examples=80, deadline=None)
@given(name=st.sampled_from(["0603", "SOT-23", "SOIC-8", "QFN-16-3x3", "header-2x3"]),
       x=st.floats(-50, 50), y=st.floats(-50, 50), quarter=st.integers(0, 3),
       side=st.sampled_from(["top", "bottom"]))
def test_pads_on_board_is_a_rigid_move(name, x, y, quarter, side):
    pkg = load_library().package(name)
    placed = pads_on_board(pkg, x, y, 90 * quarter, side)
    assert [p.number for p in placed] == [p.number for p in pkg.pads]
    # distances between pad centres are kept (closed form: rotations and mirrors are isometries)
    for a, b, pa, pb in zip(pkg.pads, pkg.pads[1:], placed, placed[1:]):
        d0 = math.hypot(a.x_mm - b.x_mm, a.y_mm - b.y_mm)
        assert math.hypot(pa.x_mm - pb.x_mm, pa.y_mm - pb.y_mm) == pytest.approx(d0, abs=1e-5)
    # the centre of the pads' box goes to (x, y): our patterns are centred on the origin
    xs, ys = [p.x_mm for p in placed], [p.y_mm for p in placed]
    assert ((min(xs) + max(xs)) / 2, (min(ys) + max(ys)) / 2) == pytest.approx((x, y), abs=1e-5)
    assert all(p.rotation == 90 * (quarter % 2) for p in placed)


def test_bottom_side_mirrors_pin1(lib):
    pkg = lib.package("SOIC-8")
    top = {p.number: p for p in pads_on_board(pkg, 0, 0, 0, "top")}
    bottom = {p.number: p for p in pads_on_board(pkg, 0, 0, 0, "bottom")}
    # seen from the top through the board, pin 1 moves to the other end of its row
    assert top["1"].x_mm == -bottom["1"].x_mm and top["1"].y_mm == bottom["1"].y_mm


@pytest.mark.parametrize("rot,side", [(45, "top"), (0, "left")])
def test_pads_on_board_rejects_bad_calls(lib, rot, side):
    with pytest.raises(ValueError):
        pads_on_board(lib.package("0603"), 0, 0, rot, side)


@pytest.mark.parametrize("level", DENSITY_LEVELS)
def test_to252_tab_land(lib, level):
    # JEDEC TO-252AA (DPAK, memory): leads 1 and 3 at e1 = 2 x e = 4.56 apart (e 2.28), the middle
    # lead cut; the tab (pin 2) b3 up to 5.46 wide. Tab land: the IPC-7351B side equation on the
    # tab width (no tolerance: min = max) and 5.80 mm deep (common practice; memory), its outer
    # edge at the same toe line Z / 2 as the lead lands, on the side opposite the leads.
    pkg = lib.package("DPAK")
    assert pkg.name == "TO-252" and pkg.pin_count == 3
    by = {p.number: p for p in pkg.pads_at(level)}
    assert sorted(by) == ["1", "2", "3"]
    assert abs((by["3"].x_mm - by["1"].x_mm) - 4.56) < 1e-9
    toe, _, side = GULL[level]
    x_hand = 5.46 + 2 * side + math.sqrt(F * F + P * P)
    assert 0 <= by["2"].width_mm - x_hand < 0.05 + 1e-9
    assert by["2"].height_mm == 5.80 and by["2"].x_mm == 0 and by["2"].y_mm > 0
    z, _, _ = _hand(*CASES["TO-252"][:3], GULL[level])
    lead_outer = abs(by["1"].y_mm) + by["1"].height_mm / 2
    tab_outer = by["2"].y_mm + by["2"].height_mm / 2
    assert abs(lead_outer - tab_outer) < 1e-9 and 0 <= 2 * tab_outer - z < 0.05 + 1e-9
    # tab land and lead lands do not touch; every pad inside the level's courtyard
    assert by["2"].y_mm - by["2"].height_mm / 2 > by["1"].y_mm + by["1"].height_mm / 2
    c = pkg.courtyard(level)
    for p in by.values():
        assert abs(p.x_mm) + p.width_mm / 2 <= c.length_mm / 2
        assert abs(p.y_mm) + p.height_mm / 2 <= c.width_mm / 2
    # seated height A max 2.38 (JEDEC TO-252AA, memory)
    assert pkg.height_mm == 2.38
