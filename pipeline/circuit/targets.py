"""Targets and quantities as a design writes them: ``"1kHz ±10%"``, ``"0.9kHz .. 1.1kHz"``, ``"3.3V"``."""

from __future__ import annotations

import math
import re

from .. import values as _values
from ..errors import ValueTextError
from ..model import Target

__all__ = ["parse_target", "quantity"]

_UNIT_SUFFIX = {"Hz": "hz", "V": "v", "A": "a", "W": "w"}
_PM_RE = re.compile(r"±|\+/-|\+-")


@_values.located
def quantity(text: str, unit: str) -> float:
    """A signed number with an optional unit, e.g. ``-10``, ``1.0kHz``, ``50mV``.

    Raises :class:`~pipeline.errors.ValueTextError` on bad text, or with
    ``at=Where(...)`` the error located there (:func:`pipeline.values.located`).

    >>> quantity("1.0kHz", "Hz"), quantity("-50mV", "V"), quantity("4k7", "ohm")
    (1000.0, -0.05, 4700.0)
    """
    t = re.sub(r"\s+", "", text)
    neg = False
    if t[:1] in "+-" and t:
        neg = t[0] == "-"
        t = t[1:]
    if not t:
        raise ValueTextError(f"'{text.strip()}' is not a number")
    if unit == "ohm":
        v = _values.parse_value(t, "ohm")
    else:
        suf = _UNIT_SUFFIX.get(unit)
        if suf and t.lower().endswith(suf) and len(t) > len(suf):
            t = t[: -len(suf)]
        v = _values.parse_value(t, "")
    return -v if neg else v


@_values.located
def parse_target(text: str, figure: str = "", unit: str = "") -> Target:
    """Parse a target: ``"1kHz ±10%"``, ``"2.5V +/- 50mV"`` or ``"0.9kHz .. 1.1kHz"``.

    The allowed error is a percentage of the aim or an absolute amount in
    the figure's unit; a range gives its middle as the aim. Raises
    :class:`~pipeline.errors.ValueTextError` on bad text, or with
    ``at=Where(...)`` the error located there.

    >>> t = parse_target("1.0kHz ±10%", "f0", "Hz")
    >>> (t.aim, round(t.lo, 6), round(t.hi, 6))
    (1000.0, 900.0, 1100.0)
    >>> parse_target("-10 +/- 0.5", "gain").lo
    -10.5
    """
    if not isinstance(text, str) or not text.strip():
        raise ValueTextError("a target is text such as \"1kHz ±5%\" or \"0.9kHz .. 1.1kHz\"")
    t = text.strip()
    if ".." in t:
        a, b = t.split("..", 1)
        lo, hi = quantity(a, unit), quantity(b, unit)
        if not lo < hi:
            raise ValueTextError(f"target range '{t}' must go from low to high")
        return Target(figure, t, (lo + hi) / 2.0, lo, hi)
    parts = _PM_RE.split(t, maxsplit=1)
    if len(parts) != 2:
        raise ValueTextError(f"target '{t}' needs its allowed error, e.g. \"{t} ±5%\" or a range \"lo .. hi\"")
    aim = quantity(parts[0], unit)
    tol = parts[1].strip()
    if tol.endswith("%"):
        half = abs(aim) * _values.parse_tolerance(tol)
    else:
        half = quantity(tol, unit)
    if not (half > 0 and math.isfinite(half)):
        raise ValueTextError(f"the allowed error in '{t}' must be above zero")
    return Target(figure, t, aim, aim - half, aim + half)
