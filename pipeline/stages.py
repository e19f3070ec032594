"""Stage 4: what each declared circuit stage really does, and how to fix it.

Entry point: :func:`analyse_stages`; :func:`stage_sections` turns its
reports into (heading, html) pairs for ``report.html``.

A design declares stages in ``[stages.NAME]`` tables (one per stage)::

    [stages.antinoise]
    type = "sallen-key-lowpass"
    parts = { R1 = "R3", R2 = "R4", Cf = "C3", Cg = "C4", amp = "U1" }   # role = ref
    targets = { f0 = "1.0kHz ±10%", q = "0.707 ±10%" }                 # figure = target
    series = { resistor = "E24", capacitor = "E12" }                   # retune series

:data:`STAGE_TYPES` lists every type with its roles, figures and keys; the
README documents them from it. For each stage the analysis gives

* the nominal figures from the sized values (closed forms of
  :mod:`pipeline.filters`, ideal op-amps and comparators);
* each target as a pass/fail finding (``error`` when the nominal value is
  outside it, so ``snugboard run`` exits 1);
* the spread from component tolerances: the extremes over all ``2**n``
  tolerance corners (plus the nominal point; for a figure that is not
  monotonic in every part, such as ``q``, this bounds the corners, not
  every interior point) and a seeded Monte Carlo of ``draws`` builds with
  each part uniform within its tolerance, independent, giving the 1st /
  50th / 99th percentiles and the share of builds outside each target;
* for a filter, its frequency response by ``scipy.signal.freqs``, nominal
  and the envelope over the tolerance corners;
* for a stage that misses a target, retune proposals: preferred values
  (IEC 60063 series, default E24 resistors / E12 capacitors) ranked by the
  combined error on all targets at once.

A part without a tolerance is taken as 5 % (resistor) or 10 % (capacitor)
and an ``info`` finding says so.

Finding codes
-------------
========================  ========  ==========================================
code                      severity  what
========================  ========  ==========================================
stage.summary             info      the stage's figures and their spread
stage.target-missed       error     a nominal figure outside its target
stage.target-met          info      a nominal figure inside its target
stage.unstable            error     a Sallen-Key section with too much gain
stage.led-off             error     an LED whose supply cannot forward-bias it
stage.spread              warning   tolerances push a figure out of target
stage.retune              info      preferred values that meet every target
stage.retune-none         warning   no preferred-value combination meets them
stage.tolerance-assumed   info      a stage part without a tolerance
stage.assumption          info      a level the analysis assumed (VOL, VOH, ...)
stage.no-targets          info      a stage declaring no targets
========================  ========  ==========================================
"""

from __future__ import annotations

import html
import math
import re
from dataclasses import dataclass
from itertools import combinations
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from . import filters as F
from . import values as _values
from .errors import DesignError
from .model import Design, Finding, Net, Part, RawTable

__all__ = [
    "analyse_stages",
    "stage_sections",
    "stage_samples",
    "parse_target",
    "StageReport",
    "FigureReport",
    "RolePart",
    "Target",
    "Proposal",
    "Response",
    "StageType",
    "RoleSpec",
    "FigureSpec",
    "STAGE_TYPES",
    "DEFAULT_TOLERANCE",
    "DEFAULT_SERIES",
]

Progress = Callable[[str, float], None]

#: Tolerance assumed for a stage part that states none (fraction).
DEFAULT_TOLERANCE = {"resistor": 0.05, "capacitor": 0.10}
#: Series searched by retune unless the stage's ``series`` table says otherwise.
DEFAULT_SERIES = {"resistor": "E24", "capacitor": "E12"}
#: Practical value range searched by retune (ohm, F).
_BOUNDS = {"resistor": (1.0, 100e6), "capacitor": (1e-12, 1e-3)}
_MAX_PROPOSALS = 5
_HOLD_BAND = 0.2          # untargeted figures pull toward their present value (+-20 %)


# --------------------------------------------------------------------------
# Stage types
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class RoleSpec:
    """A part a stage type needs: role name, part kind and where it sits."""

    name: str
    kind: str          # "resistor", "capacitor", "amp" or "led"
    where: str
    required: bool = True


@dataclass(frozen=True)
class FigureSpec:
    """A figure a stage type computes: name (the target key), unit, label."""

    name: str
    unit: str          # "Hz", "V", "A", "W", "ohm" or "" (ratio)
    label: str


@dataclass(frozen=True)
class StageType:
    """One stage type: its roles, figures, extra keys and response kind."""

    name: str
    description: str
    roles: tuple[RoleSpec, ...]
    figures: tuple[FigureSpec, ...]
    keys: tuple[tuple[str, str], ...] = ()    # (key, meaning)
    response: str = ""                        # "lowpass2", "highpass2", "lowpass1", "highpass1"
    #: retune holds the first figure of each group near its present value
    #: when no figure of the group has a target (a weak pull, see _retune)
    holds: tuple[tuple[str, ...], ...] = ()

    def role(self, name: str) -> RoleSpec:
        for r in self.roles:
            if r.name == name:
                return r
        raise KeyError(name)


_AMP = RoleSpec("amp", "amp", "the op-amp (optional; checked to be an op-amp or comparator)", False)
_GAIN = (
    RoleSpec("Ra", "resistor", "output to the inverting input (gain 1 + Ra/Rb; with Rb)", False),
    RoleSpec("Rb", "resistor", "inverting input to ground (with Ra)", False),
)
_SK_FIGS = (
    FigureSpec("f0", "Hz", "natural frequency f0"),
    FigureSpec("q", "", "quality factor Q"),
    FigureSpec("gain", "", "pass-band gain (V/V)"),
    FigureSpec("f_3db", "Hz", "-3 dB frequency"),
)
_VOLT_KEY = "a voltage (\"3.3V\") or the name of a net with a declared voltage"

STAGE_TYPES: dict[str, StageType] = {
    t.name: t
    for t in (
        StageType(
            "sallen-key-lowpass",
            "second-order Sallen-Key low-pass, unity gain or with gain resistors Ra/Rb",
            (
                RoleSpec("R1", "resistor", "input to the middle node"),
                RoleSpec("R2", "resistor", "middle node to the non-inverting input"),
                RoleSpec("Cf", "capacitor", "middle node to the output"),
                RoleSpec("Cg", "capacitor", "non-inverting input to ground"),
                *_GAIN,
                _AMP,
            ),
            _SK_FIGS,
            response="lowpass2",
            holds=(("f0", "f_3db"), ("q",), ("gain",)),
        ),
        StageType(
            "sallen-key-highpass",
            "second-order Sallen-Key high-pass, unity gain or with gain resistors Ra/Rb",
            (
                RoleSpec("C1", "capacitor", "input to the middle node"),
                RoleSpec("C2", "capacitor", "middle node to the non-inverting input"),
                RoleSpec("Rf", "resistor", "middle node to the output"),
                RoleSpec("Rg", "resistor", "non-inverting input to ground"),
                *_GAIN,
                _AMP,
            ),
            _SK_FIGS,
            response="highpass2",
            holds=(("f0", "f_3db"), ("q",), ("gain",)),
        ),
        StageType(
            "rc-lowpass",
            "first-order RC low-pass (series R, C to ground)",
            (RoleSpec("R", "resistor", "in series"), RoleSpec("C", "capacitor", "output to ground")),
            (FigureSpec("f0", "Hz", "-3 dB frequency"),),
            response="lowpass1",
        ),
        StageType(
            "rc-highpass",
            "first-order RC high-pass (series C, R to ground)",
            (RoleSpec("C", "capacitor", "in series"), RoleSpec("R", "resistor", "output to ground")),
            (FigureSpec("f0", "Hz", "-3 dB frequency"),),
            response="highpass1",
        ),
        StageType(
            "divider",
            "unloaded resistor divider",
            (RoleSpec("Rtop", "resistor", "input to the output"),
             RoleSpec("Rbottom", "resistor", "output to ground")),
            (FigureSpec("ratio", "", "division ratio (V/V)"),
             FigureSpec("rout", "ohm", "source resistance of the output"),
             FigureSpec("vout", "V", "output voltage (needs vin)")),
            keys=(("vin", "input voltage: " + _VOLT_KEY + "; default: the declared voltage of "
                   "Rtop's other net"),),
            holds=(("ratio", "vout"), ("rout",)),
        ),
        StageType(
            "comparator-hysteresis",
            "comparator with hysteresis by positive feedback, inverting or non-inverting, "
            "push-pull or open-collector output",
            (
                RoleSpec("Rin", "resistor", "signal to the non-inverting input (non-inverting only)", False),
                RoleSpec("Rfb", "resistor", "output to the non-inverting input"),
                RoleSpec("Rtop", "resistor", "reference supply (vtop) to the reference node: the "
                         "non-inverting input (inverting) or the inverting input (non-inverting)", False),
                RoleSpec("Rbottom", "resistor", "reference node to ground", False),
                RoleSpec("Rpull", "resistor", "pull-up of an open-collector output", False),
                RoleSpec("amp", "amp", "the comparator (optional; its supply pins give vcc)", False),
            ),
            (FigureSpec("v_rise", "V", "threshold, input rising"),
             FigureSpec("v_fall", "V", "threshold, input falling"),
             FigureSpec("hysteresis", "V", "hysteresis width")),
            holds=(("v_rise",), ("v_fall",)),
            keys=(
                ("input", "\"inverting\" or \"non-inverting\": the comparator input the signal drives (required)"),
                ("output", "\"push-pull\" (default) or \"open-collector\" (alias \"open-drain\"; needs Rpull)"),
                ("vcc", "supply: " + _VOLT_KEY + "; default: the declared voltage of amp's supply net"),
                ("vref", "reference on the inverting input when there is no Rtop (non-inverting only)"),
                ("vtop", "voltage Rtop hangs from; default vcc"),
                ("vpull", "pull-up supply; default: Rpull's other net, else vcc"),
                ("voh", "push-pull high level; default vcc (rail-to-rail)"),
                ("vol", "low level; default 0 V"),
            ),
        ),
        StageType(
            "opamp-inverting",
            "inverting amplifier",
            (RoleSpec("Rin", "resistor", "input to the inverting input"),
             RoleSpec("Rf", "resistor", "output to the inverting input"), _AMP),
            (FigureSpec("gain", "", "gain -Rf/Rin (V/V, negative)"),),
        ),
        StageType(
            "opamp-noninverting",
            "non-inverting amplifier",
            (RoleSpec("Rf", "resistor", "output to the inverting input"),
             RoleSpec("Rg", "resistor", "inverting input to ground"), _AMP),
            (FigureSpec("gain", "", "gain 1 + Rf/Rg (V/V)"),),
        ),
        StageType(
            "led-resistor",
            "LED with its series resistor",
            (RoleSpec("R", "resistor", "in series with the LED"),
             RoleSpec("led", "led", "the LED")),
            (FigureSpec("current", "A", "LED current"),
             FigureSpec("power", "W", "dissipation in R")),
            keys=(
                ("vf", "LED forward voltage, e.g. \"2.0V\" (required)"),
                ("vcc", "supply: " + _VOLT_KEY + "; default: the declared voltage of R's other net"),
                ("vdrop", "drop of the driver (transistor or logic pin); default 0 V"),
            ),
            holds=(("current", "power"),),
        ),
    )
}

_COMMON_KEYS = ("type", "parts", "targets", "series", "note")


# --------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------
def _r(x: float | None, digits: int = 6) -> float | None:
    """JSON-ready rounding to ``digits`` significant digits; non-finite -> None."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}")


@dataclass(frozen=True)
class Target:
    """A figure's target: the text written, the aim and the allowed range."""

    figure: str
    text: str
    aim: float
    lo: float
    hi: float

    @property
    def half(self) -> float:
        return (self.hi - self.lo) / 2.0

    def contains(self, x: Any) -> Any:
        """True where ``x`` lies in ``[lo, hi]`` (a hair of float slack)."""
        eps = 1e-12 * max(abs(self.lo), abs(self.hi))
        x = np.asarray(x, dtype=float)
        return (x >= self.lo - eps) & (x <= self.hi + eps)

    def to_dict(self) -> dict[str, Any]:
        return {"text": self.text, "aim": _r(self.aim), "lo": _r(self.lo), "hi": _r(self.hi)}


@dataclass(frozen=True)
class RolePart:
    """A part playing a role: its value (SI) and tolerance (fraction)."""

    role: str
    ref: str
    kind: str
    value: float | None
    value_text: str
    tolerance: float | None
    tolerance_assumed: bool

    def to_dict(self) -> dict[str, Any]:
        return {
            "role": self.role, "ref": self.ref, "kind": self.kind, "value": _r(self.value),
            "value_text": self.value_text, "tolerance": _r(self.tolerance),
            "tolerance_assumed": self.tolerance_assumed,
        }


@dataclass(frozen=True)
class FigureReport:
    """One figure of a stage: nominal, target, corner extremes, percentiles."""

    name: str
    unit: str
    label: str
    nominal: float
    target: Target | None
    corner_min: float
    corner_max: float
    p01: float | None
    p50: float | None
    p99: float | None
    share_out: float | None
    passes: bool | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name, "unit": self.unit, "label": self.label,
            "nominal": _r(self.nominal),
            "target": self.target.to_dict() if self.target else None,
            "corners": {"min": _r(self.corner_min), "max": _r(self.corner_max)},
            "monte_carlo": {"p1": _r(self.p01), "p50": _r(self.p50), "p99": _r(self.p99)},
            "share_out": _r(self.share_out, 4),
            "passes": self.passes,
        }


@dataclass(frozen=True)
class Proposal:
    """A retune proposal: preferred values per role and what they give.

    ``error`` is the sum over targets of ((figure - aim) / half-width)^2;
    ``share_out`` the Monte Carlo share of builds (same tolerances, same
    seed) missing some target.
    """

    values: tuple[tuple[str, str, float], ...]      # (role, ref, value)
    figures: tuple[tuple[str, float], ...]
    error: float
    passes: bool
    share_out: float | None
    changed: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "values": [{"role": r, "ref": ref, "value": _r(v)} for r, ref, v in self.values],
            "figures": {k: _r(v) for k, v in self.figures},
            "error": _r(self.error, 4),
            "passes": self.passes,
            "share_out": _r(self.share_out, 4),
            "changed": list(self.changed),
        }


@dataclass(frozen=True)
class Response:
    """Frequency response (dB) at ``f_hz``: nominal and corner envelope."""

    f_hz: tuple[float, ...]
    nominal_db: tuple[float, ...]
    low_db: tuple[float, ...]
    high_db: tuple[float, ...]
    f0_hz: float
    f3db_hz: float
    passband_db: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "f_hz": [_r(v) for v in self.f_hz],
            "nominal_db": [_r(v, 5) for v in self.nominal_db],
            "low_db": [_r(v, 5) for v in self.low_db],
            "high_db": [_r(v, 5) for v in self.high_db],
            "f0_hz": _r(self.f0_hz), "f3db_hz": _r(self.f3db_hz), "passband_db": _r(self.passband_db),
        }


@dataclass(frozen=True)
class StageReport:
    """Everything the analysis found about one declared stage."""

    name: str
    type: str
    key: str
    parts: tuple[RolePart, ...]
    settings: tuple[tuple[str, float], ...]
    options: tuple[tuple[str, str], ...]
    figures: tuple[FigureReport, ...]
    draws: int
    seed: int
    share_out: float | None
    passes: bool | None
    response: Response | None
    series: tuple[tuple[str, str], ...]
    proposals: tuple[Proposal, ...]
    assumptions: tuple[str, ...]
    note: str = ""

    distribution = "uniform within +-tolerance, parts independent"

    def figure(self, name: str) -> FigureReport:
        for f in self.figures:
            if f.name == name:
                return f
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name, "type": self.type, "key": self.key, "note": self.note,
            "parts": [p.to_dict() for p in self.parts],
            "settings": {k: _r(v) for k, v in self.settings},
            "options": dict(self.options),
            "figures": [f.to_dict() for f in self.figures],
            "monte_carlo": {"draws": self.draws, "seed": self.seed,
                            "distribution": self.distribution, "share_out": _r(self.share_out, 4)},
            "passes": self.passes,
            "response": self.response.to_dict() if self.response else None,
            "retune": {"series": dict(self.series), "proposals": [p.to_dict() for p in self.proposals]},
            "assumptions": list(self.assumptions),
        }


# --------------------------------------------------------------------------
# Parsing targets and quantities
# --------------------------------------------------------------------------
_UNIT_SUFFIX = {"Hz": "hz", "V": "v", "A": "a", "W": "w"}
_PM_RE = re.compile(r"±|\+/-|\+-")


def _quantity(text: str, unit: str) -> float:
    """A signed number with an optional unit, e.g. ``-10``, ``1.0kHz``, ``50mV``."""
    t = re.sub(r"\s+", "", text)
    neg = False
    if t[:1] in "+-" and t:
        neg = t[0] == "-"
        t = t[1:]
    if not t:
        raise ValueError(f"'{text.strip()}' is not a number")
    if unit == "ohm":
        v = _values.parse_value(t, "ohm")
    else:
        suf = _UNIT_SUFFIX.get(unit)
        if suf and t.lower().endswith(suf) and len(t) > len(suf):
            t = t[: -len(suf)]
        v = _values.parse_value(t, "")
    return -v if neg else v


def parse_target(text: str, figure: str = "", unit: str = "") -> Target:
    """Parse a target: ``"1kHz ±10%"``, ``"2.5V +/- 50mV"`` or ``"0.9kHz .. 1.1kHz"``.

    The allowed error is a percentage of the aim or an absolute amount in
    the figure's unit; a range gives its middle as the aim. Raises
    ``ValueError(reason)`` on bad text.

    >>> t = parse_target("1.0kHz ±10%", "f0", "Hz")
    >>> (t.aim, round(t.lo, 6), round(t.hi, 6))
    (1000.0, 900.0, 1100.0)
    >>> parse_target("-10 +/- 0.5", "gain").lo
    -10.5
    """
    if not isinstance(text, str) or not text.strip():
        raise ValueError("a target is text such as \"1kHz ±5%\" or \"0.9kHz .. 1.1kHz\"")
    t = text.strip()
    if ".." in t:
        a, b = t.split("..", 1)
        lo, hi = _quantity(a, unit), _quantity(b, unit)
        if not lo < hi:
            raise ValueError(f"target range '{t}' must go from low to high")
        return Target(figure, t, (lo + hi) / 2.0, lo, hi)
    parts = _PM_RE.split(t, maxsplit=1)
    if len(parts) != 2:
        raise ValueError(f"target '{t}' needs its allowed error, e.g. \"{t} ±5%\" or a range \"lo .. hi\"")
    aim = _quantity(parts[0], unit)
    tol = parts[1].strip()
    if tol.endswith("%"):
        half = abs(aim) * _values.parse_tolerance(tol)
    else:
        half = _quantity(tol, unit)
    if not (half > 0 and math.isfinite(half)):
        raise ValueError(f"the allowed error in '{t}' must be above zero")
    return Target(figure, t, aim, aim - half, aim + half)


# --------------------------------------------------------------------------
# Declarations
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class _Decl:
    table: RawTable
    stype: StageType
    roles: tuple[tuple[str, Part], ...]        # every role used, spec order
    numeric: tuple[str, ...]                   # roles with values (R, C)
    kinds: tuple[str, ...]                     # "resistor"/"capacitor" per numeric role
    values: np.ndarray
    tols: np.ndarray
    assumed: tuple[bool, ...]
    settings: tuple[tuple[str, float], ...]
    options: tuple[tuple[str, str], ...]
    targets: tuple[Target, ...]
    series: tuple[tuple[str, str], ...]
    assumptions: tuple[str, ...]
    note: str

    @property
    def name(self) -> str:
        return self.table.name

    def setting(self, k: str) -> float | None:
        for kk, v in self.settings:
            if kk == k:
                return v
        return None

    def option(self, k: str) -> str:
        return dict(self.options).get(k, "")

    def ref(self, role: str) -> str:
        return dict(self.roles)[role].ref


def _err(table: RawTable, sub: str, reason: str) -> DesignError:
    key = f"{table.key}.{sub}" if sub else table.key
    return DesignError(table.file, reason, key=key, line=table.line or None)


def _pin_nets(design: Design) -> dict[tuple[str, str], Net]:
    out: dict[tuple[str, str], Net] = {}
    for n in design.nets:
        for p in n.pins:
            out.setdefault((p.ref, p.pin), n)
    return out


def _net_volts(net: Net) -> float | None:
    if net.voltage is not None:
        return net.voltage
    return 0.0 if net.name == "GND" else None


def _far_net(design: Design, pin_nets: Mapping[tuple[str, str], Net], ref: str, other: str) -> Net | None:
    """The net of two-terminal ``ref`` that ``other`` is not on (None if not exactly one)."""
    def nets(r: str) -> dict[str, Net]:
        part = design.part(r)
        found = {}
        for p in part.pins:
            n = pin_nets.get((r, p.number))
            if n is not None:
                found[n.name] = n
        return found

    mine, theirs = nets(ref), nets(other)
    far = sorted(k for k in mine if k not in theirs)
    return mine[far[0]] if len(far) == 1 else None


def _amp_supply(design: Design, pin_nets: Mapping[tuple[str, str], Net], ref: str) -> float | None:
    part = design.part(ref)
    volts = []
    for p in part.pins:
        if p.role == "power-in":
            n = pin_nets.get((ref, p.number))
            v = _net_volts(n) if n is not None else None
            if v is not None:
                volts.append(v)
    return max(volts) if volts and max(volts) > 0 else None


def _kind_unit(design: Design, kind: str) -> tuple[str, str]:
    for k in design.kinds:
        if k.name == kind:
            return k.category, k.value_unit
    return "", ""


def _part_fits(design: Design, part: Part, want: str) -> bool:
    cat, unit = _kind_unit(design, part.kind)
    if want == "resistor":
        return part.kind == "resistor" or unit == "ohm"
    if want == "capacitor":
        return part.kind in ("capacitor", "capacitor-polarized") or unit == "F"
    if want == "amp":
        return part.kind.startswith(("opamp", "comparator")) or cat == "ic"
    if want == "led":
        return part.kind == "led" or cat == "semiconductor"
    return False


def _volts(table: RawTable, key: str, spec: Any, design: Design) -> float:
    if isinstance(spec, bool) or not isinstance(spec, (str, int, float)):
        raise _err(table, key, "expected a voltage such as \"3.3V\" or a net name")
    if isinstance(spec, (int, float)):
        v = float(spec)
    else:
        names = {n.name: n for n in design.nets}
        if spec.strip() in names:
            v = _net_volts(names[spec.strip()])
            if v is None:
                raise _err(table, key, f"net '{spec.strip()}' has no declared voltage: declare it "
                                       f"under [voltages] or give a voltage such as \"3.3V\"")
            return v
        try:
            v = _quantity(spec, "V")
        except ValueError:
            raise _err(table, key, f"'{spec}' is neither a voltage such as \"3.3V\" nor a net "
                                   f"of the design") from None
    if not math.isfinite(v):
        raise _err(table, key, "the voltage must be a finite number")
    return v


def _declare(design: Design, table: RawTable, pin_nets: Mapping[tuple[str, str], Net]) -> _Decl:
    items = dict(table.items)
    tname = items.get("type")
    if tname is None:
        raise _err(table, "type", f"a stage needs a type; one of {', '.join(sorted(STAGE_TYPES))}")
    if not isinstance(tname, str) or tname not in STAGE_TYPES:
        raise _err(table, "type", f"unknown stage type {tname!r}; known types: "
                                  f"{', '.join(sorted(STAGE_TYPES))}")
    st = STAGE_TYPES[tname]
    allowed = _COMMON_KEYS + tuple(k for k, _ in st.keys)
    for k in sorted(items):
        if k not in allowed:
            raise _err(table, k, f"unknown key for a {tname} stage; keys are {', '.join(allowed)}")
    note = items.get("note", "")
    if not isinstance(note, str):
        raise _err(table, "note", "note must be text")

    # options first: they decide which roles are needed
    options: list[tuple[str, str]] = []
    required = [r.name for r in st.roles if r.required]
    forbidden: set[str] = set()
    if tname == "comparator-hysteresis":
        inp = items.get("input")
        if inp not in ("inverting", "non-inverting"):
            raise _err(table, "input", "give input = \"inverting\" or \"non-inverting\" (which "
                                       "comparator input the signal drives)")
        out = items.get("output", "push-pull")
        if out == "open-drain":
            out = "open-collector"
        if out not in ("push-pull", "open-collector"):
            raise _err(table, "output", "output must be \"push-pull\" or \"open-collector\"")
        options = [("input", inp), ("output", out)]
        if inp == "inverting":
            required.append("Rtop")
            forbidden.add("Rin")
        else:
            required.append("Rin")
        if out == "open-collector":
            required.append("Rpull")
        else:
            forbidden.add("Rpull")

    parts_spec = items.get("parts")
    if not isinstance(parts_spec, dict):
        raise _err(table, "parts", "give parts = { ROLE = \"REF\", ... }; roles: "
                                   + ", ".join(r.name for r in st.roles))
    role_names = [r.name for r in st.roles]
    for role in sorted(parts_spec):
        if role not in role_names:
            raise _err(table, f"parts.{role}", f"unknown role for a {tname} stage; roles are "
                                               f"{', '.join(role_names)}")
        if role in forbidden:
            raise _err(table, f"parts.{role}", f"role {role} does not apply to this stage's "
                                               f"{'output' if role == 'Rpull' else 'input'} setting")
    for role in required:
        if role not in parts_spec:
            spec = st.role(role)
            raise _err(table, f"parts.{role}", f"missing role {role} ({spec.where})")
    pairs: tuple[tuple[str, str], ...] = (("Ra", "Rb"), ("Rb", "Ra")) if tname.startswith("sallen") else ()
    if tname == "comparator-hysteresis" and dict(options)["input"] == "non-inverting":
        pairs = (("Rtop", "Rbottom"), ("Rbottom", "Rtop"))
    for a, b in pairs:
        if a in parts_spec and b not in parts_spec:
            raise _err(table, f"parts.{b}", f"missing role {b}: {a} and {b} go together "
                                            f"({st.role(b).where})")

    roles: list[tuple[str, Part]] = []
    seen: dict[str, str] = {}
    for spec in st.roles:
        if spec.name not in parts_spec:
            continue
        k = f"parts.{spec.name}"
        ref = parts_spec[spec.name]
        if not isinstance(ref, str) or not ref.strip():
            raise _err(table, k, "expected a part reference such as \"R3\"")
        ref = ref.strip()
        try:
            part = design.part(ref)
        except KeyError:
            raise _err(table, k, f"no part {ref} in the design") from None
        if ref in seen:
            raise _err(table, k, f"{ref} already plays role {seen[ref]}; each role needs its own part")
        seen[ref] = spec.name
        if not _part_fits(design, part, spec.kind):
            want = {"amp": "an op-amp or comparator", "led": "an LED"}.get(spec.kind, f"a {spec.kind}")
            raise _err(table, k, f"{ref} is a {part.kind}, but role {spec.name} needs {want}")
        if part.dnp:
            raise _err(table, k, f"{ref} is marked dnp (not fitted) but plays role {spec.name}")
        if spec.kind in ("resistor", "capacitor"):
            if part.value is None or not math.isfinite(part.value) or part.value <= 0:
                raise _err(table, k, f"{ref} needs a value above zero to play role {spec.name}")
        roles.append((spec.name, part))

    numeric = tuple(r for r, _ in roles if st.role(r).kind in ("resistor", "capacitor"))
    kinds = tuple(st.role(r).kind for r in numeric)
    byrole = dict(roles)
    vals = np.array([byrole[r].value for r in numeric], dtype=float)
    tols, assumed = [], []
    for r, kind in zip(numeric, kinds):
        t = byrole[r].tolerance
        assumed.append(t is None)
        tols.append(DEFAULT_TOLERANCE[kind] if t is None else float(t))
    settings, assumptions = _settings(design, table, st, items, byrole, dict(options), pin_nets)

    figs = {f.name: f for f in st.figures}
    available = set(figs)
    if tname == "divider" and not any(k == "vin" for k, _ in settings):
        available.discard("vout")
    targets_spec = items.get("targets", {})
    if not isinstance(targets_spec, dict):
        raise _err(table, "targets", "give targets = { FIGURE = \"VALUE ±ERROR\", ... }; figures: "
                                     + ", ".join(figs))
    targets = []
    for fname in [f.name for f in st.figures] + sorted(set(targets_spec) - set(figs)):
        if fname not in targets_spec:
            continue
        k = f"targets.{fname}"
        if fname not in figs:
            raise _err(table, k, f"unknown figure for a {tname} stage; figures are {', '.join(figs)}")
        if fname not in available:
            raise _err(table, k, "a vout target needs the input voltage: give vin or declare the "
                                 "voltage of Rtop's input net")
        try:
            targets.append(parse_target(targets_spec[fname], fname, figs[fname].unit))
        except ValueError as e:
            raise _err(table, k, str(e)) from None

    series_spec = items.get("series", {})
    if not isinstance(series_spec, dict):
        raise _err(table, "series", "give series = { resistor = \"E24\", capacitor = \"E12\" }")
    series = dict(DEFAULT_SERIES)
    for kk in sorted(series_spec):
        if kk not in series:
            raise _err(table, f"series.{kk}", "series are given for resistor and capacitor")
        sv = series_spec[kk]
        if not isinstance(sv, str) or sv.strip().upper() not in _values.SERIES:
            raise _err(table, f"series.{kk}", f"unknown series {sv!r}; one of "
                                              f"{', '.join(_values.SERIES)}")
        series[kk] = sv.strip().upper()

    return _Decl(
        table=table, stype=st, roles=tuple(roles), numeric=numeric, kinds=kinds, values=vals,
        tols=np.array(tols, dtype=float), assumed=tuple(assumed), settings=tuple(settings),
        options=tuple(options), targets=tuple(targets), series=tuple(sorted(series.items())),
        assumptions=tuple(assumptions), note=note,
    )


def _settings(design: Design, table: RawTable, st: StageType, items: Mapping[str, Any],
              byrole: Mapping[str, Part], options: Mapping[str, str],
              pin_nets: Mapping[tuple[str, str], Net]) -> tuple[list[tuple[str, float]], list[str]]:
    out: list[tuple[str, float]] = []
    notes: list[str] = []

    def given(k: str) -> float | None:
        return _volts(table, k, items[k], design) if k in items else None

    if st.name == "divider":
        vin = given("vin")
        if vin is None:
            n = _far_net(design, pin_nets, byrole["Rtop"].ref, byrole["Rbottom"].ref)
            vin = _net_volts(n) if n is not None else None
            if vin is not None:
                notes.append(f"vin = {_fmt(vin, 'V')} from net {n.name}")
        if vin is not None:
            out.append(("vin", vin))
    elif st.name == "led-resistor":
        if "vf" not in items:
            raise _err(table, "vf", "give the LED forward voltage, e.g. vf = \"2.0V\"")
        vf = given("vf")
        vcc = given("vcc")
        if vcc is None:
            n = _far_net(design, pin_nets, byrole["R"].ref, byrole["led"].ref)
            vcc = _net_volts(n) if n is not None else None
            if vcc is None:
                raise _err(table, "vcc", "no supply voltage: give vcc = \"3.3V\" or declare the "
                                         "voltage of the net at R's other end")
            notes.append(f"vcc = {_fmt(vcc, 'V')} from net {n.name}")
        vdrop = given("vdrop")
        if vdrop is None:
            vdrop = 0.0
            notes.append("the LED's return is taken as ground (vdrop = 0 V)")
        out += [("vcc", vcc), ("vf", vf), ("vdrop", vdrop)]
    elif st.name == "comparator-hysteresis":
        inverting = options["input"] == "inverting"
        oc = options["output"] == "open-collector"
        cache: dict[str, float] = {}

        def vcc() -> float:
            if "vcc" not in cache:
                v = given("vcc")
                if v is None and "amp" in byrole:
                    v = _amp_supply(design, pin_nets, byrole["amp"].ref)
                    if v is not None:
                        notes.append(f"vcc = {_fmt(v, 'V')} from {byrole['amp'].ref}'s supply net")
                if v is None:
                    raise _err(table, "vcc", "no supply voltage: give vcc = \"3.3V\", or name the "
                                             "comparator as amp with its supply net's voltage declared")
                cache["vcc"] = v
            return cache["vcc"]

        has_div = "Rtop" in byrole
        if "vref" in items and (inverting or has_div):
            raise _err(table, "vref", "vref is the inverting input's voltage when there is no Rtop; "
                                      "with a reference divider give vtop")
        if "vtop" in items and not has_div:
            raise _err(table, "vtop", "vtop is the voltage Rtop hangs from; there is no Rtop")
        if has_div:
            vt = given("vtop")
            out.append(("vtop", vcc() if vt is None else vt))
        else:
            vr = given("vref")
            if vr is None:
                raise _err(table, "vref", "give the reference on the inverting input (vref = "
                                          "\"1.2V\") or a divider Rtop/Rbottom")
            out.append(("vref", vr))
        if oc:
            if "voh" in items:
                raise _err(table, "voh", "an open-collector output's high level is the pull-up "
                                         "supply: give vpull")
            vp = given("vpull")
            if vp is None:
                n = _far_net(design, pin_nets, byrole["Rpull"].ref, byrole["Rfb"].ref)
                vp = _net_volts(n) if n is not None else None
                if vp is not None and vp > 0:
                    notes.append(f"vpull = {_fmt(vp, 'V')} from net {n.name}")
                else:
                    vp = vcc()
                    notes.append(f"pull-up supply taken as vcc = {_fmt(vp, 'V')}")
            out.append(("vpull", vp))
        else:
            if "vpull" in items:
                raise _err(table, "vpull", "vpull applies to output = \"open-collector\"")
            voh = given("voh")
            if voh is None:
                voh = vcc()
                notes.append(f"output high level taken as vcc = {_fmt(voh, 'V')} (rail-to-rail)")
            out.append(("voh", voh))
        vol = given("vol")
        if vol is None:
            vol = 0.0
            notes.append("output low level taken as 0 V")
        out.append(("vol", vol))
        if "vcc" in cache:
            out.append(("vcc", cache["vcc"]))
    out.sort()
    return out, notes


# --------------------------------------------------------------------------
# Evaluation (vectorised over any array shape)
# --------------------------------------------------------------------------
def _evaluate(d: _Decl, v: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    s = dict(d.settings)
    t = d.stype.name
    with np.errstate(divide="ignore", invalid="ignore"):
        if t in ("sallen-key-lowpass", "sallen-key-highpass"):
            k = 1.0 + v["Ra"] / v["Rb"] if "Ra" in v else 1.0
            if t == "sallen-key-lowpass":
                return F.sallen_key_lowpass(v["R1"], v["R2"], v["Cf"], v["Cg"], k)
            return F.sallen_key_highpass(v["C1"], v["C2"], v["Rf"], v["Rg"], k)
        if t == "rc-lowpass":
            return F.rc_lowpass(v["R"], v["C"])
        if t == "rc-highpass":
            return F.rc_highpass(v["R"], v["C"])
        if t == "divider":
            return F.divider(v["Rtop"], v["Rbottom"], s.get("vin"))
        if t == "opamp-inverting":
            return F.opamp_inverting(v["Rin"], v["Rf"])
        if t == "opamp-noninverting":
            return F.opamp_noninverting(v["Rf"], v["Rg"])
        if t == "led-resistor":
            return F.led_resistor(v["R"], s["vcc"], s["vf"], s["vdrop"])
        if t == "comparator-hysteresis":
            oc = d.option("output") == "open-collector"
            voh = s["vpull"] if oc else s["voh"]
            rpull = v["Rpull"] if oc else None
            if d.option("input") == "inverting":
                return F.comparator_inverting(v["Rtop"], v["Rfb"], s["vtop"], voh, s["vol"],
                                              rbottom=v.get("Rbottom"), rpull=rpull)
            if "Rtop" in v:
                vref = s["vtop"] * v["Rbottom"] / (v["Rtop"] + v["Rbottom"])
            else:
                vref = s["vref"]
            return F.comparator_noninverting(v["Rin"], v["Rfb"], vref, voh, s["vol"], rpull=rpull)
    raise AssertionError(t)  # pragma: no cover - every type is handled above


def _eval_matrix(d: _Decl, m: np.ndarray) -> dict[str, np.ndarray]:
    """Figures for each row of ``m`` (columns: ``d.numeric`` order)."""
    figs = _evaluate(d, {r: m[..., i] for i, r in enumerate(d.numeric)})
    shape = m.shape[:-1]
    return {k: np.broadcast_to(np.asarray(v, dtype=float), shape) for k, v in figs.items()}


def _transfer(d: _Decl, m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    v = {r: float(m[i]) for i, r in enumerate(d.numeric)}
    t = d.stype.name
    k = 1.0 + v["Ra"] / v["Rb"] if "Ra" in v else 1.0
    if t == "sallen-key-lowpass":
        return F.sallen_key_lowpass_tf(v["R1"], v["R2"], v["Cf"], v["Cg"], k)
    if t == "sallen-key-highpass":
        return F.sallen_key_highpass_tf(v["C1"], v["C2"], v["Rf"], v["Rg"], k)
    if t == "rc-lowpass":
        return F.rc_lowpass_tf(v["R"], v["C"])
    return F.rc_highpass_tf(v["R"], v["C"])


def _corner_matrix(d: _Decl) -> np.ndarray:
    signs = F.corner_signs(len(d.numeric))
    return d.values * (1.0 + signs * d.tols)


def _mc_matrix(d: _Decl, draws: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return d.values * (1.0 + F.uniform_factors(rng, draws, len(d.numeric)) * d.tols)


def stage_samples(design: Design, table: RawTable, *, draws: int = 10000, seed: int = 1
                  ) -> dict[str, np.ndarray]:
    """The Monte Carlo builds of one declared stage: figure name -> ``(draws,)`` array.

    Each part's value is ``v (1 + u t)`` with ``u`` uniform on [-1, 1]
    (``numpy.random.default_rng(seed)``), independent per part, ``t`` its
    tolerance. :func:`analyse_stages` summarises exactly these samples.
    """
    d = _declare(design, table, _pin_nets(design))
    return _eval_matrix(d, _mc_matrix(d, draws, seed))


# --------------------------------------------------------------------------
# Retune
# --------------------------------------------------------------------------
def _series_grid(series: str, lo: float, hi: float) -> np.ndarray:
    g = np.asarray(_values.series_values(series, lo, hi), dtype=float)
    return np.unique(g[np.isfinite(g) & (g > 0)])


def _score(d: _Decl, figs: Mapping[str, np.ndarray], holds: Mapping[str, float]
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(target error, total ranking score, passes) per candidate."""
    shape = next(iter(figs.values())).shape
    err = np.zeros(shape)
    ok = np.ones(shape, dtype=bool)
    for t in d.targets:
        x = figs[t.figure]
        e = ((x - t.aim) / t.half) ** 2
        err = err + np.where(np.isfinite(e), e, np.inf)
        ok &= t.contains(x)
    total = err.copy()
    for name, v in holds.items():
        e = ((figs[name] - v) / (_HOLD_BAND * abs(v))) ** 2
        total = total + np.where(np.isfinite(e), e, 1e6)
    return err, total, ok


def _sk_seeds(d: _Decl, grids: Sequence[np.ndarray], wide: np.ndarray, best: np.ndarray,
              nominal: Mapping[str, float]) -> np.ndarray:
    """Sallen-Key candidates: every capacitor pair, resistors solved then snapped.

    For each (C, C) pair of the capacitor grids the two resistors that give
    the aimed f0 and Q exactly (gain fixed at the best candidate's) solve
    ``a x^2 - B x + c = 0`` (see :mod:`pipeline.filters`); each is then
    snapped to the series values just below and above it.
    """
    aim = {t.figure: t.aim for t in d.targets}
    q = aim.get("q", nominal["q"])
    if "f0" in aim:
        f0 = aim["f0"]
    elif "f_3db" in aim:
        ratio = float(F.lowpass2_3db_ratio(q))
        f0 = aim["f_3db"] / ratio if d.stype.name == "sallen-key-lowpass" else aim["f_3db"] * ratio
    else:
        f0 = nominal["f0"]
    if not (np.isfinite(f0) and np.isfinite(q) and f0 > 0 and q > 0):
        return np.empty((0, len(d.numeric)))
    idx = {r: i for i, r in enumerate(d.numeric)}
    k = 1.0 + best[idx["Ra"]] / best[idx["Rb"]] if "Ra" in idx else 1.0
    w0 = 2 * np.pi * f0
    lp = d.stype.name == "sallen-key-lowpass"
    ca, cb = ("Cf", "Cg") if lp else ("C1", "C2")
    ra, rb = ("R1", "R2") if lp else ("Rf", "Rg")
    c1, c2 = np.meshgrid(grids[idx[ca]], grids[idx[cb]], indexing="ij")
    c1, c2 = c1.ravel(), c2.ravel()
    prod = 1.0 / (w0 * w0 * c1 * c2)         # product of the two resistors
    big_b = 1.0 / (w0 * q)
    if lp:   # (Cg + Cf (1 - k)) R1^2 - B R1 + Cg P = 0
        x1, x2 = F.solve_quadratic_positive(c2 + c1 * (1 - k), big_b, c2 * prod)
    else:    # (C1 + C2) Rf^2 - B Rf + (1 - k) C2 P = 0
        x1, x2 = F.solve_quadratic_positive(c1 + c2, big_b, (1 - k) * c2 * prod)
    rows = []
    for x in (x1, x2):
        y = prod / x
        for xs in _snap(wide, x):
            for ys in _snap(wide, y):
                m = np.repeat(best[None, :], len(c1), axis=0)
                m[:, idx[ca]], m[:, idx[cb]] = c1, c2
                m[:, idx[ra]], m[:, idx[rb]] = xs, ys
                rows.append(m[np.isfinite(xs) & np.isfinite(ys)])
    return np.vstack(rows) if rows else np.empty((0, len(d.numeric)))


def _snap(grid: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Series values just below and just above each ``x`` (nan outside the grid / for nan)."""
    x = np.asarray(x, dtype=float)
    i = np.searchsorted(grid, np.where(np.isfinite(x), x, 0.0))
    lo = np.where((i > 0) & np.isfinite(x), grid[np.clip(i - 1, 0, len(grid) - 1)], np.nan)
    hi = np.where((i < len(grid)) & np.isfinite(x), grid[np.clip(i, 0, len(grid) - 1)], np.nan)
    exact = np.isfinite(x) & (i < len(grid)) & (grid[np.clip(i, 0, len(grid) - 1)] == x)
    lo = np.where(exact, x, lo)
    return lo, hi


def _retune(d: _Decl, nominal: Mapping[str, float], draws: int, seed: int) -> tuple[Proposal, ...]:
    """Preferred-value combinations ranked by combined error on every target.

    Method: each R or C may take the values of its series from a tenth to
    ten times its present value. Starting from the present values snapped to
    the series, every pair of parts is searched on its full grid (a
    broadcast numpy evaluation) with the others held, keeping the best 16 of
    each; the best found becomes the new start, for up to four rounds.
    Sallen-Key stages add, for every capacitor pair, the resistor pair that
    solves f0 and Q exactly, snapped to the series. Candidates are ranked:
    those meeting every target first, and among them the fewest changed
    parts; then by the combined error, the sum over targets of
    ((figure - aim) / allowed error)^2, plus two weak pulls: figures with no
    target (``StageType.holds``) toward their present value (a +-20 % band
    counts 1) and every value toward its present one (0.01 (ln ratio)^2, so
    a similar design is preferred to a rescaled one).

    Cost: O(rounds x pairs x grid^2) figure evaluations, about
    4 x 15 x 193^2 for a six-part E96 stage (a quarter of a second); an
    E96 x E12 unity-gain Sallen-Key takes some 20 ms.
    """
    n = len(d.numeric)
    series = dict(d.series)
    targeted = {t.figure for t in d.targets}
    holds = {}
    for group in d.stype.holds:
        k = group[0]
        if not targeted.intersection(group) and k in nominal and np.isfinite(nominal[k]) and nominal[k] != 0:
            holds[k] = nominal[k]
    grids, wides = [], []
    for v, kind in zip(d.values, d.kinds):
        lo_b, hi_b = _BOUNDS[kind]
        wide = _series_grid(series[kind], lo_b, hi_b)
        g = wide[(wide >= v / 10.0 * (1 - 1e-9)) & (wide <= v * 10.0 * (1 + 1e-9))]
        if g.size == 0:
            g = wide[[int(np.argmin(np.abs(np.log(wide / v))))]]
        grids.append(g)
        wides.append(wide)
    start = np.array([g[int(np.argmin(np.abs(np.log(g / v))))] for g, v in zip(grids, d.values)])

    def rank(m: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        err, total, ok = _score(d, _eval_matrix(d, m), holds)
        total = total + 0.01 * np.sum(np.log(m / d.values[None, :]) ** 2, axis=1)
        changed = np.sum(~np.isclose(m, d.values[None, :], rtol=1e-9, atol=0.0), axis=1)
        keys = [m[:, j] for j in range(n - 1, -1, -1)] + [total, np.where(ok, changed, 0), ~ok]
        return np.lexsort(keys), err, ok, total

    pool = [start[None, :]]
    best = start
    if d.stype.name.startswith("sallen-key"):
        wide_r = wides[d.kinds.index("resistor")]
        seeds = _sk_seeds(d, grids, wide_r, best, nominal)
        if len(seeds):
            pool.append(seeds)
            order, *_ = rank(seeds)
            best = seeds[order[0]]
    groups = list(combinations(range(n), 2)) if n > 1 else [(0,)]
    for _ in range(4):
        for g in groups:
            mesh = np.meshgrid(*[grids[i] for i in g], indexing="ij")
            m = np.repeat(best[None, :], mesh[0].size, axis=0)
            for col, arr in zip(g, mesh):
                m[:, col] = arr.ravel()
            order, *_ = rank(m)
            pool.append(m[order[:16]])
        allm = np.vstack(pool)
        order, *_ = rank(allm)
        new_best = allm[order[0]]
        if np.array_equal(new_best, best):
            break
        best = new_best
    cand = np.unique(np.vstack(pool), axis=0)
    cand = cand[~np.all(np.isclose(cand, d.values[None, :], rtol=1e-12, atol=0.0), axis=1)]
    if not len(cand):
        return ()
    order, err, ok, _ = rank(cand)
    top = order[:_MAX_PROPOSALS]
    rows = cand[top]
    figs = _eval_matrix(d, rows)
    mc = _mc_matrix(d, draws, seed) if draws > 0 else None
    out = []
    for j, row in enumerate(rows):
        share = None
        if mc is not None:
            mrow = row * (mc / d.values)
            fm = _eval_matrix(d, mrow)
            bad = np.zeros(draws, dtype=bool)
            for t in d.targets:
                bad |= ~t.contains(fm[t.figure])
            share = float(np.mean(bad))
        out.append(Proposal(
            values=tuple((r, d.ref(r), float(x)) for r, x in zip(d.numeric, row)),
            figures=tuple((f.name, float(figs[f.name][j])) for f in d.stype.figures if f.name in figs),
            error=float(err[top[j]]),
            passes=bool(ok[top[j]]),
            share_out=share,
            changed=tuple(d.ref(r) for r, x, v in zip(d.numeric, row, d.values)
                          if not math.isclose(x, v, rel_tol=1e-9)),
        ))
    return tuple(out)


# --------------------------------------------------------------------------
# Analysis
# --------------------------------------------------------------------------
def _stats(x: np.ndarray) -> tuple[float | None, float | None, float | None]:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    if not x.size:
        return None, None, None
    p = np.percentile(x, [1.0, 50.0, 99.0])
    return float(p[0]), float(p[1]), float(p[2])


def _response(d: _Decl, nominal: Mapping[str, float]) -> Response | None:
    if not d.stype.response:
        return None
    f0 = nominal["f0"]
    if not (np.isfinite(f0) and f0 > 0):
        return None
    dec0 = math.floor(math.log10(f0)) - 2
    f = np.logspace(dec0, dec0 + 5, 5 * 40 + 1)
    num, den = _transfer(d, d.values)
    nom, _ = F.response_db(num, den, f)
    lo, hi = nom.copy(), nom.copy()
    for row in _corner_matrix(d):
        nb, db = _transfer(d, row)
        mag, _ = F.response_db(nb, db, f)
        lo, hi = np.fmin(lo, mag), np.fmax(hi, mag)
    gain = nominal.get("gain", 1.0)
    f3 = nominal.get("f_3db", f0)
    return Response(tuple(float(x) for x in f), tuple(float(x) for x in nom),
                    tuple(float(x) for x in lo), tuple(float(x) for x in hi),
                    float(f0), float(f3), float(20 * math.log10(abs(gain))))


def _analyse_one(d: _Decl, draws: int, seed: int) -> tuple[StageReport, list[Finding]]:
    nominal_arr = _eval_matrix(d, d.values)
    nominal = {k: float(v) for k, v in nominal_arr.items()}
    corners = _eval_matrix(d, _corner_matrix(d))
    mc = _eval_matrix(d, _mc_matrix(d, draws, seed)) if draws > 0 else None
    tmap = {t.figure: t for t in d.targets}
    figs = []
    any_bad = np.zeros(draws, dtype=bool) if mc is not None else None
    for spec in d.stype.figures:
        if spec.name not in nominal:
            continue
        allv = np.append(corners[spec.name], nominal[spec.name])
        allv = allv[~np.isnan(allv)]
        cmin = float(np.min(allv)) if allv.size else math.nan
        cmax = float(np.max(allv)) if allv.size else math.nan
        p01 = p50 = p99 = share = None
        if mc is not None:
            p01, p50, p99 = _stats(mc[spec.name])
        t = tmap.get(spec.name)
        passes = None
        if t is not None:
            passes = bool(t.contains(nominal[spec.name]))
            if mc is not None:
                bad = ~t.contains(mc[spec.name])
                any_bad |= bad
                share = float(np.mean(bad))
        figs.append(FigureReport(spec.name, spec.unit, spec.label, nominal[spec.name], t, cmin, cmax,
                                 p01, p50, p99, share, passes))
    stage_pass = all(f.passes for f in figs if f.passes is not None) if d.targets else None
    share_all = float(np.mean(any_bad)) if (mc is not None and d.targets) else None
    proposals: tuple[Proposal, ...] = ()
    if stage_pass is False:
        proposals = _retune(d, nominal, draws, seed)
    parts = []
    tol = dict(zip(d.numeric, zip(d.tols, d.assumed)))
    for role, part in d.roles:
        t, a = tol.get(role, (None, False))
        parts.append(RolePart(role, part.ref, part.kind, part.value if role in tol else None,
                              part.value_text, None if t is None else float(t), bool(a)))
    report = StageReport(
        name=d.name, type=d.stype.name, key=d.table.key, parts=tuple(parts), settings=d.settings,
        options=d.options, figures=tuple(figs), draws=draws, seed=seed, share_out=share_all,
        passes=stage_pass, response=_response(d, nominal), series=d.series, proposals=proposals,
        assumptions=d.assumptions, note=d.note,
    )
    return report, _findings(d, report)


def _subject(d: _Decl) -> tuple[str, ...]:
    return (d.table.key, *sorted(p.ref for _, p in d.roles))


def _findings(d: _Decl, rep: StageReport) -> list[Finding]:
    out: list[Finding] = []
    subj = _subject(d)
    nm = f"Stage '{d.name}'"
    figs = []
    for f in rep.figures:
        txt = f"{f.name} {_fmt(f.nominal, f.unit)}"
        if f.p01 is not None and f.p99 is not None and f.corner_min != f.corner_max:
            txt += f" (1st..99th pct {_fmt(f.p01, f.unit)} .. {_fmt(f.p99, f.unit)})"
        figs.append(txt)
    tail = ""
    if rep.share_out is not None:
        tail = f"; {_pct(rep.share_out)} of {rep.draws} builds miss a target"
    out.append(Finding("info", "stage.summary", subj,
                       f"{nm} ({d.stype.name}): " + ", ".join(figs) + tail + "."))
    for a in d.assumptions:
        out.append(Finding("info", "stage.assumption", subj, f"{nm}: {a}."))
    if d.stype.name.startswith("sallen-key"):
        q = rep.figure("q").nominal
        if not (math.isfinite(q) and q > 0):
            out.append(Finding("error", "stage.unstable", subj,
                               f"{nm}: the gain 1 + Ra/Rb = {_fmt(rep.figure('gain').nominal, '')} "
                               f"is too high for these values, so the section oscillates; lower the "
                               f"gain or change the capacitor ratio."))
    if d.stype.name == "led-resistor" and rep.figure("current").nominal <= 0:
        s = dict(d.settings)
        head = s["vcc"] - s["vf"] - s["vdrop"]
        out.append(Finding("error", "stage.led-off", subj,
                           f"{nm}: vcc - vf - vdrop = {_fmt(head, 'V')}, so the LED never lights; "
                           f"raise the supply or pick an LED with a lower forward voltage."))
    if not d.targets:
        out.append(Finding("info", "stage.no-targets", subj,
                           f"{nm} declares no targets, so only its figures are reported; add "
                           f"targets = {{ {d.stype.figures[0].name} = \"... ±...%\" }} to check them."))
    spread_bad = []
    for f in rep.figures:
        if f.target is None:
            continue
        rng_txt = f"{_fmt(f.target.lo, f.unit)} .. {_fmt(f.target.hi, f.unit)}"
        if f.passes:
            out.append(Finding("info", "stage.target-met", subj,
                               f"{nm}: {f.name} is {_fmt(f.nominal, f.unit)}, inside its target "
                               f"{f.target.text} ({rng_txt})."))
        else:
            out.append(Finding("error", "stage.target-missed", subj,
                               f"{nm}: {f.name} is {_fmt(f.nominal, f.unit)}, outside its target "
                               f"{f.target.text} ({rng_txt})."))
        corner_out = not (f.target.contains(f.corner_min) and f.target.contains(f.corner_max))
        if f.passes and ((f.share_out or 0) > 0 or corner_out):
            spread_bad.append(f)
    if spread_bad:
        bits = []
        for f in spread_bad:
            s = f"{f.name} {_pct(f.share_out)} of builds out, corners " \
                f"{_fmt(f.corner_min, f.unit)} .. {_fmt(f.corner_max, f.unit)}"
            bits.append(s)
        total = f"{_pct(rep.share_out)} of {rep.draws} Monte Carlo builds" if rep.share_out is not None \
            else "the tolerance corners"
        out.append(Finding("warning", "stage.spread", subj,
                           f"{nm}: component tolerances put it out of target in {total} "
                           f"(uniform within tolerance): " + "; ".join(bits) + "."))
    if rep.passes is False:
        ser = dict(d.series)
        which = f"{ser['resistor']} resistors and {ser['capacitor']} capacitors"
        good = [p for p in rep.proposals if p.passes]
        if good:
            p = good[0]
            vals = ", ".join(f"{ref} = {_fmt_part(v, kind)}" for (r, ref, v), kind
                             in zip(p.values, d.kinds) if ref in p.changed)
            figs = ", ".join(f"{k} {_fmt(v, _unit(d, k))}" for k, v in p.figures
                             if k in {t.figure for t in d.targets})
            out.append(Finding("info", "stage.retune", subj,
                               f"{nm}: with {which}, {vals or 'the present values'} meets every "
                               f"target ({figs})."))
        else:
            out.append(Finding("warning", "stage.retune-none", subj,
                               f"{nm}: no combination of {which} within a decade of the present "
                               f"values meets every target; widen the series or revisit the targets."))
    return out


def analyse_stages(design: Design, *, draws: int = 10000, seed: int = 1,
                   progress: Progress | None = None
                   ) -> tuple[tuple[StageReport, ...], tuple[Finding, ...]]:
    """Analyse every ``[stages.NAME]`` table of ``design``.

    Parameters
    ----------
    design : Design
        The sized design; ``design.stages`` holds the declarations.
    draws : int
        Monte Carlo builds per stage (0 skips the Monte Carlo).
    seed : int
        Seed of ``numpy.random.default_rng``; each stage starts from it, so
        a stage's spread does not depend on the other stages.
    progress : callable, optional
        ``progress(message, fraction)`` after each stage.

    Returns
    -------
    (reports, findings)
        One :class:`StageReport` per stage in design order, and findings
        (see the module docstring for codes).

    Raises
    ------
    DesignError
        A bad declaration, naming its key: unknown type, unknown or missing
        role, a ref not in the design or of the wrong kind, bad target text,
        an unknown series or an unresolvable voltage.

    Examples
    --------
    >>> from pipeline.model import Design, Part, RawTable
    >>> r = Part("R1", "resistor", "0603", (), value=1e3, tolerance=0.01)
    >>> c = Part("C1", "capacitor", "0603", (), value=159.155e-9, tolerance=0.05)
    >>> t = RawTable("rc", (("type", "rc-lowpass"), ("parts", {"R": "R1", "C": "C1"}),
    ...              ("targets", {"f0": "1kHz ±10%"})), "d.toml", "stages.rc")
    >>> reps, _ = analyse_stages(Design("x", "A", "d.toml", (r, c), (), (t,)), draws=1000)
    >>> round(reps[0].figure("f0").nominal), reps[0].passes
    (1000, True)
    """
    if draws < 0:
        raise ValueError("draws must be >= 0")
    pin_nets = _pin_nets(design)
    decls = [_declare(design, t, pin_nets) for t in design.stages]
    reports: list[StageReport] = []
    findings: list[Finding] = []
    assumed: dict[str, tuple[str, float]] = {}
    for i, d in enumerate(decls):
        rep, fs = _analyse_one(d, draws, seed)
        reports.append(rep)
        findings += fs
        byrole = dict(d.roles)
        for role, kind in zip(d.numeric, d.kinds):
            if byrole[role].tolerance is None:
                assumed.setdefault(byrole[role].ref, (kind, DEFAULT_TOLERANCE[kind]))
        if progress is not None:
            progress(f"stage {d.name}", (i + 1) / len(decls))
    for ref in sorted(assumed):
        kind, t = assumed[ref]
        findings.append(Finding("info", "stage.tolerance-assumed", (ref,),
                                f"{ref} states no tolerance; the stage analysis assumes "
                                f"{t * 100:g} % as usual for a {kind} without one."))
    return tuple(reports), tuple(findings)


# --------------------------------------------------------------------------
# Formatting
# --------------------------------------------------------------------------
_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
             (1e-9, "n"), (1e-12, "p"))


def _fmt(x: float | None, unit: str, digits: int = 4) -> str:
    """Engineering text, e.g. 1002.3 Hz -> "1.002 kHz"; plain number for no unit."""
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
    for scale, p in _PREFIXES:
        if abs(x) >= scale * (1 - 5e-5):
            break
    txt = f"{x / scale:.{digits}g}"
    if unit == "ohm":
        return f"{txt}{p}{sym}" if p else f"{txt}{sym}"
    return f"{txt} {p}{unit}"


def _fmt_part(v: float, kind: str) -> str:
    return _values.format_value(v, "F" if kind == "capacitor" else "")


def _pct(x: float | None) -> str:
    return "n/a" if x is None else f"{x * 100:.2f} %"


def _unit(d: _Decl, figure: str) -> str:
    for f in d.stype.figures:
        if f.name == figure:
            return f.unit
    return ""


# --------------------------------------------------------------------------
# Report sections
# --------------------------------------------------------------------------
_E = html.escape


def _svg(rep: StageReport, index: int) -> str:
    r = rep.response
    assert r is not None
    clip = f"stage-plot-{index}"
    w, h, ml, mr, mt, mb = 640, 300, 58, 18, 26, 42
    pw, ph = w - ml - mr, h - mt - mb
    f = np.asarray(r.f_hz)
    lf0, lf1 = math.log10(f[0]), math.log10(f[-1])
    top = math.ceil((max(max(r.high_db), r.passband_db) + 3.0) / 10.0) * 10.0
    bottom = max(math.floor(min(r.low_db) / 10.0) * 10.0, top - 80.0)

    def x(fr: float) -> float:
        return ml + (math.log10(fr) - lf0) / (lf1 - lf0) * pw

    def y(db: float) -> float:
        db = min(max(db, bottom - 40.0), top + 40.0)      # clipped by the plot's clipPath
        return mt + (top - db) / (top - bottom) * ph

    def pts(fs: Sequence[float], dbs: Sequence[float]) -> str:
        return " ".join(f"{x(a):.2f},{y(b):.2f}" for a, b in zip(fs, dbs))

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" height="{h}" '
           f'role="img" aria-label="{_E("frequency response of stage " + rep.name)}" '
           f'font-family="sans-serif" font-size="11">',
           f'<rect x="0" y="0" width="{w}" height="{h}" fill="#fbfaf6"/>',
           f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" fill="#ffffff" stroke="#8a8579"/>',
           f'<clipPath id="{clip}"><rect x="{ml}" y="{mt}" width="{pw}" height="{ph}"/></clipPath>']
    for dec in range(math.ceil(lf0), math.floor(lf1) + 1):
        for m in range(1, 10):
            fr = m * 10.0 ** dec
            if f[0] <= fr <= f[-1]:
                col = "#d9d4c7" if m == 1 else "#efebe2"
                out.append(f'<line x1="{x(fr):.2f}" y1="{mt}" x2="{x(fr):.2f}" y2="{mt + ph}" stroke="{col}"/>')
        out.append(f'<text x="{x(10.0 ** dec):.2f}" y="{mt + ph + 15}" text-anchor="middle" '
                   f'fill="#4a463e">{_E(_fmt(10.0 ** dec, "Hz", 3))}</text>')
    step = 10 if top - bottom <= 60 else 20
    db = math.floor(top / step) * step
    while db >= bottom - 1e-9:
        out.append(f'<line x1="{ml}" y1="{y(db):.2f}" x2="{ml + pw}" y2="{y(db):.2f}" stroke="#e6e1d6"/>')
        out.append(f'<text x="{ml - 6}" y="{y(db) + 4:.2f}" text-anchor="end" fill="#4a463e">{db:g}</text>')
        db -= step
    band = pts(r.f_hz, r.high_db) + " " + pts(r.f_hz[::-1], r.low_db[::-1])
    out.append(f'<g clip-path="url(#{clip})">')
    out.append(f'<polygon points="{band}" fill="#cfe0e8" stroke="#9fc1d1" stroke-width="0.6"/>')
    ref3 = r.passband_db - 3.0
    out.append(f'<line x1="{ml}" y1="{y(ref3):.2f}" x2="{ml + pw}" y2="{y(ref3):.2f}" '
               f'stroke="#7d9a5a" stroke-dasharray="2,3"/>')
    out.append(f'<polyline points="{pts(r.f_hz, r.nominal_db)}" fill="none" stroke="#1f4e66" stroke-width="1.8"/>')
    out.append("</g>")
    for fr, lab, col, dash, dy in ((r.f0_hz, "f0", "#a8452b", "5,3", 0),
                                   (r.f3db_hz, "-3 dB", "#5b7f2a", "2,2", 12)):
        if np.isfinite(fr) and f[0] <= fr <= f[-1]:
            out.append(f'<line x1="{x(fr):.2f}" y1="{mt}" x2="{x(fr):.2f}" y2="{mt + ph}" stroke="{col}" '
                       f'stroke-dasharray="{dash}"/>')
            out.append(f'<text x="{x(fr) + 4:.2f}" y="{mt + 12 + dy}" fill="{col}">'
                       f'{_E(lab + " " + _fmt(fr, "Hz"))}</text>')
    out.append(f'<text x="{ml + pw / 2:.2f}" y="{h - 8}" text-anchor="middle" fill="#4a463e">frequency (Hz, log)</text>')
    out.append(f'<text x="14" y="{mt + ph / 2:.2f}" text-anchor="middle" fill="#4a463e" '
               f'transform="rotate(-90 14 {mt + ph / 2:.2f})">gain (dB)</text>')
    out.append(f'<text x="{ml}" y="{mt - 9}" fill="#2b2924">{_E(rep.name)}: nominal (line), '
               f'tolerance corners (band)</text>')
    out.append("</svg>")
    return "\n".join(out)


def _table(head: Sequence[str], rows: Sequence[Sequence[str]], cls: str) -> str:
    th = "".join(f"<th>{_E(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{_E(c)}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="{cls}"><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def stage_sections(reports: Sequence[StageReport]) -> list[tuple[str, str]]:
    """(heading, html fragment) per stage for ``report.html``.

    The heading is plain text (the report writer escapes it); everything
    user-written inside the fragment is escaped here. A fragment holds the
    parts table, the figures table (nominal, target, corner extremes,
    percentiles, share out of target, verdict), an inline SVG frequency
    response for filters, and the retune proposals when there are some.
    """
    out = []
    for rep in reports:
        units = {f.name: f.unit for f in rep.figures}
        parts = [(p.role, p.ref, p.value_text or "",
                  "" if p.tolerance is None else f"{p.tolerance * 100:g} %" + (" (assumed)" if p.tolerance_assumed else ""))
                 for p in rep.parts]
        figs = []
        for f in rep.figures:
            verdict = "" if f.passes is None else ("meets target" if f.passes else "MISSES target")
            figs.append((f.label, _fmt(f.nominal, f.unit), f.target.text if f.target else "",
                         _fmt(f.corner_min, f.unit), _fmt(f.corner_max, f.unit),
                         _fmt(f.p01, f.unit), _fmt(f.p50, f.unit), _fmt(f.p99, f.unit),
                         "" if f.share_out is None else _pct(f.share_out), verdict))
        bits = ['<div class="stage">',
                f'<p>{_E(rep.type)}' + (f": {_E(rep.note)}" if rep.note else "") +
                f'. Spread: every tolerance corner, and {rep.draws} Monte Carlo builds (seed {rep.seed}, '
                f'each part uniform within its tolerance).</p>']
        if rep.settings:
            bits.append("<p>" + _E("; ".join(f"{k} = {_fmt(v, 'V')}" for k, v in rep.settings)) + "</p>")
        if rep.assumptions:
            bits.append("<p>Assumed: " + _E("; ".join(rep.assumptions)) + ".</p>")
        bits.append(_table(("role", "part", "value", "tolerance"), parts, "stage-parts"))
        bits.append(_table(("figure", "nominal", "target", "corner min", "corner max", "1st pct",
                            "median", "99th pct", "builds out", "verdict"), figs, "stage-figures"))
        if rep.response is not None:
            bits.append(f'<figure class="stage-response">{_svg(rep, len(out) + 1)}</figure>')
        if rep.proposals:
            kinds = {p.role: p.kind for p in rep.parts}
            rows = []
            for i, p in enumerate(rep.proposals, 1):
                vals = ", ".join(f"{ref} = {_fmt_part(v, kinds[role])}" for role, ref, v in p.values)
                fg = ", ".join(f"{k} {_fmt(v, units.get(k, ''))}" for k, v in p.figures)
                rows.append((str(i), vals, fg, f"{p.error:.3g}", "yes" if p.passes else "no",
                             "" if p.share_out is None else _pct(p.share_out)))
            ser = ", ".join(f"{k} {v}" for k, v in rep.series)
            bits.append(f"<p>Retune with preferred values ({_E(ser)}):</p>")
            bits.append(_table(("#", "values", "figures", "error", "meets all", "builds out"), rows,
                               "stage-retune"))
        bits.append("</div>")
        out.append((f"Stage {rep.name} ({rep.type})", "\n".join(bits)))
    return out
