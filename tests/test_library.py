"""Tests of pipeline/library/ and the footprints/ data.

Reference figures are typed here from /work/shared/REFERENCES.md (which names
the published tables they come from) and CONTRACT.md section 2, not read from
the data under test. Each check names its source beside it.
"""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.errors import LibraryError, UnknownNameError
from pipeline.library import (
    DEFAULT_ROOT,
    LEVELS,
    Library,
    ceil_to_grid,
    courtyard,
    courtyard_size,
    load_library,
    normalize_level,
    pin_mismatch,
)
from pipeline.model import PIN_ROLES, PartKind, PinDef

GRID = 0.05  # IPC-7351B courtyard grid (REFERENCES.md s3, memory)
TOE_B = 0.35  # IPC-7351B level B toe goal, 1608 and larger (REFERENCES.md s3, memory)

# IPC-7351B courtyard excess per side (REFERENCES.md s3, memory matching secondary summaries)
EXCESS_GENERAL = {"most": 0.50, "nominal": 0.25, "least": 0.10}
EXCESS_SMALL_CHIP = {"most": 0.20, "nominal": 0.15, "least": 0.10}  # chips below 1608 metric
SMALL_CHIPS = {"0201", "0402"}  # metric 0603 and 1005: smaller than 1608 (REFERENCES.md s1)
# aluminium cans and two-pin metal-can crystals: IPC-7351B Table 3-20 excess (memory)
EXCESS_LARGE = {"most": 1.00, "nominal": 0.50, "least": 0.25}


@pytest.fixture(scope="module")
def lib() -> Library:
    return load_library()


def _close(a: float, b: float, tol: float = 1e-6) -> bool:
    return abs(a - b) <= tol


# --------------------------------------------------------------------------
# Chip sizes: EIA inch code / IEC 60115-8 metric code (REFERENCES.md s1)
# --------------------------------------------------------------------------
# inch, metric, L, L tol, W low, W high, typical resistor H
CHIPS = [
    ("0201", "0603", 0.60, 0.03, 0.30 - 0.03, 0.30 + 0.03, 0.23),
    ("0402", "1005", 1.00, 0.05, 0.50 - 0.05, 0.50 + 0.05, 0.35),
    ("0603", "1608", 1.60, 0.10, 0.80 - 0.10, 0.80 + 0.10, 0.45),
    ("0805", "2012", 2.00, 0.20, 1.25 - 0.15, 1.25 + 0.15, 0.50),
    ("1206", "3216", 3.20, 0.20, 1.60 - 0.15, 1.60 + 0.15, 0.55),
    ("1210", "3225", 3.20, 0.20, 2.50, 2.60, 0.55),
    ("2010", "5025", 5.00, 0.20, 2.50 - 0.20, 2.50 + 0.20, 0.55),
    ("2512", "6332", 6.30, 0.20, 3.20 - 0.20, 3.20 + 0.20, 0.55),
]
CAPACITOR_SIZES = {"0201", "0402", "0603", "0805", "1206", "1210"}


@pytest.mark.parametrize("inch,metric,L,Ltol,Wlo,Whi,Hres", CHIPS)
def test_chip_body_matches_eia_iec_size_code(lib, inch, metric, L, Ltol, Wlo, Whi, Hres):
    pkg = lib.package(inch)
    # EIA / IEC 60115-8 size code table (REFERENCES.md s1), with its tolerance
    assert abs(pkg.body_length_mm - L) <= Ltol + 1e-9
    assert Wlo - 1e-9 <= pkg.body_width_mm <= Whi + 1e-9
    assert pkg.pin_count == 2 and pkg.family == "chip"
    # height policy: at least the typical resistor thickness (REFERENCES.md s1) ...
    assert pkg.height_mm >= Hres
    if inch in CAPACITOR_SIZES:
        # ... and capacitors "allow up to the body width" (REFERENCES.md s1 note, memory):
        # the conservative maximum is the upper end of the width spread
        assert Whi - 0.005 <= pkg.height_mm <= Whi + 1e-9
    else:
        # resistor-only sizes (common practice): no higher than the body is wide
        assert pkg.height_mm < pkg.body_width_mm
    # two lands on the terminal axis, pin 1 at -x (IPC-7351B zero orientation, memory);
    # the lands reach beyond the body ends (toe goal > 0 at every level, REFERENCES.md s8)
    one, two = pkg.pads
    assert (one.number, two.number) == ("1", "2") and one.x_mm < 0 < two.x_mm
    assert pkg.land_length_mm > L
    assert pkg.source.startswith(f"EIA {inch} inch / IEC 60115-8 metric")


@pytest.mark.parametrize("inch,metric", [(c[0], c[1]) for c in CHIPS if c[0] != "0201"])
def test_unambiguous_metric_codes_resolve_to_inch(lib, inch, metric):
    # EIA inch <-> IEC 60115-8 metric pairs (REFERENCES.md s1)
    assert lib.package(metric).name == inch


def test_metric_0603_is_not_an_alias(lib):
    # "0603" is an inch code; metric 0603 is inch 0201 (REFERENCES.md s1): the name
    # must give the inch 0603 body, 1.60 x 0.80, never the 0.60 x 0.30 one
    pkg = lib.package("0603")
    assert pkg.name == "0603" and _close(pkg.body_length_mm, 1.60)
    assert lib.package("0201").aliases == ()
    # likewise "0402" is inch 0402 (1.00 x 0.50), not metric 0402 = inch 01005
    assert _close(lib.package("0402").body_length_mm, 1.00)


# Tantalum cases, EIA 535BAAC (REFERENCES.md s1): code, L, W, typical H
TANTALUM = [
    ("A", "3216-18", 3.2, 1.6, 1.6),
    ("B", "3528-21", 3.5, 2.8, 1.9),
    ("C", "6032-28", 6.0, 3.2, 2.5),
    ("D", "7343-31", 7.3, 4.3, 2.8),
]


@pytest.mark.parametrize("case,code,L,W,H", TANTALUM)
def test_tantalum_cases_eia_535baac(lib, case, code, L, W, H):
    pkg = lib.package(f"tantalum-{case}")
    assert lib.package(code) is pkg
    # EIA 535BAAC case code LLWW-HH: length, width in tenths of mm (REFERENCES.md s1)
    assert _close(pkg.body_length_mm, L) and _close(pkg.body_width_mm, W)
    assert _close(float(code[:2]) / 10, L, 0.051) and _close(float(code[2:4]) / 10, W, 0.051)
    # the -HH suffix is the maximum height in tenths of mm (EIA 535BAAC code, memory);
    # the typical height of REFERENCES.md s1 must not exceed it
    assert _close(pkg.height_mm, int(code[-2:]) / 10)
    assert pkg.height_mm >= H


# --------------------------------------------------------------------------
# JEDEC outlines (REFERENCES.md s2)
# --------------------------------------------------------------------------
# name, outline text in source, body L, body W, span lo, span hi, pitch, H lo, H hi
JEDEC = [
    ("SOT-23", "TO-236AB", 2.90, 1.30, 2.10, 2.64, 0.95, 1.12, 1.12),
    ("SOT-23-5", "MO-178AA", 2.90, 1.60, 2.80, 2.80, 0.95, 1.45, 1.45),
    ("SOT-23-6", "MO-178AB", 2.90, 1.60, 2.80, 2.80, 0.95, 1.45, 1.45),
    ("SC-70-5", "MO-203", 2.00, 1.25, 2.10, 2.10, 0.65, 1.10, 1.10),
    ("SOIC-8", "MS-012AA", 4.90, 3.90, 6.00, 6.00, 1.27, 1.75, 1.75),
    ("SOIC-14", "MS-012AB", 8.65, 3.90, 6.00, 6.00, 1.27, 1.75, 1.75),
    ("SOIC-16", "MS-012AC", 9.90, 3.90, 6.00, 6.00, 1.27, 1.75, 1.75),
    ("TSSOP-8", "MO-153", 3.00, 4.40, 6.40, 6.40, 0.65, 1.20, 1.20),
    ("TSSOP-14", "MO-153", 5.00, 4.40, 6.40, 6.40, 0.65, 1.20, 1.20),
    ("TSSOP-16", "MO-153", 5.00, 4.40, 6.40, 6.40, 0.65, 1.10, 1.20),
    ("TSSOP-20", "MO-153", 6.50, 4.40, 6.40, 6.40, 0.65, 1.10, 1.20),
    ("MSOP-8", "MO-187", 3.00, 3.00, 4.90, 4.90, 0.65, 1.10, 1.10),
    ("MSOP-10", "MO-187BA", 3.00, 3.00, 4.90, 4.90, 0.50, 1.10, 1.10),
]


@pytest.mark.parametrize("name,outline,L,W,span_lo,span_hi,pitch,Hlo,Hhi", JEDEC)
def test_gull_wing_bodies_match_jedec_outlines(
    lib, name, outline, L, W, span_lo, span_hi, pitch, Hlo, Hhi
):
    pkg = lib.package(name)
    assert outline in pkg.source  # the JEDEC outline named in REFERENCES.md s2
    # body along the rows x across, pitch (JEDEC outline, REFERENCES.md s2)
    assert _close(pkg.body_length_mm, L) and _close(pkg.body_width_mm, W)
    assert _close(pkg.pitch_mm, pitch)
    # max height within the published spread; the policy takes the conservative end
    assert Hlo - 1e-9 <= pkg.height_mm <= Hhi + 1e-9
    assert _close(pkg.height_mm, Hhi)
    # pin count is the number in the trade name (SOT-23 has 3 leads, TO-236AB)
    assert pkg.pin_count == (3 if name == "SOT-23" else int(name.rsplit("-", 1)[1]))
    # toe-to-toe land extent across the rows: at least the lead span plus a level-B toe
    # on each side (REFERENCES.md s2 span, s3 toe 0.35, memory) and not more than
    # 0.5 mm beyond that (tolerance allowance)
    assert span_hi + 2 * TOE_B - 1e-9 <= pkg.land_width_mm <= span_hi + 2 * TOE_B + 0.5
    # along the rows the pads of the longer row must fit: their centre spacing
    # (closed-form geometry: (n - 1) x pitch; SOT-23 leads 1 and 2 sit two pitches
    # apart, TO-236AB, memory) plus one pad narrower than the pitch
    per_row = math.ceil(pkg.pin_count / 2)
    row = 2 * pitch if name == "SOT-23" else (per_row - 1) * pitch
    assert row < pkg.land_length_mm < row + pitch


@pytest.mark.parametrize(
    "name,L,W,span,Hlo,Hhi",
    [
        # SOD-123 (no JEDEC number) and SOD-323 (SC-76), REFERENCES.md s2
        ("SOD-123", 2.70, 1.60, 3.70, 1.25, 1.35),
        ("SOD-323", 1.70, 1.25, 2.50, 1.00, 1.00),
    ],
)
def test_sod_outlines(lib, name, L, W, span, Hlo, Hhi):
    pkg = lib.package(name)
    assert _close(pkg.body_length_mm, L) and _close(pkg.body_width_mm, W)
    assert Hlo <= pkg.height_mm <= Hhi and _close(pkg.height_mm, Hhi)
    assert pkg.pin_count == 2
    # leads at the ends: the land extent runs along the body length, beyond the lead span
    # (REFERENCES.md s2 span; toe goals of at least 0.10 a side, s8 memory)
    assert span + 2 * 0.10 - 0.2 <= pkg.land_length_mm <= span + 2 * TOE_B + 0.5


@pytest.mark.parametrize("name,side,pins,exposed", [("QFN-16-3x3", 3.0, 16, "1.55"),
                                                    ("QFN-20-4x4", 4.0, 20, "2.70")])
def test_qfn_mo220(lib, name, side, pins, exposed):
    pkg = lib.package(name)
    # MO-220 (REFERENCES.md s2, memory): square body, 0.50 pitch, 1.00 max height;
    # leads do not stand out ("span = body") so lands reach only a little beyond it
    assert "MO-220" in pkg.source and exposed in pkg.source
    assert _close(pkg.body_length_mm, side) and _close(pkg.body_width_mm, side)
    assert _close(pkg.pitch_mm, 0.50) and _close(pkg.height_mm, 1.00)
    assert pkg.pin_count == pins
    # four sides of pins/4 each at 0.50 pitch must fit along the body (closed form)
    assert (pins / 4 - 1) * 0.50 < side
    assert side < pkg.land_length_mm <= side + 1.0
    assert side < pkg.land_width_mm <= side + 1.0


def test_dip8_ms001(lib):
    pkg = lib.package("DIP-8")
    # MS-001 (REFERENCES.md s2, memory): body 9.27 x 6.35, rows 7.62 apart, pitch 2.54,
    # max seated height 5.33
    assert "MS-001" in pkg.source
    assert _close(pkg.body_length_mm, 9.27) and _close(pkg.body_width_mm, 6.35)
    assert _close(pkg.pitch_mm, 2.54) and _close(pkg.height_mm, 5.33) and pkg.pin_count == 8
    # lands: row spacing plus one pad across, 3 pitches plus one pad along (closed form);
    # pad between 1.0 and 2.54 mm (common practice)
    pad_across = pkg.land_width_mm - 7.62
    pad_along = pkg.land_length_mm - 3 * 2.54
    assert 1.0 <= pad_across < 2.54 and _close(pad_across, pad_along)


# --------------------------------------------------------------------------
# IPC-7351B courtyards (REFERENCES.md s3)
# --------------------------------------------------------------------------
def _expected_excess(name: str) -> dict[str, float]:
    if name.startswith("can-") or name.startswith("xtal-11.4"):
        return EXCESS_LARGE
    return EXCESS_SMALL_CHIP if name in SMALL_CHIPS else EXCESS_GENERAL


def _pad_box(pads) -> tuple[float, float]:
    """Centred box around the pads, from their corners (closed form, shapely-free)."""
    return (2 * max(abs(p.x_mm) + p.width_mm / 2 for p in pads),
            2 * max(abs(p.y_mm) + p.height_mm / 2 for p in pads))


def _check_courtyards(pkg) -> None:
    excess = _expected_excess(pkg.name)
    assert [c.level for c in pkg.courtyards] == list(LEVELS)
    for level in LEVELS:
        land_l, land_w = _pad_box(pkg.pads_at(level))
        ext_l = max(pkg.body_length_mm, land_l)
        ext_w = max(pkg.body_width_mm, land_w)
        cy = courtyard(pkg, level)
        assert cy is pkg.courtyard(level)
        for size, ext in ((cy.length_mm, ext_l), (cy.width_mm, ext_w)):
            # IPC-7351B: courtyard - (body and lands) = 2 x excess, up to the 0.05 grid
            # rounding (REFERENCES.md s3, memory)
            over = size - ext - 2 * excess[level]
            assert -1e-9 <= over < GRID - 1e-9, (pkg.name, level, size, ext)
            # on the 0.05 grid
            assert abs(size / GRID - round(size / GRID)) < 1e-6
        assert _close(cy.area_mm2, cy.length_mm * cy.width_mm)
    a, b, c = (pkg.courtyard(lv) for lv in LEVELS)
    assert a.length_mm >= b.length_mm >= c.length_mm
    assert a.width_mm >= b.width_mm >= c.width_mm


def test_every_listed_package_courtyard_follows_ipc_excess(lib):
    pkgs = lib.packages()
    assert len(pkgs) >= 30
    for pkg in pkgs:
        _check_courtyards(pkg)


@pytest.mark.parametrize(
    "name,level,expected",
    [
        # worked by hand: IPC-7351B equations (REFERENCES.md s8), 0603 ranges L 1.50..1.70,
        # T 0.20..0.50, W 0.70..0.90 (EIA 0603, memory), F 0.05, P 0.025, toe 0.35, heel 0,
        # side 0 (Table 3-5, memory): Z = 1.50 + 0.70 + sqrt(0.2^2 + 0.05^2 + 0.025^2)
        # = 2.4077 -> 2.45; X = 0.70 + 0.2077 = 0.9077 -> 0.95; courtyard excess 0.25 a side
        # (s3): 2.45 + 0.50 = 2.95; 0.95 + 0.50 = 1.45. The old 2.80 x 1.30 (3.64 mm2)
        # was 15 % smaller in area than these 4.28 mm2.
        ("0603", "nominal", (2.95, 1.45)),
        # SOIC-14 level B: body 8.65 + 0.50 = 9.15 along (already on the 0.05 grid); across:
        # Z = 5.80 + 0.70 + sqrt(0.4^2 + 0.05^2 + 0.025^2) = 6.9039 -> 6.95, + 0.50 = 7.45
        ("SOIC-14", "B", (9.15, 7.45)),
    ],
)
def test_courtyard_worked_examples(lib, name, level, expected):
    cy = courtyard(lib.package(name), level)
    assert (cy.length_mm, cy.width_mm) == pytest.approx(expected, abs=1e-9)


def test_courtyard_excess_table_matches_ipc(lib):
    rules = {r.name: r for r in lib.courtyard_rules()}
    # IPC-7351B courtyard excess (REFERENCES.md s3, memory)
    for name, expected in (("general", EXCESS_GENERAL), ("small-chip", EXCESS_SMALL_CHIP)):
        for level in LEVELS:
            assert _close(rules[name].excess(level), expected[level])
        assert "IPC-7351B" in rules[name].source
    assert _close(lib.grid_mm, GRID)


@pytest.mark.parametrize(
    "value,expected",
    [(2.80, 2.80), (2.81, 2.85), (2.849, 2.85), (0.05, 0.05), (0.8 + 0.5, 1.30),
     (4.9 + 2 * 0.1, 5.10), (0.0001, 0.05), (7.0, 7.0)],
)
def test_ceil_to_grid(value, expected):
    # closed form: the least multiple of 0.05 not below the value
    assert ceil_to_grid(value) == pytest.approx(expected, abs=1e-12)


def test_courtyard_size_is_bounding_box_plus_excess():
    # closed-form geometry: the larger of body and lands on each axis, plus 2 x excess
    assert courtyard_size(3.0, 4.4, 2.4, 7.3, 0.25) == pytest.approx((3.5, 7.8))
    assert courtyard_size(1.0, 1.0, 1.0, 1.0, 0.0) == pytest.approx((1.0, 1.0))


@pytest.mark.parametrize("text,level", [("most", "most"), ("A", "most"), ("Nominal", "nominal"),
                                        ("b", "nominal"), ("LEAST", "least"), ("c", "least")])
def test_density_level_names(text, level):
    # IPC-7351B: A = most, B = nominal, C = least (REFERENCES.md s3)
    assert normalize_level(text) == level


@pytest.mark.parametrize("bad", ["", "D", "medium", "max"])
def test_bad_density_level(lib, bad):
    with pytest.raises(UnknownNameError, match="most, nominal or least"):
        courtyard(lib.package("0603"), bad)


# --------------------------------------------------------------------------
# CONTRACT.md section 2: packages and kinds that must exist
# --------------------------------------------------------------------------
CONTRACT_PACKAGES = [
    "0201", "0402", "0603", "0805", "1206", "1210", "SOD-123", "SOD-323", "SOT-23",
    "SOT-23-5", "SOT-23-6", "SC-70-5", "SOIC-8", "SOIC-14", "SOIC-16", "MSOP-8", "MSOP-10",
    "TSSOP-8", "TSSOP-14", "TSSOP-16", "QFN-16-3x3", "DIP-8",
]


@pytest.mark.parametrize("name", CONTRACT_PACKAGES)
def test_contract_packages_exist(lib, name):
    # CONTRACT.md s2: the package list, by its exact names
    assert lib.has_package(name)
    pkg = lib.package(name)
    assert pkg.name == name
    assert pkg in lib.packages()
    info = lib.info(name)
    assert info.source and info.land_basis and info.height_basis


@pytest.mark.parametrize("n", range(1, 21))
def test_contract_headers_1_to_20(lib, n):
    # CONTRACT.md s2: header-1xN-2.54, N = 1 .. 20; 2.54 mm pitch (the name)
    pkg = lib.package(f"header-1x{n}-2.54")
    # the old name is an alias of the canonical pin row name (footprints/README.md)
    assert pkg.name == f"pins-rows1-n{n}-pitch2.54-tht-vertical" and pkg.pin_count == n
    assert lib.package(pkg.name) == pkg
    assert _close(pkg.pitch_mm, 2.54)
    # housing 2.54 mm a position (common practice); pads at 2.54 spacing: the land
    # extent is (n - 1) x 2.54 plus one pad (closed form)
    assert _close(pkg.body_length_mm, n * 2.54)
    pad = pkg.land_length_mm - (n - 1) * 2.54
    assert 1.0 <= pad < 2.54 and _close(pad, pkg.land_width_mm)
    pins = lib.pins_for(lib.kind("header"), pkg)
    assert [p.number for p in pins] == [str(i) for i in range(1, n + 1)]
    _check_courtyards(pkg)


def test_header_1x7(lib):
    # the brief's example: 7 pins at 2.54 pitch (CONTRACT.md s2)
    pkg = lib.package("header-1x7-2.54")
    assert pkg.pin_count == 7 and _close(pkg.pitch_mm, 2.54)
    assert _close(pkg.body_length_mm, 17.78)  # 7 x 2.54, closed form
    assert len(lib.pins_for(lib.kind("header"), pkg)) == 7


@pytest.mark.parametrize("text,canonical,d", [
    ("pad-1.5mm", "pad-1.5mm", 1.5), ("PAD-1.5MM", "pad-1.5mm", 1.5), ("pad-2.0mm", "pad-2mm", 2.0),
    ("pad-0.5mm", "pad-0.5mm", 0.5), ("pad-10mm", "pad-10mm", 10.0), ("pad-3", "pad-3mm", 3.0),
    ("pad-1.25mm", "pad-1.25mm", 1.25),
])
def test_round_pads(lib, text, canonical, d):
    # CONTRACT.md s2: pad-Dmm, D the pad diameter; a round pad fills a D x D square
    pkg = lib.package(text)
    assert pkg.name == canonical and pkg.pin_count == 1
    assert _close(pkg.land_length_mm, d) and _close(pkg.land_width_mm, d)
    assert _close(pkg.body_length_mm, d) and _close(pkg.body_width_mm, d)
    _check_courtyards(pkg)


@settings(max_examples=60, deadline=None)
@given(d=st.decimals(min_value="0.5", max_value="10", places=2))
def test_pad_family_any_diameter(d):
    lib = load_library()
    pkg = lib.package(f"pad-{d}mm")
    # closed form: D x D pad; courtyard = D + 2 x excess rounded up to 0.05 (IPC-7351B s3)
    assert _close(pkg.land_length_mm, float(d))
    _check_courtyards(pkg)


def test_header_2xn_family(lib):
    # extra family: two rows at 2.54 mm (common practice), pins 1 .. 2N
    pkg = lib.package("header-2x5-2.54")
    assert pkg.pin_count == 10 and _close(pkg.body_width_mm, 5.08)
    assert len(lib.pins_for(lib.kind("header"), pkg)) == 10


# CONTRACT.md s2 kind table, typed from it: kind -> [(number, name)]
def _numbered(*names: str) -> list[tuple[str, str]]:
    return [(str(i), n) for i, n in enumerate(names, start=1)]


CONTRACT_KINDS = {
    "resistor": _numbered("1", "2"),
    "capacitor": _numbered("1", "2"),
    "inductor": _numbered("1", "2"),
    "ferrite": _numbered("1", "2"),
    "capacitor-polarized": _numbered("+", "-"),
    "diode": _numbered("K", "A"),
    "led": _numbered("K", "A"),
    "opamp-single": _numbered("OUT", "V-", "+IN", "-IN", "V+"),
    "opamp-dual": _numbered("OUTA", "-INA", "+INA", "V-", "+INB", "-INB", "OUTB", "V+"),
    "opamp-quad": _numbered("OUTA", "-INA", "+INA", "V+", "+INB", "-INB", "OUTB", "OUTC",
                            "-INC", "+INC", "V-", "+IND", "-IND", "OUTD"),
    "comparator-dual": _numbered("OUTA", "-INA", "+INA", "GND", "+INB", "-INB", "OUTB", "VCC"),
    "comparator-quad": _numbered("OUT2", "OUT1", "VCC", "-IN1", "+IN1", "-IN2", "+IN2", "-IN3",
                                 "+IN3", "-IN4", "+IN4", "GND", "OUT4", "OUT3"),
    "and2-quad": _numbered("1A", "1B", "1Y", "2A", "2B", "2Y", "GND", "3Y", "3A", "3B", "4Y",
                           "4A", "4B", "VCC"),
    "ldo-regulator": _numbered("IN", "GND", "EN", "NC", "OUT"),
    "wire-pad": _numbered("1"),
    "test-point": _numbered("1"),
}
# CONTRACT.md s2 gives only numbers for these; names are the numbers (common practice)
NUMBER_ONLY = {"resistor", "capacitor", "inductor", "ferrite", "wire-pad", "test-point"}


@pytest.mark.parametrize("name", sorted(CONTRACT_KINDS))
def test_contract_kinds_have_contract_pins(lib, name):
    kind = lib.kind(name)
    got = [(p.number, p.name) for p in kind.pins]
    if name in NUMBER_ONLY:
        assert [n for n, _ in got] == [n for n, _ in CONTRACT_KINDS[name]]  # CONTRACT.md s2
    else:
        assert got == CONTRACT_KINDS[name]  # CONTRACT.md s2, numbers and names
    assert all(p.role in PIN_ROLES for p in kind.pins)
    assert kind.source and not kind.pins_from_package


def test_contract_header_kind(lib):
    # CONTRACT.md s2: header pins 1 .. N from the package
    kind = lib.kind("header")
    assert kind.pins_from_package and kind.category == "connector"


ROLE_EXPECTATIONS = {
    # industry-standard parts (common practice): comparator outputs are open collector (open-drain)
    "comparator-dual": {"OUTA": "open-drain", "OUTB": "open-drain", "GND": "supply",
                        "VCC": "supply", "+INA": "in"},
    "comparator-quad": {"OUT1": "open-drain", "OUT4": "open-drain", "VCC": "supply"},
    "opamp-dual": {"OUTA": "out", "V-": "supply", "V+": "supply", "-INB": "in"},
    "and2-quad": {"1Y": "out", "4A": "in", "GND": "supply", "VCC": "supply"},
    # a regulator's output feeds a rail; NC is not connected (CONTRACT.md s2 pin name)
    "ldo-regulator": {"IN": "supply", "OUT": "supply-out", "NC": "nc", "EN": "in"},
    "comparator-single": {"OUT": "out"},
}


@pytest.mark.parametrize("name", sorted(ROLE_EXPECTATIONS))
def test_pin_roles(lib, name):
    roles = {p.name: p.role for p in lib.kind(name).pins}
    for pin, role in ROLE_EXPECTATIONS[name].items():
        assert roles[pin] == role


@pytest.mark.parametrize(
    "name,category,unit",
    [("resistor", "passive", "ohm"), ("capacitor", "passive", "F"), ("inductor", "passive", "H"),
     ("capacitor-polarized", "polarized", "F"), ("diode", "semiconductor", ""),
     ("led", "semiconductor", ""), ("opamp-dual", "ic", ""), ("wire-pad", "connector", ""),
     ("npn", "semiconductor", ""), ("analog-switch-spdt", "ic", "")],
)
def test_kind_category_and_unit(lib, name, category, unit):
    kind = lib.kind(name)
    assert kind.category == category and kind.value_unit == unit


def test_every_ic_has_two_supply_pins(lib):
    # an IC has a positive and a negative/ground supply pin (common practice)
    for kind in lib.kinds():
        if kind.category == "ic":
            assert sum(p.role == "supply" for p in kind.pins) >= 2, kind.name


@pytest.mark.parametrize(
    "name,pins",
    [
        # common practice SOT-23 pinouts
        ("npn", ["B", "E", "C"]), ("pnp", ["B", "E", "C"]),
        ("nmos", ["G", "S", "D"]), ("pmos", ["G", "S", "D"]),
        # the single op-amp 5-pin pinout (CONTRACT.md s2) shared by single comparators
        ("comparator-single", ["OUT", "V-", "+IN", "-IN", "V+"]),
        ("and2-single", ["A", "B", "GND", "Y", "VCC"]),
        ("analog-switch-spdt", ["IN", "V+", "GND", "NO", "COM", "NC"]),
    ],
)
def test_extra_kinds(lib, name, pins):
    kind = lib.kind(name)
    assert [p.name for p in kind.pins] == pins
    assert [p.number for p in kind.pins] == [str(i) for i in range(1, len(pins) + 1)]


@pytest.mark.parametrize(
    "kind,package",
    [("opamp-single", "SOT-23-5"), ("opamp-dual", "SOIC-8"), ("opamp-dual", "MSOP-8"),
     ("opamp-quad", "TSSOP-14"), ("comparator-dual", "DIP-8"), ("comparator-quad", "SOIC-14"),
     ("and2-quad", "SOIC-14"), ("ldo-regulator", "SOT-23-5"), ("diode", "SOD-123"),
     ("led", "0603"), ("npn", "SOT-23"), ("analog-switch-spdt", "SC-70-6"),
     ("wire-pad", "pad-1.5mm"), ("capacitor-polarized", "tantalum-B"),
     ("header", "header-1x4-2.54")],
)
def test_kinds_fit_their_usual_packages(lib, kind, package):
    # pin counts agree (the trade names carry the pin count)
    assert pin_mismatch(lib.kind(kind), lib.package(package)) is None


@pytest.mark.parametrize("kind,package", [("opamp-dual", "SOT-23"), ("resistor", "SOIC-8"),
                                          ("ldo-regulator", "SOT-23")])
def test_pin_mismatch_reported(lib, kind, package):
    msg = pin_mismatch(lib.kind(kind), lib.package(package))
    assert msg is not None and kind in msg and package in msg


# --------------------------------------------------------------------------
# Names: aliases, case, suggestions
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "alias,name",
    [("SOIC8", "SOIC-8"), ("SO-8", "SOIC-8"), ("so8", "SOIC-8"), ("soic-8", "SOIC-8"),
     ("SOT23", "SOT-23"), ("SOT-23-3", "SOT-23"), ("sot23-5", "SOT-23-5"), ("SOT23-6", "SOT-23-6"),
     ("1608", "0603"), ("1005", "0402"), ("2012", "0805"), ("3216", "1206"), ("3225", "1210"),
     ("SC70-5", "SC-70-5"), ("SOT-353", "SC-70-5"), ("SO-14", "SOIC-14"), ("SO16", "SOIC-16"),
     ("TSSOP14", "TSSOP-14"), ("msop10", "MSOP-10"), ("DIP8", "DIP-8"), ("PDIP-8", "DIP-8"),
     ("qfn16-3x3", "QFN-16-3x3"), ("SOD123", "SOD-123"), ("TO-236AB", "SOT-23"),
     ("  0805 ", "0805"), ("tssop_16", "TSSOP-16"), ("SOT 23 5", "SOT-23-5"),
     ("Header-1x07-2.54", "pins-rows1-n7-pitch2.54-tht-vertical"),
     ("header-1x3", "pins-rows1-n3-pitch2.54-tht-vertical")],
)
def test_aliases(lib, alias, name):
    assert lib.package(alias).name == name


@pytest.mark.parametrize(
    "bad,hint",
    [("SOIC-9", "SOIC-8"), ("TSOP-8", "TSSOP-8"), ("SOT-23-7", "SOT-23"), ("0604", "0603"),
     ("MSOP-9", "MSOP-8"), ("QFN-16-4x4", "QFN-16-3x3"), ("headr-1x4-2.54", "unknown package 'headr-1x4-2.54'"),
     ("header-1x41-2.54", "n: '41' must be a whole number from 1 to 40"),
     ("header-1x0-2.54", "n: '0' must be a whole number from 1 to 40"),
     ("pad-0.3mm", "D from 0.5 to 10 mm"), ("pad-12mm", "D from 0.5 to 10 mm"),
     ("", "empty package name"), ("resistor", "unknown package 'resistor'")],
)
def test_bad_package_names(lib, bad, hint):
    with pytest.raises(UnknownNameError) as info:
        lib.package(bad)
    assert hint in str(info.value)
    assert not lib.has_package(bad)


@pytest.mark.parametrize("bad,hint", [("resister", "resistor"), ("opamp", "opamp-single"),
                                      ("comparator", "comparator-dual"), ("LDO", "unknown part kind")])
def test_bad_kind_names(lib, bad, hint):
    with pytest.raises(UnknownNameError) as info:
        lib.kind(bad)
    assert hint in str(info.value)


def test_kind_lookup_ignores_case(lib):
    assert lib.kind("OpAmp-Dual") is lib.kind("opamp-dual")


# --------------------------------------------------------------------------
# Listing, determinism, user kinds, caching
# --------------------------------------------------------------------------
def test_listing_is_sorted_and_unique(lib):
    names = [p.name for p in lib.packages()]
    assert len(set(n.casefold() for n in names)) == len(names)
    assert names.index("MSOP-8") < names.index("MSOP-10")  # natural order
    assert names.index("SOIC-8") < names.index("SOIC-14") < names.index("SOIC-16")
    assert [k.name for k in lib.kinds()] == sorted(k.name for k in lib.kinds())
    assert lib.packages() == load_library().packages()


def test_with_kinds_adds_and_keeps_original(lib):
    trig = PartKind("trigger-ic", "ic", (PinDef("1", "OUT", "out"), PinDef("2", "GND", "supply"),
                                         PinDef("3", "VDD", "supply")))
    lib2 = lib.with_kinds([trig])
    assert lib2.kind("trigger-ic") is trig and not lib.has_kind("trigger-ic")
    assert lib2.package("SOT-23") == lib.package("SOT-23")
    assert len(lib2.kinds()) == len(lib.kinds()) + 1
    # a same-named kind replaces the built-in in the copy only
    mine = PartKind("resistor", "passive", (PinDef("1", "A", "passive"), PinDef("2", "B", "passive")),
                    "ohm")
    assert lib.with_kinds([mine]).kind("resistor") is mine
    assert lib.kind("resistor") is not mine


def test_load_is_cached(lib):
    assert load_library() is lib
    assert load_library(DEFAULT_ROOT) is lib


# --------------------------------------------------------------------------
# Malformed data: LibraryError names the file and the row / key
# --------------------------------------------------------------------------
@pytest.fixture()
def fp_copy(tmp_path: Path) -> Path:
    dst = tmp_path / "fp"
    shutil.copytree(DEFAULT_ROOT, dst)
    return dst


def _line_of(path: Path, start: str) -> int:
    for i, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if line.startswith(start):
            return i
    raise AssertionError(start)


def _line_in_table(path: Path, header: str, anchor: str) -> int:
    """Line of the first line starting with ``anchor`` at or after table ``header``."""
    start = _line_of(path, header)
    lines = path.read_text(encoding="utf-8").splitlines()
    return next(i for i, ln in enumerate(lines, start=1) if i >= start and ln.startswith(anchor))


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


def _pkg_cell(root: Path, name: str, column: int, value: str) -> int:
    """Set one cell of a packages.csv row (no quoted cells in that row); return its line."""
    path = root / "packages.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    n = _line_of(path, name + ",")
    cells = lines[n - 1].split(",")
    cells[column] = value
    lines[n - 1] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return n


@pytest.mark.parametrize(
    "column,value,key,reason",
    [
        (5, "tall", "DIP-8.height_mm", "not a number"),
        (3, "-2", "DIP-8.body_length_mm", "greater than 0"),
        (3, "nan", "DIP-8.body_length_mm", "finite"),
        (6, "2.5", "DIP-8.pin_count", "whole number"),
        (8, "tiny", "DIP-8.courtyard_class", "unknown courtyard class"),
        (9, "", "DIP-8.source", "must not be empty"),
        (0, "DIP 8", "name", "bad package name"),
        (1, "SOIC8", "DIP-8.aliases", "already used by package SOIC-8"),
        (1, "header-1x2-2.54", "DIP-8.aliases", "form of a pin row name"),
        (1, "pad-2mm", "DIP-8.aliases", "family pad-Dmm"),
        (1, "sot-23-5", "DIP-8.aliases", "already used by package SOT-23-5"),
        (1, "SOT2-35", "DIP-8.aliases", "only in '-', '_' or spaces"),
    ],
)
def test_bad_package_row(fp_copy, column, value, key, reason):
    # DIP-8 is the last row, so a clash is found on it (the error names the earlier row)
    line = _pkg_cell(fp_copy, "DIP-8", column, value)
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    err = info.value
    assert err.file.endswith("packages.csv") and err.line == line and err.key == key
    assert reason in err.reason
    assert f"packages.csv:{line}: {key}: " in str(err)


def test_package_row_with_missing_field(fp_copy):
    path = fp_copy / "packages.csv"
    line = _line_of(path, "1206,")
    _edit(path, "1206,3216,chip,3.20,", "1206,3216,chip,")
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    assert info.value.line == line and "fields, expected 12" in str(info.value)


def test_package_header_checked(fp_copy):
    path = fp_copy / "packages.csv"
    line = _line_of(path, "name,")
    _edit(path, "name,aliases,family", "name,alias,family")
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    assert info.value.line == line and "missing aliases" in str(info.value)


def test_duplicate_package_name(fp_copy):
    path = fp_copy / "packages.csv"
    first = _line_of(path, "SOIC-8,")
    _edit(path, "SOIC-14,SOIC14", "SOIC-8,SOIC14")
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    assert info.value.line == _line_of(path, "SOIC-8,SOIC14")
    assert f"line {first}" in str(info.value)


@pytest.mark.parametrize(
    "old,new,key,reason,anchor",
    [
        ('{ number = 3, name = "+INA", role = "in" }', '{ number = 3, name = "+INA", role = "sink" }',
         "opamp-dual.pins[2].role", "unknown role", '  { number = 3, name = "+INA"'),
        ('{ number = 8, name = "V+", role = "supply" },\n]\n\n[opamp-quad]',
         '{ number = 7, name = "V+", role = "supply" },\n]\n\n[opamp-quad]',
         "opamp-dual.pins[7].number", "appears twice", '  { number = 7, name = "V+"'),
        ('category = "passive"\nvalue_unit = "ohm"\ndescription = "two-terminal resistor',
         'category = "resistive"\nvalue_unit = "ohm"\ndescription = "two-terminal resistor',
         "resistor.category", "unknown category", 'category = "resistive"'),
        ('[led]\ncategory = "semiconductor"', '[led]\ncolour = "red"\ncategory = "semiconductor"',
         "led.colour", "unknown key", 'colour = "red"'),
        ('{ number = 2, name = "E", role = "terminal" },\n  { number = 3, name = "C"',
         '{ number = 2, name = "3", role = "terminal" },\n  { number = 3, name = "C"',
         "npn.pins[1].name", "ambiguous", '  { number = 2, name = "3"'),
    ],
)
def test_bad_kind_data(fp_copy, old, new, key, reason, anchor):
    path = fp_copy / "kinds.toml"
    _edit(path, old, new)
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    err = info.value
    assert err.file.endswith("kinds.toml") and err.key == key and reason in err.reason
    # the line of the offending pin or key
    assert err.line == _line_in_table(path, "[" + key.split(".")[0] + "]", anchor)


def test_toml_syntax_error_gives_line(fp_copy):
    path = fp_copy / "kinds.toml"
    _edit(path, 'category = "ic"', 'category = "ic', )
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    assert info.value.file.endswith("kinds.toml") and "not valid TOML" in info.value.reason
    assert info.value.line == _line_of(path, 'category = "ic')


@pytest.mark.parametrize(
    "old,new,key,reason,header,anchor",
    [
        ("max = 10.0\nbody_length_mm = { base = 0.0, per = 1.0 }",
         "max = 0.2\nbody_length_mm = { base = 0.0, per = 1.0 }",
         "pad-Dmm.max", "below min", '[pad-Dmm]', "max = 0.2"),
        ('pattern = "pad-{D}mm"', 'pattern = "pad-mm"', "pad-Dmm.pattern", "exactly once",
         "[pad-Dmm]", 'pattern = "pad-mm"'),
        ("pad_mm = { base = 0.0, per = 1.0 }\ndrill_mm = 0.0",
         "pad_mm = { base = -3.0, per = 1.0 }\ndrill_mm = 0.0",
         "pad-Dmm.pad_mm", "greater than 0", '[pad-Dmm]', "pad_mm = { base = -3.0"),
        ("pin_count = 1\n", "pin_count = { base = 0, per = 1 }\n", "pad-Dmm.pin_count",
         "whole number", "[pad-Dmm]", "pin_count"),
    ],
)
def test_bad_family_data(fp_copy, old, new, key, reason, header, anchor):
    path = fp_copy / "families.toml"
    _edit(path, old, new)
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    err = info.value
    assert err.file.endswith("families.toml") and err.key == key and reason in err.reason
    assert err.line == _line_in_table(path, header, anchor)  # the offending key's line


def test_bad_courtyard_data(fp_copy):
    path = fp_copy / "courtyard.toml"
    _edit(path, "most = 0.20\n", "")
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    err = info.value
    assert err.file.endswith("courtyard.toml") and err.key == "excess.small-chip.most"
    # a missing key has no line of its own: the table header's line
    assert err.line == _line_of(path, "[excess.small-chip]") and "missing key" in err.reason


def test_bad_courtyard_value(fp_copy):
    path = fp_copy / "courtyard.toml"
    _edit(path, "least = 0.10\napplies_to = \"chips smaller", "least = -0.10\napplies_to = \"chips smaller")
    with pytest.raises(LibraryError) as info:
        load_library(fp_copy)
    err = info.value
    assert err.key == "excess.small-chip.least" and "at least 0" in err.reason
    assert err.line == _line_in_table(path, "[excess.small-chip]", "least = -0.10")


def test_missing_file(fp_copy):
    (fp_copy / "kinds.toml").unlink()
    with pytest.raises(LibraryError, match="kinds.toml: footprint data file not found"):
        load_library(fp_copy)


def test_missing_folder(tmp_path):
    with pytest.raises(LibraryError, match="folder not found"):
        load_library(tmp_path / "nowhere")


def test_edited_copy_is_reread(fp_copy):
    first = load_library(fp_copy)
    assert load_library(fp_copy) is first
    _pkg_cell(fp_copy, "0805", 5, "1.50")
    second = load_library(fp_copy)
    assert second is not first and _close(second.package("0805").height_mm, 1.50)


# --------------------------------------------------------------------------
# Heights by kind (issue 8 item 4) and the new packages against their size codes
# --------------------------------------------------------------------------
@pytest.mark.parametrize("size,typical", [("0201", 0.23), ("0402", 0.35), ("0603", 0.45),
                                          ("0805", 0.50), ("1206", 0.55), ("2512", 0.55)])
def test_chip_resistors_take_the_resistor_thickness(lib, size, typical):
    pkg = lib.package(size)
    res, basis = lib.part_height("resistor", pkg)
    cap, _ = lib.part_height("capacitor", pkg)
    # typical resistor thickness of the size code (REFERENCES.md s1) plus at most 0.10 allowance
    assert typical <= res <= typical + 0.10 + 1e-9 and "REFERENCES.md s1" in basis
    # capacitors keep the package height, which may reach the body width (s1 note)
    assert cap == pkg.height_mm and cap >= res


@pytest.mark.parametrize("name,d,h", [("can-4x5.4", 4.0, 5.4), ("can-5x5.4", 5.0, 5.4),
                                      ("can-6.3x5.4", 6.3, 5.4), ("can-6.3x7.7", 6.3, 7.7),
                                      ("can-8x6.2", 8.0, 6.2), ("can-8x10.2", 8.0, 10.2)])
def test_aluminium_cans_match_their_size_code(lib, name, d, h):
    pkg = lib.package(name)
    # the size code is can diameter x height (common practice); the base plate is D + 0.3
    # square and the seated height the code's height plus at most 0.3 (memory)
    assert _close(pkg.body_length_mm, d + 0.3) and _close(pkg.body_width_mm, d + 0.3)
    assert h <= pkg.height_mm <= h + 0.3 + 1e-9
    one, two = pkg.pads
    assert one.x_mm < 0 < two.x_mm and pkg.pin_count == 2


@pytest.mark.parametrize("name,s,h", [("ind-2.5x1.2", 2.5, 1.2), ("ind-3x1.5", 3.0, 1.5),
                                      ("ind-4x2", 4.0, 2.0), ("ind-5x3", 5.0, 3.0),
                                      ("ind-6x3", 6.0, 3.0)])
def test_power_inductors_match_their_size(lib, name, s, h):
    pkg = lib.package(name)
    # square body of the named size and the named height (common practice size codes)
    assert _close(pkg.body_length_mm, s) and _close(pkg.body_width_mm, s) and _close(pkg.height_mm, h)
    # molded terminals fold under the body: the lands reach beyond it by the heel goal only
    assert pkg.land_length_mm <= s + 2 * 0.80 + 0.5


@pytest.mark.parametrize("name,l,w,pins", [("xtal-3.2x2.5", 3.2, 2.5, 4), ("xtal-2.5x2.0", 2.5, 2.0, 4),
                                           ("xtal-2.0x1.6", 2.0, 1.6, 4), ("xtal-11.4x4.7", 11.4, 4.7, 2),
                                           ("tact-6x6x4.3", 6.0, 6.0, 4), ("tact-6x6x5", 6.0, 6.0, 4),
                                           ("tact-4.5x4.5x3.8", 4.5, 4.5, 4), ("tact-3x6x2.5", 6.0, 3.0, 2),
                                           ("tact-3x4x2", 4.0, 3.0, 2)])
def test_crystals_and_switches_match_their_size(lib, name, l, w, pins):
    pkg = lib.package(name)
    # body from the size in the name (common package size codes, memory); tactile switch
    # heights are the third figure of the name
    assert _close(pkg.body_length_mm, l) and _close(pkg.body_width_mm, w) and pkg.pin_count == pins
    if name.startswith("tact-"):
        assert _close(pkg.height_mm, float(name.split("x")[-1]))
    if pins == 4:
        # four pads anticlockwise from pin 1 at lower left (common practice)
        by = {p.number: p for p in pkg.pads}
        assert by["1"].x_mm < 0 > by["1"].y_mm and by["3"].x_mm > 0 < by["3"].y_mm


@pytest.mark.parametrize("name,pins,ep", [("DFN-8-2x2", 8, (1.50, 0.90)), ("DFN-8-3x3", 8, (2.40, 1.60))])
def test_dfn_with_exposed_pad(lib, name, pins, ep):
    pads = lib.package(name).pads
    # MO-229 two-row no-lead: eight terminals and a centre exposed pad (memory)
    assert len(pads) == pins + 1 and (pads[-1].number, pads[-1].width_mm, pads[-1].height_mm) == ("EP", *ep)


@pytest.mark.parametrize("name,h", [("SOD-523", 0.70), ("TSOT-23-5", 1.00), ("TSOT-23-6", 1.00),
                                    ("SOT-89", 1.60)])
def test_small_outlines_added(lib, name, h):
    # maximum heights of the outlines (SOD-523, MO-193, TO-243AA; memory)
    assert _close(lib.package(name).height_mm, h)
