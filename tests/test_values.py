"""Tests for pipeline.values: value text, tolerances, ratings, E-series.

External references used here:
- quantiphy (PyPI), an independent engineering-notation parser and formatter;
- eseries (PyPI), an independent implementation of the IEC 60063 tables;
- IEC 60062 (RKM letter code) for the worked RKM cases;
- IEC 60063:2015 as summarised in REFERENCES.md section 6 for the irregular values.
"""

from __future__ import annotations

import math
import random

import eseries
import numpy as np
import pytest
from quantiphy import Quantity

from pipeline.errors import DesignError, ProjectError, ValueTextError, Where
from pipeline.values import (
    SERIES,
    SERIES_TOLERANCE,
    format_value,
    nearest_in_series,
    parse_rating,
    parse_tolerance,
    parse_value,
    series_for_tolerance,
    series_of,
    series_values,
)

ES_KEYS = {
    "E3": eseries.E3,
    "E6": eseries.E6,
    "E12": eseries.E12,
    "E24": eseries.E24,
    "E48": eseries.E48,
    "E96": eseries.E96,
    "E192": eseries.E192,
}


# --------------------------------------------------------------------------
# parse_value against quantiphy
# --------------------------------------------------------------------------
_PREFIXES = ["", "T", "G", "M", "k", "m", "u", "\u00b5", "\u03bc", "n", "p", "f"]
_UNIT_FORMS = {
    "ohm": ["", "Ohm", " Ohm", "\u03a9", " \u03a9", "ohm"],
    "F": ["", "F", " F"],
    "H": ["", "H", " H"],
}


def _mantissa(rng: random.Random) -> str:
    form = rng.randrange(4)
    if form == 0:
        return str(rng.randint(1, 999))
    if form == 1:
        return f"{rng.randint(1, 999)}.{rng.randint(0, 999):0{rng.randint(1, 3)}d}"
    if form == 2:
        return f".{rng.randint(1, 999)}"
    return f"{rng.randint(1, 9)}.{rng.randint(0, 99):02d}e{rng.randint(-15, 12)}"


def _generated_cases(n: int = 400, seed: int = 60063):
    rng = random.Random(seed)
    cases = []
    for _ in range(n):
        unit = rng.choice(list(_UNIT_FORMS))
        mant = _mantissa(rng)
        prefix = "" if "e" in mant else rng.choice(_PREFIXES)
        space = rng.choice(["", " "]) if not prefix else ""
        unit_text = rng.choice(_UNIT_FORMS[unit])
        if prefix and unit_text.startswith(" "):
            unit_text = unit_text.strip()
            space = " "  # "4.7 kOhm": space before the prefixed unit
        text = f"{mant}{space}{prefix}{unit_text}"
        cases.append((text, unit))
    return cases


def test_parse_value_matches_quantiphy_on_generated_values():
    # Reference: quantiphy.Quantity, an independent SI-prefix parser (PyPI).
    cases = _generated_cases()
    assert len(cases) >= 300
    for text, unit in cases:
        ours = parse_value(text, unit)
        ref = float(Quantity(text))
        assert math.isclose(ours, ref, rel_tol=1e-12), (text, ours, ref)


@pytest.mark.parametrize(
    "text, unit",
    [
        ("10k", ""),
        ("4.7 kOhm", "ohm"),
        ("4.7k\u03a9", "ohm"),
        ("100n", ""),
        ("100nF", "F"),
        ("2.2\u00b5F", "F"),
        ("2.2\u03bcF", "F"),
        ("1M", ""),
        ("1m", ""),
        ("10p", ""),
        ("1f", ""),
        ("1G", ""),
        ("1T", ""),
        ("4.7e3", ""),
        ("4.7 k", ""),
        ("1mOhm", "ohm"),
        ("1MOhm", "ohm"),
        ("10uH", "H"),
        ("10F", "F"),
        ("0", ""),
    ],
)
def test_named_forms_match_quantiphy(text, unit):
    # Reference: quantiphy.Quantity (PyPI) reads the same text to the same number.
    assert math.isclose(parse_value(text, unit), float(Quantity(text)), rel_tol=1e-12)


@pytest.mark.parametrize(
    "text, unit, expected",
    [
        # IEC 60062 RKM (letter and digit) code: the letter stands for the decimal
        # point and the multiplier; R is the ohm code.
        ("4k7", "", 4700.0),
        ("4k7", "ohm", 4700.0),
        ("R47", "ohm", 0.47),
        ("1R0", "ohm", 1.0),
        ("2u2", "", 2.2e-6),
        ("2\u00b52", "", 2.2e-6),  # micro sign U+00B5
        ("2\u03bc2", "", 2.2e-6),  # Greek small mu U+03BC
        ("0R", "ohm", 0.0),
        ("47R", "ohm", 47.0),
        ("4n7", "F", 4.7e-9),
        ("4n7F", "F", 4.7e-9),
        ("1M5", "", 1.5e6),
        ("4K7", "", 4700.0),
        ("6p8", "F", 6.8e-12),
    ],
)
def test_rkm_code_worked_cases(text, unit, expected):
    # Source: IEC 60062 RKM code (worked cases 4k7 = 4700, R47 = 0.47, 1R0 = 1, 2u2 = 2.2e-6, 0R = 0).
    assert math.isclose(parse_value(text, unit), expected, rel_tol=1e-12, abs_tol=0.0)


@pytest.mark.parametrize(
    "text, expected",
    [
        # Documented decision (not an external figure): "meg" is mega, M is mega, m is milli.
        # SI Brochure, 9th ed., table 7: M = 1e6, m = 1e-3.
        ("1meg", 1e6),
        ("2.2MEG", 2.2e6),
        ("1Meg ohm", 1e6),
        ("100 ohms", 100.0),
        ("4.7 k Ohm", 4700.0),
    ],
)
def test_mega_and_ohm_spellings(text, expected):
    assert parse_value(text, "ohm") == pytest.approx(expected, rel=1e-12)


def test_parse_value_is_correctly_rounded():
    # Reference: Python's float() of the decimal literal is correctly rounded (IEEE 754).
    assert parse_value("4.7k") == float("4.7e3")
    assert parse_value("100n") == float("1e-7")
    assert parse_value("2u2") == float("2.2e-6")


@pytest.mark.parametrize(
    "text, unit, reason",
    [
        ("4x7", "", "expected a number with an optional SI prefix or RKM code such as 4k7"),
        ("", "", "empty value"),
        ("   ", "ohm", "empty value"),
        ("-10k", "", "negative"),
        ("+10k", "", "sign"),
        ("nan", "", "not a finite number"),
        ("inf", "", "not a finite number"),
        ("4,7k", "", "comma"),
        ("100nF", "ohm", "unit 'F'"),
        ("10kOhm", "", "plain number"),
        ("10uf", "F", "case-sensitive"),
        ("100N", "", "did you mean 'n'"),
        ("2U2", "", "did you mean 'u'"),
        ("4R7", "F", "RKM code for ohm"),
        ("4R7", "H", "4.7 uH"),
        ("4.7e3k", "", "both an exponent and an SI prefix"),
        ("4.7k7", "", "RKM code takes no decimal point"),
        ("1e400", "", "too large"),
        ("1e-400", "", "too small"),
        ("1e99999", "", "out of range"),
        ("4k7R", "ohm", "after an RKM code"),
        ("4.7kR", "ohm", "mixes an SI prefix with R"),
        ("k", "", "is not a value"),
        ("10 V", "", "is not a value"),
        ("100nH", "F", "unit 'H'"),
        ("1..2k", "", "is not a value"),
        (float("nan"), "", "not a finite number"),
        (-1.0, "", "negative"),
        (True, "", "is not a value"),
    ],
)
def test_parse_value_bad_input(text, unit, reason):
    with pytest.raises(ValueTextError) as exc:
        parse_value(text, unit)
    assert reason in str(exc.value)


@pytest.mark.parametrize("parse,text", [(parse_value, "4x7"), (parse_tolerance, "5"), (parse_rating, "16")])
def test_bad_text_raises_from_the_error_tree_located_when_given_where(parse, text):
    # issue 12: no ValueError for a user's mistake; with at=Where the parser names file, line and key
    with pytest.raises(ValueTextError) as plain:
        parse(text)
    assert not isinstance(plain.value, ValueError) and str(plain.value) == plain.value.reason
    with pytest.raises(DesignError) as located:
        parse(text, at=Where("design.toml", 12, "parts.R1.x"))
    assert str(located.value) == f"design.toml:12: parts.R1.x: {plain.value.reason}"
    with pytest.raises(ProjectError) as other:
        parse(text, at=Where("p.toml", 3, "k", reason="say this", kind=ProjectError))
    assert str(other.value) == "p.toml:3: k: say this"
    assert parse_value("4k7", "ohm", at=Where("d.toml", 1, "k")) == 4700.0   # good text: no effect


def test_parse_value_bad_unit_argument():
    with pytest.raises(ValueError, match="unknown unit"):
        parse_value("10k", "V")


# --------------------------------------------------------------------------
# Tolerance and rating
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "text, expected",
    [
        # Per cent is 1/100 (definition); symbols as written on datasheets.
        ("1%", 0.01),
        ("\u00b15 %", 0.05),
        ("+/-10%", 0.10),
        ("0.1 %", 0.001),
        ("0.5 %", 0.005),
        ("\u00b1 20%", 0.20),
        ("+-2%", 0.02),
    ],
)
def test_parse_tolerance(text, expected):
    assert parse_tolerance(text) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    "text, reason",
    [
        ("5", "no per-cent sign"),
        ("", "empty tolerance"),
        ("+80/-20%", "asymmetric"),
        ("100%", "100 % or more"),
        ("abc%", "not a percentage"),
        ("-5%", "not a percentage"),
    ],
)
def test_parse_tolerance_bad(text, reason):
    with pytest.raises(ValueTextError) as exc:
        parse_tolerance(text)
    assert reason in str(exc.value)


@pytest.mark.parametrize(
    "text, volts, watts",
    [
        # Fractions and SI prefixes evaluated by hand: 1/8 = 0.125, 1/10 = 0.1, 250 m = 0.25.
        ("16V", 16.0, None),
        ("0.1W", None, 0.1),
        ("1/8W", None, 0.125),
        ("250mW", None, 0.25),
        ("6.3V", 6.3, None),
        ("6.3 V", 6.3, None),
        ("50 V", 50.0, None),
        ("16V 0.1W", 16.0, 0.1),
        ("50V, 1/10W", 50.0, 0.1),
        ("1/4 W; 200V", 200.0, 0.25),
        ("1kV", 1000.0, None),
        ("25 VDC", 25.0, None),
    ],
)
def test_parse_rating(text, volts, watts):
    v, w = parse_rating(text)
    assert (v is None) == (volts is None) and (w is None) == (watts is None)
    if volts is not None:
        assert v == pytest.approx(volts, rel=1e-12)
    if watts is not None:
        assert w == pytest.approx(watts, rel=1e-12)


@pytest.mark.parametrize(
    "text, reason",
    [
        ("", "empty rating"),
        ("16", "not understood"),
        ("16V 25V", "voltage twice"),
        ("0.1W 0.2W", "power twice"),
        ("0V", "zero"),
        ("1/0W", "divides by zero"),
        ("16A", "not understood"),
        ("16V x", "not understood"),
    ],
)
def test_parse_rating_bad(text, reason):
    with pytest.raises(ValueTextError) as exc:
        parse_rating(text)
    assert reason in str(exc.value)


# --------------------------------------------------------------------------
# format_value
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "value, unit, expected",
    [
        (4700, "", "4.7k"),
        (1e-7, "", "100n"),
        (0, "", "0"),
        (2.2e-6, "", "2.2u"),
        (1e-7, "F", "100nF"),
        (4700, "ohm", "4.7k"),
        (1e-5, "H", "10uH"),
        (1e6, "", "1M"),
        (1e-3, "", "1m"),
    ],
)
def test_format_value_examples(value, unit, expected):
    # The same text quantiphy renders (Quantity(v).render()); checked in the generated test below.
    assert format_value(value, unit) == expected


def test_format_value_matches_quantiphy_render():
    # Reference: quantiphy.Quantity(v).render(prec=5) gives 6 significant digits,
    # SI prefix, 'u' for micro, trailing zeros dropped (PyPI quantiphy).
    rng = random.Random(62)
    for _ in range(300):
        digits = rng.randint(1, 999999)
        exp = rng.randint(-20, 12)
        v = float(f"{digits}e{exp}")
        if not 1e-15 <= v < 1e15:
            continue
        assert format_value(v) == Quantity(v).render(prec=5), v
        # and our own parser reads it back (within the 6 digits kept)
        assert math.isclose(parse_value(format_value(v)), v, rel_tol=5e-6)


def test_format_value_is_ascii_and_rejects_nan():
    assert format_value(2.2e-6, "F").isascii()
    with pytest.raises(ValueError):
        format_value(float("inf"))


# --------------------------------------------------------------------------
# E-series tables
# --------------------------------------------------------------------------
@pytest.mark.parametrize("name", list(ES_KEYS))
def test_series_table_equals_eseries(name):
    # Reference: eseries.erange(key, 1, 10), the PyPI eseries implementation of IEC 60063.
    ref = [v for v in eseries.erange(ES_KEYS[name], 1, 10) if v < 10]
    assert len(SERIES[name]) == int(ES_KEYS[name]) == len(ref)
    for ours, theirs in zip(SERIES[name], ref):
        assert math.isclose(ours, theirs, rel_tol=1e-12), (name, ours, theirs)


@pytest.mark.parametrize("name", list(ES_KEYS))
def test_series_values_over_decades_equal_eseries(name):
    # Reference: eseries.erange over nine decades (PyPI eseries, IEC 60063).
    ours = series_values(name, 1e-12, 1e6)
    ref = np.array(list(eseries.erange(ES_KEYS[name], 1e-12, 1e6)))
    assert ours.shape == ref.shape
    np.testing.assert_allclose(ours, ref, rtol=1e-12)
    assert np.all(np.diff(ours) > 0)


def test_irregular_e24_values():
    # Source: IEC 60063:2015 as summarised in REFERENCES.md section 6: the E24 values that are
    # not round(10**(n/24), 1) are 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2 (formula gives
    # 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6, 8.3).
    diff = {
        (v, round(10 ** (n / 24), 1)) for n, v in enumerate(SERIES["E24"]) if not math.isclose(v, round(10 ** (n / 24), 1))
    }
    assert diff == {(2.7, 2.6), (3.0, 2.9), (3.3, 3.2), (3.6, 3.5), (3.9, 3.8), (4.3, 4.2), (4.7, 4.6), (8.2, 8.3)}


def test_irregular_e192_value():
    # Source: IEC 60063:2015, REFERENCES.md section 6: E192 has 9.20 where the formula gives 9.19;
    # every other E192, E96 and E48 value is round(10**(n/N), 2).
    for name, n_per_decade in (("E48", 48), ("E96", 96), ("E192", 192)):
        diff = [
            (v, round(10 ** (n / n_per_decade), 2))
            for n, v in enumerate(SERIES[name])
            if not math.isclose(v, round(10 ** (n / n_per_decade), 2))
        ]
        assert diff == ([(9.2, 9.19)] if name == "E192" else []), name


def test_series_nest():
    # IEC 60063 (structure of the series, common knowledge of the standard): each series is
    # every second value of the next finer one within its group (E3..E24, E48..E192).
    assert SERIES["E3"] == SERIES["E6"][::2]
    assert SERIES["E6"] == SERIES["E12"][::2]
    assert SERIES["E12"] == SERIES["E24"][::2]
    assert SERIES["E48"] == SERIES["E96"][::2]
    assert SERIES["E96"] == SERIES["E192"][::2]


# --------------------------------------------------------------------------
# series_of, nearest_in_series, series_for_tolerance, series_values
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "value, expected",
    [
        # Hand-checked against the IEC 60063 tables above: 4.7 is in E3..E24 and 470 is in E192,
        # but E48/E96 have 464 and 475.
        (4700.0, ("E3", "E6", "E12", "E24", "E192")),
        (10e3, ("E3", "E6", "E12", "E24", "E48", "E96", "E192")),
        (1e-12, ("E3", "E6", "E12", "E24", "E48", "E96", "E192")),
        (4750.0, ("E96", "E192")),
        (1.05, ("E48", "E96", "E192")),
        (9.2, ("E192",)),
        (8.2e-9, ("E12", "E24")),
        (3.3e-6, ("E6", "E12", "E24")),
        (4800.0, ()),
        (0.0, ()),
        (-4700.0, ()),
        (float("nan"), ()),
    ],
)
def test_series_of_cases(value, expected):
    assert series_of(value) == expected


def test_series_of_agrees_with_eseries():
    # Reference: membership by eseries.erange on a narrow window around the value (PyPI eseries).
    rng = random.Random(24)
    for _ in range(60):
        src = rng.choice(list(ES_KEYS))
        v = rng.choice(list(eseries.erange(ES_KEYS[src], 10 ** rng.randint(-12, 5), 10 ** rng.randint(6, 7))))
        expected = tuple(
            name for name, key in ES_KEYS.items() if any(math.isclose(v, c, rel_tol=1e-9) for c in eseries.erange(key, v * 0.999, v * 1.001))
        )
        assert src in expected
        assert series_of(v) == expected, v


def test_nearest_in_series_agrees_with_eseries():
    # Reference: eseries.find_less_than_or_equal / find_greater_than_or_equal (PyPI eseries).
    rng = random.Random(96)
    for _ in range(200):
        name = rng.choice(list(ES_KEYS))
        v = 10 ** rng.uniform(-11, 6)
        lo, hi = nearest_in_series(v, name)
        assert math.isclose(lo, eseries.find_less_than_or_equal(ES_KEYS[name], v), rel_tol=1e-12)
        assert math.isclose(hi, eseries.find_greater_than_or_equal(ES_KEYS[name], v), rel_tol=1e-12)
        assert lo <= v <= hi


@pytest.mark.parametrize(
    "value, series, expected",
    [
        # Hand-checked in the IEC 60063 tables.
        (4800.0, "E24", (4700.0, 5100.0)),
        (4800.0, "E192", (4750.0, 4810.0)),
        (4800.0, "E96", (4750.0, 4870.0)),
        (1e-7, "E12", (1e-7, 1e-7)),
        (9.95, "E192", (9.88, 10.0)),
        (1.001e3, "E3", (1000.0, 2200.0)),
        (990.0, "E6", (680.0, 1000.0)),
    ],
)
def test_nearest_in_series_cases(value, series, expected):
    lo, hi = nearest_in_series(value, series)
    assert math.isclose(lo, expected[0], rel_tol=1e-12) and math.isclose(hi, expected[1], rel_tol=1e-12)


def test_nearest_matches_find_nearest_few():
    # Reference: eseries.find_nearest_few(num=2) returns the two nearest values, which bracket a
    # value lying between two series values (PyPI eseries).
    for v, name in ((4800.0, "E24"), (1234.0, "E96"), (3.0e-9, "E12")):
        assert tuple(sorted(eseries.find_nearest_few(ES_KEYS[name], v, num=2))) == pytest.approx(
            nearest_in_series(v, name), rel=1e-12
        )


@pytest.mark.parametrize("bad", [0.0, -1.0, float("inf"), float("nan")])
def test_nearest_in_series_bad(bad):
    with pytest.raises(ValueError):
        nearest_in_series(bad, "E24")


def test_unknown_series():
    with pytest.raises(ValueError, match="unknown E-series"):
        nearest_in_series(1.0, "E25")
    with pytest.raises(ValueError, match="unknown E-series"):
        series_values("E7", 1, 10)


@pytest.mark.parametrize(
    "tol, expected",
    [
        # IEC 60063:2015 loose tie between series and tolerance, common practice:
        # E12 ~10 %, E24 ~5 %, E48 ~2 %, E96 ~1 %, E192 ~0.5 % and tighter.
        (0.10, "E12"),
        (0.05, "E24"),
        (0.02, "E48"),
        (0.01, "E96"),
        (0.005, "E192"),
        (0.001, "E192"),
        (0.0, "E192"),
        (0.20, "E6"),
        (0.5, "E3"),
        (0.03, "E48"),
        (None, "E24"),
    ],
)
def test_series_for_tolerance(tol, expected):
    assert series_for_tolerance(tol) == expected


def test_series_for_tolerance_matches_eseries_tolerance():
    # Reference: eseries.tolerance(key), the nominal tolerance eseries pairs with each series.
    for name, key in ES_KEYS.items():
        assert SERIES_TOLERANCE[name] == pytest.approx(eseries.tolerance(key))
        assert series_for_tolerance(eseries.tolerance(key)) == name


def test_series_values_inclusive_and_errors():
    # Reference: eseries.erange is inclusive at both ends (PyPI eseries docs).
    vals = series_values("E24", 1, 10)
    assert vals[0] == 1.0 and vals[-1] == 10.0 and len(vals) == 25
    assert series_values("E12", 4.8, 5.0).size == 0
    for lo, hi in ((0, 10), (-1, 10), (10, 1), (1, float("inf"))):
        with pytest.raises(ValueError):
            series_values("E24", lo, hi)


def test_docstring_examples_run():
    # The numpydoc examples of the module are executed (they double as documentation).
    import doctest

    import pipeline.values

    result = doctest.testmod(pipeline.values)
    assert result.attempted > 0 and result.failed == 0


def test_parse_value_parses_each_distinct_text_once():
    # cost guard: a design repeating one value text parses it once (lru cache on the text);
    # True is not taken for a cached 1 (typed cache)
    from pipeline.errors import ValueTextError
    inner = parse_value.__wrapped__
    inner.cache_clear()
    for _ in range(500):
        assert parse_value("4k7") == 4700.0
    assert inner.cache_info().misses == 1 and inner.cache_info().hits == 499
    assert parse_value(1) == 1.0
    with pytest.raises(ValueTextError):
        parse_value(True)


def test_format_value_formats_each_distinct_value_once():
    # cost guard: the writers format the same few values thousands of times (lru cache); keys that
    # compare equal (4700, 4700.0; 0.0, -0.0) have the same text, so sharing an entry is exact
    format_value.cache_clear()
    for _ in range(300):
        assert format_value(4700.0) == "4.7k" and format_value(4700) == "4.7k"
        assert format_value(1e-7, "F") == "100nF"
    assert format_value.cache_info().misses == 3  # 4700 and 4700.0: functools keys a lone int apart
    assert format_value(-0.0) == format_value(0.0) == "0"
    with pytest.raises(ValueError):
        format_value(float("nan"))


@pytest.mark.parametrize("v", [0.0, -0.0, -0.0004, 0.0005, 1.0005, -2.5, 1234.56789, 1e-9, -1e-9, 3])
def test_format_fixed_matches_decimal_rounding_without_negative_zero(v):
    from decimal import ROUND_HALF_EVEN, Decimal

    from pipeline.values import format_fixed

    # Reference: Python's decimal module, rounding the exact binary value half-to-even to 0.001
    # (the IEEE 754 rule printf's %.3f follows); a zero is written without its sign.
    ref = Decimal(float(v)).quantize(Decimal("0.001"), rounding=ROUND_HALF_EVEN)
    expected = "0.000" if ref == 0 else str(ref)
    assert format_fixed(v) == expected


@pytest.mark.parametrize("v", [0.0, 0.05, 0.25, 12.345, 599.5, 1234.56, 1e6])
def test_format_area_matches_decimal_rounding(v):
    from decimal import ROUND_HALF_EVEN, Decimal

    from pipeline.values import format_area

    # Reference: Python's decimal module rounding the exact binary value half-to-even to 0.1 (printf's rule).
    ref = Decimal(float(v)).quantize(Decimal("0.1"), rounding=ROUND_HALF_EVEN)
    assert format_area(v) == f"{ref} mm\u00b2"
