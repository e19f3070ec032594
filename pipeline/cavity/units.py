"""Drawing units: ``$INSUNITS`` codes, their lengths in millimetres, unit names.

Exact definitions: 1 in = 25.4 mm since the 1959 international yard and
pound agreement, 1 ft = 12 in, 1 mil = 0.001 in, SI prefixes for metric
units; the astronomical units from the IAU (DXF reference, header variable
``$INSUNITS``, for the code table).
"""

from __future__ import annotations

from pipeline.errors import CavityError
from pipeline.model import Finding

__all__ = ["MM_PER_UNIT", "UNIT_NAMES", "UNIT_WORDS", "IMPERIAL_CODES", "unit_words_text", "unit_problem",
           "unit_code", "unit_scale", "drawing_units", "cavity_units"]

_INCH = 25.4  # mm, exact (international inch, 1959)
_US_SURVEY_FOOT = 1200.0 / 3937.0 * 1000.0  # mm (US survey foot definition)

#: Millimetres per drawing unit for each ``$INSUNITS`` code (DXF reference,
#: header variable ``$INSUNITS``). 0 (unitless) is absent on purpose.
MM_PER_UNIT: dict[int, float] = {
    1: _INCH,
    2: 12 * _INCH,
    3: 63360 * _INCH,
    4: 1.0,
    5: 10.0,
    6: 1000.0,
    7: 1e6,
    8: 1e-6 * _INCH,
    9: 1e-3 * _INCH,
    10: 36 * _INCH,
    11: 1e-7,
    12: 1e-6,
    13: 1e-3,
    14: 100.0,
    15: 1e4,
    16: 1e5,
    17: 1e12,
    18: 1.495978707e14,  # astronomical unit (IAU 2012: 149 597 870 700 m)
    19: 9.4607304725808e18,  # light year (IAU: Julian year x c)
    20: 3.0856775814913673e19,  # parsec (IAU 2015)
    21: _US_SURVEY_FOOT,
    22: _US_SURVEY_FOOT / 12.0,
    23: _US_SURVEY_FOOT * 3.0,
    24: _US_SURVEY_FOOT * 5280.0,
}

#: Short unit name for each ``$INSUNITS`` code.
UNIT_NAMES: dict[int, str] = {
    1: "inch", 2: "foot", 3: "mile", 4: "mm", 5: "cm", 6: "m", 7: "km",
    8: "microinch", 9: "mil", 10: "yard", 11: "angstrom", 12: "nm",
    13: "micron", 14: "dm", 15: "dam", 16: "hm", 17: "Gm", 18: "au",
    19: "light year", 20: "parsec", 21: "US survey foot", 22: "US survey inch",
    23: "US survey yard", 24: "US survey mile",
}

#: ``$INSUNITS`` codes of inch-based units (DXF reference, header variable
#: ``$INSUNITS``): a drawing in them is written with ``$MEASUREMENT`` 0
#: (imperial), every other unit with 1 (metric).
IMPERIAL_CODES: frozenset[int] = frozenset({1, 2, 3, 8, 9, 10, 21, 22, 23, 24})

#: The one list of unit words a user may write (project.toml ``[cavity] units``
#: and ``[board] outline_units``, a measured-cavity file's ``units``),
#: compared without regard to case, with the ``$INSUNITS`` code each means.
UNIT_WORDS: dict[str, int] = {
    "mm": 4, "millimeter": 4, "millimeters": 4, "millimetre": 4, "millimetres": 4,
    "cm": 5, "centimeter": 5, "centimeters": 5, "centimetre": 5, "centimetres": 5,
    "m": 6, "meter": 6, "meters": 6, "metre": 6, "metres": 6,
    "dm": 14, "decimeter": 14, "decimetre": 14,
    "in": 1, "inch": 1, "inches": 1, '"': 1,
    "ft": 2, "foot": 2, "feet": 2,
    "mil": 9, "mils": 9, "thou": 9,
    "um": 13, "µm": 13, "μm": 13, "micron": 13, "microns": 13,
    "micrometer": 13, "micrometre": 13, "micrometers": 13, "micrometres": 13,
}


def unit_words_text() -> str:
    """The accepted unit words for a message, in :data:`UNIT_WORDS` order.

    >>> unit_words_text().startswith("mm, millimeter, ")
    True
    """
    return ", ".join(UNIT_WORDS)


def unit_problem(text: object, *, also: str | None = None) -> str | None:
    """Why ``text`` is not an accepted unit word (nor ``also``), or ``None`` when it is one.

    >>> unit_problem("Inch") is None, unit_problem("furlong")[:24]
    (True, "unknown units 'furlong':")
    >>> unit_problem("drawing", also="drawing") is None, unit_problem("x", also="drawing")[:34]
    (True, "unknown units 'x': use drawing or ")
    """
    if also is not None and text == also or isinstance(text, str) and text.strip().casefold() in UNIT_WORDS:
        return None
    return f"unknown units {text!r}: use {also + ' or ' if also else ''}one of {unit_words_text()}"


def unit_code(text: str, *, source: str = "project.toml", key: str = "cavity.units") -> int:
    """``$INSUNITS`` code for a unit name such as ``"mm"``, ``"inch"`` or ``"mil"``.

    Raises
    ------
    CavityError
        For an unknown name, naming ``source`` and ``key`` (where the user
        wrote it) and listing the accepted words.

    Examples
    --------
    >>> unit_code("Inch"), unit_code("mm"), unit_code("micron")
    (1, 4, 13)
    """
    problem = unit_problem(text)
    if problem:
        raise CavityError(source, problem, key=key)
    return UNIT_WORDS[text.strip().casefold()]


def unit_scale(text: str) -> tuple[int, float]:
    """``($INSUNITS code, mm per unit)`` of an accepted unit word (checked beforehand).

    >>> unit_scale("inch"), unit_scale("MM")
    ((1, 25.4), (4, 1.0))
    """
    code = UNIT_WORDS[text.strip().casefold()]
    return code, MM_PER_UNIT[code]


def drawing_units(declared: int | None, default_code: int, name: str,
                  findings: list[Finding]) -> tuple[str, float]:
    """Unit name and mm per unit of a drawing whose header declares ``declared``.

    ``None`` or 0 (no header, no ``$INSUNITS``, or "unitless") takes
    ``default_code`` with an info finding; an unknown code takes it with a
    warning.
    """
    code = declared if declared is not None else 0
    if code == 0:
        findings.append(Finding(
            "info", "cavity.units", (name,),
            f"The drawing declares no units ($INSUNITS 0); it was read in "
            f"{UNIT_NAMES[default_code]} from [cavity] units."))
        code = default_code
    elif code not in MM_PER_UNIT:
        findings.append(Finding(
            "warning", "cavity.units", (name,),
            f"The drawing declares unknown units ($INSUNITS {code}); it was read in "
            f"{UNIT_NAMES[default_code]} from [cavity] units: save it with known units."))
        code = default_code
    return UNIT_NAMES[code], MM_PER_UNIT[code]


def cavity_units(cavity) -> tuple[int, float]:
    """``($INSUNITS code, mm per unit)`` of the drawing a :class:`~pipeline.model.Cavity` was read from.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> cavity_units(SimpleNamespace(unit_name="inch", mm_per_unit=25.4))
    (1, 25.4)
    """
    codes = [c for c, n in UNIT_NAMES.items() if n == cavity.unit_name]
    return (codes[0], MM_PER_UNIT[codes[0]]) if codes else (4, 1.0)
