"""Parametric pin rows and connectors (pipeline/library/pinrows.py, footprints/pinrows.toml)."""

from __future__ import annotations

import math

import pytest
from click.testing import CliRunner
from shapely.geometry import box

from pipeline.cli import main
from pipeline.errors import UnknownNameError
from pipeline.library import load_library


@pytest.fixture(scope="module")
def lib():
    return load_library()


def _close(a, b, tol=1e-6):
    return abs(a - b) <= tol


# (written name, rows, n, pitch, mount, entry)
GOOD = [
    ("pins(n=4)", 1, 4, 2.54, "tht", "vertical"),
    ("pins(rows=1, n=4, pitch=2.54, mount=tht, entry=vertical)", 1, 4, 2.54, "tht", "vertical"),
    ("pins(rows=2; n=5; pitch=2.0; mount=smd; entry=side)", 2, 5, 2.0, "smd", "side"),
    ("PINS(entry=side n=3 pitch=1.25)", 1, 3, 1.25, "tht", "side"),
    ("pins(n=6, pitch=1, mount=smd)", 1, 6, 1.0, "smd", "vertical"),
    ("pins(rows=2, n=20, pitch=1.27)", 2, 20, 1.27, "tht", "vertical"),
    ("pins(n=1, pitch=2.5, entry=side)", 1, 1, 2.5, "tht", "side"),
    ("pins(n=8, pitch=1.5, mount=smd, entry=side)", 1, 8, 1.5, "smd", "side"),
    ("header-2x3-2.54", 2, 3, 2.54, "tht", "vertical"),
]


@pytest.mark.parametrize("name,rows,n,pitch,mount,entry", GOOD)
def test_pad_positions_follow_pitch_and_positions(lib, name, rows, n, pitch, mount, entry):
    pkg = lib.package(name)
    assert pkg.pin_count == rows * n and _close(pkg.pitch_mm, pitch)
    # the canonical name reads back to the same package (footprints/README.md grammar)
    assert pkg.name.startswith(f"pins-rows{rows}-n{n}-pitch") and pkg.name.endswith(f"-{mount}-{entry}")
    assert lib.package(pkg.name) == pkg
    for level in ("most", "nominal", "least"):
        pads = pkg.pads_at(level)
        assert sorted(int(p.number) for p in pads) == list(range(1, rows * n + 1))
        xs = sorted({round(p.x_mm, 6) for p in pads})
        # n places per row at the pitch, centred on the origin (closed form: (i - (n-1)/2) p)
        assert xs == [round((i - (n - 1) / 2) * pitch, 6) for i in range(n)]
        assert len({round(p.y_mm, 6) for p in pads}) == rows
        by = {p.number: p for p in pads}
        # pin 1 at the left of the lower row; odd pins in the lower row of two (common practice)
        assert _close(by["1"].x_mm, -(n - 1) / 2 * pitch)
        assert by["1"].y_mm == min(p.y_mm for p in pads)
        if rows == 2:
            assert by["2"].x_mm == by["1"].x_mm and by["2"].y_mm > by["1"].y_mm
        # through-hole: every pad drilled, the hole passes the post's diagonal (post x sqrt 2);
        # pin 1 square, others round (common practice). Surface: rectangles, no hole.
        if mount == "tht":
            assert all(p.drill_mm > 0 for p in pads)
            assert by["1"].shape == "rect" and all(p.shape == "circle" for p in pads if p.number != "1")
        else:
            assert all(p.drill_mm == 0 and p.shape == "rect" for p in pads)


@pytest.mark.parametrize("name,rows,n,pitch,mount,entry", GOOD)
def test_every_pad_inside_body_courtyard(lib, name, rows, n, pitch, mount, entry):
    pkg = lib.package(name)
    for level in ("most", "nominal", "least"):
        c = pkg.courtyard(level)
        yard = box(-c.length_mm / 2, -c.width_mm / 2, c.length_mm / 2, c.width_mm / 2)
        for p in pkg.pads_at(level):
            pad = box(p.x_mm - p.width_mm / 2, p.y_mm - p.height_mm / 2,
                      p.x_mm + p.width_mm / 2, p.y_mm + p.height_mm / 2)
            assert yard.contains(pad), (level, p)
        # neighbouring pads of a row do not touch (their edges a positive gap apart)
        row = sorted((p for p in pkg.pads_at(level) if p.y_mm == pkg.pads_at(level)[0].y_mm),
                     key=lambda p: p.x_mm)
        for a, b in zip(row, row[1:]):
            assert b.x_mm - a.x_mm - (a.width_mm + b.width_mm) / 2 > 0.1


def test_side_entry_rows_sit_at_the_back(lib):
    # side entry: the back row side_back_mm in from the housing's back edge (pinrows.toml, 2.54:
    # 1.27 = half a pitch, common practice); the housing runs towards +y, the mating face
    pkg = lib.package("pins(n=3, entry=side)")
    by = {p.number: p for p in pkg.pads_at("nominal")}
    assert _close(by["1"].y_mm, -pkg.body_width_mm / 2 + 1.27)


def test_header_alias_keeps_previous_geometry(lib):
    # CONTRACT.md s2: header-1xN-2.54 stays accepted: 2.54 mm housing per position (common
    # practice), 1.0 mm holes, 1.70 mm lands; 8.5 mm tall (2.5 housing + 6.0 pin, common practice)
    old = lib.package("header-1x7-2.54")
    new = lib.package("pins(rows=1, n=7, pitch=2.54, mount=tht, entry=vertical)")
    assert old == new
    assert _close(new.body_length_mm, 7 * 2.54) and _close(new.body_width_mm, 2.54)
    assert _close(new.height_mm, 8.5)
    pad = new.pads_at("nominal")[0]
    assert (pad.width_mm, pad.drill_mm) == (1.7, 1.0)
    # the 0.64 mm square post (common practice) has a diagonal of 0.905 mm: it passes the hole
    assert 0.64 * math.sqrt(2) < pad.drill_mm
    assert lib.info("header-1x7-2.54").source == lib.info(new.name).source


BAD = [
    ("pins(n=2, pitch=3)", "pitch", "not a known pitch"),
    ("pins(rows=3, n=2)", "rows", "from 1 to 2"),
    ("pins(n=0)", "n", "from 1 to 40"),
    ("pins(n=41)", "n", "from 1 to 40"),
    ("pins(rows=1)", "n", "missing"),
    ("pins(n=2, mount=glue)", "mount", "not one of tht, smd"),
    ("pins(n=2, entry=top)", "entry", "not one of vertical, side"),
    ("pins(n=2, colour=red)", "colour", "unknown key"),
    ("pins(n=2, n=3)", "n", "given twice"),
    ("pins(n)", "n", "expected key=value"),
    ("pins(n=2, pitch=1.0)", "mount", "surface mount only"),
    ("pins-rows1-n2-pitch9-tht-vertical", "pitch", "not a known pitch"),
]


@pytest.mark.parametrize("name,key,reason", BAD)
def test_bad_parameters_name_the_key(lib, name, key, reason):
    with pytest.raises(UnknownNameError) as info:
        lib.package(name, file="d.toml", key="parts.J1.package")
    text = str(info.value)
    assert text.startswith("d.toml") and "parts.J1.package" in text
    assert f": {key}: " in text and reason in text


DESIGN = """
[design]
name = "pins"
[parts.J1]
kind = "header"
package = "{package}"
[parts.R1]
kind = "resistor"
value = "1k"
package = "0603"
[nets]
A = ["J1.1", "R1.1"]
B = ["J1.2", "R1.2"]
"""


@pytest.mark.parametrize("package,needle", [
    ("pins(n=2, pitch=3)", "pitch: '3' is not a known pitch"),
    ("pins(n=2, entry=top)", "entry: 'top' is not one of"),
])
def test_cli_bad_pin_row_exits_2_naming_file_and_key(tmp_path, package, needle):
    p = tmp_path / "d.toml"
    p.write_text(DESIGN.format(package=package))
    r = CliRunner().invoke(main, ["check", str(p)])
    assert r.exit_code == 2, r.output
    assert "d.toml" in r.stderr and "parts.J1.package" in r.stderr and needle in r.stderr
    assert "Traceback" not in r.output


def test_cli_good_pin_row_checks_clean(tmp_path):
    p = tmp_path / "d.toml"
    p.write_text(DESIGN.format(package="pins(n=2, pitch=2.0, mount=smd, entry=side)"))
    r = CliRunner().invoke(main, ["check", str(p)])
    assert r.exit_code == 0, r.output
