"""SPICE numbers: a decimal number, an exponent, a scale factor in any case, then anything."""

from __future__ import annotations

import math
import re
from decimal import Decimal, InvalidOperation, Overflow, Underflow, localcontext

from ..errors import ValueTextError
from ..values import PREFIX_EXPONENT


#: SPICE's scale-factor letters (ngspice manual, "Conventions": any case) ->
#: the SI prefix each stands for; the powers of ten are pipeline.values' own.
#: ``MEG`` is mega and ``M`` milli, unlike SI.
_SPICE_PREFIX = (("MEG", "M"), ("T", "T"), ("G", "G"), ("K", "k"), ("M", "m"), ("U", "u"), ("N", "n"),
                 ("P", "p"), ("F", "f"))
#: ``MIL``: a thousandth of an inch, 25.4 um (the inch is 25.4 mm exactly, international yard and pound, 1959).
_MIL = Decimal("25.4e-6")

#: SPICE scale factors: letters -> factor, longest first (``MEG`` and ``MIL`` before ``M``).
SCALE_FACTORS: tuple[tuple[str, Decimal], ...] = tuple(sorted(
    [*((letters, Decimal(1).scaleb(PREFIX_EXPONENT[si])) for letters, si in _SPICE_PREFIX), ("MIL", _MIL)],
    key=lambda item: -len(item[0])))


NUM_RE = re.compile(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(.*)\Z", re.S)


PLAIN_NUM = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")


def _split_number(token: str) -> tuple[Decimal, str, str] | None:
    """``(decimal value, scale letters, ignored rest)`` or ``None``."""
    m = NUM_RE.match(token)
    if not m:
        return None
    num, rest = m.group(1), m.group(2)
    with localcontext() as ctx:
        ctx.traps[Overflow] = ctx.traps[Underflow] = ctx.traps[InvalidOperation] = False
        try:
            d = Decimal(num)
        except InvalidOperation:  # pragma: no cover - the regex admits only numbers
            return None
        up = rest.upper()
        for letters, factor in SCALE_FACTORS:
            if up.startswith(letters):
                return d * factor, rest[: len(letters)], rest[len(letters):]
    return d, "", rest


def parse_number(token: str) -> float:
    """Read a number as SPICE does (scale factors in any case, rest ignored).

    The value is converted exactly (decimal arithmetic, one rounding to
    float), so ``"4.7k"`` is ``4700.0`` and ``"1mil"`` ``2.54e-05``.

    Parameters
    ----------
    token : str
        The text, e.g. ``"10kOhm"``, ``"1MEG"``, ``"100pF"``, ``"1e-3"``.

    Returns
    -------
    float

    Raises
    ------
    ValueTextError
        When ``token`` does not start with a number, or overflows.

    Examples
    --------
    >>> parse_number("10kOhm"), parse_number("1Meg"), parse_number("1m"), parse_number("100pF")
    (10000.0, 1000000.0, 0.001, 1e-10)
    >>> parse_number("2k2")     # SPICE ignores what follows the scale factor
    2000.0
    """
    got = _split_number(token.strip())
    if got is None:
        raise ValueTextError(f"'{token}' is not a number")
    value = float(got[0])
    if not math.isfinite(value):
        raise ValueTextError(f"'{token}' is out of range")
    return value


def number_warning(token: str, letter: str) -> str | None:
    """A sentence when SPICE's reading of ``token`` is probably not what was meant."""
    got = _split_number(token)
    if got is None:
        return None
    _, scale, rest = got
    if scale.upper() == "M" and rest.upper().startswith("OHM"):
        return f"'{token}' reads as milliohms in SPICE (M is milli); write {token[:len(token) - len(scale + rest)]}Meg for megohms"
    if rest[:1].isdigit():
        return (f"'{token}' reads as {fmt(parse_number(token))} in SPICE, which knows no RKM code; "
                f"write it with a decimal point (e.g. 2.2k for 2k2)")
    if letter == "c" and scale == "F" and rest == "":
        return f"'{token}' reads as femtofarads in SPICE (F is femto); write the number alone for farads"
    return None


def fmt(v: float) -> str:
    return f"{v:.6g}"
