"""Parts that must sit somewhere (pipeline/place_rules.py): fixed parts, the wire-entry zone, near rules.

Every placement is re-checked here with shapely and the test's own pad
arithmetic (a quarter turn maps (x, y) to (-y, x): elementary geometry),
independently of the placer.
"""

from __future__ import annotations

import math
from pathlib import Path

import ezdxf
import numpy as np
import pytest
import shapely
from click.testing import CliRunner
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st
from shapely.geometry import box

from pipeline.area import items_from_design
from pipeline.cavity import read_cavity
from pipeline.cavity.roles import parse_layer_map
from pipeline.cli import main
from pipeline.design import read_design_text
from pipeline.library import load_library
from pipeline.model import BoardOptions, HeightZone, Region
from pipeline.place import place_and_fit
from pipeline.place_rules import EDGE_BAND_MM, NEAR_WITHIN_MM

ROOT = Path(__file__).resolve().parents[1]
LIB = load_library()
EDGE = 0.5  # edge clearance of the tests' boards, mm


def _design(pads: int, resistors: int, fixed_r1: tuple[float, float] | None, extra: str = "") -> str:
    """An op-amp with two decoupling caps across its supply, wire pads and resistors."""
    out = ['[design]\nname = "t"\n',
           '[parts.U1]\nkind = "opamp-dual"\npackage = "SOIC-8"\n',
           '[parts.C1]\nkind = "capacitor"\nvalue = "100n"\npackage = "0603"\n',
           '[parts.C2]\nkind = "capacitor"\nvalue = "1u"\npackage = "0603"\n']
    for k in range(1, pads + 1):
        out.append(f'[parts.P{k}]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n')
    for k in range(1, resistors + 1):
        at = f"at = [{fixed_r1[0]}, {fixed_r1[1]}]\nrotation = 90\n" if k == 1 and fixed_r1 else ""
        out.append(f'[parts.R{k}]\nkind = "resistor"\nvalue = "10k"\npackage = "0603"\n{at}')
    out.append(extra)
    sig = ["U1.3", "U1.5"] + [f"R{k}.1" for k in range(1, resistors + 1)]
    nets = {"VCC": ["U1.8", "C1.1", "C2.1"], "GND": ["U1.4", "C1.2", "C2.2"],
            "OUT": ["U1.1", "U1.2"] + [f"R{k}.2" for k in range(1, resistors + 1)], "OUTB": ["U1.6", "U1.7"],
            "IN": sig}
    for k in range(1, pads + 1):
        nets[["VCC", "GND", "IN", "OUT"][(k - 1) % 4]].append(f"P{k}.1")
    out.append("[nets]\n" + "".join(f"{n} = {v!r}\n".replace("'", '"') for n, v in nets.items()))
    return "\n".join(out)


def _pad_centres(ref_pkg: str, x: float, y: float, rot: int, pins=None) -> list[tuple[float, float]]:
    """Pad centres on the board, by the test's own quarter-turn arithmetic."""
    c, s = round(math.cos(math.radians(rot))), round(math.sin(math.radians(rot)))
    return [(x + p.x_mm * c - p.y_mm * s, y + p.x_mm * s + p.y_mm * c)
            for p in LIB.package(ref_pkg).pads if pins is None or p.number in pins]


def _nearest(a, b) -> float:
    return min(math.dist(p, q) for p in a for q in b)


WALLS = st.sampled_from(["left", "right", "bottom", "top"])


def _zone(wall: str, w: float, h: float, at: float) -> shapely.Geometry:
    """A 4 mm wide zone straddling one wall of the w x h board, at fraction ``at`` along it."""
    if wall in ("left", "right"):
        y = at * (h - 4)
        x0 = -1 if wall == "left" else w - 2
        return box(x0, y, x0 + 3, y + 4)
    x = at * (w - 4)
    y0 = -1 if wall == "bottom" else h - 2
    return box(x, y0, x + 4, y0 + 3)


GENERATED = dict(w=st.floats(26, 34), h=st.floats(18, 22), wall=WALLS, at=st.floats(0, 1), pads=st.integers(1, 5),
                 resistors=st.integers(1, 5), fx=st.floats(0.3, 0.7), fy=st.floats(0.3, 0.7), zone=st.booleans())


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow],
          phases=[Phase.explicit, Phase.generate])  # bounded: no shrinking (a slow placement per example)
@given(**GENERATED)
def test_generated_designs_keep_every_rule(**case):
    _check_generated(**case)


@pytest.mark.fuzz
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(**GENERATED)
def test_generated_designs_keep_every_rule_long(**case):
    """The same, many more designs (pytest -m fuzz; minutes)."""
    _check_generated(**case)


def _check_generated(w, h, wall, at, pads, resistors, fx, fy, zone):
    fixed = (round(fx * w, 2), round(fy * h, 2))
    design, _ = read_design_text(_design(pads, resistors, fixed), LIB)
    items = items_from_design(design, LIB, "nominal")
    entry = _zone(wall, w, h, at) if zone else None
    region = Region(box(0, 0, w, h), (HeightZone(box(0, 0, w, h), 5.0),), 0.8, wire_entry=entry)
    fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))
    assert fit.fits, fit.blocked_by
    at_ = {p.ref: p for p in fit.placements}
    # fixed part exactly where asked
    assert (at_["R1"].x_mm, at_["R1"].y_mm, at_["R1"].rotation_deg) == (fixed[0], fixed[1], 90)
    # every courtyard inside the board less its edge clearance, none overlapping (shapely, not the placer)
    area = box(EDGE, EDGE, w - EDGE, h - EDGE)
    courts = [p.courtyard for p in fit.placements]
    assert all(area.buffer(1e-6).covers(c) for c in courts)
    for i, a in enumerate(courts):
        for b in courts[i + 1:]:
            assert a.intersection(b).area < 1e-9
    # wire pads inside the zone or in the edge band: courtyard within the edge clearance plus
    # EDGE_BAND_MM of the board outline (plus 0.01 mm: the placer insets by a polygon that keeps
    # arcs outside the true circle, pipeline/place.py _inset)
    outline = box(0, 0, w, h).exterior
    for k in range(1, pads + 1):
        c = at_[f"P{k}"].courtyard
        in_zone = entry is not None and entry.contains(c.centroid)
        assert in_zone or outline.distance(c) <= EDGE + EDGE_BAND_MM + 0.01, (f"P{k}", c.bounds)
    # decoupling caps within NEAR_WITHIN_MM (pad centre to supply pad centre) of U1's pins 4 and 8
    u = at_["U1"]
    supply = _pad_centres("SOIC-8", u.x_mm, u.y_mm, u.rotation_deg, pins=("4", "8"))
    for cap in ("C1", "C2"):
        p = at_[cap]
        assert _nearest(_pad_centres("0603", p.x_mm, p.y_mm, p.rotation_deg), supply) <= NEAR_WITHIN_MM + 1e-6


def test_with_a_zone_the_pads_sit_in_it_first():
    """Three pads and a zone wide enough for three: all three courtyards touch the zone."""
    design, _ = read_design_text(_design(3, 2, None), LIB)
    items = items_from_design(design, LIB, "nominal")
    entry = box(20, -1, 28, 2)  # across the lower wall; 8 mm holds three 2 mm pads
    region = Region(box(0, 0, 30, 20), (HeightZone(box(0, 0, 30, 20), 5.0),), 0.8, wire_entry=entry)
    fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))
    pads = [p for p in fit.placements if p.ref.startswith("P")]
    assert len(pads) == 3 and all(entry.contains(p.courtyard.centroid) for p in pads)


def test_at_edge_false_and_true_change_the_items():
    extra = '[parts.R9]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\nat_edge = true\n'
    text = _design(2, 1, None, extra).replace('package = "pad-1.5mm"\n', 'package = "pad-1.5mm"\nat_edge = false\n', 1)
    text = text.replace('IN = ["U1.3"', 'IN = ["R9.1", "U1.3"').replace('OUTB = ["U1.6"', 'OUTB = ["R9.2", "U1.6"')
    design, _ = read_design_text(text, LIB)
    edge = {it.ref: it.edge for it in items_from_design(design, LIB, "nominal")}
    assert edge["P1"] is False and edge["P2"] is True and edge["R9"] is True and edge["R1"] is False


def test_a_near_rule_that_cannot_be_met_blocks_and_says_how_far():
    """C1 fixed 20 mm from U1 with near = U1 within 2 mm: the fit names C1, the rule and the distance."""
    text = _design(0, 1, None).replace('[parts.C1]\nkind = "capacitor"\nvalue = "100n"\npackage = "0603"\n',
                                       '[parts.C1]\nkind = "capacitor"\nvalue = "100n"\npackage = "0603"\n'
                                       'near = "U1"\nwithin_mm = 2\nat = [27, 10]\n')
    text = text.replace('[parts.U1]\nkind = "opamp-dual"\npackage = "SOIC-8"\n',
                        '[parts.U1]\nkind = "opamp-dual"\npackage = "SOIC-8"\nat = [5, 10]\n')
    design, _ = read_design_text(text, LIB)
    region = Region(box(0, 0, 30, 20), (HeightZone(box(0, 0, 30, 20), 5.0),), 0.8)
    fit = place_and_fit(items_from_design(design, LIB, "nominal"), region, BoardOptions(edge_clearance_mm=EDGE))
    assert not fit.fits
    # the expected distance, by the test's own arithmetic: nearest of C1's pads to any of U1's pads
    want = _nearest(_pad_centres("0603", 27, 10, 0), _pad_centres("SOIC-8", 5, 10, 0))
    text = next(b for b in fit.blocked_by if b.startswith("C1 "))
    assert "within 2 mm of U1" in text and "near" in text and f"{want:.2f}".rstrip("0").rstrip(".") in text


def test_the_swap_pass_does_not_take_a_decoupling_cap_away():
    """With and without the swap improvement, the caps end within the distance."""
    design, _ = read_design_text(_design(2, 8, None), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 30, 20), (HeightZone(box(0, 0, 30, 20), 5.0),), 0.8)
    for improve in (True, False):
        fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE), improve=improve)
        at_ = {p.ref: p for p in fit.placements}
        u = at_["U1"]
        supply = _pad_centres("SOIC-8", u.x_mm, u.y_mm, u.rotation_deg, pins=("4", "8"))
        for cap in ("C1", "C2"):
            p = at_[cap]
            assert _nearest(_pad_centres("0603", p.x_mm, p.y_mm, p.rotation_deg), supply) <= NEAR_WITHIN_MM


# ---------------------------------------------------------------------------- the zone in the cavity readers
def test_layer_map_takes_the_wire_entry_role():
    roles = parse_layer_map({"WIRE-ENTRY": "Wires in"})
    assert roles.role_of("WIRES IN") == ("WIRE-ENTRY", None)
    assert roles.role_of("WIRE-ENTRY") is None  # a mapped role takes only the named layers


def test_demo_bay_has_its_wire_entry_zone_in_both_forms():
    """x 4..10, y -1..2.5 (outlines/README.md): 6 x 3.5 = 21 mm² drawn, the same in the measured file."""
    for name in ("controller-bay.dxf", "controller-bay.cavity.toml"):
        cav, _ = read_cavity(ROOT / "outlines" / name, depth_mm=6.0)
        assert len(cav.wire_entries) == 1
        assert cav.wire_entries[0].area == pytest.approx(21.0, abs=1e-9)
        assert cav.wire_entries[0].bounds == pytest.approx((4, -1, 10, 2.5))


# ---------------------------------------------------------------------------- bad input through the CLI
_MINI = _design(2, 1, None)


def _dxf(path: Path, zone_layer: str | None, zone_at=(4, -1)) -> None:
    doc = ezdxf.new("R2010", units=4)  # $INSUNITS 4: millimetres
    msp = doc.modelspace()
    msp.add_lwpolyline([(0, 0), (30, 0), (30, 20), (0, 20)], close=True, dxfattribs={"layer": "CAVITY"})
    if zone_layer:
        x, y = zone_at
        msp.add_lwpolyline([(x, y), (x + 4, y), (x + 4, y + 3), (x, y + 3)], close=True,
                           dxfattribs={"layer": zone_layer})
    doc.saveas(path)


def _project(tmp_path: Path, *, cavity: str, design: str = _MINI, layers: str = "") -> Path:
    d = tmp_path / "proj"
    d.mkdir()
    (d / "design.toml").write_text(design)
    (d / "project.toml").write_text(f'[project]\nname = "t"\ndesign = "design.toml"\ncavity = "{cavity}"\n'
                                    f'[cavity]\ndepth_mm = 5.0\n{layers}')
    return d


MEASURED = 'units = "mm"\n[pocket]\nsize = [30, 20]\n'


@pytest.mark.parametrize("case, needles", [
    ("unknown-zone-layer", ["bay.dxf", "cavity.layers.WIRE-ENTRY"]),
    ("zone-outside-drawing", ["bay.dxf", "wire-entry zone", "outside the cavity"]),
    ("zone-outside-measured", ["bay.cavity.toml", "wire_entry[0]", "outside the pocket"]),
    ("zone-unknown-key", ["bay.cavity.toml", "wire_entry[0].depth"]),
    ("near-missing-part", ["design.toml", "parts.C1.near", "U9"]),
    ("within-without-near", ["design.toml", "parts.C1.within_mm"]),
    ("at-edge-not-bool", ["design.toml", "parts.P1.at_edge"]),
])
def test_bad_input_exits_2_naming_file_and_key(tmp_path, case, needles):
    design, layers, cavity = _MINI, "", "bay.dxf"
    if case == "unknown-zone-layer":
        layers = '[cavity.layers]\n"WIRE-ENTRY" = "Wires"\n'
    if case.endswith("measured") or case == "zone-unknown-key":
        cavity = "bay.cavity.toml"
    d = _project(tmp_path, cavity=cavity, layers=layers, design=design)
    if cavity.endswith(".dxf"):
        _dxf(d / cavity, "WIRE-ENTRY" if case == "zone-outside-drawing" else None, zone_at=(100, 100))
    elif case == "zone-outside-measured":
        (d / cavity).write_text(MEASURED + "[[wire_entry]]\nat = [100, 100]\nsize = [3, 3]\n")
    else:
        (d / cavity).write_text(MEASURED + "[[wire_entry]]\nat = [4, -1]\nsize = [3, 3]\ndepth = 2\n")
    cap = '[parts.C1]\nkind = "capacitor"\nvalue = "100n"\npackage = "0603"\n'
    edits = {"near-missing-part": (cap, cap + 'near = "U9"\n'),
             "within-without-near": (cap, cap + "within_mm = 2\n"),
             "at-edge-not-bool": ('package = "pad-1.5mm"\n', 'package = "pad-1.5mm"\nat_edge = "yes"\n')}
    if case in edits:
        old, new = edits[case]
        (d / "design.toml").write_text(design.replace(old, new, 1))
    before = sorted(p.name for p in d.iterdir())
    r = CliRunner().invoke(main, ["run", str(d), "--out", str(d / "out")])
    assert r.exit_code == 2, r.output
    text = r.output
    assert all(n in text for n in needles), text
    assert "Traceback" not in text
    assert not (d / "out").exists() and sorted(p.name for p in d.iterdir()) == before


def test_a_project_with_a_drawn_zone_runs_and_puts_the_pads_there(tmp_path):
    d = _project(tmp_path, cavity="bay.dxf")
    _dxf(d / "bay.dxf", "WIRE-ENTRY", zone_at=(20, -1))
    r = CliRunner().invoke(main, ["run", str(d), "--out", str(d / "out"), "--no-route"])
    assert r.exit_code in (0, 1), r.output
    rows = (d / "out" / "placement.csv").read_text().splitlines()[1:]
    zone = box(20, -1, 24, 2)
    for row in rows:
        ref, x, y, rot, _side = row.split(",")
        if ref.startswith("P"):  # two 2 mm pads fit in the 4 mm zone: both centres in it
            assert zone.contains(shapely.Point(float(x), float(y))), row


def test_measured_zone_survives_the_dxf_writer(tmp_path):
    """snugboard cavity bay.toml --write-dxf: the zone comes back on WIRE-ENTRY with the same shape."""
    out = tmp_path / "bay.dxf"
    r = CliRunner().invoke(main, ["cavity", str(ROOT / "outlines" / "controller-bay.cavity.toml"),
                                  "--write-dxf", str(out)])
    assert r.exit_code == 0, r.output
    cav, _ = read_cavity(out, depth_mm=6.0)
    assert len(cav.wire_entries) == 1 and cav.wire_entries[0].area == pytest.approx(21.0, abs=1e-6)


# ---------------------------------------------------------------------------- the near pass's cost
def _placed(fit) -> list[tuple]:
    return sorted((p.ref, round(p.x_mm, 6), round(p.y_mm, 6), p.rotation_deg, p.side) for p in fit.placements)


def test_near_pass_windows_give_the_whole_board_answer_and_scan_less(monkeypatch):
    """The windowed near pass places every part as a search of the whole board and of every swap
    does (the plain method of the module notes), and looks at far fewer cells than the board has per
    moved part (a cost guard: cells counted, not seconds)."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_design(2, 40, None), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 60, 40), (HeightZone(box(0, 0, 60, 40), 5.0),), 0.8)
    seen: list[int] = []
    real = pr._scan_window

    def counting(board, i, h, w, goal, pads, size, span):
        seen.append((span[1] - span[0]) * (span[3] - span[2]))
        seen.append(-board.g.nx * board.g.ny)  # the board's cells, marked negative
        return real(board, i, h, w, goal, pads, size, span)

    monkeypatch.setattr(pr, "_scan_window", counting)
    fast = _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)))
    windows = [c for c in seen if c >= 0]
    board = -min(seen)
    assert windows and sum(windows) < 0.25 * board * len(windows)
    monkeypatch.setattr(pr, "_window", lambda g, goal, reach: (0, g.ny, 0, g.nx))  # every origin, at once
    monkeypatch.setattr(pr, "_swap_order",  # every candidate in one ring, none passed over by a bound
                        lambda board, i, goal, drop=None, cut=None: iter([(
                            c, np.full(len(c), -math.inf)) for c in [pr._swap_candidates(board, i)]]))
    assert _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))) == fast


def _decoupled(ics: int, caps: int, resistors: int) -> str:
    """``ics`` dual op-amps sharing one supply, ``caps`` 0603 capacitors across it per op-amp
    (each gets a decoupling near rule) and ``resistors`` 0603 resistors of the caps' size."""
    out = ['[design]\nname = "t"\n']
    vcc, gnd = [f"U{u}.8" for u in range(1, ics + 1)], [f"U{u}.4" for u in range(1, ics + 1)]
    out += [f'[parts.U{u}]\nkind = "opamp-dual"\npackage = "SOIC-8"\n' for u in range(1, ics + 1)]
    for c in range(1, ics * caps + 1):
        out.append(f'[parts.C{c}]\nkind = "capacitor"\nvalue = "100n"\npackage = "0603"\n')
        vcc.append(f"C{c}.1")
        gnd.append(f"C{c}.2")
    out += [f'[parts.R{k}]\nkind = "resistor"\nvalue = "10k"\npackage = "0603"\n' for k in range(1, resistors + 1)]
    nets = {"VCC": vcc, "GND": gnd, "A": [f"R{k}.1" for k in range(1, resistors + 1)] + ["U1.3"],
            "B": [f"R{k}.2" for k in range(1, resistors + 1)] + ["U1.1", "U1.2"]}
    out.append("[nets]\n" + "".join(f"{n} = {v!r}\n".replace("'", '"') for n, v in nets.items()))
    return "\n".join(out)


def test_near_pass_finds_each_targets_pins_once_per_place(monkeypatch):
    """A cost guard (calls counted, not seconds): the swap search asks for the target pins of every
    candidate with a near rule of its own; they are worked out once per (rule, target place), not
    once per candidate and mover (252 times against 12 places here before, 16,000-part profile of
    issue 11). Only :func:`near_distance`'s own checks and each new near pass may ask again."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(4, 3, 16), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 26, 17), (HeightZone(box(0, 0, 26, 17), 5.0),), 0.8)
    asked: list[tuple] = []
    checks: list[int] = []
    passes: list[int] = []
    real_points, real_distance, real_pass = pr._points, pr.near_distance, pr.near_pass

    def points(rule, own, *at, **pins):
        if not own:
            asked.append((id(rule), at, tuple(pins.items())))
        return real_points(rule, own, *at, **pins)

    def distance(*args):
        checks.append(1)
        return real_distance(*args)

    monkeypatch.setattr(pr, "_points", points)
    monkeypatch.setattr(pr, "near_distance", distance)
    monkeypatch.setattr(pr, "near_pass", lambda *a: (passes.append(1), real_pass(*a))[1])
    fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))
    assert fit.fits and checks and passes
    assert len(asked) - len(set(asked)) <= len(checks) + (len(passes) - 1) * len(set(asked))


@pytest.mark.parametrize("shape, cells", [((1, 1), [(0, 0)]), ((3, 4), []), ((4, 5), [(0, 4), (2, 0), (2, 3), (3, 4)]),
                                          ((6, 2), [(5, 1)]), ((0, 3), [])])
def test_true_cells_is_numpy_nonzero(shape, cells):
    """The near pass's row-first search gives numpy's own ``nonzero`` (the reference) in its order."""
    import numpy as np

    from pipeline.place_rules import _true_cells

    ok = np.zeros(shape, dtype=bool)
    for r, c in cells:
        ok[r, c] = True
    got, want = _true_cells(ok), np.nonzero(ok)
    assert [a.tolist() for a in got] == [b.tolist() for b in want] and len(got[0]) == len(cells)


def test_near_pass_reads_only_rows_holding_a_free_origin(monkeypatch):
    """A cost guard (cells counted, not seconds): the search for the nearest free origin looks cell
    by cell only at rows that hold one, not at the whole window (numpy's 2-D ``nonzero`` over a
    window of the 16,000-part board was a third of the near pass, issue 11)."""
    import sys

    import numpy as np

    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(4, 3, 16), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 26, 17), (HeightZone(box(0, 0, 26, 17), 5.0),), 0.8)
    read: list[tuple[int, int]] = []
    real_nonzero = np.nonzero

    def nonzero(a):
        if a.ndim == 2 and sys._getframe(1).f_globals["__name__"] == pr.__name__:  # the near pass's own
            read.append((a.size, int(a.any(axis=1).sum()) * a.shape[1]))
        return real_nonzero(a)

    monkeypatch.setattr(pr.np, "nonzero", nonzero)
    assert place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)).fits
    assert read and all(size <= rows_with_one for size, rows_with_one in read)


def test_edge_parts_look_up_each_taken_courtyard_once(monkeypatch):
    """A cost guard (lookups counted, not seconds): pre-placing the edge parts looks each taken
    courtyard up in the candidate spots' tree once, not once per later edge part (quadratic in
    the edge parts before: 671 wire pads of the 16,000-part run, issue 11)."""
    import sys

    design, _ = read_design_text(_design(12, 2, None), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 40, 30), (HeightZone(box(0, 0, 40, 30), 5.0),), 0.8)
    looked: list[int] = []
    real = shapely.STRtree.query

    def query(self, geoms, *args, **kw):
        if sys._getframe(1).f_globals["__name__"] == "pipeline.place_rules":  # the edge pre-placement's own
            looked.append(len(geoms) if hasattr(geoms, "__len__") else 1)
        return real(self, geoms, *args, **kw)

    monkeypatch.setattr(shapely.STRtree, "query", query)
    fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))
    assert fit.fits
    edge_parts = 12  # P1..P12, one courtyard size: one tree; each pad's courtyard is taken once
    assert 0 < sum(looked) <= edge_parts


def test_swap_search_measures_the_mover_only_where_the_partner_keeps_its_rule(monkeypatch):
    """A cost guard (calls counted, not seconds): the swap search works out the mover's distance at
    a candidate's slot only once the candidate's own near rule is known to hold in the mover's slot
    (most candidates of a crowded board fail that test: 77,506 wasted distances at 16,000 parts)."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(4, 3, 16), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 26, 17), (HeightZone(box(0, 0, 26, 17), 5.0),), 0.8)
    state: dict = {}
    wasted: list[int] = []
    measured: list[int] = []
    real_swap, real_distance = pr._nearest_swap, pr._slot_distance

    def swap(board, fixed, i, goal, here):
        state.update(board=board, mover=i, last=None)
        return real_swap(board, fixed, i, goal, here)

    def distance(packer, k, slot, goal):
        d = real_distance(packer, k, slot, goal)
        if state.get("mover") == k:
            owner = [j for j, s in state["board"].run.slots.items() if s == slot and j != k]
            rule = packer.items[owner[0]].near if owner else None
            measured.append(1)
            if rule is not None and state["last"] != (owner[0], True):
                wasted.append(owner[0])
        else:
            state["last"] = (k, d <= packer.items[k].near.within_mm + pr.TOL)
        return d

    monkeypatch.setattr(pr, "_nearest_swap", swap)
    monkeypatch.setattr(pr, "_slot_distance", distance)
    assert place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)).fits
    assert measured and not wasted


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 2), st.sampled_from([0.0, 0.5, 1.5, math.inf]), st.integers(0, 1)),
                min_size=1, max_size=12))
def test_lex_first_is_lexsorts_first(rows):
    """The edge pre-placement's narrowing gives numpy's ``lexsort`` first index (the reference),
    ties included."""
    import numpy as np

    from pipeline.place_rules import _lex_first

    a, b, c = (np.array(col) for col in zip(*rows))
    assert _lex_first(a, lambda k: b[k], c) == int(np.lexsort((c, b, a))[0])


def test_edge_parts_sort_no_candidate_list(monkeypatch):
    """A cost guard (calls counted, not seconds): choosing each edge part's spot narrows by one key
    at a time instead of sorting every free spot per part (671 sorts of the whole edge band at
    16,000 parts, issue 11)."""
    import sys

    import numpy as np

    import pipeline.place_rules as pr

    design, _ = read_design_text(_design(12, 2, None), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 40, 30), (HeightZone(box(0, 0, 40, 30), 5.0),), 0.8)
    sorts: list[str] = []
    real = np.lexsort
    monkeypatch.setattr(pr.np, "lexsort", lambda keys: (sorts.append(sys._getframe(1).f_code.co_name), real(keys))[1])
    chosen: list[int] = []
    real_first = pr._lex_first
    monkeypatch.setattr(pr, "_lex_first", lambda *keys: (chosen.append(1), real_first(*keys))[1])
    assert place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)).fits
    assert len(chosen) == 12 and "_best_edge_spot" not in sorts


@settings(max_examples=60, deadline=None)
@given(st.lists(st.booleans(), min_size=2, max_size=14), st.data())
def test_decoupling_target_is_the_nearest_ic_in_part_order(is_ic, data):
    """Each cap's IC is the paired one nearest in part order, ties to the earlier: checked against
    the plain minimum over every pair (the rule as written, not the bisection)."""
    from types import SimpleNamespace

    from pipeline.place_rules import _decoupling_targets

    refs = [f"{'U' if ic else 'C'}{n}" for n, ic in enumerate(is_ic)]
    ics, caps = [r for r in refs if r[0] == "U"], [r for r in refs if r[0] == "C"]
    pairs = {ic: tuple(c for c in caps if data.draw(st.booleans())) for ic in ics}
    design = SimpleNamespace(parts=[SimpleNamespace(ref=r) for r in refs])
    pos = {r: n for n, r in enumerate(refs)}
    want = {c: min((ic for ic in ics if c in pairs[ic]), key=lambda ic: (abs(pos[ic] - pos[c]), pos[ic]))
            for c in caps if any(c in pairs[ic] for ic in ics)}
    assert _decoupling_targets(design, pairs, set(refs)) == want


def test_decoupling_targets_sort_each_list_of_ics_once(monkeypatch):
    """A cost guard (calls counted, not seconds): caps sharing a supply share one sorted list of
    ICs; each cap then looks at two of them, not at every IC (929,296 pairs at 16,000 parts)."""
    import builtins
    from types import SimpleNamespace

    from pipeline.place_rules import _decoupling_targets

    refs = [f"U{n}" for n in range(30)] + [f"C{n}" for n in range(30)]
    pairs = {f"U{n}": tuple(f"C{k}" for k in range(30)) for n in range(30)}
    design = SimpleNamespace(parts=[SimpleNamespace(ref=r) for r in refs])
    looked: list[int] = []
    real_min = builtins.min

    def counting_min(items, *a, **k):
        items = list(items)
        looked.append(len(items))
        return real_min(items, *a, **k)

    monkeypatch.setattr(builtins, "min", counting_min)
    out = _decoupling_targets(design, pairs, set(refs))
    monkeypatch.undo()
    assert set(out.values()) == {"U29"} and len(out) == 30
    assert sum(looked) <= 2 * 30


@pytest.mark.parametrize("ics, caps, resistors, w, h", [(4, 3, 16, 26, 17), (3, 4, 8, 18, 14), (4, 1, 16, 30, 20)])
def test_free_slot_search_stops_at_the_parts_own_distance(monkeypatch, ics, caps, resistors, w, h):
    """A cost guard (cells counted, not seconds): with no trade to beat, the free-slot search looks only
    as far as the part's own distance to its target (a slot farther than where it stands is no gain;
    its own place counts as free, so the answer is the same), not over the whole board. The placement
    is identical to a search without that limit, which scans more cells here."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(ics, caps, resistors), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, w, h), (HeightZone(box(0, 0, w, h), 5.0),), 0.8)
    real_slot, real_scan = pr._nearest_slot, pr._scan_window
    cells: list[int] = []

    def scan(board, i, hh, ww, goal, pads, size, span):
        cells.append((span[1] - span[0]) * (span[3] - span[2]))
        return real_scan(board, i, hh, ww, goal, pads, size, span)

    monkeypatch.setattr(pr, "_scan_window", scan)
    limited = _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)))
    limited_cells, cells[:] = sum(cells), []
    monkeypatch.setattr(pr, "_nearest_slot", lambda board, i, goal, limit=math.inf: real_slot(board, i, goal))
    assert _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))) == limited
    assert 0 < limited_cells < 0.8 * sum(cells)


def test_decoupling_targets_walk_each_shared_cap_list_once():
    """A cost guard (membership tests counted, not seconds): ICs on one shared rail all pair with
    every cap; their equal lists are walked once, not once per IC (30 x 30 = 900 tests), and the
    answer is the plain minimum over every pair (the rule as written, ties to the earlier IC)."""
    from types import SimpleNamespace

    from pipeline.place_rules import _decoupling_targets

    refs = [r for n in range(30) for r in (f"U{n}", f"C{n}")]
    caps = tuple(f"C{n}" for n in range(30))
    pairs = {f"U{n}": tuple(caps) for n in range(30)}  # equal lists, not one object
    design = SimpleNamespace(parts=[SimpleNamespace(ref=r) for r in refs])
    asked: list[str] = []

    class Counting(set):
        def __contains__(self, item):
            asked.append(item)
            return set.__contains__(self, item)

    out = _decoupling_targets(design, pairs, Counting(refs))
    pos = {r: k for k, r in enumerate(refs)}
    want = {c: min(pairs, key=lambda u: (abs(pos[u] - pos[c]), pos[u])) for c in caps}
    assert out == want and out["C7"] == "U7"
    assert len(asked) <= 2 * (len(pairs) + len(caps))


def test_near_pass_swap_search_reads_rings_not_the_whole_size_class(monkeypatch):
    """A cost guard (bounds counted, not seconds): the swap search works out the lower bounds of the
    candidates ring by ring round the goal and stops at the first ring past its best trade, so on a
    board of 600 resistors of the capacitors' size it computes far fewer bounds than movers x
    candidates (every candidate per mover, O(n) per moved part, before issue 11's change)."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(8, 3, 600), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, 80, 50), (HeightZone(box(0, 0, 80, 50), 5.0),), 0.8)
    bounds: list[int] = []
    every: list[int] = []
    real_bounds, real_candidates = pr._swap_bounds, pr._swap_candidates
    monkeypatch.setattr(pr, "_swap_bounds", lambda b, i, g, c: (bounds.append(len(c)), real_bounds(b, i, g, c))[1])
    monkeypatch.setattr(pr, "_swap_candidates", lambda b, i: (lambda c: (every.append(len(c)), c)[1])(
        real_candidates(b, i)))
    assert place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)).fits
    assert len(every) >= 10 and min(every) > 600  # movers, each seeing the whole size class
    assert sum(bounds) < 0.5 * sum(every)


@pytest.mark.parametrize("ics, caps, resistors, w, h", [(4, 3, 16, 26, 17), (6, 2, 30, 30, 20)])
def test_swap_search_bound_rejects_partners_without_laying_out_pads(monkeypatch, ics, caps, resistors, w, h):
    """The triangle-inequality bound (``_far_for``: centre-to-goal distance less the farthest pad
    offset) turns down partners whose own near rule would break, without working out their pads:
    the placement is the one made with the bound switched off (the plain test of every partner),
    and fewer pad distances are worked out (a cost guard: calls counted, not seconds)."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(ics, caps, resistors), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, w, h), (HeightZone(box(0, 0, w, h), 5.0),), 0.8)
    calls: list[int] = []
    real_distance, real_far = pr._slot_distance, pr._far_for
    monkeypatch.setattr(pr, "_slot_distance", lambda *a: (calls.append(1), real_distance(*a))[1])
    bounded = _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)))
    with_bound = len(calls)
    calls.clear()
    monkeypatch.setattr(pr, "_far_for", lambda *a: False)
    assert _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))) == bounded
    assert with_bound < len(calls)


@given(st.floats(-20, 20), st.floats(-20, 20), st.lists(st.tuples(st.floats(-30, 30), st.floats(-30, 30)),
                                                        min_size=1, max_size=6), st.floats(0, 40))
@settings(max_examples=80, deadline=None)
def test_far_for_is_a_lower_bound_of_the_pad_distance(x, y, goal, limit):
    # reference: the exact distance of pipeline.place_rules._slot_distance (pads laid out one by one)
    # for an 0603 capacitor with a near rule; the bound may only say "far" when that distance exceeds limit
    import types

    import numpy as np

    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(1, 1, 0), LIB)
    items = items_from_design(design, LIB, "nominal")
    k = next(n for n, it in enumerate(items) if it.near is not None)
    it = items[k]
    for turn in (0, 1):
        dx, dy = (it.width_mm, it.length_mm) if turn else (it.length_mm, it.width_mm)
        packer = types.SimpleNamespace(items=items, rect=lambda i, s, dx=dx, dy=dy: (x, y, x + dx, y + dy))
        board = types.SimpleNamespace(packer=packer, reach={})
        board.pad_reach = lambda j, board=board: pr._TopBoard.pad_reach(board, j)
        pts = np.array(goal, dtype=float)
        if pr._far_for(board, k, ("top", turn, 0, 0), pts, limit):
            assert pr._slot_distance(packer, k, ("top", turn, 0, 0), pts) > limit


@given(st.floats(-50, 50), st.floats(-50, 50), st.floats(-20, 20), st.floats(-20, 20), st.floats(0.01, 15),
       st.floats(0.01, 15))
@settings(max_examples=80, deadline=None)
def test_box_distance_is_shapelys_point_to_box_distance(x, y, x1, y1, w, h):
    # reference: shapely.distance (GEOS) from a point to a rectangle, 0 inside (a courtyard is never
    # a line: a zero side made GEOS warn of a division by zero)
    import pipeline.place_rules as pr

    want = shapely.distance(shapely.Point(x, y), box(x1, y1, x1 + w, y1 + h))
    got = float(pr._box_distance(np.array([x]), np.array([y]), (x1, y1, x1 + w, y1 + h))[0])
    assert got == pytest.approx(want, abs=1e-9)


@pytest.mark.parametrize("ics, caps, resistors, w, h", [(4, 3, 16, 26, 17), (6, 2, 30, 30, 20), (8, 3, 60, 40, 26)])
def test_swap_search_drops_partners_in_vectors_with_the_same_placement(monkeypatch, ics, caps, resistors, w, h):
    """The swap search's vector test of the partners' own near rules (``_Partners.surely_off``: the
    distance to the goal's box less the farthest pad offset) turns partners down without a
    ``_far_for`` call each, and the placement is the one made with that test switched off (every
    partner then goes through the exact test); a cost guard counting calls, not seconds."""
    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(ics, caps, resistors), LIB)
    items = items_from_design(design, LIB, "nominal")
    region = Region(box(0, 0, w, h), (HeightZone(box(0, 0, w, h), 5.0),), 0.8)
    calls: list[int] = []
    real_far = pr._far_for
    monkeypatch.setattr(pr, "_far_for", lambda *a: (calls.append(1), real_far(*a))[1])
    fast = _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE)))
    with_vectors = len(calls)
    calls.clear()
    monkeypatch.setattr(pr._Partners, "surely_off", lambda self, i, slot, cand: np.zeros(len(cand), dtype=bool))
    assert _placed(place_and_fit(items, region, BoardOptions(edge_clearance_mm=EDGE))) == fast
    assert with_vectors < len(calls)


@given(st.floats(-20, 20), st.floats(-20, 20), st.lists(st.tuples(st.floats(-30, 30), st.floats(-30, 30)),
                                                        min_size=1, max_size=6), st.floats(0, 40),
       st.integers(0, 1))
@settings(max_examples=80, deadline=None)
def test_surely_off_only_turns_down_partners_the_exact_test_turns_down(x, y, goal, limit, turn):
    # reference: the exact distance of pipeline.place_rules._slot_distance (pads laid out one by one)
    # for an 0603 capacitor with a near rule: the vector test may only say "off" when it exceeds limit
    import types

    import pipeline.place_rules as pr

    design, _ = read_design_text(_decoupled(1, 1, 0), LIB)
    items = items_from_design(design, LIB, "nominal")
    k = next(n for n, it in enumerate(items) if it.near is not None)
    it = items[k]
    dx, dy = (it.width_mm, it.length_mm) if turn else (it.length_mm, it.width_mm)
    packer = types.SimpleNamespace(items=items, rect=lambda i, s: (x, y, x + dx, y + dy))
    grid = types.SimpleNamespace(x0=x, y0=y, cell=0.05)
    index = {p.ref: n for n, p in enumerate(items)}
    board = types.SimpleNamespace(packer=packer, g=grid, index=index, reach={}, run=None, fixed=None)
    board.pad_reach = lambda j: pr._TopBoard.pad_reach(board, j)
    pts = np.array(goal, dtype=float)
    part = pr._Partners(board)
    part.limit[k] = limit
    part.box[k] = (*pts.min(axis=0), *pts.max(axis=0))
    part.reach[k] = board.pad_reach(k)
    part.tgt[k] = len(items)  # never the mover
    if part.surely_off(-1, ("top", turn, 0, 0), np.array([k]))[0]:
        assert pr._slot_distance(packer, k, ("top", turn, 0, 0), pts) > limit


@given(st.lists(st.tuples(st.floats(-40, 40), st.floats(-40, 40), st.floats(0.1, 6), st.floats(0.1, 6)),
                min_size=1, max_size=30))
@settings(max_examples=60, deadline=None)
def test_edge_distance_is_shapelys_distance(rects):
    # reference: shapely.distance (GEOS) from the outer edge (two rings, one a 64-gon) to each box
    import pipeline.place_rules as pr

    area = shapely.union_all([shapely.Point(0, 0).buffer(20, quad_segs=16), box(25, -5, 35, 5)])
    edge = pr._outer_edge(area)
    x, y, w, h = (np.array(c) for c in zip(*rects))
    boxes = shapely.box(x, y, x + w, y + h)
    assert pr._edge_distance(edge, boxes).tolist() == shapely.distance(edge, boxes).tolist()
