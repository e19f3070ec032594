"""pipeline.cavity.units: the one home of the unit words and of the ``$INSUNITS`` code table.

The codes are checked against the DXF reference's table for the header variable ``$INSUNITS``
(Autodesk DXF Reference, HEADER section variables, "$INSUNITS: default drawing units for AutoCAD
DesignCenter blocks"; typed here from that published table) and against ezdxf (a general-purpose
reference library: ``ezdxf.units.InsertUnits`` and ``IMPERIAL_UNITS``).
"""

from __future__ import annotations

import ezdxf.units
import pytest

from pipeline.cavity.units import (IMPERIAL_CODES, MM_PER_UNIT, UNIT_NAMES, UNIT_WORDS, unit_code, unit_problem,
                                   unit_scale, unit_words_text)
from pipeline.errors import CavityError

#: The DXF reference's $INSUNITS table (0 unitless is not a unit a drawing can be read in).
DXF_INSUNITS = {
    1: "Inches", 2: "Feet", 3: "Miles", 4: "Millimeters", 5: "Centimeters", 6: "Meters", 7: "Kilometers",
    8: "Microinches", 9: "Mils", 10: "Yards", 11: "Angstroms", 12: "Nanometers", 13: "Microns",
    14: "Decimeters", 15: "Decameters", 16: "Hectometers", 17: "Gigameters", 18: "Astronomical units",
    19: "Light years", 20: "Parsecs", 21: "US Survey Feet", 22: "US Survey Inch", 23: "US Survey Yard",
    24: "US Survey Mile",
}

#: What each word a user may write means, as a unit of that table (ordinary English and SI usage:
#: "thou" is a mil, "micron" the micrometre; '"' the inch mark).
WORD_MEANS = {
    "Millimeters": ["mm", "millimeter", "millimeters", "millimetre", "millimetres"],
    "Centimeters": ["cm", "centimeter", "centimeters", "centimetre", "centimetres"],
    "Meters": ["m", "meter", "meters", "metre", "metres"],
    "Decimeters": ["dm", "decimeter", "decimetre"],
    "Inches": ["in", "inch", "inches", '"'],
    "Feet": ["ft", "foot", "feet"],
    "Mils": ["mil", "mils", "thou"],
    "Microns": ["um", "\u00b5m", "\u03bcm", "micron", "microns", "micrometer", "micrometre", "micrometers",
                "micrometres"],
}
_PAIRS = [(w, name) for name, words in WORD_MEANS.items() for w in words]


def test_every_code_of_the_table_has_a_length_and_a_name():
    assert set(MM_PER_UNIT) == set(UNIT_NAMES) == set(DXF_INSUNITS)


def test_the_hand_typed_table_agrees_with_ezdxf():
    # reference library: ezdxf's InsertUnits enum names the same 25 codes (0 unitless)
    assert {int(u) for u in ezdxf.units.InsertUnits} == set(DXF_INSUNITS) | {0}
    for code, name in DXF_INSUNITS.items():
        assert ezdxf.units.InsertUnits(code).name.casefold() == name.replace(" ", "").casefold()


def test_the_words_are_exactly_the_ones_checked_here():
    assert sorted(UNIT_WORDS) == sorted(w for w, _ in _PAIRS)


@pytest.mark.parametrize("word,name", _PAIRS)
def test_each_word_has_its_published_code(word, name):
    code = unit_code(word)
    assert DXF_INSUNITS[code] == name            # DXF reference, $INSUNITS
    assert unit_code(f" {word.upper()} ") == code   # compared without regard to case or spaces
    assert unit_scale(word) == (code, MM_PER_UNIT[code])


@pytest.mark.parametrize("word,mm", [("inch", 25.4), ("foot", 304.8), ("mil", 0.0254), ("mm", 1.0), ("cm", 10.0),
                                     ("m", 1000.0), ("dm", 100.0), ("micron", 0.001)])
def test_lengths_of_the_words(word, mm):
    # exact definitions: 1 in = 25.4 mm (international yard and pound agreement, 1959), 1 ft = 12 in,
    # 1 mil = 0.001 in; SI prefixes (BIPM SI Brochure, 9th edition, table 7)
    assert unit_scale(word)[1] == pytest.approx(mm, rel=1e-15)


def test_imperial_codes_are_the_inch_based_units():
    # reference library: ezdxf.units.IMPERIAL_UNITS; and by name from the DXF table
    assert IMPERIAL_CODES == {int(u) for u in ezdxf.units.IMPERIAL_UNITS}
    inch_based = {c for c, n in DXF_INSUNITS.items()
                  if any(k in n.casefold() for k in ("inch", "feet", "mile", "mils", "yard"))}
    assert IMPERIAL_CODES == inch_based


@pytest.mark.parametrize("bad", ["furlong", "", "m m", "mm2", 3, None, "drawing"])
def test_an_unknown_word_names_the_file_and_key_and_lists_the_words(bad):
    with pytest.raises(CavityError) as ei:
        unit_code(bad, source="pocket.toml", key="units")
    assert str(ei.value).startswith(f"pocket.toml: units: unknown units {bad!r}: use one of ")
    assert str(ei.value).endswith(unit_words_text())
    assert unit_words_text().split(", ") == list(UNIT_WORDS)


def test_also_is_taken_only_where_given():
    assert unit_problem("drawing", also="drawing") is None
    assert unit_problem("drawing").startswith("unknown units 'drawing': use one of mm, ")
    assert unit_problem("x", also="drawing").startswith("unknown units 'x': use drawing or one of mm, ")


def test_readme_lists_the_same_words():
    """README's list is for people; it must not drift from the one list."""
    import re
    from pathlib import Path

    text = " ".join((Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8").split())
    listed = text.split("(any case; one list, `pipeline/cavity/units.py`): ", 1)[1].split(". Any other", 1)[0]
    words = set()
    for item in listed.split(", "):
        item = item.strip("`")
        m = re.fullmatch(r"(\w+)\(s\)", item)
        words |= {m.group(1), m.group(1) + "s"} if m else {item}
    assert words == set(UNIT_WORDS)
