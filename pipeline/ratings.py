"""Design-value checks: preferred values, voltage and power ratings, safety caution.

One entry function, :func:`check_values`, turns a :class:`~pipeline.model.Design`
into findings. Everything here is arithmetic on declared values; nothing is
simulated.

Checks and their codes
----------------------
``values.series`` (info)
    A resistor, capacitor or inductor value that is an IEC 60063 preferred
    value, naming the coarsest series it is in.
``values.off-series`` (warning)
    A value in no series E3 .. E192: names the nearest values below and
    above in E192 and in the series its tolerance suggests
    (:func:`pipeline.values.series_for_tolerance`; with no tolerance, E24
    for resistors and E12 for capacitors and inductors, common practice).
    Zero-ohm links are skipped.
``ratings.capacitor-voltage`` (error / warning / info)
    Working voltage across a capacitor against its voltage rating: error
    above the rating, warning above the derated limit, info for a polarised
    capacitor of unstated type that passes as aluminium but not as tantalum.
``ratings.capacitor-polarity`` (error)
    A polarised capacitor whose ``+`` pin sits on a lower declared voltage
    than its ``-`` pin.
``ratings.resistor-power`` (error / warning)
    Dissipation ``P = V**2 / R`` against the power rating: error above the
    rating, warning above half of it (50 % margin); a zero-ohm link between
    nets at different declared voltages is a warning (a short). Zero-ohm
    links are rated by current, not power, and are not asked for a rating.
``values.zero`` (error)
    A capacitor or inductor of value 0: no part (a 0 ohm resistor is a link).
``ratings.missing`` (info)
    Fitted resistors with no power rating or capacitors with no voltage
    rating: one note for those whose voltage across is unknown, one for
    those that need more than the smallest common rating
    (:data:`UNRATED_SAFE_W`, :data:`UNRATED_SAFE_V`) with the least rating
    each needs; a part whose need is within that is safe and not named.
``ratings.no-voltages`` (info)
    No net voltage is declared at all, so no rating can be checked.
``safety.caution`` (warning)
    One finding when any net is declared above 30 V or is a battery net.

Assumptions (common practice, stated so that users can see them)
-----------------------------------------------------------------
* Voltage across a two-terminal part comes from its two nets' declared
  ``Net.voltage`` and ``Net.voltage_max``; the worst case over both figures of
  both nets is used (so a charged cell's maximum counts). A net named
  ``GND`` (also ``AGND``, ``DGND``, ``PGND`` and the SPICE node ``0``, any
  case) is 0 V when it declares nothing; any other net without a declared
  voltage is unknown, and so is a pin on no net.
* A part of kind ``capacitor`` is taken to be a class II ceramic (X5R, X7R,
  ...), the usual small SMD capacitor, unless its note or extra fields name
  another type: class II ceramics lose capacitance under DC bias, so the
  working voltage is kept to at most 50 % of the rating (REFERENCES.md
  section 7, common practice). Class I ceramics (C0G/NP0) and film
  capacitors have no such loss and are allowed 80 % (common practice).
* A part of kind ``capacitor-polarized`` is taken to be an aluminium
  electrolytic, allowed 80 % of its rating (common practice), because that is
  what the kind most often is. A note or extra field naming ``tantalum``
  switches to 50 %, the usual derating for manganese-dioxide tantalum
  capacitors, whose failure under surge is a short that can burn (common
  practice); ``polymer`` keeps 80 %. When the type is not named and the
  working voltage lies between 50 % and 80 %, an info finding says so.
* Resistors: full power to 70 degC, derated to zero at 155 degC; design at
  <= 50 % of the rating (REFERENCES.md section 7, common practice).
* Inductor and ferrite current ratings are not modelled and not checked.
* Preferred values are checked on every part (fitted or not); ratings only on
  fitted parts.

Findings come out deterministic: design-level findings first, then by part
ref in natural order (R2 before R10), each part's checks in a fixed order.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

from pipeline.findings_group import listed
from pipeline.graph import is_ground, pin_net_map
from pipeline.model import Design, Finding, Net, Part, PinRef
from pipeline.order import natural_key
from pipeline.values import (
    format_quantity,
    format_value,
    nearest_in_series,
    series_for_tolerance,
    series_of,
)

__all__ = [
    "check_values",
    "CAUTION_VOLTS",
    "CERAMIC_CLASS2_FRACTION",
    "CLASS1_FILM_FRACTION",
    "ALUMINIUM_FRACTION",
    "TANTALUM_FRACTION",
    "RESISTOR_POWER_FRACTION",
    "UNRATED_SAFE_W",
    "UNRATED_SAFE_V",
]

#: A net above this voltage (magnitude) brings the safety caution.
CAUTION_VOLTS = 30.0
#: Class II ceramic: working voltage at most half the rating (REFERENCES.md s. 7).
CERAMIC_CLASS2_FRACTION = 0.5
#: Class I ceramic (C0G/NP0) and film: at most 80 % (common practice).
CLASS1_FILM_FRACTION = 0.8
#: Aluminium electrolytic and polymer: at most 80 % (common practice).
ALUMINIUM_FRACTION = 0.8
#: Manganese-dioxide tantalum: at most 50 % (common practice).
TANTALUM_FRACTION = 0.5
#: Resistor dissipation at most half the rating (REFERENCES.md s. 7).
RESISTOR_POWER_FRACTION = 0.5
#: A resistor without a rating that needs at most this (W, after the margin) gets no note: the
#: smallest common chip resistor, 0201, is rated 1/20 W (common practice, from memory).
UNRATED_SAFE_W = 0.05
#: A capacitor without a rating that needs at most this (V, after derating) gets no note: the
#: lowest widely stocked ceramic rating is 6.3 V (common practice, from memory).
UNRATED_SAFE_V = 6.3

_VALUE_UNIT = {"resistor": "ohm", "capacitor": "F", "capacitor-polarized": "F", "inductor": "H"}
_DEFAULT_SERIES = {"resistor": "E24", "capacitor": "E12", "capacitor-polarized": "E12", "inductor": "E12"}
_EPS = 1e-9

_TYPE_PATTERNS: tuple[tuple[str, re.Pattern[str]], ...] = (
    ("polymer electrolytic", re.compile(r"polymer", re.I)),
    ("tantalum", re.compile(r"tantal", re.I)),
    ("aluminium electrolytic", re.compile(r"alumin|electrolytic", re.I)),
    ("class I ceramic", re.compile(r"\b(c0g|cog|np0|npo)\b|class\s*(1|i)\b", re.I)),
    ("film capacitor", re.compile(r"\bfilm\b", re.I)),
    ("class II ceramic", re.compile(r"\b(x5r|x6s|x7r|x7s|x7t|x8r|y5v|z5u)\b|class\s*(2|ii)\b", re.I)),
)
_TYPE_FRACTION = {
    "polymer electrolytic": ALUMINIUM_FRACTION,
    "tantalum": TANTALUM_FRACTION,
    "aluminium electrolytic": ALUMINIUM_FRACTION,
    "class I ceramic": CLASS1_FILM_FRACTION,
    "film capacitor": CLASS1_FILM_FRACTION,
    "class II ceramic": CERAMIC_CLASS2_FRACTION,
}


# --------------------------------------------------------------------------
# Small helpers
# --------------------------------------------------------------------------


def _show(value: float, unit: str) -> str:
    text = format_value(value, unit)
    return f"{text} ohm" if unit == "ohm" else text


def _volts(v: float) -> str:
    return format_quantity(v, "V", 3)


def _watts(w: float) -> str:
    return format_quantity(w, "W", 3)


def _pct(fraction: float) -> str:
    return f"{fraction * 100:.3g} %"


def _net_volts(net: Net) -> tuple[float, ...] | None:
    """Declared voltages of a net (nominal and max), 0 V for an undeclared ground, else None."""
    vs = tuple(float(v) for v in (net.voltage, net.voltage_max) if v is not None)
    if vs:
        return vs
    if is_ground(net.name):
        return (0.0,)
    return None


@dataclass(frozen=True)
class _Across:
    """Worst-case voltage across two pins and the nets that give it."""

    volts: float
    net_a: str
    net_b: str


def _across(part: Part, pin_a: str, pin_b: str, pin_nets: dict[PinRef, list[Net]]) -> _Across | None:
    nets_a = pin_nets.get(PinRef(part.ref, pin_a), [])
    nets_b = pin_nets.get(PinRef(part.ref, pin_b), [])
    if not nets_a or not nets_b:
        return None
    best: _Across | None = None
    for na in nets_a:
        va = _net_volts(na)
        for nb in nets_b:
            vb = _net_volts(nb)
            if va is None or vb is None:
                return None
            v = max(abs(x - y) for x in va for y in vb)
            if best is None or v > best.volts:
                best = _Across(v, na.name, nb.name)
    return best


@dataclass(frozen=True)
class _Missing:
    """A fitted part without the rating it needs: ``what`` is "power" or "voltage"; ``need`` says
    what it needs when the voltage across it is known (None: unknown)."""

    what: str
    ref: str
    across: _Across | None
    need: str | None


def _missing_summary(found: list[_Missing]) -> list[Finding]:
    """``ratings.missing`` notes, one per kind of rating and known / unknown voltage, listing the
    parts (one line per part would drown the findings that need action); a single part keeps its
    own message."""
    out = []
    for what in ("power", "voltage"):
        for known in (False, True):
            group = sorted((m for m in found if m.what == what and (m.need is not None) == known),
                           key=lambda m: natural_key(m.ref))
            if len(group) == 1:
                m = group[0]
                subject = (m.ref, m.across.net_a, m.across.net_b) if m.across else (m.ref,)
                msg = (f"{m.ref} has no {what} rating: it {m.need}." if known else
                       f"{m.ref} has no {what} rating and the voltage across it is unknown: "
                       f"declare its nets' voltages and give it a rating.")
                out.append(Finding("info", "ratings.missing", subject, msg))
            elif group:
                refs = tuple(m.ref for m in group)
                if known:
                    msg = (f"{len(refs)} parts have no {what} rating and need one: "
                           + listed((f"{m.ref} {m.need}" for m in group), sep="; ") + ".")
                else:
                    msg = (f"{listed(refs)} have no {what} rating and the voltage across them is "
                           f"unknown: declare their nets' voltages and give them ratings.")
                out.append(Finding("info", "ratings.missing", refs, msg))
    return out


def _two_pins(part: Part) -> tuple[str, str] | None:
    if len(part.pins) != 2:
        return None
    return part.pins[0].number, part.pins[1].number


def _capacitor_type(part: Part) -> str | None:
    text = " ".join([part.note, *(v for _, v in part.extra)])
    for name, pat in _TYPE_PATTERNS:
        if pat.search(text):
            return name
    return None


# --------------------------------------------------------------------------
# Preferred values
# --------------------------------------------------------------------------
def _value_findings(part: Part) -> list[Finding]:
    """The part's ``values.series`` or ``values.off-series`` finding (none for a value of no series
    unit, or not above 0)."""
    note = _value_note(part.kind, part.value, part.tolerance)
    return [] if note is None else [Finding(note[0], note[1], (part.ref,), f"{part.ref} {note[2]}")]


@lru_cache(maxsize=4096)  # pure; a design repeats few kind, value and tolerance triples (issue 11)
def _value_note(kind: str, value: float | None, tolerance: float | None) -> tuple[str, str, str] | None:
    """``(severity, code, message after the ref)`` of :func:`_value_findings`, or None."""
    unit = _VALUE_UNIT.get(kind)
    if unit is None or value is None or not (value > 0 and math.isfinite(value)):
        return None
    v = float(value)
    shown = _show(v, unit)
    found = series_of(v)
    if found:
        also = f"; also in {', '.join(found[1:])}" if len(found) > 1 else ""
        return "info", "values.series", f"{shown} is an {found[0]} preferred value (IEC 60063){also}."
    lo, hi = nearest_in_series(v, "E192")
    msg = f"{shown} is in no E-series (IEC 60063): nearest E192 values {_show(lo, unit)} and {_show(hi, unit)}"
    if tolerance is not None:
        tseries = series_for_tolerance(tolerance)
        why = f"its {_pct(tolerance)} tolerance suggests {tseries}"
    else:
        tseries = _DEFAULT_SERIES[kind]
        why = f"no tolerance given, {tseries} assumed for a {kind}"
    if tseries == "E192":
        msg += f" ({why})."
    else:
        tlo, thi = nearest_in_series(v, tseries)
        msg += f"; nearest {tseries} values {_show(tlo, unit)} and {_show(thi, unit)} ({why})."
    return "warning", "values.off-series", msg


# --------------------------------------------------------------------------
# Ratings
# --------------------------------------------------------------------------
def _capacitor_findings(part: Part, pin_nets: dict[PinRef, list[Net]]) -> list[Finding | _Missing]:
    pins = _two_pins(part)
    if pins is None:
        return []
    across = _across(part, pins[0], pins[1], pin_nets)
    polarized = part.kind == "capacitor-polarized"
    stated = _capacitor_type(part)
    if stated is None:
        used = "aluminium electrolytic" if polarized else "class II ceramic"
        ctype = f"assumed {used}"
    else:
        used = ctype = stated
    frac = _TYPE_FRACTION[used]
    out: list[Finding | _Missing] = _polarity(part, pin_nets) if polarized else []
    if part.rating_v is None:
        return out + _unrated_capacitor(part, across, frac, ctype)
    if across is None:
        return out
    return out + _capacitor_margin(part, across, frac, ctype, tantalum_note=polarized and stated is None)


def _unrated_capacitor(part: Part, across, frac: float, ctype: str) -> list[_Missing]:
    """A capacitor with no rating: missing always, with the needed rating when above the safe bound."""
    if across is None:
        return [_Missing("voltage", part.ref, None, None)]
    need = across.volts / frac
    if need <= UNRATED_SAFE_V * (1 + _EPS):
        return []
    return [_Missing("voltage", part.ref, across,
                     f"sees up to {_volts(across.volts)} between {across.net_a} and {across.net_b}, "
                     f"so it needs at least {_volts(need)} ({ctype}, at most {_pct(frac)} of rating)")]


def _capacitor_margin(part: Part, across, frac: float, ctype: str, *, tantalum_note: bool) -> list[Finding]:
    """The rated capacitor's voltage against its rating and the derating ``frac`` of its type."""
    rating = float(part.rating_v)
    v = across.volts
    subject = (part.ref, across.net_a, across.net_b)
    where = f"{_volts(v)} between {across.net_a} and {across.net_b}"
    if v > rating * (1 + _EPS):
        return [Finding("error", "ratings.capacitor-voltage", subject,
                        f"{part.ref} sees up to {where}, above its {_volts(rating)} rating: "
                        f"choose at least {_volts(v / frac)} ({ctype}, at most {_pct(frac)} of rating).")]
    if v > frac * rating * (1 + _EPS):
        return [Finding("warning", "ratings.capacitor-voltage", subject,
                        f"{part.ref} sees up to {where}, {_pct(v / rating)} of its {_volts(rating)} rating; "
                        f"{'an' if ctype[0] in 'aeiou' else 'a'} {ctype} should work at most {_pct(frac)}: "
                        f"choose at least {_volts(v / frac)}.")]
    if tantalum_note and v > TANTALUM_FRACTION * rating * (1 + _EPS):
        return [Finding("info", "ratings.capacitor-voltage", subject,
                        f"{part.ref} sees up to {where}, {_pct(v / rating)} of its {_volts(rating)} rating: "
                        f"fine for an aluminium electrolytic (at most {_pct(ALUMINIUM_FRACTION)}) but too high "
                        f"for a tantalum (at most {_pct(TANTALUM_FRACTION)}); name the type in its note.")]
    return []


def _polarity(part: Part, pin_nets: dict[PinRef, list[Net]]) -> list[Finding]:
    names = {p.name: p.number for p in part.pins}
    plus = names.get("+", "1")
    minus = names.get("-", "2")

    def nominal(pin: str) -> tuple[float, str] | None:
        nets = pin_nets.get(PinRef(part.ref, pin), [])
        if len(nets) != 1:
            return None
        vs = _net_volts(nets[0])
        if vs is None:
            return None
        return vs[0], nets[0].name

    a, b = nominal(plus), nominal(minus)
    if a is None or b is None or not a[0] < b[0] - _EPS:
        return []
    return [
        Finding(
            "error",
            "ratings.capacitor-polarity",
            (part.ref, a[1], b[1]),
            f"{part.ref} is reverse-biased: its + pin is on {a[1]} ({_volts(a[0])}) and its - pin "
            f"on {b[1]} ({_volts(b[0])}); turn it round.",
        )
    ]


def _resistor_findings(part: Part, pin_nets: dict[PinRef, list[Net]]) -> list[Finding | _Missing]:
    pins = _two_pins(part)
    if pins is None or part.value is None:
        return []
    across = _across(part, pins[0], pins[1], pin_nets)
    r = float(part.value)
    if r == 0.0:  # a zero-ohm link: rated by current, not power; only a short matters
        if across is not None and across.volts > _EPS:
            return [
                Finding(
                    "warning",
                    "ratings.resistor-power",
                    (part.ref, across.net_a, across.net_b),
                    f"{part.ref} is a zero-ohm link between {across.net_a} and {across.net_b}, "
                    f"declared {_volts(across.volts)} apart: it would short them.",
                )
            ]
        return []
    if across is None:
        return [_Missing("power", part.ref, None, None)] if part.rating_w is None else []
    p = across.volts**2 / r
    subject = (part.ref, across.net_a, across.net_b)
    how = (
        f"{_watts(p)} ({_volts(across.volts)} across {_show(r, 'ohm')}, "
        f"between {across.net_a} and {across.net_b})"
    )
    need = p / RESISTOR_POWER_FRACTION
    if part.rating_w is None:
        if need <= UNRATED_SAFE_W * (1 + _EPS):
            return []
        return [_Missing("power", part.ref, across,
                         f"dissipates up to {how}, so it needs at least {_watts(need)} (50 % margin)")]
    rating = float(part.rating_w)
    if p > rating * (1 + _EPS):
        return [
            Finding(
                "error",
                "ratings.resistor-power",
                subject,
                f"{part.ref} dissipates up to {how}, above its {_watts(rating)} rating: "
                f"choose at least {_watts(need)} (50 % margin).",
            )
        ]
    if p > RESISTOR_POWER_FRACTION * rating * (1 + _EPS):
        return [
            Finding(
                "warning",
                "ratings.resistor-power",
                subject,
                f"{part.ref} dissipates up to {how}, {_pct(p / rating)} of its {_watts(rating)} rating; "
                f"keep it at most 50 %: choose at least {_watts(need)}.",
            )
        ]
    return []


# --------------------------------------------------------------------------
# Design-level findings
# --------------------------------------------------------------------------
def _caution(design: Design) -> list[Finding]:
    battery = sorted((n.name for n in design.nets if n.battery), key=natural_key)
    high: list[tuple[str, float]] = []
    for n in design.nets:
        vs = [abs(float(v)) for v in (n.voltage, n.voltage_max) if v is not None]
        if vs and max(vs) > CAUTION_VOLTS:
            high.append((n.name, max(vs)))
    high.sort(key=lambda t: natural_key(t[0]))
    if not battery and not high:
        return []
    what = []
    if battery:
        what.append(f"{', '.join(battery)} {'is a battery supply' if len(battery) == 1 else 'are battery supplies'}")
    if high:
        what.append(
            ", ".join(f"{name} is declared at {_volts(v)}" for name, v in high)
            + f" (above {_volts(CAUTION_VOLTS)})"
        )
    advice = "work on the board unpowered"
    if battery:
        advice += " with the battery disconnected, handle lithium cells with care (a shorted, punctured or overcharged cell can overheat and burn)"
    advice += ", and defer to your local electrical codes and licensed practice"
    if high:
        advice += " for anything above 30 V"
    subject = tuple(sorted({*battery, *(name for name, _ in high)}, key=natural_key))
    return [Finding("warning", "safety.caution", subject, f"{' and '.join(what)}: {advice}.")]


def _no_voltages(design: Design) -> list[Finding]:
    if any(n.voltage is not None or n.voltage_max is not None for n in design.nets):
        return []
    if not any(
        not p.dnp and p.kind in ("resistor", "capacitor", "capacitor-polarized") for p in design.parts
    ):
        return []
    return [
        Finding(
            "info",
            "ratings.no-voltages",
            (),
            "No net voltages are declared, so no capacitor or resistor rating can be checked against "
            "the voltage across it: declare them in the design's voltages table.",
        )
    ]


def check_values(design: Design) -> tuple[Finding, ...]:
    """Preferred-value, rating and safety findings for a design.

    Parameters
    ----------
    design : Design
        Parts with parsed values (ohm, F, H), tolerances (fractions) and
        ratings (V, W); nets with declared voltages (V).

    Returns
    -------
    tuple of Finding
        Design-level findings (``safety.caution``, ``ratings.no-voltages``)
        first, then per part in natural ref order: ``values.*`` then
        ``ratings.*``. See the module docstring for codes, severities and
        assumptions.

    Notes
    -----
    Method: for each two-terminal part, the worst-case voltage across it is
    the largest ``|Va - Vb|`` over the declared nominal and maximum voltages
    of its two nets. Capacitors: ``V <= k * V_rated`` with ``k`` = 0.5 for
    class II ceramics and tantalum, 0.8 for class I ceramics, film,
    aluminium and polymer (common practice; REFERENCES.md section 7 for the
    ceramic rule). Resistors: ``P = V**2 / R <= 0.5 * P_rated``
    (REFERENCES.md section 7). Cost: linear in parts plus pins.

    Examples
    --------
    >>> from pipeline.model import Design, Net, Part, PinDef, PinRef
    >>> pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    >>> r1 = Part("R1", "resistor", "0603", pins, value=100.0, rating_w=0.125)
    >>> nets = (Net("VCC", (PinRef("R1", "1"),), voltage=5.0), Net("GND", (PinRef("R1", "2"),)))
    >>> [f.check for f in check_values(Design("d", "A", "d.toml", (r1,), nets))]
    ['values.series', 'ratings.resistor-power']
    """
    pin_nets = pin_net_map(design)
    head = _caution(design) + _no_voltages(design)
    per_part: list[tuple[tuple, list[Finding]]] = []
    in_series: list[Part] = []
    missing: list[_Missing] = []
    for part in design.parts:
        found = _zero_value(part)
        note = _value_note(part.kind, part.value, part.tolerance)
        if note is not None and note[1] == "values.series":
            in_series.append(part)  # summarized below: no finding of its own unless it is the only one
        elif note is not None:
            found += _value_findings(part)
        if not part.dnp:
            if part.kind in ("capacitor", "capacitor-polarized"):
                found += _capacitor_findings(part, pin_nets)
            elif part.kind == "resistor":
                found += _resistor_findings(part, pin_nets)
        missing += [f for f in found if isinstance(f, _Missing)]
        found = [f for f in found if isinstance(f, Finding)]
        if found:
            per_part.append((natural_key(part.ref), found))
    per_part.sort(key=lambda t: t[0])
    return tuple(head + _series_summary(in_series) + _missing_summary(missing)
                 + [f for _, fs in per_part for f in fs])


def _zero_value(part: Part) -> list:
    """A capacitor or inductor of value 0 is no part (a 0 ohm resistor is a link, and fine)."""
    unit = _VALUE_UNIT.get(part.kind)
    if unit not in ("F", "H") or part.value is None or part.value != 0:
        return []
    return [Finding("error", "values.zero", (part.ref,),
                    f"{part.ref} is a {part.kind} of value 0, which is no part: give its real value, or "
                    f"remove it (a link is a 0 ohm resistor).", kind="zero")]


def _series_summary(in_series: list[Part]) -> list[Finding]:
    """One ``values.series`` finding for all parts on preferred values, grouped
    by the coarsest series each belongs to (one line per part would drown
    the findings that need action); a single part keeps its own message."""
    if len(in_series) <= 1:
        return [f for part in in_series for f in _value_findings(part)]
    by_series: dict[str, list[str]] = {}
    ordered = sorted(in_series, key=lambda p: natural_key(p.ref))
    for part in ordered:
        v = float(part.value)
        by_series.setdefault(series_of(v)[0], []).append(f"{part.ref} {_show(v, _VALUE_UNIT[part.kind])}")
    order = sorted(by_series, key=lambda name: int(name[1:]))
    groups = "; ".join(f"{name}: {listed(by_series[name])}" for name in order)
    refs = tuple(p.ref for p in ordered)
    return [Finding("info", "values.series", refs,
                    f"{len(refs)} values are IEC 60063 preferred values, each listed under the coarsest "
                    f"series that holds it: {groups}.")]
