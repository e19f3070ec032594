"""Stage 1, SPICE form: read a sized design from a SPICE netlist.

Entry point: :func:`read_spice`. CONTRACT.md section 2 says what a SPICE
design must give; this module says how each line is read. README.md quotes
the parts-map syntax and the reference scheme below.

What is read
------------
* **Title.** The first line of the top file is the title, as SPICE has it;
  it becomes the design name (a ``.title`` line overrides it). Included
  files have no title line.
* **Comments.** Lines whose first non-blank character is ``*``; the rest of
  a line after ``;``; and, as ngspice does, after a ``$`` that stands alone
  (blank or line start before it, blank or line end after it). Blank lines.
* **Continuations.** A line whose first non-blank character is ``+``
  continues the line before it (comment lines may stand between them).
* **Board parts.** Element lines ``R``, ``C``, ``L``, ``D``, ``Q``, ``M``,
  ``J`` and ``X`` (subcircuit instances). The first letter of an element
  name says what it is, in any case; names and nodes are case-insensitive
  as in SPICE (``in`` and ``IN`` are one node; the first spelling is kept).
* **Numbers.** SPICE's own rule, which differs from the TOML design's: a
  decimal number, an optional exponent, an optional scale factor in any
  case (``T`` 1e12, ``G`` 1e9, ``MEG`` 1e6, ``K`` 1e3, ``MIL`` 25.4e-6,
  ``M`` 1e-3 -- *milli*, ``U`` 1e-6, ``N`` 1e-9, ``P`` 1e-12, ``F``
  1e-15), then anything else is ignored: ``10kOhm`` = 1e4, ``1uF`` = 1e-6,
  ``100pF`` = 1e-10, ``2k2`` = 2e3 (a warning: SPICE knows no RKM code),
  ``10MOhm`` = 1e-2 (a warning: M is milli), ``1F`` = 1e-15 (a warning).
  This is how ngspice's manual (chapter "Conventions") defines numbers, and
  ngspice 39 itself reads them so (tests/test_spice.py checks the two
  agree, token by token).
* **Values in braces.** ``{name}``, ``{2*rb}`` or ``'rb/2'``: names from
  ``.param`` (and subcircuit parameters), numbers, ``+ - * / ^ **`` and
  brackets. ``.param a=1k b={a*2}`` may refer forward; a loop is an error.
* **Subcircuits.** ``.subckt NAME ports... [params: k=v ...]`` / ``.ends``.
  An ``X`` instance is **one board part** when the parts map (or a
  ``* snugboard:`` record, below) gives its kind; otherwise its subcircuit
  is **flattened** into board parts. Definitions nested inside another are
  visible everywhere; ``.model`` lines are global wherever they stand.
* **Includes.** ``.include FILE`` / ``.inc FILE``, ``.lib FILE`` (the whole
  file) and ``.lib FILE SECTION`` (the lines between ``.lib SECTION`` and
  ``.endl`` in FILE), relative to the including file. A path that leaves the
  project folder ``root`` (also through ``..`` or a link), a missing file or
  a file that includes itself is a :class:`~pipeline.errors.DesignError`
  naming the including file and line.
* **Models.** ``.model NAME TYPE(...)`` is recorded: a ``D``, ``Q``, ``M``
  or ``J`` line's model gives the part's polarity (``NPN``/``PNP``,
  ``NMOS``/``PMOS``, ``NJF``/``PJF``); a model name that *is* one of those
  words (``Q1 c b e npn``) says so too. The model name is kept in the part's
  pass-through data as ``spice_model``.
* **Not board parts** (info findings, ``spice.not-a-part``): sources ``V``,
  ``I``, ``B``, ``E``, ``F``, ``G``, ``H``; coupling ``K``; analysis and
  output lines (``.op .ac .dc .tran .noise .tf .meas .save .print .plot
  .probe .four .options .temp .ic .nodeset`` ...) and ``.control`` ...
  ``.endc`` blocks. Other element letters (switches, lines, digital) are
  left out with a warning. A DC-only source from a node to ground (``V1 vcc
  0 5``, not 0 V, no AC or transient part) declares that net's voltage.
* **Ground.** Node ``0`` and ``gnd`` (any case) are the net ``GND``.
* ``.global`` nodes keep their name inside subcircuits. ``.end`` ends the
  file; lines after it are ignored.

Pins follow SPICE's node order, matched to the kind's pins by name:

======== =============================== ===============================
element  SPICE nodes                     kind pins (defaults)
======== =============================== ===============================
R, C, L  n1 n2                           1, 2 (in the kind's pin order)
D        anode cathode                   ``A``, ``K`` (diode: 2 = A, 1 = K)
Q        collector base emitter [subst]  ``C``, ``B``, ``E`` (substrate ignored)
M        drain gate source bulk          ``D``, ``G``, ``S`` (bulk must be the
                                         source's net, else a warning)
J        drain gate source               ``D``, ``G``, ``S``
X        as the subcircuit's ports       the parts map's ``pins`` list
======== =============================== ===============================

Without a parts map R, C and L become ``resistor``, ``capacitor`` and
``inductor`` in ``0603``, D ``diode`` in ``SOD-123`` (CONTRACT section 2);
Q, M and J the library's ``npn``/``pnp``, ``nmos``/``pmos`` (and
``njfet``/``pjfet`` where the library has them; else the parts map must name
the kind) in ``SOT-23``. An info finding lists the parts read by default.

References of flattened subcircuits
-----------------------------------
A part inside an instance gets the instance path, outermost first, and its
own name, joined by ``_``: ``R1`` inside ``X1`` is ``X1_R1``; ``C2`` inside
``X2`` inside ``X1`` is ``X1_X2_C2``. (Board references must be letters,
digits and ``_``, because a pin is written ``REF.PIN``.) Internal nodes
become nets named by the same path joined by ``.``: node ``mid`` of ``X1``
is the net ``X1.mid``; subcircuit ports take the caller's nets. An ``X``
instance that is one part takes its name without the leading ``X`` when the
rest starts with a letter (``XU1`` -> ``U1``; ``X7`` stays ``X7``), unless
the parts map gives ``ref``. A generated name that meets an existing one is
an error, never a silent merge.

The parts map
-------------
``[project] parts_map = "parts.toml"`` names a TOML file::

    [defaults]                      # per element letter R C L D Q M J
    R = { package = "0805" }
    D = { kind = "led", package = "0603" }

    [models.LEDRED]                 # every D/Q/M/J line using this model
    kind = "led"
    package = "0805"

    [subckt.OPAMP1]                 # every X instance of this subcircuit
    kind = "opamp-dual"
    package = "SOIC-8"
    pins = ["3", "2", "8", "4", "1"]

    [refs.XU1B]                     # one element: its SPICE name, a
    ref = "U1"                      # flattened ref (X1_R1) or board ref
    kind = "opamp-dual"
    package = "SOIC-8"
    pins = ["5", "6", "8", "4", "7"]
    mpn = "..."

    [design]
    revision = "B"

    [stages.lowpass]                # passed on to the stage analysis
    type = "sallen-key-lowpass"

Keys of a ``refs``, ``subckt`` or ``models`` table: ``kind``, ``package``,
``pins``; and for ``refs`` also ``ref``, ``value`` (TOML design notation),
``tolerance``, ``rating``, ``manufacturer``, ``mpn``, ``note``, ``dnp``,
``supplier``, ``order_code``, ``description``. ``pins`` lists, in the
element's node order, the kind's pin (number or name) each node goes to;
``""`` leaves that node off the board part; kind pins not listed stay
unconnected. Without ``pins``, pins are matched by name (table above), then
by position when the counts agree. Several elements given the same ``ref``
(and the same kind and package) are sections of one part: the two halves of
a dual op-amp, each drawn as its own ``X`` line. Lookups are
case-insensitive; the most specific table wins (``refs``, then a
``* snugboard:`` record, then ``subckt`` / ``models``, then ``defaults``).
Unknown keys, kinds or packages are errors naming the key; entries no
element used give a warning.

``* snugboard:`` records
------------------------
Comment lines ``* snugboard: design|kind|net|part|stage key=value ...``
(values bare or JSON strings) are what :func:`pipeline.export.spice.spice_netlist`
writes so a written file reads back to the same design: part kinds,
packages and values, net names SPICE cannot spell, and parts it does not
simulate (connectors, unfitted parts) with their nodes. Any other SPICE
program reads them as comments.
"""

from __future__ import annotations

import json
import math
import posixpath
import re
from dataclasses import dataclass, field
from decimal import Decimal, InvalidOperation, Overflow, Underflow, localcontext
from pathlib import Path
from typing import Any, Callable, Iterable

from . import values as _values
from .errors import DesignError
from .model import Design, Finding, Net, Part, PartKind, PinDef, PinRef, PIN_ROLES, RawTable
from .tomlsrc import load as _load_toml

__all__ = ["read_spice", "parse_number", "SCALE_FACTORS", "RECORD_PREFIX"]

#: SPICE scale factors (ngspice manual, "Conventions"): letters -> factor.
#: Longest first: ``MEG`` and ``MIL`` before ``M``.
SCALE_FACTORS: tuple[tuple[str, Decimal], ...] = (
    ("MEG", Decimal("1e6")),
    ("MIL", Decimal("25.4e-6")),
    ("T", Decimal("1e12")),
    ("G", Decimal("1e9")),
    ("K", Decimal("1e3")),
    ("M", Decimal("1e-3")),
    ("U", Decimal("1e-6")),
    ("N", Decimal("1e-9")),
    ("P", Decimal("1e-12")),
    ("F", Decimal("1e-15")),
)

#: Comment prefix of the records the SPICE writer leaves for this reader.
RECORD_PREFIX = "snugboard:"

_NUM_RE = re.compile(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(.*)\Z", re.S)
_PLAIN_NUM = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_REF_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_RECORD_RE = re.compile(r"^\*\s*snugboard:\s*(\w+)\s*(.*)$", re.I)
_KV_RE = re.compile(r'\s*([A-Za-z_][\w]*)=("(?:[^"\\]|\\.)*"|\S*)')
_GROUND = ("0", "gnd")

_SOURCES = {"v": "voltage source", "i": "current source", "b": "behavioural source",
            "e": "voltage-controlled voltage source", "f": "current-controlled current source",
            "g": "voltage-controlled current source", "h": "current-controlled voltage source"}
_OTHER_ELEMENTS = {"k": "inductor coupling", "s": "voltage-controlled switch", "w": "current-controlled switch",
                   "t": "transmission line", "o": "lossy transmission line", "u": "distributed RC line",
                   "y": "transmission line", "a": "code-model element", "n": "device-model element",
                   "p": "coupled transmission line", "z": "MESFET"}
_ANALYSIS = frozenset({
    "op", "ac", "dc", "tran", "noise", "tf", "sens", "disto", "pz", "sp", "four", "fourier", "meas",
    "measure", "save", "print", "plot", "probe", "options", "option", "opt", "temp", "ic", "nodeset",
    "width", "csparam", "func", "step", "data", "alter", "pss", "hb", "checkpoint", "endl",
})
_DEFAULTS = {
    "r": ("resistor", "0603"),
    "c": ("capacitor", "0603"),
    "l": ("inductor", "0603"),
    "d": ("diode", "SOD-123"),
}
#: Element letter -> terminal roles in SPICE node order, each with the pin
#: names (upper case) that role matches on a kind.
_ROLES: dict[str, tuple[tuple[str, tuple[str, ...]], ...]] = {
    "d": (("anode", ("A", "ANODE")), ("cathode", ("K", "CATHODE"))),
    "q": (("collector", ("C", "COLLECTOR")), ("base", ("B", "BASE")), ("emitter", ("E", "EMITTER"))),
    "m": (("drain", ("D", "DRAIN")), ("gate", ("G", "GATE")), ("source", ("S", "SOURCE"))),
    "j": (("drain", ("D", "DRAIN")), ("gate", ("G", "GATE")), ("source", ("S", "SOURCE"))),
}
#: Model type (and model names that are a type) -> candidate kind names.
_POLARITY_KINDS = {
    "npn": ("npn",), "pnp": ("pnp",),
    "nmos": ("nmos",), "pmos": ("pmos",),
    "njf": ("njfet", "jfet-n", "njf"), "pjf": ("pjfet", "jfet-p", "pjf"),
}
_LETTER_TYPES = {"q": ("npn", "pnp"), "m": ("nmos", "pmos"), "j": ("njf", "pjf"), "d": ("d",)}
_PM_TOP = ("defaults", "models", "subckt", "refs", "design", "stages")
_PM_MAP_KEYS = ("kind", "package", "pins")
_PM_REF_KEYS = ("kind", "package", "pins", "ref", "value", "tolerance", "rating", "manufacturer", "mpn",
                "note", "dnp", "supplier", "order_code", "description")
_PM_DEFAULT_KEYS = ("kind", "package")
_PASSTHROUGH = ("supplier", "order_code", "description")
_MAX_DEPTH = 50


# ==========================================================================
# Numbers
# ==========================================================================
def _split_number(token: str) -> tuple[Decimal, str, str] | None:
    """``(decimal value, scale letters, ignored rest)`` or ``None``."""
    m = _NUM_RE.match(token)
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
    ValueError
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
        raise ValueError(f"'{token}' is not a number")
    value = float(got[0])
    if not math.isfinite(value):
        raise ValueError(f"'{token}' is out of range")
    return value


def _number_warning(token: str, letter: str) -> str | None:
    """A sentence when SPICE's reading of ``token`` is probably not what was meant."""
    got = _split_number(token)
    if got is None:
        return None
    _, scale, rest = got
    if scale.upper() == "M" and rest.upper().startswith("OHM"):
        return f"'{token}' reads as milliohms in SPICE (M is milli); write {token[:len(token) - len(scale + rest)]}Meg for megohms"
    if rest[:1].isdigit():
        return (f"'{token}' reads as {_fmt(parse_number(token))} in SPICE, which knows no RKM code; "
                f"write it with a decimal point (e.g. 2.2k for 2k2)")
    if letter == "c" and scale == "F" and rest == "":
        return f"'{token}' reads as femtofarads in SPICE (F is femto); write the number alone for farads"
    return None


def _fmt(v: float) -> str:
    return f"{v:.6g}"


# ==========================================================================
# Expressions ({...} and '...')
# ==========================================================================
_EXPR_TOKEN = re.compile(
    r"\s*(?:(?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*)"
    r"|(?P<name>[A-Za-z_][\w.]*)|(?P<op>\*\*|[-+*/^()]))"
)


class _ExprError(Exception):
    pass


def _evaluate(text: str, lookup: Callable[[str], float]) -> float:
    """Evaluate a parameter expression: numbers, names, + - * / ^ ** ( )."""
    tokens: list[tuple[str, str]] = []
    pos = 0
    text = text.strip()
    while pos < len(text):
        m = _EXPR_TOKEN.match(text, pos)
        if not m or m.end() == pos:
            if text[pos:].strip() == "":
                break
            raise _ExprError(f"cannot read '{text[pos:].strip()}' in the expression '{text}'")
        kind = m.lastgroup
        tokens.append((kind, m.group(kind)))
        pos = m.end()
    if not tokens:
        raise _ExprError("the expression is empty")
    i = 0

    def peek() -> tuple[str, str] | None:
        return tokens[i] if i < len(tokens) else None

    def take() -> tuple[str, str]:
        nonlocal i
        t = tokens[i]
        i += 1
        return t

    def atom() -> float:
        t = peek()
        if t is None:
            raise _ExprError(f"the expression '{text}' ends too early")
        if t == ("op", "("):
            take()
            v = add()
            if peek() != ("op", ")"):
                raise _ExprError(f"a ')' is missing in '{text}'")
            take()
            return v
        if t[0] == "op" and t[1] in "+-":
            take()
            v = power()
            return -v if t[1] == "-" else v
        if t[0] == "num":
            take()
            try:
                return parse_number(t[1])
            except ValueError as exc:
                raise _ExprError(str(exc)) from None
        if t[0] == "name":
            take()
            if peek() == ("op", "("):
                raise _ExprError(f"function '{t[1]}(...)' is not supported; use a plain value")
            return lookup(t[1])
        raise _ExprError(f"unexpected '{t[1]}' in '{text}'")

    def power() -> float:
        base = atom()
        t = peek()
        if t in (("op", "^"), ("op", "**")):
            take()
            exp = power()
            try:
                return float(base ** exp)
            except (OverflowError, ZeroDivisionError, TypeError):
                raise _ExprError(f"'{text}' is out of range or not a real number") from None
        return base

    def mul() -> float:
        v = power()
        while peek() in (("op", "*"), ("op", "/")):
            op = take()[1]
            r = power()
            if op == "*":
                v *= r
            else:
                if r == 0:
                    raise _ExprError(f"'{text}' divides by zero")
                v /= r
        return v

    def add() -> float:
        v = mul()
        while peek() in (("op", "+"), ("op", "-")):
            op = take()[1]
            r = mul()
            v = v + r if op == "+" else v - r
        return v

    value = add()
    if i != len(tokens):
        raise _ExprError(f"unexpected '{tokens[i][1]}' in '{text}'")
    if isinstance(value, complex) or not math.isfinite(value):
        raise _ExprError(f"'{text}' is not a finite number")
    return float(value)


@dataclass
class _Scope:
    """Parameter names (lower case) -> expression text, evaluated lazily."""

    raw: dict[str, tuple[str, str, int]]  # name -> (text, file, line)
    parent: "_Scope | None" = None
    cache: dict[str, float] = field(default_factory=dict)
    busy: set[str] = field(default_factory=set)

    def get(self, name: str) -> float:
        key = name.lower()
        if key in self.raw:
            if key in self.cache:
                return self.cache[key]
            if key in self.busy:
                raise _ExprError(f"parameter '{name}' is defined in terms of itself")
            self.busy.add(key)
            text, file, line = self.raw[key]
            try:
                v = _evaluate(_strip_braces(text), self.get)
            except _ExprError as exc:
                if exc.args and isinstance(exc.args[0], tuple):
                    raise
                raise _ExprError((file, line, f"parameter '{name}': {exc.args[0]}")) from None
            finally:
                self.busy.discard(key)
            self.cache[key] = v
            return v
        if self.parent is not None:
            return self.parent.get(name)
        raise _ExprError(f"no parameter '{name}' (define it with .param {name}=...)")


def _strip_braces(text: str) -> str:
    t = text.strip()
    if len(t) >= 2 and ((t[0] == "{" and t[-1] == "}") or (t[0] == "'" and t[-1] == "'")):
        return t[1:-1]
    return t


# ==========================================================================
# Lines, files, includes
# ==========================================================================
@dataclass(frozen=True)
class _Line:
    file: str  # display name
    line: int  # 1-based line the logical line starts on
    text: str  # comments removed, continuations joined


@dataclass
class _Reader:
    """Mutable state of one :func:`read_spice` call (never escapes it)."""

    root: Path
    shown: str
    findings: list[Finding] = field(default_factory=list)
    records: list[tuple[str, dict[str, str], str, int]] = field(default_factory=list)
    title: str = ""
    dot_title: str = ""

    def note(self, severity: str, check: str, subject: Iterable[str], message: str) -> None:
        self.findings.append(Finding(severity, check, tuple(subject), message))


def _read_text(path: Path, shown: str, where: tuple[str, int] | None) -> str:
    def fail(reason: str) -> DesignError:
        if where is not None:
            return DesignError(where[0], f"{reason}: {shown}", line=where[1])
        return DesignError(shown, reason)

    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise fail("file not found") from None
    except IsADirectoryError:
        raise fail("is a folder, expected a file") from None
    except OSError as exc:
        raise fail(f"cannot read the file ({exc.strerror})") from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        # Older simulators write Latin-1; every byte decodes, so nothing is lost.
        return raw.decode("latin-1")


def _strip_inline(text: str) -> str:
    """Drop ``;`` comments and ngspice ``$`` comments (outside quotes)."""
    out = []
    quote = ""
    n = len(text)
    for i, ch in enumerate(text):
        if quote:
            out.append(ch)
            if ch == quote:
                quote = ""
            continue
        if ch == '"':
            quote = ch
        elif ch == ";":
            break
        elif ch == "$" and (i == 0 or text[i - 1] in " \t") and (i + 1 == n or text[i + 1] in " \t"):
            break
        out.append(ch)
    return "".join(out).rstrip()


def _logical(text: str, shown: str, rd: _Reader, *, has_title: bool) -> list[_Line]:
    """Physical lines -> logical lines (continuations joined, comments gone)."""
    lines = text.splitlines()
    out: list[_Line] = []
    start = 0
    if has_title:
        if not lines:
            raise DesignError(shown, "the file is empty; a SPICE file starts with a title line", line=1)
        rd.title = lines[0].strip().lstrip("*").strip()
        start = 1
        first = lines[0].strip()
        if first[:1] == "." or (first[:1].isalpha() and len(first.split()) >= 3
                                and first[:1].lower() in "rcldqmjxvi"):
            rd.note("warning", "spice.title-line", (shown,),
                    f"{shown}:1: the first line '{first[:40]}' is read as the title, as SPICE does; "
                    f"put a title line before it if it should count.")
    for no in range(start, len(lines)):
        raw = lines[no]
        stripped = raw.strip()
        if not stripped:
            continue
        if stripped.startswith("*"):
            m = _RECORD_RE.match(stripped)
            if m:
                rd.records.append((m.group(1).lower(), _parse_kv(m.group(2), shown, no + 1), shown, no + 1))
            continue
        body = _strip_inline(raw).strip()
        if stripped.startswith("+"):
            if not out:
                raise DesignError(shown, "a '+' continuation line with no line before it to continue",
                                  line=no + 1)
            rest = _strip_inline(stripped[1:]).strip()
            prev = out[-1]
            out[-1] = _Line(prev.file, prev.line, (prev.text + " " + rest).strip())
            continue
        if not body:
            continue
        out.append(_Line(shown, no + 1, body))
    return out


def _parse_kv(text: str, shown: str, line: int) -> dict[str, str]:
    out: dict[str, str] = {}
    pos = 0
    text = text.rstrip()
    while pos < len(text):
        m = _KV_RE.match(text, pos)
        if not m or m.end() == pos:
            raise DesignError(shown, f"cannot read the snugboard record near '{text[pos:pos + 30].strip()}'",
                              line=line)
        val = m.group(2)
        if val.startswith('"'):
            try:
                val = json.loads(val)
            except json.JSONDecodeError:
                raise DesignError(shown, f"bad quoted text in the snugboard record: {val}", line=line) from None
        out[m.group(1).lower()] = val
        pos = m.end()
    return out


def _child_display(parent: str, target: str) -> str:
    parent_dir = posixpath.dirname(parent.replace("\\", "/"))
    joined = posixpath.join(parent_dir, target.replace("\\", "/"))
    return posixpath.normpath(joined)


def _expand(lines: list[_Line], here: Path, rd: _Reader, stack: tuple[Path, ...],
            section: str | None = None, section_where: tuple[str, int] | None = None) -> list[_Line]:
    """Splice includes into ``lines``; with ``section``, keep only that .lib section."""
    out: list[_Line] = []
    in_section = section is None
    found = section is None
    in_control: _Line | None = None
    for ln in lines:
        words = ln.text.split()
        head = words[0].lower()
        if in_control is not None:
            if head == ".endc":
                in_control = None
            continue
        if section is not None:
            if head == ".lib" and len(words) == 2:
                if in_section:
                    raise DesignError(ln.file, f".lib section '{words[1]}' starts inside section '{section}'",
                                      line=ln.line)
                in_section = words[1].lower() == section.lower()
                found = found or in_section
                continue
            if head == ".endl":
                in_section = False
                continue
            if not in_section:
                continue
        if head == ".control":
            in_control = ln
            rd.note("info", "spice.not-a-part", (ln.file,),
                    f"{ln.file}:{ln.line}: the .control block holds simulator commands, not board parts; left out.")
            continue
        if head in (".include", ".inc", ".lib"):
            if len(words) < 2:
                raise DesignError(ln.file, f"{words[0]} needs a file name", line=ln.line)
            rest = ln.text.split(None, 1)[1].strip()
            if rest[:1] in "\"'":
                end = rest.find(rest[0], 1)
                if end < 0:
                    raise DesignError(ln.file, f"{words[0]}: the file name's closing quote is missing", line=ln.line)
                target, more = rest[1:end], rest[end + 1:].split()
            else:
                target, *more = rest.split()
            sect = None
            if head == ".lib":
                if len(more) > 1:
                    raise DesignError(ln.file, ".lib takes a file and at most one section name", line=ln.line)
                sect = more[0] if more else None
            elif more:
                raise DesignError(ln.file, f"{words[0]} takes one file name; found more: {' '.join(more)}",
                                  line=ln.line)
            out.extend(_include(target, sect, ln, here, rd, stack))
            continue
        if head == ".end":
            break
        out.append(ln)
    if in_control is not None:
        raise DesignError(in_control.file, ".control has no .endc", line=in_control.line)
    if section is not None and not found:
        where = section_where or (lines[0].file if lines else "", 0)
        raise DesignError(where[0], f"no .lib section '{section}' in the library file", line=where[1])
    return out


def _include(target: str, section: str | None, ln: _Line, here: Path, rd: _Reader,
             stack: tuple[Path, ...]) -> list[_Line]:
    path = Path(target)
    full = (path if path.is_absolute() else here.parent / path)
    try:
        resolved = full.resolve()
    except (OSError, RuntimeError):
        raise DesignError(ln.file, f"cannot follow the path '{target}'", line=ln.line) from None
    root = rd.root
    if not resolved.is_relative_to(root):
        raise DesignError(ln.file, f"'{target}' lies outside the project folder; only files inside it may be included",
                          line=ln.line)
    if resolved in stack:
        raise DesignError(ln.file, f"'{target}' includes itself (through {len(stack)} file(s))", line=ln.line)
    shown = _child_display(ln.file, target)
    text = _read_text(resolved, shown, (ln.file, ln.line))
    sub = _logical(text, shown, rd, has_title=False)
    return _expand(sub, resolved, rd, stack + (resolved,), section, (ln.file, ln.line))


# ==========================================================================
# Tokens
# ==========================================================================
_TOKEN_RE = re.compile(r"\{[^}]*\}|'[^']*'|\"[^\"]*\"|=|[^\s=]+")


def _tokens(text: str, *, drop_brackets: bool = False) -> list[str]:
    if drop_brackets:
        text = _debracket(text)
    raw = _TOKEN_RE.findall(text)
    out: list[str] = []
    i = 0
    while i < len(raw):
        t = raw[i]
        if t == "=" and out and i + 1 < len(raw):
            out[-1] = out[-1] + "=" + raw[i + 1]
            i += 2
            continue
        if t.endswith("=") and len(t) > 1 and i + 1 < len(raw):
            out.append(t + raw[i + 1])
            i += 2
            continue
        out.append(t)
        i += 1
    # "a =b" style: token "=b" glued to the one before
    merged: list[str] = []
    for t in out:
        if t.startswith("=") and merged:
            merged[-1] += t
        else:
            merged.append(t)
    return merged


def _debracket(text: str) -> str:
    """Turn ``( ) ,`` outside braces and quotes into blanks."""
    out = []
    depth = 0
    quote = ""
    for ch in text:
        if quote:
            out.append(ch)
            if ch == quote:
                quote = ""
            continue
        if ch in "'\"":
            quote = ch
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth = max(0, depth - 1)
        elif depth == 0 and ch in "(),":
            out.append(" ")
            continue
        out.append(ch)
    return "".join(out)


def _is_kv(token: str) -> bool:
    return "=" in token and not token.startswith(("{", "'", '"'))


# ==========================================================================
# The parts map
# ==========================================================================
@dataclass(frozen=True)
class _Spec:
    """What one parts-map table (or record) says about an element."""

    origin: str  # "refs", "record", "subckt", "models", "defaults"
    file: str
    key: str
    line: int | None
    kind: str = ""
    package: str = ""
    pins: tuple[str, ...] | None = None
    ref: str = ""
    fields: tuple[tuple[str, Any], ...] = ()

    def get(self, k: str, default: Any = None) -> Any:
        for kk, v in self.fields:
            if kk == k:
                return v
        return default


@dataclass
class _PartsMap:
    defaults: dict[str, _Spec] = field(default_factory=dict)
    models: dict[str, _Spec] = field(default_factory=dict)
    subckt: dict[str, _Spec] = field(default_factory=dict)
    refs: dict[str, _Spec] = field(default_factory=dict)
    revision: str | None = None
    stages: tuple[RawTable, ...] = ()
    used: set[str] = field(default_factory=set)


def _read_parts_map(path: Path, shown: str, library: Any) -> _PartsMap:
    src = _load_toml(path, shown, DesignError)
    data = src.data
    pm = _PartsMap()

    def err(key: str, reason: str) -> DesignError:
        return src.error(key, reason, DesignError)

    def table(key: str, value: Any) -> dict:
        if not isinstance(value, dict):
            raise err(key, f"expected a table, found {type(value).__name__}")
        return value

    def unknown(prefix: str, t: dict, allowed: tuple[str, ...]) -> None:
        for k in t:
            if k not in allowed:
                raise err(f"{prefix}.{k}" if prefix else k, f"unknown key '{k}'; expected one of: {', '.join(allowed)}")

    def text(key: str, v: Any) -> str:
        if isinstance(v, bool) or not isinstance(v, (str, int, float)):
            raise err(key, f"expected text, found {type(v).__name__}")
        return str(v).strip()

    def spec(origin: str, key: str, body: dict, allowed: tuple[str, ...]) -> _Spec:
        unknown(key, body, allowed)
        kind = text(f"{key}.kind", body["kind"]) if "kind" in body else ""
        if kind:
            library.kind(kind, file=shown, line=src.line(f"{key}.kind"), key=f"{key}.kind")
        package = text(f"{key}.package", body["package"]) if "package" in body else ""
        if package:
            package = library.package(package, file=shown, line=src.line(f"{key}.package"),
                                      key=f"{key}.package").name
        pins = None
        if "pins" in body:
            raw = body["pins"]
            if not isinstance(raw, list) or not raw:
                raise err(f"{key}.pins", "pins is a list naming, in node order, each node's kind pin: "
                          "pins = [\"3\", \"2\", \"8\", \"4\", \"1\"]")
            pins = tuple(text(f"{key}.pins", p) for p in raw)
        ref = text(f"{key}.ref", body["ref"]) if "ref" in body else ""
        if ref and not _REF_RE.match(ref):
            raise err(f"{key}.ref", f"'{ref}' is not a usable reference: start with a letter, then letters, digits or _")
        fields: list[tuple[str, Any]] = []
        for k in ("value", "tolerance", "rating", "manufacturer", "mpn", "note", *_PASSTHROUGH):
            if k in body:
                fields.append((k, text(f"{key}.{k}", body[k])))
        if "dnp" in body:
            if not isinstance(body["dnp"], bool):
                raise err(f"{key}.dnp", "dnp must be true or false")
            fields.append(("dnp", body["dnp"]))
        return _Spec(origin, shown, key, src.line(key), kind, package, pins, ref, tuple(fields))

    unknown("", data, _PM_TOP)
    for letter, body in table("defaults", data.get("defaults", {})).items():
        key = f"defaults.{letter}"
        if letter.lower() not in ("r", "c", "l", "d", "q", "m", "j"):
            raise err(key, f"defaults are per element letter R, C, L, D, Q, M or J, not '{letter}'")
        if letter.lower() in pm.defaults:
            raise err(key, f"defaults for {letter.upper()} given twice")
        pm.defaults[letter.lower()] = spec("defaults", key, table(key, body), _PM_DEFAULT_KEYS)
    for group, target in (("models", pm.models), ("subckt", pm.subckt), ("refs", pm.refs)):
        for name, body in table(group, data.get(group, {})).items():
            key = f"{group}.{name}"
            if name.lower() in target:
                raise err(key, f"'{name}' is given twice (names are not case-sensitive in SPICE)")
            allowed = _PM_REF_KEYS if group == "refs" else _PM_MAP_KEYS
            target[name.lower()] = spec(group, key, table(key, body), allowed)
    head = table("design", data.get("design", {}))
    unknown("design", head, ("revision",))
    if "revision" in head:
        pm.revision = text("design.revision", head["revision"])
    stages = table("stages", data.get("stages", {}))
    pm.stages = tuple(
        RawTable(name=n, items=tuple(table(f"stages.{n}", b).items()), file=shown, key=f"stages.{n}",
                 line=src.line(f"stages.{n}") or 0)
        for n, b in stages.items()
    )
    return pm


# ==========================================================================
# Collected netlist
# ==========================================================================
@dataclass
class _Subckt:
    name: str
    ports: tuple[str, ...]
    params: dict[str, tuple[str, str, int]]
    body: list[_Line]
    file: str
    line: int


@dataclass
class _Model:
    name: str
    type: str
    file: str
    line: int


@dataclass
class _Cand:
    """An element that becomes (part of) a board part."""

    spice_name: str  # hierarchical, dotted: X1.R1
    ref: str
    letter: str
    nodes: list[str]  # net keys, SPICE order
    file: str
    line: int
    kind: PartKind
    package: str
    pins: tuple[str, ...]  # kind pin number per node ("" = not on the board part)
    value: float | None = None
    value_text: str = ""
    model: str = ""
    spec: _Spec | None = None  # the most specific parts-map entry (for fields)
    record: dict[str, str] | None = None
    explicit_ref: bool = False


@dataclass
class _Netlist:
    subckts: dict[str, _Subckt] = field(default_factory=dict)
    models: dict[str, _Model] = field(default_factory=dict)
    params: dict[str, tuple[str, str, int]] = field(default_factory=dict)
    globals_: set[str] = field(default_factory=set)
    top: list[_Line] = field(default_factory=list)


def _collect(lines: list[_Line], rd: _Reader) -> _Netlist:
    nl = _Netlist()
    stack: list[_Subckt] = []
    for ln in lines:
        head = ln.text.split()[0].lower()
        if head == ".subckt":
            toks = _tokens(ln.text)
            if len(toks) < 2:
                raise DesignError(ln.file, ".subckt needs a name", line=ln.line)
            name = toks[1]
            ports, params = _nodes_and_params(toks[2:], ln, prefix="",
                                              after=lambda t: f"port '{t}' after the parameters of .subckt {name}")
            if name.lower() in nl.subckts:
                other = nl.subckts[name.lower()]
                raise DesignError(ln.file, f"subcircuit '{name}' is defined twice (first at {other.file}:{other.line})",
                                  line=ln.line)
            lower_ports = [p.lower() for p in ports]
            if len(set(lower_ports)) != len(lower_ports):
                raise DesignError(ln.file, f".subckt {name} names a port twice", line=ln.line)
            sub = _Subckt(name, tuple(ports), params, [], ln.file, ln.line)
            nl.subckts[name.lower()] = sub
            stack.append(sub)
            continue
        if head == ".ends":
            if not stack:
                raise DesignError(ln.file, ".ends without a .subckt before it", line=ln.line)
            words = ln.text.split()
            if len(words) > 1 and words[1].lower() != stack[-1].name.lower():
                raise DesignError(ln.file, f".ends {words[1]} closes .subckt {stack[-1].name}", line=ln.line)
            stack.pop()
            continue
        if head == ".model":
            toks = _tokens(_debracket(ln.text))
            if len(toks) < 3:
                raise DesignError(ln.file, ".model needs a name and a type, e.g. .model Q1MOD NPN", line=ln.line)
            name, mtype = toks[1], toks[2].split("(")[0]
            nl.models[name.lower()] = _Model(name, mtype.lower(), ln.file, ln.line)
            continue
        if head == ".global":
            nl.globals_.update(w.lower() for w in ln.text.split()[1:])
            continue
        if head == ".title":
            rd.dot_title = ln.text.split(None, 1)[1].strip() if len(ln.text.split()) > 1 else ""
            continue
        if stack:
            stack[-1].body.append(ln)
            continue
        if head in (".param", ".params"):
            _read_params(ln, nl.params)
            continue
        nl.top.append(ln)
    if stack:
        raise DesignError(stack[-1].file, f".subckt {stack[-1].name} has no .ends", line=stack[-1].line)
    return nl


def _read_params(ln: _Line, into: dict[str, tuple[str, str, int]]) -> None:
    toks = _tokens(ln.text)[1:]
    if not toks:
        raise DesignError(ln.file, ".param needs name=value", line=ln.line)
    for t in toks:
        if not _is_kv(t):
            raise DesignError(ln.file, f".param: '{t}' is not name=value", line=ln.line)
        k, v = t.split("=", 1)
        if not re.match(r"^[A-Za-z_][\w.]*$", k) or not v:
            raise DesignError(ln.file, f".param: cannot read '{t}'", line=ln.line)
        into[k.lower()] = (v, ln.file, ln.line)


# ==========================================================================
# Elaboration
# ==========================================================================
@dataclass
class _Ctx:
    path: tuple[str, ...]  # instance names, outermost first, as written
    ports: dict[str, str]  # lower port name -> net key
    scope: _Scope
    stack: tuple[str, ...]  # subcircuit names being expanded


@dataclass
class _Build:
    library: Any
    pm: _PartsMap
    nl: _Netlist
    rd: _Reader
    records: dict[str, dict[str, str]]  # lower element name -> part record
    cands: list[_Cand] = field(default_factory=list)
    net_names: dict[str, str] = field(default_factory=dict)  # key -> display
    net_origin: dict[str, tuple[str, int, str]] = field(default_factory=dict)  # key -> (file, line, path)
    net_lines: dict[str, int] = field(default_factory=dict)
    elements: dict[str, tuple[str, int]] = field(default_factory=dict)  # lower spice name -> where
    sources: list[tuple[str, str, str, float, _Line]] = field(default_factory=list)
    defaulted: dict[str, list[str]] = field(default_factory=dict)
    gscope: _Scope | None = None


def _net(b: _Build, ctx: _Ctx, node: str, ln: _Line) -> str:
    if node[:1] in "{'\"" or "=" in node:
        raise DesignError(ln.file, f"'{node}' is not a node name", line=ln.line)
    low = node.lower()
    if low in _GROUND:
        b.net_names.setdefault("0", "GND")
        b.net_lines.setdefault("0", ln.line)
        return "0"
    if low in ctx.ports:
        return ctx.ports[low]
    if not ctx.path or low in b.nl.globals_:
        key, shown, origin = low, node, ""
    else:
        key = ".".join(p.lower() for p in ctx.path) + "." + low
        shown = ".".join(ctx.path) + "." + node
        origin = ".".join(ctx.path)
    prev = b.net_origin.get(key)
    if prev is None:
        b.net_origin[key] = (ln.file, ln.line, origin)
        b.net_names[key] = shown
        b.net_lines[key] = ln.line
    elif prev[2] != origin:
        inside = origin or prev[2]
        raise DesignError(ln.file, f"node '{shown}' is both a node of the top level and an inside node of "
                          f"{inside} (first at {prev[0]}:{prev[1]}); rename one of them", line=ln.line)
    return key


def _value_of(token: str, ctx: _Ctx, ln: _Line, b: _Build, name: str, letter: str) -> tuple[float, str]:
    t = token.strip()
    if t[:1] in "{'":
        try:
            return _evaluate(_strip_braces(t), ctx.scope.get), t
        except _ExprError as exc:
            raise _expr_error(exc, ln, name) from None
    if t[:1] == '"':
        t = t[1:-1]
    try:
        v = parse_number(t)
    except ValueError:
        try:
            ctx.scope.get(t)
            hint = f"; write {{{t}}} to use the parameter"
        except _ExprError:
            hint = ""
        raise DesignError(ln.file, f"{name}: value '{token}' is not a number{hint}", line=ln.line) from None
    warn = _number_warning(t, letter)
    if warn:
        b.rd.note("warning", "spice.number", (name,), f"{ln.file}:{ln.line}: {name}: {warn}.")
    return v, t


def _expr_error(exc: _ExprError, ln: _Line, name: str) -> DesignError:
    arg = exc.args[0] if exc.args else "bad expression"
    if isinstance(arg, tuple):
        return DesignError(arg[0], arg[2], line=arg[1])
    return DesignError(ln.file, f"{name}: {arg}", line=ln.line)


def _board_ref(ctx: _Ctx, name: str) -> str:
    return "_".join((*ctx.path, name))


def _elaborate(lines: list[_Line], ctx: _Ctx, b: _Build) -> None:
    for ln in lines:
        head = ln.text.split()[0]
        low = head.lower()
        if low.startswith("."):
            _directive(ln, low, ctx, b)
            continue
        letter = low[0]
        if not letter.isalpha():
            raise DesignError(ln.file, f"cannot read the line '{ln.text[:40]}': an element name starts with a letter",
                              line=ln.line)
        spice_name = ".".join((*ctx.path, head))
        key = spice_name.lower()
        if key in b.elements:
            f, l = b.elements[key]
            raise DesignError(ln.file, f"element {head} is defined twice (first at {f}:{l}; names are not "
                              f"case-sensitive in SPICE)", line=ln.line)
        b.elements[key] = (ln.file, ln.line)
        if letter in _SOURCES:
            _source(ln, letter, ctx, b, spice_name)
            continue
        if letter in _OTHER_ELEMENTS:
            sev = "info" if letter == "k" else "warning"
            b.rd.note(sev, "spice.not-a-part", (spice_name,),
                      f"{ln.file}:{ln.line}: {spice_name} is a {_OTHER_ELEMENTS[letter]}, which snugboard does not "
                      f"place on the board; left out.")
            continue
        if letter in "rcl":
            _passive(ln, letter, ctx, b, spice_name)
        elif letter in "dqmj":
            _semiconductor(ln, letter, ctx, b, spice_name)
        elif letter == "x":
            _instance(ln, ctx, b, spice_name)
        else:
            raise DesignError(ln.file, f"unknown element letter '{head[0]}' in '{head}'", line=ln.line)


def _directive(ln: _Line, low: str, ctx: _Ctx, b: _Build) -> None:
    name = low[1:]
    if low in (".param", ".params"):  # inside a subcircuit body: read before its elements
        return
    if name in _ANALYSIS:
        b.rd.note("info", "spice.not-a-part", (ln.file,),
                  f"{ln.file}:{ln.line}: {low} is a simulator directive, not a board part; left out.")
        return
    b.rd.note("warning", "spice.unknown-directive", (ln.file,),
              f"{ln.file}:{ln.line}: snugboard does not know the directive {low}; it was left out.")


def _source(ln: _Line, letter: str, ctx: _Ctx, b: _Build, spice_name: str) -> None:
    b.rd.note("info", "spice.not-a-part", (spice_name,),
              f"{ln.file}:{ln.line}: {spice_name} is a {_SOURCES[letter]}, not a board part; left out.")
    if letter != "v":
        return
    toks = _tokens(ln.text, drop_brackets=True)
    if len(toks) < 4:
        return
    rest = [t.lower() for t in toks[3:]]
    if any(w in rest for w in ("ac", "pulse", "sin", "exp", "pwl", "sffm", "am", "trnoise", "trrandom", "distof1",
                               "distof2", "external")):
        return
    vals = [t for t in toks[3:] if t.lower() != "dc"]
    if len(vals) != 1:
        return
    try:
        v = _evaluate(_strip_braces(vals[0]), ctx.scope.get) if vals[0][:1] in "{'" else parse_number(vals[0])
    except (ValueError, _ExprError):
        return
    if v == 0:
        return
    try:
        n1, n2 = _net(b, ctx, toks[1], ln), _net(b, ctx, toks[2], ln)
    except DesignError:
        return
    if n2 == "0" and n1 != "0":
        b.sources.append((spice_name, n1, "+", v, ln))
    elif n1 == "0" and n2 != "0":
        b.sources.append((spice_name, n2, "-", -v, ln))


def _lookup_specs(b: _Build, names: Iterable[str]) -> _Spec | None:
    for n in names:
        s = b.pm.refs.get(n.lower())
        if s is not None:
            b.pm.used.add(s.key)
            return s
    return None


def _record_spec(b: _Build, spice_name: str, ln: _Line) -> _Spec | None:
    rec = b.records.get(spice_name.lower())
    if rec is None:
        return None
    pins = tuple(p for p in rec["pins"].split(",")) if rec.get("pins") else None
    return _Spec("record", ln.file, f"record for {spice_name}", ln.line, rec.get("kind", ""), rec.get("package", ""),
                 pins, rec.get("ref", ""), ())


def _resolve(b: _Build, ln: _Line, letter: str, spice_name: str, ref: str, model: str, subckt: str,
             auto_kind: tuple[str, ...]) -> tuple[PartKind | None, str, tuple[str, ...] | None, str, _Spec | None, _Spec | None]:
    """Kind, package, pins, board ref, the ``refs`` spec and the record spec."""
    ref_spec = _lookup_specs(b, (spice_name, spice_name.replace(".", "_"), ref))
    rec_spec = _record_spec(b, spice_name, ln)
    chain: list[_Spec] = [s for s in (ref_spec, rec_spec) if s is not None]
    if subckt:
        s = b.pm.subckt.get(subckt.lower())
        if s is not None:
            b.pm.used.add(s.key)
            chain.append(s)
    if model:
        s = b.pm.models.get(model.lower())
        if s is not None:
            b.pm.used.add(s.key)
            chain.append(s)
    d = b.pm.defaults.get(letter)
    if d is not None:
        chain.append(d)
    kind_name = next((s.kind for s in chain if s.kind), "")
    package = next((s.package for s in chain if s.package), "")
    new_ref = next((s.ref for s in chain if s.ref), "")
    kind_spec = next((s for s in chain if s.kind), None)
    # a pins list belongs to the kind it was written for: only the table that
    # names the kind, or a more specific one, may give it
    upto = chain[: chain.index(kind_spec) + 1] if kind_spec is not None else chain
    pins = next((s.pins for s in upto if s.pins is not None), None)
    kind = None
    defaulted = False
    if kind_name:
        kind = _kind(b, kind_name, kind_spec, ln)
    elif auto_kind:
        kind = next((b.library.kind(k) for k in auto_kind if b.library.has_kind(k)), None)
        if kind is None:
            raise DesignError(ln.file, f"{spice_name}: the library has no kind {' or '.join(auto_kind)}; "
                              f"name its kind in the parts map ([refs.{spice_name}] kind = ...)", line=ln.line)
        defaulted = True
    if kind is not None and not package:
        package = _DEFAULTS.get(letter, ("", "SOT-23"))[1] if letter in "rcldqmj" else ""
        if not package:
            raise DesignError(ln.file, f"{spice_name}: give its package in the parts map "
                              f"([refs.{spice_name}] package = ...)", line=ln.line)
        defaulted = True
    if kind is not None and defaulted:
        b.defaulted.setdefault(f"{kind.name} in {package}", []).append(new_ref or ref)
    if kind is not None:
        src = next((s for s in chain if s.package), None)
        where = {"file": src.file, "line": src.line, "key": src.key + ".package"} if src else \
            {"file": ln.file, "line": ln.line}
        package = b.library.package(package, **where).name
    return kind, package, pins, new_ref, ref_spec, rec_spec


def _kind(b: _Build, name: str, spec: _Spec | None, ln: _Line) -> PartKind:
    if spec is not None and spec.origin != "record":
        return b.library.kind(name, file=spec.file, line=spec.line, key=spec.key + ".kind")
    return b.library.kind(name, file=ln.file, line=ln.line)


def _map_pins(b: _Build, ln: _Line, spice_name: str, letter: str, kind: PartKind, package: str,
              n_nodes: int, pins: tuple[str, ...] | None, port_names: tuple[str, ...] = ()) -> tuple[str, ...]:
    """Kind pin number for each node, in node order ("" = none)."""
    kpins = _kind_pins(b, kind, package)
    numbers = [p.number for p in kpins]
    if pins is not None:
        if len(pins) != n_nodes:
            raise DesignError(ln.file, f"{spice_name}: the parts map's pins list has {len(pins)} entries but the "
                              f"line has {n_nodes} nodes", line=ln.line)
        out = []
        for p in pins:
            if p == "":
                out.append("")
                continue
            if p in numbers:
                out.append(p)
                continue
            named = [q.number for q in kpins if q.name.lower() == p.lower()]
            if len(named) != 1:
                raise DesignError(ln.file, f"{spice_name}: kind {kind.name} has no pin '{p}' (pins: "
                                  f"{', '.join(f'{q.number} {q.name}' for q in kpins)})", line=ln.line)
            out.append(named[0])
        used = [p for p in out if p]
        if len(set(used)) != len(used):
            raise DesignError(ln.file, f"{spice_name}: the pins list names a kind pin twice", line=ln.line)
        return tuple(out)
    roles = _ROLES.get(letter)
    if roles and n_nodes == len(roles):
        out = []
        for role, names in roles:
            hit = [q.number for q in kpins if q.name.upper() in names]
            if len(hit) != 1:
                out = []
                break
            out.append(hit[0])
        if out:
            return tuple(out)
    if port_names and len(port_names) == n_nodes:
        hit = []
        for pn in port_names:
            m = [q.number for q in kpins if q.name.lower() == pn.lower()]
            if len(m) != 1:
                hit = []
                break
            hit.append(m[0])
        if hit and len(set(hit)) == len(hit):
            return tuple(hit)
    if len(kpins) == n_nodes:
        return tuple(numbers)
    what = " (" + ", ".join(r for r, _ in roles) + ")" if roles else ""
    raise DesignError(ln.file, f"{spice_name}: kind {kind.name} has {len(kpins)} pins but the line gives {n_nodes} "
                      f"nodes{what}; give pins = [...] for it in the parts map", line=ln.line)


def _kind_pins(b: _Build, kind: PartKind, package: str) -> tuple[PinDef, ...]:
    return tuple(b.library.pins_for(kind, b.library.package(package)))


def _add(b: _Build, ln: _Line, letter: str, spice_name: str, ref: str, nodes: list[str], kind: PartKind,
         package: str, pins: tuple[str, ...], new_ref: str, ref_spec: _Spec | None, rec_spec: _Spec | None,
         value: float | None = None, value_text: str = "", model: str = "") -> None:
    explicit = bool(new_ref)
    final = new_ref or ref
    if not _REF_RE.match(final):
        raise DesignError(ln.file, f"{spice_name}: '{final}' is not a usable board reference (a letter, then "
                          f"letters, digits or _); give ref = \"...\" for it in the parts map", line=ln.line)
    rec = b.records.get(spice_name.lower())
    b.cands.append(_Cand(spice_name, final, letter, nodes, ln.file, ln.line, kind, package, pins, value, value_text,
                         model, ref_spec, rec, explicit))


def _passive(ln: _Line, letter: str, ctx: _Ctx, b: _Build, spice_name: str) -> None:
    toks = _tokens(ln.text, drop_brackets=True)
    name = toks[0]
    if len(toks) < 3:
        raise DesignError(ln.file, f"{name}: needs two nodes and a value, e.g. {name} in out 10k", line=ln.line)
    n1, n2 = _net(b, ctx, toks[1], ln), _net(b, ctx, toks[2], ln)
    value_tok = None
    model = ""
    keywords = {"r": ("r", "resistance"), "c": ("c", "capacitance"), "l": ("l", "inductance")}[letter]
    for t in toks[3:]:
        if _is_kv(t):
            k, v = t.split("=", 1)
            if k.lower() in keywords and value_tok is None:
                value_tok = v
            continue
        if value_tok is None and (t[:1] in "{'\"" or _NUM_RE.match(t)):
            value_tok = t
        elif not model and not _NUM_RE.match(t):
            model = t
    if value_tok is None:
        raise DesignError(ln.file, f"{name}: no value (write e.g. {name} {toks[1]} {toks[2]} 10k)", line=ln.line)
    value, text = _value_of(value_tok, ctx, ln, b, name, letter)
    if value < 0 or (value == 0 and letter != "r"):
        raise DesignError(ln.file, f"{name}: value {value_tok} is {'negative' if value < 0 else 'zero'}; a board "
                          f"part needs a positive value", line=ln.line)
    ref = _board_ref(ctx, name)
    kind, package, pins, new_ref, rspec, cspec = _resolve(
        b, ln, letter, spice_name, ref, model, "", (_DEFAULTS[letter][0],))
    assert kind is not None
    mapped = _map_pins(b, ln, spice_name, letter, kind, package, 2, pins)
    _add(b, ln, letter, spice_name, ref, [n1, n2], kind, package, mapped, new_ref, rspec, cspec,
         value if kind.value_unit else None, text, model)


def _semiconductor(ln: _Line, letter: str, ctx: _Ctx, b: _Build, spice_name: str) -> None:
    toks = [t for t in _tokens(ln.text, drop_brackets=True)]
    name = toks[0]
    plain = [t for t in toks[1:] if not _is_kv(t)]
    n_nodes = {"d": 2, "q": 3, "m": 4, "j": 3}[letter]
    models = b.nl.models

    def is_model(t: str) -> bool:
        return t.lower() in models or t.lower() in _POLARITY_KINDS

    # Q may have a substrate node, M may lack the bulk node (3-terminal models).
    if letter == "q" and len(plain) >= 5 and not is_model(plain[3]) and not _PLAIN_NUM.match(plain[4]):
        n_nodes = 4
    if letter == "m" and len(plain) >= 4 and is_model(plain[3]):
        n_nodes = 3
    if len(plain) < n_nodes + 1:
        need = {"d": "anode cathode model", "q": "collector base emitter model",
                "m": "drain gate source bulk model", "j": "drain gate source model"}[letter]
        raise DesignError(ln.file, f"{name}: expected {name} {need}", line=ln.line)
    node_toks = plain[:n_nodes]
    model = plain[n_nodes]
    if _PLAIN_NUM.match(model) or model[:1] in "{'\"":
        raise DesignError(ln.file, f"{name}: '{model}' is not a model name", line=ln.line)
    nodes = [_net(b, ctx, t, ln) for t in node_toks]
    if letter == "q" and n_nodes == 4:
        nodes = nodes[:3]  # substrate: not a pin of a discrete transistor
    if letter == "m" and n_nodes == 4:
        if nodes[3] != nodes[2]:
            b.rd.note("warning", "spice.mos-bulk", (spice_name,),
                      f"{ln.file}:{ln.line}: {spice_name}: bulk is on {b.net_names.get(nodes[3], nodes[3])} but source "
                      f"on {b.net_names.get(nodes[2], nodes[2])}; a discrete MOSFET ties bulk to source inside, so the "
                      f"board part has no bulk pin.")
        nodes = nodes[:3]
    mtype = model.lower() if model.lower() in _POLARITY_KINDS else (models[model.lower()].type if model.lower() in models else "")
    auto: tuple[str, ...] = ()
    if letter == "d":
        auto = (_DEFAULTS["d"][0],)
    elif mtype in _POLARITY_KINDS and mtype in _LETTER_TYPES[letter]:
        auto = _POLARITY_KINDS[mtype]
    elif mtype == "vdmos":
        auto = ("nmos",)
    ref = _board_ref(ctx, name)
    kind, package, pins, new_ref, rspec, cspec = _resolve(b, ln, letter, spice_name, ref, model, "", auto)
    if kind is None:
        known = f"model {model} is of type {mtype.upper()}" if mtype else f"model {model} is not defined here"
        want = "/".join(t.upper() for t in _LETTER_TYPES[letter])
        raise DesignError(ln.file, f"{spice_name}: cannot tell which part this is ({known}; expected {want}); "
                          f"add a .model line or name its kind in the parts map", line=ln.line)
    mapped = _map_pins(b, ln, spice_name, letter, kind, package, len(nodes), pins)
    _add(b, ln, letter, spice_name, ref, nodes, kind, package, mapped, new_ref, rspec, cspec, model=model)


def _nodes_and_params(
    toks: list[str], ln: _Line, *, prefix: str, after: Callable[[str], str]
) -> tuple[list[str], dict[str, tuple[str, str, int]]]:
    """Split a ``.subckt`` header's or an X line's tokens into nodes and ``key=value`` parameters.

    An optional ``params:`` marker is skipped; parameters come last, so a
    node after one is an error (``after(token)`` gives its message).
    Parameter values keep their file and line for later messages.
    """
    nodes: list[str] = []
    params: dict[str, tuple[str, str, int]] = {}
    for t in toks:
        if t.lower() in ("params:", "param:"):
            continue
        if _is_kv(t):
            k, v = t.split("=", 1)
            if not k or not v:
                raise DesignError(ln.file, f"{prefix}cannot read the parameter '{t}'", line=ln.line)
            params[k.lower()] = (v, ln.file, ln.line)
        elif params:
            raise DesignError(ln.file, after(t), line=ln.line)
        else:
            nodes.append(t)
    return nodes, params


def _instance(ln: _Line, ctx: _Ctx, b: _Build, spice_name: str) -> None:
    toks = _tokens(ln.text, drop_brackets=True)
    name = toks[0]
    plain, overrides = _nodes_and_params(toks[1:], ln, prefix=f"{name}: ",
                                         after=lambda t: f"{name}: '{t}' after the parameters")
    if len(plain) < 1:
        raise DesignError(ln.file, f"{name}: expected {name} nodes... SUBCIRCUIT", line=ln.line)
    subname = plain[-1]
    node_toks = plain[:-1]
    sub = b.nl.subckts.get(subname.lower())
    base = name[1:] if _REF_RE.match(name[1:] or "-") else name
    ref = _board_ref(ctx, base)
    kind, package, pins, new_ref, rspec, cspec = _resolve(b, ln, "x", spice_name, ref, "", subname, ())
    if kind is not None:
        nodes = [_net(b, ctx, t, ln) for t in node_toks]
        ports = sub.ports if sub is not None else ()
        mapped = _map_pins(b, ln, spice_name, "x", kind, package, len(nodes), pins, ports)
        if sub is not None and len(sub.ports) != len(nodes):
            raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has {len(sub.ports)} ports but the line gives "
                              f"{len(nodes)} nodes", line=ln.line)
        _add(b, ln, "x", spice_name, ref, nodes, kind, package, mapped, new_ref, rspec, cspec)
        return
    if sub is None:
        raise DesignError(ln.file, f"{name}: subcircuit '{subname}' is not defined (include its file) and the parts "
                          f"map does not name it ([subckt.{subname}] kind = ..., package = ...)", line=ln.line)
    if len(sub.ports) != len(node_toks):
        raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has {len(sub.ports)} ports but the line gives "
                          f"{len(node_toks)} nodes", line=ln.line)
    if sub.name.lower() in ctx.stack:
        raise DesignError(ln.file, f"{name}: subcircuit {sub.name} calls itself", line=ln.line)
    if len(ctx.stack) >= _MAX_DEPTH:
        raise DesignError(ln.file, f"{name}: subcircuits nest deeper than {_MAX_DEPTH} levels", line=ln.line)
    if not _REF_RE.match(name):
        raise DesignError(ln.file, f"{name}: '{name}' cannot start a board reference (a letter, then letters, "
                          f"digits or _)", line=ln.line)
    ports = {p.lower(): _net(b, ctx, t, ln) for p, t in zip(sub.ports, node_toks)}
    # Parameters: the subcircuit's defaults (global scope) overridden by the
    # instance's values (evaluated where the instance stands).
    values: dict[str, tuple[str, str, int]] = {}
    for k, (v, f, l) in sub.params.items():
        values[k] = (v, f, l)
    for k, (v, f, l) in overrides.items():
        if k not in sub.params:
            raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has no parameter '{k}'", line=ln.line)
        try:
            val = _evaluate(_strip_braces(v), ctx.scope.get)
        except _ExprError as exc:
            raise _expr_error(exc, ln, name) from None
        values[k] = (repr(val), f, l)
    scope = _Scope(values, parent=_global_scope(b))
    local: dict[str, tuple[str, str, int]] = {}
    for body_line in sub.body:
        if body_line.text.split()[0].lower() in (".param", ".params"):
            _read_params(body_line, local)
    inner = _Ctx(path=(*ctx.path, name), ports=ports, scope=_Scope(local, parent=scope),
                 stack=(*ctx.stack, sub.name.lower()))
    _elaborate(sub.body, inner, b)


def _global_scope(b: _Build) -> _Scope:
    if b.gscope is None:
        b.gscope = _Scope(b.nl.params)
    return b.gscope


# ==========================================================================
# Records written by the SPICE writer
# ==========================================================================
def _record_kinds(rd: _Reader) -> list[PartKind]:
    out = []
    for rtype, kv, file, line in rd.records:
        if rtype != "kind":
            continue
        try:
            pins = tuple(PinDef(str(n), str(nm), str(r)) for n, nm, r in json.loads(kv.get("pins", "[]")))
        except (json.JSONDecodeError, TypeError, ValueError):
            raise DesignError(file, "the kind record's pins are not a JSON list of [number, name, role]",
                              line=line) from None
        for p in pins:
            if p.role not in PIN_ROLES:
                raise DesignError(file, f"kind record: unknown pin role '{p.role}'", line=line)
        if not kv.get("name") or not pins:
            raise DesignError(file, "the kind record needs name=... and pins=...", line=line)
        out.append(PartKind(name=kv["name"], category=kv.get("category", "ic"), pins=pins,
                            value_unit=kv.get("value_unit", ""), description=kv.get("description", ""),
                            source=kv.get("source", f"defined in {file}")))
    return out


def _float_or_none(text: str | None, file: str, line: int, key: str) -> float | None:
    if text is None or text == "":
        return None
    try:
        v = float(text)
    except ValueError:
        raise DesignError(file, f"snugboard record: {key}={text} is not a number", line=line) from None
    if not math.isfinite(v):
        raise DesignError(file, f"snugboard record: {key}={text} is not finite", line=line)
    return v


# ==========================================================================
# Entry point
# ==========================================================================
def read_spice(
    path: Path,
    library: Any,
    *,
    display_name: str | None = None,
    parts_map: Path | None = None,
    root: Path | None = None,
) -> tuple[Design, list[Finding]]:
    """Read a SPICE netlist as a sized design.

    Parameters
    ----------
    path : Path
        The SPICE file (``.cir``, ``.sp``, ``.spice``, ``.net``).
    library : pipeline.library.Library
        Part kinds and packages to resolve against.
    display_name : str, optional
        The file as the user named it, for messages and ``Design.source``
        (default ``str(path)``). Included files are shown relative to it.
    parts_map : Path, optional
        The parts-map TOML file (module docstring). Shown relative to
        ``root`` when inside it.
    root : Path, optional
        The project folder; includes may not leave it (default: the folder
        of ``path``).

    Returns
    -------
    (Design, list of Finding)
        Parts in file order (flattened subcircuits where their instance
        stands), nets in order of first use with pins in line order.

    Raises
    ------
    DesignError
        Bad input, naming the file (an included one where the fault is
        there, the parts map for its own faults) and line.

    Notes
    -----
    Method: physical lines -> logical lines (comments dropped,
    continuations joined) -> includes spliced in -> ``.subckt`` bodies,
    ``.model``, ``.param`` and ``.global`` collected -> the top level
    elaborated, expanding each unmapped ``X`` instance into its body with
    the instance's node map and parameter scope (recursion refused, depth at
    most 50) -> candidates grouped by board reference (sections merged)
    -> nets. Cost: linear in the size of the flattened netlist; parameters
    are evaluated lazily, once per scope.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from pipeline.library import load_library
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "rc.cir").write_text("RC low-pass\\nR1 in out 10kOhm\\nC1 out 0 100n\\n.end\\n")
    >>> design, findings = read_spice(d / "rc.cir", load_library(), display_name="rc.cir")
    >>> design.name, [(p.ref, p.kind, p.package, p.value) for p in design.parts]
    ('RC low-pass', [('R1', 'resistor', '0603', 10000.0), ('C1', 'capacitor', '0603', 1e-07)])
    >>> [(n.name, [str(p) for p in n.pins]) for n in design.nets]
    [('in', ['R1.1']), ('out', ['R1.2', 'C1.1']), ('GND', ['C1.2'])]
    """
    path = Path(path)
    shown = display_name or str(path)
    root_dir = Path(root) if root is not None else path.parent
    try:
        root_dir = root_dir.resolve()
        here = path.resolve()
    except (OSError, RuntimeError):
        raise DesignError(shown, "cannot follow the file's path") from None
    rd = _Reader(root=root_dir, shown=shown)

    pm = _PartsMap()
    if parts_map is not None:
        pm_path = Path(parts_map)
        pm_shown = str(pm_path)
        try:
            rel = pm_path.resolve().relative_to(root_dir)
            pm_shown = rel.as_posix()
        except ValueError:
            pass
        pm = _read_parts_map(pm_path, pm_shown, library)

    text = _read_text(path, shown, None)
    lines = _logical(text, shown, rd, has_title=True)
    lines = _expand(lines, here, rd, (here,))
    record_kinds = _record_kinds(rd)
    lib = library.with_kinds(record_kinds) if record_kinds else library
    if record_kinds and parts_map is not None:
        pm = _read_parts_map(Path(parts_map), pm_shown, lib)
    nl = _collect(lines, rd)

    records: dict[str, dict[str, str]] = {}
    net_records: dict[str, dict[str, str]] = {}
    loose: list[tuple[dict[str, str], str, int]] = []
    design_rec: dict[str, str] = {}
    stage_recs: list[tuple[dict[str, str], str, int]] = []
    for rtype, kv, file, line in rd.records:
        if rtype == "part":
            kv = dict(kv, _file=file, _line=str(line))
            if kv.get("element"):
                records[kv["element"].lower()] = kv
            elif kv.get("nodes") is not None and kv.get("ref"):
                loose.append((kv, file, line))
            else:
                raise DesignError(file, "a part record needs element=... or ref=... with nodes=...", line=line)
        elif rtype == "net":
            if not kv.get("node"):
                raise DesignError(file, "a net record needs node=...", line=line)
            net_records[kv["node"].lower()] = kv
        elif rtype == "design":
            design_rec = kv
        elif rtype == "stage":
            stage_recs.append((kv, file, line))
        elif rtype != "kind":
            rd.note("warning", "spice.record", (file,), f"{file}:{line}: unknown snugboard record '{rtype}'; ignored.")

    b = _Build(library=lib, pm=pm, nl=nl, rd=rd, records=records)
    top = _Ctx(path=(), ports={}, scope=_global_scope(b), stack=())
    _elaborate(nl.top, top, b)
    for kv, file, line in loose:
        _loose_part(b, kv, file, line)

    for key in sorted(set(pm.refs) | set(pm.subckt) | set(pm.models)):
        for group in (pm.refs, pm.subckt, pm.models):
            s = group.get(key)
            if s is not None and s.key not in pm.used:
                rd.note("warning", "spice.parts-map-unused", (s.key,),
                        f"{s.file}: [{s.key}] matches no element of {shown}; check the name.")
    for what, refs in sorted(b.defaulted.items()):
        rd.note("info", "spice.default-kind", tuple(refs),
                f"{shown}: {', '.join(refs)} read as {what} by default; name others in the parts map.")

    parts, nets = _assemble(b, net_records)
    if not parts:
        raise DesignError(shown, "no board parts found: expected R, C, L, D, Q, M, J or X element lines")
    name = design_rec.get("name") or rd.dot_title or rd.title or Path(shown).stem
    revision = pm.revision if pm.revision is not None else design_rec.get("revision", "")
    stages = list(pm.stages)
    known_stages = {s.name for s in stages}
    for kv, file, line in stage_recs:
        try:
            items = json.loads(kv.get("items", "{}"))
        except json.JSONDecodeError:
            raise DesignError(file, "the stage record's items are not JSON", line=line) from None
        if not isinstance(items, dict) or not kv.get("name"):
            raise DesignError(file, "a stage record needs name=... and items={...}", line=line)
        if kv["name"] not in known_stages:
            stages.append(RawTable(name=kv["name"], items=tuple(items.items()), file=kv.get("file", file),
                                   key=kv.get("key", f"stages.{kv['name']}"),
                                   line=int(kv["line"]) if kv.get("line", "").isdigit() else 0))
    design = Design(name=name, revision=revision, source=shown, parts=parts, nets=nets, stages=tuple(stages),
                    kinds=tuple(record_kinds))
    return design, rd.findings


def _loose_part(b: _Build, kv: dict[str, str], file: str, line: int) -> None:
    """A part the writer left as a comment (connector, unfitted): rebuild it."""
    ln = _Line(file, line, "")
    ref = kv["ref"]
    if not _REF_RE.match(ref):
        raise DesignError(file, f"part record: '{ref}' is not a usable reference", line=line)
    kind = _kind(b, kv.get("kind", ""), None, ln)
    package = b.library.package(kv.get("package", ""), file=file, line=line).name
    pins = tuple(kv["pins"].split(",")) if kv.get("pins") else None
    node_list = kv["nodes"].split(",")
    if pins is None and node_list == [""]:
        node_list = []
    ctx = _Ctx(path=(), ports={}, scope=_global_scope(b), stack=())
    nodes = [_net(b, ctx, n, ln) if n else "" for n in node_list]
    mapped = _map_pins(b, ln, ref, "x", kind, package, len(nodes), pins)
    key = ref.lower()
    if key in b.elements:
        raise DesignError(file, f"part record {ref} clashes with element {ref}", line=line)
    b.elements[key] = (file, line)
    b.cands.append(_Cand(ref, ref, "x", nodes, file, line, kind, package, mapped, record=kv, explicit_ref=True))


def _assemble(b: _Build, net_records: dict[str, dict[str, str]]) -> tuple[tuple[Part, ...], tuple[Net, ...]]:
    groups: dict[str, list[_Cand]] = {}
    order: list[str] = []
    for c in b.cands:
        k = c.ref.lower()
        if k not in groups:
            groups[k] = []
            order.append(k)
        else:
            first = groups[k][0]
            if not (c.explicit_ref and first.explicit_ref):
                raise DesignError(c.file, f"{c.spice_name} becomes board part {c.ref}, which {first.spice_name} "
                                  f"({first.file}:{first.line}) already is; rename one", line=c.line)
            if (c.kind.name, c.package) != (first.kind.name, first.package):
                raise DesignError(c.file, f"{c.spice_name} is a section of {c.ref} but its kind or package "
                                  f"({c.kind.name}, {c.package}) differs from {first.spice_name}'s "
                                  f"({first.kind.name}, {first.package})", line=c.line)
        groups[k].append(c)

    net_pins: dict[str, list[PinRef]] = {}
    pin_net: dict[tuple[str, str], tuple[str, _Cand]] = {}
    parts: list[Part] = []
    for k in order:
        cands = groups[k]
        first = cands[0]
        for c in cands:
            for node, pin in zip(c.nodes, c.pins):
                if not pin or not node:
                    continue
                rec = net_records.get(node)
                if rec is not None and rec.get("unconnected") == "true":
                    continue
                prev = pin_net.get((first.ref, pin))
                if prev is not None:
                    if prev[0] != node:
                        raise DesignError(c.file, f"{c.spice_name} puts pin {first.ref}.{pin} on "
                                          f"{b.net_names.get(node, node)} but {prev[1].spice_name} puts it on "
                                          f"{b.net_names.get(prev[0], prev[0])}", line=c.line)
                    continue
                pin_net[(first.ref, pin)] = (node, c)
                net_pins.setdefault(node, []).append(PinRef(first.ref, pin))
        parts.append(_part(b, cands))

    voltages: dict[str, float] = {}
    for name, node, sign, v, ln in b.sources:
        if node in net_pins and node not in voltages:
            voltages[node] = v
            b.rd.note("info", "spice.net-voltage", (b.net_names.get(node, node),),
                      f"{ln.file}:{ln.line}: {name} sets net {b.net_names.get(node, node)} to {_fmt(v)} V; "
                      f"taken as its declared voltage.")
    nets: list[Net] = []
    for node, pins in net_pins.items():
        rec = net_records.get(node, {})
        name = rec.get("name") or b.net_names.get(node, node)
        if node == "0":
            name = "GND"
        file, line = rec.get("_file", ""), 0
        v = _float_or_none(rec.get("voltage"), file, line, "voltage") if "voltage" in rec else voltages.get(node)
        vmax = _float_or_none(rec.get("voltage_max"), file, line, "voltage_max")
        nets.append(Net(name=name, pins=tuple(pins), voltage=v, voltage_max=vmax,
                        battery=rec.get("battery") == "true", line=b.net_lines.get(node, 0)))
    seen: set[str] = set()
    for n in nets:
        if n.name in seen:
            raise DesignError(b.rd.shown, f"two different nodes both end up named {n.name} (check the snugboard "
                              f"net records)", line=n.line or None)
        seen.add(n.name)
    return tuple(parts), tuple(nets)


def _part(b: _Build, cands: list[_Cand]) -> Part:
    c = cands[0]
    spec = next((x.spec for x in cands if x.spec is not None), None)
    rec = c.record
    kind, package = c.kind, c.package
    pins = _kind_pins(b, kind, package)
    pkg = b.library.package(package)
    if not kind.pins_from_package and pkg.pin_count and pkg.pin_count != len(pins):
        where = (spec.file, spec.line) if spec else (c.file, c.line)
        raise DesignError(where[0], f"{c.ref}: package {pkg.name} has {pkg.pin_count} pins but kind {kind.name} has "
                          f"{len(pins)}", line=where[1])
    value, value_text = c.value, c.value_text
    tol = rv = rw = None
    tol_text = rating_text = manufacturer = mpn = note = ""
    dnp = False
    extra: dict[str, str] = {}
    if c.model and c.model.lower() not in _POLARITY_KINDS and rec is None:
        extra["spice_model"] = c.model
    if rec is not None:
        file, line = rec.get("_file", c.file), int(rec.get("_line", "0") or 0)
        rv_val = _float_or_none(rec.get("value"), file, line, "value")
        if c.letter in "rcl" and c.value is not None:
            if rv_val is not None and rv_val == c.value:
                value_text = rec.get("value_text", "")
        elif rv_val is not None or "value_text" in rec:
            value = rv_val if kind.value_unit else None
            value_text = rec.get("value_text", "")
        tol = _float_or_none(rec.get("tolerance"), file, line, "tolerance")
        tol_text = rec.get("tolerance_text", "")
        rv = _float_or_none(rec.get("rating_v"), file, line, "rating_v")
        rw = _float_or_none(rec.get("rating_w"), file, line, "rating_w")
        rating_text = rec.get("rating_text", "")
        manufacturer, mpn, note = rec.get("manufacturer", ""), rec.get("mpn", ""), rec.get("note", "")
        dnp = rec.get("dnp") == "true"
        if rec.get("extra"):
            try:
                pairs = json.loads(rec["extra"])
                extra = {str(k): str(v) for k, v in pairs}
            except (json.JSONDecodeError, TypeError, ValueError):
                raise DesignError(file, "the part record's extra is not a JSON list of pairs", line=line) from None
    if spec is not None and spec.origin == "refs":
        where_err = lambda k, msg: DesignError(spec.file, msg, line=spec.line, key=f"{spec.key}.{k}")  # noqa: E731
        if spec.get("value") is not None:
            value_text = spec.get("value")
            if kind.value_unit:
                try:
                    value = _values.parse_value(value_text, kind.value_unit)
                except ValueError as exc:
                    raise where_err("value", str(exc)) from None
        if spec.get("tolerance") is not None:
            tol_text = spec.get("tolerance")
            try:
                tol = _values.parse_tolerance(tol_text)
            except ValueError as exc:
                raise where_err("tolerance", str(exc)) from None
        if spec.get("rating") is not None:
            rating_text = spec.get("rating")
            try:
                rv, rw = _values.parse_rating(rating_text)
            except ValueError as exc:
                raise where_err("rating", str(exc)) from None
        manufacturer = spec.get("manufacturer", manufacturer)
        mpn = spec.get("mpn", mpn)
        note = spec.get("note", note)
        dnp = spec.get("dnp", dnp)
        for k in _PASSTHROUGH:
            if spec.get(k) is not None:
                extra[k] = spec.get(k)
    if kind.value_unit and value is None and c.letter == "x" and rec is None:
        where = (spec.file, spec.line) if spec else (c.file, c.line)
        raise DesignError(where[0], f"{c.ref}: a {kind.name} needs a value; give value = \"...\" in the parts map",
                          line=where[1])
    return Part(ref=c.ref, kind=kind.name, package=package, pins=pins, value=value, value_text=value_text,
                tolerance=tol, tolerance_text=tol_text, rating_v=rv, rating_w=rw, rating_text=rating_text,
                manufacturer=manufacturer, mpn=mpn, note=note, dnp=dnp, extra=tuple(sorted(extra.items())),
                line=c.line)
