"""Component values: engineering notation, RKM code, tolerances, ratings, E-series.

Pure functions over text and numbers; this module knows nothing of parts or
nets. Values are in SI base units (ohm, F, H, V, W); tolerances are
fractions (``0.01`` for 1 %).

Value syntax accepted by :func:`parse_value`
--------------------------------------------
* Engineering notation: a decimal number, optionally an exponent
  (``4.7e3``), optionally an SI prefix, optionally the unit: ``10k``,
  ``4.7 kOhm``, ``4.7kΩ``, ``100nF``, ``2.2µF``. Whitespace may stand between
  number, prefix and unit.
* Prefixes (case-sensitive, as in SI): ``T`` 1e12, ``G`` 1e9, ``M`` 1e6
  (mega), ``k`` 1e3 (``K`` accepted too: it is no other SI prefix and BOMs
  use it), ``m`` 1e-3 (milli), ``u`` / ``µ`` (U+00B5) / ``μ`` (U+03BC) 1e-6,
  ``n`` 1e-9, ``p`` 1e-12, ``f`` 1e-15.
* ``meg`` (any case) is accepted as mega, because resistor and simulator
  practice writes it and nothing else could be meant for ohm, F or H. In
  the TOML design ``M`` is mega and ``m`` is milli, exactly as in SI; the
  SPICE reader has its own rules (there ``M`` is milli) and does not use
  this function for that.
* RKM code (IEC 60062): the prefix letter, or ``R`` for ohm, stands for the
  decimal point: ``4k7`` = 4700, ``R47`` = 0.47, ``1R0`` = 1, ``2u2`` =
  2.2e-6, ``4M7`` = 4.7e6; a trailing ``R`` marks ohms (``47R``, ``0R``).
  ``R`` is refused for capacitors and inductors: on inductors ``4R7`` is a
  common marking for 4.7 µH, so it would be read wrongly.
* The unit that may follow depends on ``unit``: ``"ohm"`` accepts
  ``ohm``/``ohms`` (any case), ``Ω`` (U+03A9 or U+2126) and ``R``; ``"F"``
  accepts ``F``; ``"H"`` accepts ``H``; ``""`` accepts no unit (RKM ``R``
  still works). Units are case-sensitive except the ohm words, so
  ``10uf`` is refused with a hint rather than guessed.
* Never accepted: a sign, nan, inf, a decimal comma, a number that
  overflows or underflows a float.

E-series
--------
:data:`SERIES` holds the IEC 60063:2015 preferred-number series E3 .. E192
as mantissas ``1.0 <= m < 10``. E3 .. E24 have two significant digits,
E48 .. E192 three. The tables are written out, not computed: several
values differ from ``round(10 ** (n / N))`` (E24 2.7, 3.0, 3.3, 3.6, 3.9,
4.3, 4.7, 8.2; E192 9.20).

Examples
--------
>>> parse_value("4k7")
4700.0
>>> parse_value("100nF", "F")
1e-07
>>> format_value(2.2e-6, "F")
'2.2uF'
>>> series_of(4700.0)
('E3', 'E6', 'E12', 'E24', 'E192')
>>> nearest_in_series(4800.0, "E24")
(4700.0, 5100.0)
"""

from __future__ import annotations

import math
import re
from decimal import Decimal, DecimalException
from functools import lru_cache, wraps
from typing import Any, Callable, TypeVar

import numpy as np

from .errors import ValueTextError, Where

__all__ = [
    "parse_value",
    "parse_tolerance",
    "parse_rating",
    "located",
    "format_value",
    "format_quantity",
    "format_fixed",
    "format_area",
    "round_sig",
    "format_share",
    "format_mm",
    "SERIES",
    "SERIES_TOLERANCE",
    "series_of",
    "nearest_in_series",
    "series_for_tolerance",
    "series_values",
    "PREFIX_EXPONENT",
    "EXPONENT_PREFIX",
]

# --------------------------------------------------------------------------
# Prefixes and units
# --------------------------------------------------------------------------
#: SI prefix letter -> power of ten (SI Brochure, 9th edition, table 7),
#: plus ``K`` for kilo (common practice on BOMs).
_PREFIX_EXP: dict[str, int] = {
    "T": 12,
    "G": 9,
    "M": 6,
    "k": 3,
    "K": 3,
    "m": -3,
    "u": -6,
    "n": -9,
    "p": -12,
    "f": -15,
}
#: Canonical output letter per power of ten (ASCII only).
_EXP_PREFIX: dict[int, str] = {12: "T", 9: "G", 6: "M", 3: "k", 0: "", -3: "m", -6: "u", -9: "n", -12: "p", -15: "f"}
#: Read-only views for other notations built on the same prefixes (the SPICE reader and writer).
PREFIX_EXPONENT = _PREFIX_EXP
EXPONENT_PREFIX = _EXP_PREFIX
#: Upper-case letters people write for a lower-case prefix (for hints only).
_PREFIX_HINT = {"N": "n", "P": "p", "U": "u"}

_UNIT_NAMES = {"ohm": "ohm", "Ohm": "ohm", "OHM": "ohm", "ohms": "ohm", "R": "ohm", "\u03a9": "ohm",
               "\u2126": "ohm", "F": "F", "H": "H", "": ""}
_UNIT_WORD = {"ohm": "ohm", "F": "F (farad)", "H": "H (henry)", "": "a plain number"}

_NUMBER = re.compile(r"(?P<int>\d*)(?:\.(?P<frac>\d*))?(?:[eE](?P<exp>[+-]?\d+))?")
_RKM = re.compile(r"(?P<int>\d*)(?P<letter>[RrTGMkKmunpf])(?P<frac>\d+)")
_HELP = "expected a number with an optional SI prefix or RKM code such as 4k7, 4.7k, 100n or 2u2"


def _canon_unit(unit: str) -> str:
    try:
        return _UNIT_NAMES[unit]
    except KeyError:
        raise ValueError(f"unknown unit {unit!r}: expected 'ohm', 'F', 'H' or ''") from None


def _normalise(text: str) -> str:
    # Both micro characters map to 'u'; both ohm characters to the word.
    return (
        text.strip()
        .replace("\u00b5", "u")
        .replace("\u03bc", "u")
        .replace("\u03a9", "ohm")
        .replace("\u2126", "ohm")
    )


def _match_unit(rest: str, unit: str, original: str, *, prefixed: bool) -> None:
    """Check that ``rest`` (what follows number and prefix) is an allowed unit."""
    rest = rest.strip()
    if not rest:
        return
    if rest.lower() in ("ohm", "ohms") or rest in ("R", "r"):
        if unit == "ohm" or (unit == "" and rest in ("R", "r")):
            return
        if unit == "":
            raise ValueTextError(f"{original!r} ends in the unit {rest!r}, but this part takes a plain number")
        if rest in ("R", "r"):
            raise ValueTextError(
                f"{original!r} uses R, the RKM code for ohm, but a value in {_UNIT_WORD[unit]} was expected"
            )
        raise ValueTextError(f"{original!r} ends in the unit {rest!r}, but a value in {_UNIT_WORD[unit]} was expected")
    if rest in ("F", "H"):
        if rest == unit:
            return
        if unit == "":
            raise ValueTextError(f"{original!r} ends in the unit {rest!r}, but this part takes a plain number")
        raise ValueTextError(f"{original!r} ends in the unit {rest!r}, but a value in {_UNIT_WORD[unit]} was expected")
    if rest in ("f", "h") and unit == rest.upper() and prefixed:
        raise ValueTextError(f"{original!r}: write the unit as {unit!r} (units are case-sensitive), e.g. 10u{unit}")
    if rest[0] in _PREFIX_HINT:
        raise ValueTextError(
            f"{original!r}: {rest[0]!r} is not an SI prefix (prefixes are case-sensitive): "
            f"did you mean {_PREFIX_HINT[rest[0]]!r}?"
        )
    raise ValueTextError(f"{original!r} is not a value: {_HELP}")


def _to_float(int_part: str, frac: str, exp: int, original: str) -> float:
    digits = (int_part or "0") + "." + (frac or "0")
    try:
        d = Decimal(digits).scaleb(exp)
    except DecimalException:
        raise ValueTextError(f"{original!r} is out of range for a component value") from None
    v = float(d)
    if math.isinf(v):
        raise ValueTextError(f"{original!r} is too large to be a component value")
    if v == 0.0 and d != 0:
        raise ValueTextError(f"{original!r} is too small to be a component value")
    return v


_F = TypeVar("_F", bound=Callable[..., Any])


def located(parse: _F) -> _F:
    """Give a text parser the optional keyword ``at`` (a :class:`~pipeline.errors.Where`).

    The parser raises :class:`~pipeline.errors.ValueTextError` (the reason
    alone) for bad text; with ``at`` the wrapped parser raises
    ``at.error(reason)`` instead: the error naming file, line and key.

    >>> from pipeline.errors import Where
    >>> parse_tolerance("5", at=Where("d.toml", 4, "parts.R1.tolerance"))
    Traceback (most recent call last):
    ...
    pipeline.errors.DesignError: d.toml:4: parts.R1.tolerance: tolerance '5' has no per-cent sign: expected a percentage such as 1%, ±5 % or +/-10%
    """
    @wraps(parse)
    def run(*args: Any, at: Where | None = None, **kw: Any) -> Any:
        try:
            return parse(*args, **kw)
        except ValueTextError as exc:
            if at is None:
                raise
            raise at.error(exc.reason) from None
    return run  # type: ignore[return-value]


@located
@lru_cache(maxsize=4096, typed=True)  # pure; a design repeats few value texts (typed: True is not 1)
def parse_value(text: str, unit: str = "") -> float:
    """Parse a component value in engineering notation or RKM code.

    Parameters
    ----------
    text : str
        The value as written, e.g. ``"4k7"``, ``"4.7 kOhm"``, ``"100nF"``,
        ``"2µ2"``, ``"R47"``, ``"0R"``, ``"1meg"``. A TOML integer or float
        is accepted as well (non-negative, finite).
    unit : {"", "ohm", "F", "H"}
        The unit that may follow the number (``"R"``, ``"Ω"``, ``"Ohm"``
        are accepted as names of ``"ohm"``). With ``""`` no unit may follow.

    Returns
    -------
    float
        The value in SI base units (ohm, F, H), correctly rounded from the
        decimal text.

    Raises
    ------
    ValueTextError
        With a reason naming the text and what was expected; given
        ``at=Where(...)`` (:func:`located`), the located error instead.

    Notes
    -----
    RKM code follows IEC 60062 (letter code for resistance and capacitance
    values). ``M`` is mega and ``m`` milli, as in SI. See the module
    docstring for the full grammar.

    Examples
    --------
    >>> parse_value("4.7 kOhm", "ohm"), parse_value("R47"), parse_value("1M"), parse_value("1m")
    (4700.0, 0.47, 1000000.0, 0.001)
    >>> parse_value("4x7")
    Traceback (most recent call last):
    ...
    pipeline.errors.ValueTextError: '4x7' is not a value: expected a number with an optional SI prefix or RKM code such as 4k7, 4.7k, 100n or 2u2
    """
    unit = _canon_unit(unit)
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise ValueTextError(f"{text!r} is not a value: {_HELP}")
    if isinstance(text, (int, float)):
        return _plain_number(text)
    s = _normalise(text)
    _refuse_written_forms(s, text)
    m = _RKM.match(s)
    if m and (m.group("int") or m.group("frac")):
        return _rkm_value(m, s, unit, text)
    return _engineering_value(s, unit, text)


def _plain_number(v: int | float) -> float:
    """A TOML number as a value: finite and not negative."""
    if not math.isfinite(v):
        raise ValueTextError(f"{v!r} is not a finite number")
    if v < 0:
        raise ValueTextError(f"{v!r} is negative: component values are zero or positive")
    return float(v)


def _refuse_written_forms(s: str, original: str) -> None:
    """Empty text, a sign, NaN or infinity, a decimal comma: each refused with its own reason."""
    if not s:
        raise ValueTextError(f"empty value: {_HELP}")
    if s[0] == "-":
        raise ValueTextError(f"{original!r} is negative: component values are zero or positive")
    if s[0] == "+":
        raise ValueTextError(f"{original!r} has a sign: write the value without one")
    if s.lower().lstrip("+-") in ("nan", "inf", "infinity"):
        raise ValueTextError(f"{original!r} is not a finite number")
    if "," in s:
        raise ValueTextError(
            f"{original!r} uses a comma: write the decimal point as '.' (4.7k) or use RKM code (4k7)"
        )


def _rkm_value(m: re.Match, s: str, unit: str, original: str) -> float:
    """RKM code (IEC 60062): digits, one letter in place of the decimal point, digits."""
    letter = m.group("letter")
    rest = s[m.end():]
    if letter in "Rr":
        if unit in ("F", "H"):
            extra = " (on inductors 4R7 often means 4.7 uH: write 4u7 or 4.7u)" if unit == "H" else ""
            raise ValueTextError(
                f"{original!r} uses R, the RKM code for ohm, but a value in {_UNIT_WORD[unit]} "
                f"was expected{extra}"
            )
        exp = 0
    else:
        exp = _PREFIX_EXP[letter]
    if rest.strip() in ("R", "r"):
        raise ValueTextError(f"{original!r} ends in R after an RKM code: write {s[: m.end()]!r} alone")
    _match_unit(rest, unit, original, prefixed=True)
    return _to_float(m.group("int"), m.group("frac"), exp, original)


def _engineering_value(s: str, unit: str, original: str) -> float:
    """A decimal number with an optional exponent or SI prefix (``meg`` for mega), then the unit."""
    m = _NUMBER.match(s)
    if not m or not (m.group("int") or m.group("frac")):
        if s[0] in _PREFIX_HINT:
            raise ValueTextError(
                f"{original!r}: {s[0]!r} is not an SI prefix (prefixes are case-sensitive): "
                f"did you mean {_PREFIX_HINT[s[0]]!r}?"
            )
        raise ValueTextError(f"{original!r} is not a value: {_HELP}")
    exp_text = m.group("exp")
    if exp_text is not None and len(exp_text.lstrip("+-")) > 4:
        raise ValueTextError(f"{original!r} has an exponent out of range for a component value")
    exp = int(exp_text) if exp_text is not None else 0
    rest = s[m.end():].lstrip()
    prefixed = False
    if rest[:3].lower() == "meg":
        prefix_exp, rest, prefixed = 6, rest[3:], True
    elif rest[:1] in _PREFIX_EXP:
        prefix_exp, rest, prefixed = _PREFIX_EXP[rest[0]], rest[1:], True
    else:
        prefix_exp = 0
    if prefixed:
        _refuse_mixed_prefix(rest, exp_text, original)
    _match_unit(rest, unit, original, prefixed=prefixed)
    return _to_float(m.group("int"), m.group("frac"), exp + prefix_exp, original)


def _refuse_mixed_prefix(rest: str, exp_text: str | None, original: str) -> None:
    """An SI prefix with an exponent, with more digits (4.7k7) or with R (4.7kR) is refused."""
    if exp_text is not None:
        raise ValueTextError(f"{original!r} has both an exponent and an SI prefix: use one of them")
    if rest[:1].isdigit():
        raise ValueTextError(
            f"{original!r} is not a value: RKM code takes no decimal point (4k7, not 4.7k7); {_HELP}"
        )
    if rest.strip() in ("R", "r"):
        raise ValueTextError(f"{original!r} mixes an SI prefix with R: write it without the R (4.7k) or as RKM code (4k7)")


# --------------------------------------------------------------------------
# Tolerance and rating
# --------------------------------------------------------------------------
_TOL = re.compile(r"(?:±|\+/-|\+-|\+/−)?\s*(?P<num>\d+(?:\.\d*)?|\.\d+)\s*%")


@located
def parse_tolerance(text: str) -> float:
    """Parse a symmetric tolerance such as ``1%``, ``±5 %``, ``+/-10%``, ``0.1 %``.

    Returns
    -------
    float
        The tolerance as a fraction (``0.05`` for 5 %), ``0 <= t < 1``.

    Raises
    ------
    ValueTextError
        For text without a per-cent sign, asymmetric tolerances
        (``+80/-20%``), or 100 % and more.

    Examples
    --------
    >>> parse_tolerance("±5 %"), parse_tolerance("+/-10%"), parse_tolerance("0.1 %")
    (0.05, 0.1, 0.001)
    """
    if not isinstance(text, str):
        raise ValueTextError(f"tolerance {text!r} is not text: write it as a percentage such as '1%'")
    s = text.strip()
    if not s:
        raise ValueTextError("empty tolerance: expected a percentage such as 1%, ±5 % or +/-10%")
    m = _TOL.fullmatch(s)
    if not m:
        if "/" in s and "+/-" not in s:
            raise ValueTextError(
                f"tolerance {text!r} looks asymmetric: only symmetric tolerances such as ±20% are supported"
            )
        if "%" not in s:
            raise ValueTextError(
                f"tolerance {text!r} has no per-cent sign: expected a percentage such as 1%, ±5 % or +/-10%"
            )
        raise ValueTextError(f"tolerance {text!r} is not a percentage: expected e.g. 1%, ±5 % or +/-10%")
    t = float(Decimal(m.group("num")) / 100)
    if t >= 1.0:
        raise ValueTextError(f"tolerance {text!r} is 100 % or more: expected a percentage below 100 %")
    return t


_RATING_ITEM = re.compile(
    r"\s*(?P<num>\d+(?:\.\d*)?|\.\d+)(?:\s*/\s*(?P<den>\d+(?:\.\d*)?|\.\d+))?"
    r"\s*(?P<prefix>[kKmu]?)\s*(?P<unit>VDC|Vdc|V|v|W|w)(?![A-Za-z])\s*[,;]?"
)


@located
def parse_rating(text: str) -> tuple[float | None, float | None]:
    """Parse a voltage and/or power rating.

    Accepts one voltage and one power item in any order, separated by
    spaces, commas or semicolons: ``16V``, ``6.3 V``, ``0.1W``, ``1/8W``,
    ``250mW``, ``16V 0.1W``, ``50V, 1/10W``, ``1kV``. Prefixes ``k``/``K``,
    ``m`` and ``u`` are allowed; ``VDC`` reads as ``V``. Cost: linear in
    the text (one regular-expression match an item).

    Returns
    -------
    (volts, watts) : tuple of float or None
        In V and W; ``None`` for the one not given.

    Raises
    ------
    ValueTextError
        For empty text, a zero rating, a repeated kind or anything else.

    Examples
    --------
    >>> parse_rating("50V, 1/10W")
    (50.0, 0.1)
    >>> parse_rating("250mW")
    (None, 0.25)
    """
    if not isinstance(text, str):
        raise ValueTextError(f"rating {text!r} is not text: write it like '16V', '0.1W' or '50V 1/8W'")
    s = text.strip()
    if not s:
        raise ValueTextError("empty rating: expected a voltage and/or power such as 16V, 0.1W or 50V 1/8W")
    found: dict[str, float] = {}  # "V" or "W" -> the rating in that unit
    pos = 0
    while pos < len(s):
        m = _RATING_ITEM.match(s, pos)
        if not m or m.end() == pos:
            raise ValueTextError(
                f"rating {text!r} is not understood at {s[pos:]!r}: "
                "expected a voltage and/or power such as 16V, 0.1W, 1/8W or 50V 250mW"
            )
        kind, v = _rating_item(m, text)
        if kind in found:
            raise ValueTextError(f"rating {text!r} gives the {'voltage' if kind == 'V' else 'power'} twice")
        found[kind] = v
        pos = m.end()
    return found.get("V"), found.get("W")


def _rating_item(m: re.Match[str], text: str) -> tuple[str, float]:
    """One matched rating item: ``("V", volts)`` or ``("W", watts)``, a fraction and prefix applied exactly."""
    num = Decimal(m.group("num"))
    if m.group("den") is not None:
        den = Decimal(m.group("den"))
        if den == 0:
            raise ValueTextError(f"rating {text!r} divides by zero")
        num = num / den
    v = float(num.scaleb(_PREFIX_EXP.get(m.group("prefix"), 0)))
    if v <= 0:
        raise ValueTextError(f"rating {text!r} is zero: a rating must be positive")
    return m.group("unit")[0].upper(), v


# --------------------------------------------------------------------------
# Formatting
# --------------------------------------------------------------------------
@lru_cache(maxsize=4096)  # pure; designs and writers repeat few values (equal keys give equal text)
def format_value(value: float, unit: str = "") -> str:
    """Canonical short ASCII text for a value, e.g. ``4700 -> "4.7k"``.

    Six significant digits at most, trailing zeros dropped, an engineering
    prefix from ``f`` to ``T`` (``u`` for micro); outside that range an
    exponent (``1e-18``). ``unit`` ``"ohm"`` (or ``"R"``, ``"Ω"``) adds
    nothing, any other unit (``"F"``, ``"H"``, ``"V"``, ...) is appended.

    Raises
    ------
    ValueError
        For nan or infinity.

    Examples
    --------
    >>> format_value(4700), format_value(1e-7, "F"), format_value(0), format_value(2.2e-6)
    ('4.7k', '100nF', '0', '2.2u')
    """
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{value!r} is not a finite number")
    suffix = "" if unit in ("ohm", "Ohm", "R", "\u03a9", "\u2126", "") else unit
    if v == 0:
        return "0" + suffix
    sign = "-" if v < 0 else ""
    d = Decimal(f"{abs(v):.6g}")
    e = d.adjusted()
    eng = 3 * (e // 3)
    if eng not in _EXP_PREFIX:
        txt = f"{abs(v):.6g}".replace("e+", "e")
        txt = re.sub(r"e(-?)0+(\d)", r"e\1\2", txt)
        return sign + txt + suffix
    mant = d.scaleb(-eng)
    txt = format(mant, "f")
    if "." in txt:
        txt = txt.rstrip("0").rstrip(".")
    return sign + txt + _EXP_PREFIX[eng] + suffix


_QUANTITY_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
                      (1e-9, "n"), (1e-12, "p"))


def format_quantity(x: float | None, unit: str, digits: int = 4) -> str:
    """Text for a measured figure: ``digits`` significant digits, a space, prefix and unit.

    The one formatter for figures shown to a user (findings, report tables,
    plot labels); :func:`format_value` is the compact form of a part value.
    ``unit`` ``"ohm"`` is written after a space (``"4.7k ohm"``); no unit
    gives a plain number; ``None`` and nan give ``"n/a"``.

    >>> format_quantity(1002.3, "Hz"), format_quantity(0.25, "W", 3), format_quantity(4700, "ohm")
    ('1.002 kHz', '250 mW', '4.7k ohm')
    >>> format_quantity(None, "V"), format_quantity(0.7071, ""), format_quantity(0, "V")
    ('n/a', '0.7071', '0 V')
    """
    if x is None:
        return "n/a"
    x = float(x)
    if math.isnan(x):
        return "n/a"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if not unit:
        return f"{x:.{digits}g}"
    sym = " ohm" if unit == "ohm" else f" {unit}"
    if x == 0:
        return f"0{sym}"
    shown = abs(float(f"{x:.{digits}g}"))      # the prefix follows the rounded figure
    for scale, p in _QUANTITY_PREFIXES:
        if shown >= scale:
            break
    txt = f"{x / scale:.{digits}g}"
    if unit == "ohm":
        return f"{txt}{p}{sym}" if p else f"{txt}{sym}"
    return f"{txt} {p}{unit}"


def format_mm(v: float) -> str:
    """A length (mm) as messages write it: two decimals at most, trailing zeros dropped; whole mm from 1000.

    Examples
    --------
    >>> format_mm(2.5), format_mm(3.0), format_mm(0.125), format_mm(1234.5)
    ('2.5', '3', '0.12', '1234')
    """
    return f"{v:.2f}".rstrip("0").rstrip(".") if abs(v) < 1000 else f"{v:.0f}"


def format_fixed(v: float) -> str:
    """A coordinate (mm) as the outputs write it: three decimals, never a negative zero.

    >>> format_fixed(1.23456), format_fixed(-0.0001), format_fixed(2)
    ('1.235', '0.000', '2.000')
    """
    s = f"{float(v):.3f}"
    return "0.000" if s == "-0.000" else s


def format_area(v: float) -> str:
    """An area (mm^2) as the report writes it: one decimal and the unit.

    >>> format_area(1234.56), format_area(0)
    ('1234.6 mm\u00b2', '0.0 mm\u00b2')
    """
    return f"{float(v):.1f} mm\u00b2"


def format_share(x: float | None) -> str:
    """A share (fraction) as a percentage with two decimals; None gives ``"n/a"``.

    >>> format_share(0.01234), format_share(None)
    ('1.23 %', 'n/a')
    """
    return "n/a" if x is None else f"{x * 100:.2f} %"


def round_sig(x: float | None, digits: int = 6) -> float | None:
    """JSON-ready rounding to ``digits`` significant digits; None and non-finite give None.

    >>> round_sig(1234.5678, 4), round_sig(float("nan")), round_sig(None)
    (1235.0, None, None)
    """
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}")


# --------------------------------------------------------------------------
# E-series, IEC 60063:2015 "Preferred number series for resistors and
# capacitors", tables 1 (E3..E24, two significant digits) and 2 (E48..E192,
# three significant digits). Written out value by value; note the E24
# values that differ from round(10**(n/24), 1): 2.7, 3.0, 3.3, 3.6, 3.9,
# 4.3, 4.7, 8.2, and E192 9.20 (formula 9.19).
# --------------------------------------------------------------------------
_E3 = (10, 22, 47)
_E6 = (10, 15, 22, 33, 47, 68)
_E12 = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)
_E24 = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)
_E48 = (
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205,
    215, 226, 237, 249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442,
    464, 487, 511, 536, 562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
)  # fmt: skip
_E96 = (
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
    147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
    215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
    316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
    464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
    681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976,
)  # fmt: skip
_E192 = (
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120,
    121, 123, 124, 126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145,
    147, 149, 150, 152, 154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
    178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203, 205, 208, 210, 213,
    215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246, 249, 252, 255, 258,
    261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
    316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379,
    383, 388, 392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459,
    464, 470, 475, 481, 487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
    562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642, 649, 657, 665, 673,
    681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768, 777, 787, 796, 806, 816,
    825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988,
)  # fmt: skip

#: Significant digits (as integers) and their decade exponent per series.
_DIGITS: dict[str, tuple[tuple[int, ...], int]] = {
    "E3": (_E3, 1),
    "E6": (_E6, 1),
    "E12": (_E12, 1),
    "E24": (_E24, 1),
    "E48": (_E48, 2),
    "E96": (_E96, 2),
    "E192": (_E192, 2),
}

#: IEC 60063:2015 series as mantissas 1.0 <= m < 10, coarsest first.
SERIES: dict[str, tuple[float, ...]] = {
    name: tuple(float(f"{d}e-{k}") for d in digits) for name, (digits, k) in _DIGITS.items()
}

#: The tolerance each series is usually paired with. IEC 60063:2015 loosened
#: the tie between series and tolerance; these are common practice
#: (E3 > 20 %, E6 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %, E192 0.5 %).
SERIES_TOLERANCE: dict[str, float] = {
    "E3": 0.40,
    "E6": 0.20,
    "E12": 0.10,
    "E24": 0.05,
    "E48": 0.02,
    "E96": 0.01,
    "E192": 0.005,
}

_REL_TOL = 1e-9


def _check_series(series: str) -> None:
    if series not in _DIGITS:
        raise ValueError(f"unknown E-series {series!r}: expected one of {', '.join(_DIGITS)}")


@lru_cache(maxsize=1024)
def _decade(series: str, exp: int) -> tuple[float, ...]:
    """The series values of one decade [10**exp, 10**(exp+1)), correctly rounded."""
    digits, k = _DIGITS[series]
    return tuple(float(f"{d}e{exp - k}") for d in digits)


def _neighbourhood(value: float, series: str) -> list[float]:
    e = math.floor(math.log10(value))
    out: list[float] = []
    for dd in (e - 1, e, e + 1):
        out.extend(_decade(series, dd))
    return out


@lru_cache(maxsize=4096)  # a pure function of the value; designs repeat values (issue 13 item 13)
def series_of(value: float) -> tuple[str, ...]:
    """The E-series (coarsest first) that contain ``value`` at some decade.

    A value matches when it is within a relative ``1e-9`` of a series value.
    Zero, negative and non-finite values belong to no series.

    Examples
    --------
    >>> series_of(10e3)
    ('E3', 'E6', 'E12', 'E24', 'E48', 'E96', 'E192')
    >>> series_of(4.75e3)
    ('E96', 'E192')
    >>> series_of(4.8e3)
    ()
    """
    return _series_of(float(value))


@lru_cache(maxsize=4096)
def _series_of(v: float) -> tuple[str, ...]:
    """:func:`series_of` for one float, cached: a design repeats few values, each costs ~300 compares."""
    if not (math.isfinite(v) and v > 0):
        return ()
    found = []
    for name in _DIGITS:
        if any(math.isclose(v, c, rel_tol=_REL_TOL) for c in _neighbourhood(v, name)):
            found.append(name)
    return tuple(found)


def nearest_in_series(value: float, series: str) -> tuple[float, float]:
    """The nearest ``series`` values at or below and at or above ``value``.

    A value in the series (relative ``1e-9``) returns that series value
    twice.

    Raises
    ------
    ValueError
        For an unknown series or a value that is not positive and finite.

    Examples
    --------
    >>> nearest_in_series(4800.0, "E192")
    (4750.0, 4810.0)
    >>> nearest_in_series(1e-7, "E12")
    (1e-07, 1e-07)
    """
    _check_series(series)
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"{value!r} has no nearest preferred value: it must be positive and finite")
    cands = _neighbourhood(v, series)
    for c in cands:
        if math.isclose(v, c, rel_tol=_REL_TOL):
            return c, c
    below = max(c for c in cands if c < v)
    above = min(c for c in cands if c > v)
    return below, above


def series_for_tolerance(tol: float | None) -> str:
    """The series a part's tolerance suggests (common practice, IEC 60063:2015 loose tie).

    The coarsest series whose usual tolerance (:data:`SERIES_TOLERANCE`)
    is no wider than ``tol``: 10 % -> E12, 5 % -> E24, 2 % -> E48,
    1 % -> E96, 0.5 % and tighter -> E192, 20 % -> E6, wider -> E3. Values
    between steps take the finer series (3 % -> E48), so that the series'
    steps stay within the part's spread. ``None`` (no tolerance given)
    gives ``"E24"``, the common default for resistors.

    Examples
    --------
    >>> series_for_tolerance(0.05), series_for_tolerance(0.01), series_for_tolerance(0.001)
    ('E24', 'E96', 'E192')
    """
    if tol is None:
        return "E24"
    t = float(tol)
    if not math.isfinite(t) or t < 0:
        raise ValueError(f"tolerance {tol!r} must be a non-negative fraction")
    for name in _DIGITS:  # coarsest first
        if SERIES_TOLERANCE[name] <= t * (1 + 1e-9):
            return name
    return "E192"


def series_values(series: str, lo: float, hi: float) -> np.ndarray:
    """Every value of ``series`` in ``[lo, hi]`` (inclusive, relative ``1e-9``), ascending.

    Each value is the correctly rounded float of its decimal text
    (``4.7e3``), so ``series_values("E24", 1, 10)`` ends in exactly
    ``10.0``.

    Raises
    ------
    ValueError
        Unknown series, non-positive or non-finite bounds, or ``lo > hi``.

    Examples
    --------
    >>> series_values("E6", 1e3, 1e4).tolist()
    [1000.0, 1500.0, 2200.0, 3300.0, 4700.0, 6800.0, 10000.0]
    """
    _check_series(series)
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi) and lo > 0 and hi > 0):
        raise ValueError(f"range [{lo!r}, {hi!r}] must be positive and finite")
    if lo > hi:
        raise ValueError(f"range [{lo!r}, {hi!r}] is empty: lo is above hi")
    e0 = math.floor(math.log10(lo)) - 1
    e1 = math.floor(math.log10(hi)) + 1
    vals = np.array([c for e in range(e0, e1 + 1) for c in _decade(series, e)], dtype=float)
    keep = (vals >= lo * (1 - _REL_TOL)) & (vals <= hi * (1 + _REL_TOL))
    return vals[keep]
