"""The sized design as a SPICE deck: ``design.cir``.

Entry point: :func:`spice_netlist`.

The file is a complete deck that ngspice runs as it stands (``ngspice -b
design.cir``): add sources and an analysis before ``.end`` to simulate what
will be built. :func:`pipeline.spice.read_spice` reads it back to the same
design (parts, kinds, packages, values, tolerances, ratings, pass-through
data, nets and their declared voltages), through ``* snugboard:`` comment
records that any SPICE program skips.

What each part becomes
----------------------
* ``resistor``, ``capacitor``, ``capacitor-polarized``, ``inductor``:
  ``R``, ``C``, ``L`` with the value (``+`` pin first for polarised
  capacitors).
* ``diode``, ``led``: ``D anode cathode`` with a placeholder model
  (``snug_diode``: the simulator's default junction; ``snug_led``: IS 1e-20 A
  and emission coefficient 2, so it conducts at about 2 V at 1 mA --
  placeholders, not a part's data).
* ``npn``, ``pnp``: ``Q collector base emitter``; ``nmos``, ``pmos``:
  ``M drain gate source source`` (bulk tied to source, as in a discrete
  part), each with the simulator's default model of that type.
* every other kind (ICs, ferrites, kinds defined in the design): an ``X``
  instance of one ``.subckt`` stub per kind, ports in the kind's pin order:

  - op-amps (``opamp-*``): per amplifier an ideal voltage-controlled
    voltage source of gain 1e6 from the inputs, referred to ground, behind
    1 Ω; inputs see 1 TΩ to ground, supply pins 1 GΩ. Linear, no rails, no
    bandwidth limit: a unity-gain stage then behaves as the textbook
    formulas assume.
  - comparators (``comparator-*``): per section a smooth switch on the input
    difference (tanh, about 0.1 mV wide). An open-collector output sinks
    to the GND/V- pin through 10 Ω while -IN is above +IN and is open
    otherwise (so it needs its pull-up, as the real part does); a push-pull
    output swings between the supply pins behind 1 Ω.
  - AND gates (``and2-*``): per gate a behavioural output (behind 1 Ω) at
    the positive supply when both inputs are above half the supply, else at
    the negative one.
  - ``ldo-regulator``: output = min(IN - 0.2 V, VOUT) behind 10 mΩ, VOUT
    being the declared voltage of the net on its OUT pin (3.3 V assumed,
    and said so in a comment, when none is declared). EN is not modelled.
  - ``ferrite``: a 10 mΩ resistor (the bead's impedance at high frequency
    is not modelled).
  - anything else: a stub that ties each pin to ground through 1 TΩ (supply
    pins 1 GΩ), which keeps the nodes valid and does nothing else.

  Stub ports are named after the pins; a pin called ``GND`` becomes the
  port ``GND_2``, because SPICE takes ``gnd`` for the ground node.
* Not simulated, written only as comments (with their nodes, so the file
  still reads back to the same design): connectors (``wire-pad``,
  ``test-point``, ``header``, any kind of category ``connector``), parts
  marked ``dnp`` (the deck simulates what is fitted), and passives without
  a value.

Nets and names
--------------
``GND`` is node ``0``. Other nets keep their names where SPICE can spell
them (letters, digits, ``_``; unique without regard to case, as SPICE
compares names); others are renamed (``V+`` -> ``Vp``, ``in`` next to
``IN`` -> ``in_2``) and a record keeps the original. An unconnected pin gets
a node of its own (``nc_U1_4``). Element names are the ref when it starts
with the element's letter, else the letter and the ref (``U1`` -> ``XU1``).
A net with a declared voltage gets a DC source to ground (``Vsupply_VCC``)
unless a pin on it is an output (a regulator or amplifier drives it). The
deck ends with ``.options rshunt=1e12`` (1 TΩ from every node to ground,
so nodes that only capacitors or open inputs reach still have a DC
solution) and ``.op``.

Numbers are written in SPICE's notation (``Meg`` for 1e6; ``m`` is milli)
with every digit of the value, so they read back bit for bit. The output is
ASCII, deterministic and holds no path, clock time or user name.
"""

from __future__ import annotations

import json
import posixpath
import re
from dataclasses import dataclass, field
from decimal import Decimal
from typing import Any, Iterable

from ..blocktables import RECORD
from ..graph import SPICE_GROUND_NET, SPICE_GROUND_NODES, pin_net_map
from ..model import Design, Part, PinDef
from ..values import EXPONENT_PREFIX

__all__ = ["spice_netlist", "spice_number"]

#: Power of ten -> the letter written: the SI prefixes of pipeline.values, with ``Meg`` for
#: mega because SPICE reads ``M`` as milli (ngspice manual, "Conventions").
_SCALE = {e: ("Meg" if p == "M" else p) for e, p in EXPONENT_PREFIX.items()}
_BARE_RE = re.compile(r"^[A-Za-z0-9_.+\-]+$")
_CONNECTORS = ("wire-pad", "test-point", "header")
_PASSIVE_LETTER = {"resistor": "R", "capacitor": "C", "capacitor-polarized": "C", "inductor": "L"}
_DIODES = {"diode": "snug_diode", "led": "snug_led"}
_BJT = {"npn": "snug_npn", "pnp": "snug_pnp"}
_MOS = {"nmos": "snug_nmos", "pmos": "snug_pmos"}
_MODELS = {
    "snug_diode": ".model snug_diode D",
    "snug_led": ".model snug_led D (IS=1e-20 N=2)",
    "snug_npn": ".model snug_npn NPN",
    "snug_pnp": ".model snug_pnp PNP",
    "snug_nmos": ".model snug_nmos NMOS",
    "snug_pmos": ".model snug_pmos PMOS (VTO=-1)",
}
_OPEN = "1e12"  # input / stub leakage to ground, ohm
_SUPPLY_LOAD = "1e9"
_OPAMP_GAIN = "1e6"
_R_OUT = "1"  # series output resistance of behavioural outputs, ohm
_R_SINK = "10"  # on-resistance of an open-collector comparator output, ohm
_R_REG = "10m"
_DRIVEN_ROLES = ("supply-out", "out")


# --------------------------------------------------------------------------
def spice_number(value: float) -> str:
    """A float in SPICE notation, exact: reading it back gives the same float.

    Examples
    --------
    >>> spice_number(4700.0), spice_number(1e6), spice_number(2.2e-6), spice_number(0.001)
    ('4.7k', '1Meg', '2.2u', '1m')
    >>> spice_number(1.0 / 3.0)
    '333.3333333333333m'
    """
    v = float(value)
    if v == 0:
        return "0"
    d = Decimal(repr(v))
    sign = "-" if d < 0 else ""
    d = abs(d)
    e = d.adjusted()
    eng = 3 * (e // 3)
    if eng not in _SCALE:
        return repr(v)
    mant = d.scaleb(-eng)
    txt = format(mant, "f")
    if "." in txt:
        txt = txt.rstrip("0").rstrip(".")
    return sign + txt + _SCALE[eng]


#: a name :func:`_legal` leaves as it is.
_LEGAL_RE = re.compile(r"[A-Za-z0-9]+(?:_[A-Za-z0-9]+)*")


def _between_words(text: str, i: int) -> bool:
    """Whether ``text[i]`` stands between two letters or digits (a hyphen, not a sign)."""
    return 0 < i < len(text) - 1 and text[i - 1].isalnum() and text[i + 1].isalnum()


def _legal(name: str, *, signs: bool = True) -> str:
    """Letters, digits and ``_`` only; with ``signs`` ``+`` -> ``p``, ``-`` -> ``n``.

    A name that is already legal (ASCII letters and digits, single ``_``
    inside) is returned at once; most names are."""
    if _LEGAL_RE.fullmatch(name):
        return name
    out = []
    for i, ch in enumerate(name):
        if ch.isascii() and (ch.isalnum() or ch == "_"):
            out.append(ch)
        elif signs and ch == "+":
            out.append("p")
        elif signs and ch == "-" and not _between_words(name, i):
            out.append("n")
        else:
            out.append("_")
    s = re.sub(r"_+", "_", "".join(out)).strip("_")
    return s


class _Names:
    """Unique names without regard to case; legal spellings kept first."""

    def __init__(self, reserved: Iterable[str] = ()) -> None:
        self.used = {r.lower() for r in reserved}

    def take(self, want: str) -> str:
        name = want
        n = 2
        while name.lower() in self.used:
            name = f"{want}_{n}"
            n += 1
        self.used.add(name.lower())
        return name


def _node_names(design: Design) -> dict[str, str]:
    names = _Names(reserved=SPICE_GROUND_NODES)
    out: dict[str, str] = {}
    rest = []
    for net in design.nets:
        if net.name == SPICE_GROUND_NET:
            out[net.name] = "0"
        else:
            rest.append(net.name)
    legal_first = sorted(rest, key=lambda n: (_legal(n) != n, n))
    for name in legal_first:
        want = _legal(name) or "net"
        out[name] = names.take(want)
    return out


def _kv(key: str, value: Any) -> str:
    if isinstance(value, bool):
        return f"{key}={'true' if value else 'false'}"
    if isinstance(value, float):
        return f"{key}={value!r}"
    text = str(value)
    if text and _BARE_RE.match(text) and text[0] != '"':
        return f"{key}={text}"
    # JSON escapes every control character but DEL; escape that too, so that a record
    # is printable ASCII on one line whatever the user wrote.
    quoted = json.dumps(text, ensure_ascii=True).replace("\x7f", "\\u007f")
    return f"{key}={quoted}"


def _record(kind: str, pairs: Iterable[tuple[str, Any]]) -> str:
    body = " ".join(_kv(k, v) for k, v in pairs if v is not None and v != "")
    return f"* snugboard: {kind} {body}".rstrip()


def _ascii(text: str) -> str:
    """``text`` as printable ASCII: any other character (a newline above all) becomes ``?``."""
    return "".join(ch if (ch.isascii() and ch.isprintable()) else "?" for ch in text)


def _pin_named(part: Part, *names: str) -> PinDef | None:
    for p in part.pins:
        if p.name.upper() in names:
            return p
    return None


# --------------------------------------------------------------------------
# Stub subcircuits
# --------------------------------------------------------------------------
def _port_names(pins: tuple[PinDef, ...]) -> list[str]:
    names = _Names(reserved=SPICE_GROUND_NODES)
    out = []
    for p in pins:
        want = _legal(p.name) or f"pin{_legal(p.number) or len(out) + 1}"
        if want.lower().startswith("snug_"):
            want = "p" + want
        out.append(names.take(want))
    return out


def _is_regulator(kind: str, pins: Iterable[PinDef]) -> bool:
    names = {p.name.upper() for p in pins}
    return ("ldo" in kind or "regulator" in kind) and {"IN", "OUT", "GND"} <= names


@dataclass
class _Ports:
    """A stub's ports (named after the kind's pins) and the ones its body drives or loads."""

    pins: tuple[PinDef, ...]
    names: list[str]
    by_name: dict[str, str]
    used: set[str] = field(default_factory=set)

    def get(self, *names: str) -> str | None:
        return next((self.by_name[n] for n in names if n in self.by_name), None)

    @property
    def vpos(self) -> str | None:
        return self.get("V+", "VCC", "VDD")

    @property
    def vneg(self) -> str | None:
        return self.get("V-", "GND", "VEE", "VSS")

    def sections(self, pattern: str, inputs: tuple[str, str]) -> list[tuple[str, str, str, str, PinDef]]:
        """``(suffix, out, in1, in2, out pin)`` for each output pin matching ``pattern`` with both inputs."""
        out = []
        for p in self.pins:
            m = re.fullmatch(pattern, p.name.upper())
            if not m:
                continue
            a, b = self.get(inputs[0].format(m.group(1))), self.get(inputs[1].format(m.group(1)))
            if a is not None and b is not None:
                out.append((m.group(1), self.by_name[p.name.upper()], a, b, p))
        return out


def _opamp_body(ports: _Ports) -> tuple[list[str], str]:
    body: list[str] = []
    for s, out, inp, inn, _ in ports.sections(r"OUT(\w*)", ("+IN{}", "-IN{}")):
        tag = s or "A"
        body += [f"E{tag} snug_o{tag} 0 {inp} {inn} {_OPAMP_GAIN}", f"RO{tag} snug_o{tag} {out} {_R_OUT}",
                 f"RP{tag} {inp} 0 {_OPEN}", f"RN{tag} {inn} 0 {_OPEN}"]
        ports.used |= {out, inp, inn}
    return body, (f"ideal op-amp: gain {_OPAMP_GAIN} per amplifier, output referred to ground through "
                  f"{_R_OUT} ohm, no rails")


def _comparator_body(ports: _Ports) -> tuple[list[str], str]:
    body: list[str] = []
    vpos, vneg = ports.vpos, ports.vneg
    for s, out, inp, inn, pin in ports.sections(r"OUT(\w*)", ("+IN{}", "-IN{}")):
        tag = s or "A"
        on = f"(0.5 + 0.5 * tanh(1e4 * (V({inp}) - V({inn}))))"
        if pin.role == "open-drain":
            # sinks to the negative supply pin while -IN is above +IN, else open
            body.append(f"B{tag} {out} {vneg} I = V({out}, {vneg}) * (1 - {on}) / {_R_SINK}")
        else:
            body += [f"B{tag} snug_o{tag} 0 V = V({vneg}) + (V({vpos}) - V({vneg})) * {on}",
                     f"RO{tag} snug_o{tag} {out} {_R_OUT}"]
        body += [f"RP{tag} {inp} 0 {_OPEN}", f"RN{tag} {inn} 0 {_OPEN}", f"RL{tag} {out} 0 {_OPEN}"]
        ports.used |= {out, inp, inn}
    return body, ("behavioural comparator: a smooth switch on the input difference; an open-collector output "
                  f"sinks through {_R_SINK} ohm, a push-pull one swings between the supply pins")


def _and_body(ports: _Ports) -> tuple[list[str], str]:
    body: list[str] = []
    vpos, vneg = ports.vpos, ports.vneg
    half = f"(V({vpos}) + V({vneg})) / 2"
    for g, y, a, bb, _ in ports.sections(r"(\d*)Y", ("{}A", "{}B")):
        tag = g or "1"
        body += [f"B{tag} snug_o{tag} 0 V = V({vneg}) + (V({vpos}) - V({vneg})) * "
                 f"(0.5 + 0.5 * tanh(50 * (V({a}) - {half}))) * (0.5 + 0.5 * tanh(50 * (V({bb}) - {half})))",
                 f"RO{tag} snug_o{tag} {y} {_R_OUT}",
                 f"RA{tag} {a} 0 {_OPEN}", f"RB{tag} {bb} 0 {_OPEN}"]
        ports.used |= {y, a, bb}
    return body, f"behavioural AND gates: output ({_R_OUT} ohm) at the supply when both inputs are above half of it"


def _regulator_body(ports: _Ports) -> tuple[list[str], str]:
    vin, vout, gnd = ports.get("IN"), ports.get("OUT"), ports.get("GND")
    ports.used.add(vout)
    return ([f"BOUT snug_o {gnd} V = max(0, min(V({vin}, {gnd}) - 0.2, {{vout}}))", f"ROUT snug_o {vout} {_R_REG}"],
            f"behavioural regulator: output = min(IN - 0.2 V, vout) through {_R_REG} ohm; EN not modelled")


def _stub(kind: str, pins: tuple[PinDef, ...], subname: str) -> list[str]:
    """One stand-in ``.subckt`` for a kind (module docstring): its comment, header, body and ``.ends``."""
    names = _port_names(pins)
    ports = _Ports(pins, names, {p.name.upper(): port for p, port in zip(pins, names)})
    params = ""
    body: list[str] = []
    if kind.startswith("opamp"):
        body, note = _opamp_body(ports)
    elif kind.startswith("comparator") and ports.vpos and ports.vneg:
        body, note = _comparator_body(ports)
    elif kind.startswith("and") and ports.vpos and ports.vneg:
        body, note = _and_body(ports)
    elif _is_regulator(kind, pins):
        body, note = _regulator_body(ports)
        params = " params: vout=3.3"
    elif kind == "ferrite" and len(names) == 2:
        body = [f"R1 {names[0]} {names[1]} 10m"]
        note = "ferrite bead as a 10 mOhm resistor; its high-frequency impedance is not modelled"
        ports.used |= set(names)
    else:
        note = "no behaviour: each pin tied to ground through 1 TOhm (supplies 1 GOhm) to keep the node valid"
    for i, pt in enumerate(names, start=1):
        if pt not in ports.used:
            body.append(f"RS{i} {pt} 0 {_SUPPLY_LOAD if pt in (ports.vpos, ports.vneg) else _OPEN}")
    # a user's kind name: one comment line whatever it holds
    return [f"* {_ascii(kind)}: {note}", f".subckt {subname} {' '.join(names)}{params}", *body, f".ends {subname}"]


# --------------------------------------------------------------------------
def spice_netlist(design: Design) -> bytes:
    """Write ``design`` as a SPICE deck that ngspice runs (module docstring).

    Parameters
    ----------
    design : Design
        The sized design.

    Returns
    -------
    bytes
        ASCII text, ``\\n`` line ends, identical for identical designs.

    Examples
    --------
    >>> from pipeline.model import Design, Net, Part, PinDef, PinRef
    >>> pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    >>> r = Part("R1", "resistor", "0603", pins, value=4700.0, value_text="4k7")
    >>> d = Design("Divider", "A", "d.toml", (r,), (Net("IN", (PinRef("R1", "1"),)), Net("GND", (PinRef("R1", "2"),))))
    >>> [ln for ln in spice_netlist(d).decode().splitlines() if ln[:1] not in "*."]
    ['Divider', 'R1 IN 0 4.7k']
    """
    nodes = _node_names(design)
    pin_net = {(pr.ref, pr.pin): nets[0].name for pr, nets in pin_net_map(design).items()}  # first net wins
    deck = _Deck(design, nodes, pin_net, elements=_Names(reserved=[f"Vsupply_{nodes[n.name]}" for n in design.nets]),
                 node_pool=_Names(reserved=[*nodes.values(), *SPICE_GROUND_NODES]),
                 categories={k.name: k.category for k in design.kinds}, voltages={})
    for n in design.nets:
        deck.voltages.setdefault(n.name, n.voltage)
    out = [*_head_lines(design), "*", "* Nets", *_net_records(design, nodes), "*", "* Parts"]
    for part in design.parts:
        out += _part_lines(part, deck)
    out += _tail_lines(deck, _driven_nets(design, pin_net))
    return ("\n".join(out) + "\n").encode("ascii")


def _head_lines(design: Design) -> list[str]:
    """Title, provenance comments, and the design, kind and block records."""
    title = _ascii(design.name.replace("\r", " ").replace("\n", " ")).strip() or "snugboard design"
    source = posixpath.basename(design.source.replace("\\", "/")) if design.source else ""
    out = [title,
           "* Sized design written by snugboard" + (f" from {_ascii(source)}" if source else "") + ".",
           "* Add sources and an analysis before .end to simulate it; the '* snugboard:' lines let snugboard read "
           "it back.",
           _record("design", [("name", design.name), ("revision", design.revision)])]
    for k in design.kinds:
        out.append(_record("kind", [
            ("name", k.name), ("category", k.category), ("value_unit", k.value_unit),
            ("description", k.description), ("source", k.source),
            ("pins", json.dumps([[p.number, p.name, p.role] for p in k.pins], ensure_ascii=True)),
        ]))
    for st in design.stages:
        try:
            items = json.dumps(dict(st.items), ensure_ascii=True, sort_keys=False)
        except (TypeError, ValueError):
            out.append(f"* block {_ascii(st.name)}: its table holds values JSON cannot carry; not recorded")
            continue
        # No file or line: the reader locates a block record in the file it reads
        # (and the design's own path would put a path into the output).
        out.append(_record(RECORD, [("name", st.name), ("key", st.key), ("items", items)]))
    return out


def _net_records(design: Design, nodes: dict[str, str]) -> list[str]:
    """A record for each net whose name SPICE cannot spell or that declares a voltage."""
    out = []
    for net in design.nets:
        node = nodes[net.name]
        plain = (node == net.name) or (net.name == SPICE_GROUND_NET and node == "0")
        if plain and net.voltage is None and net.voltage_max is None and not net.battery:
            continue
        out.append(_record("net", [("node", node), ("name", None if plain else net.name),
                                   ("voltage", _f(net.voltage)), ("voltage_max", _f(net.voltage_max)),
                                   ("battery", True if net.battery else None)]))
    return out


def _tail_lines(deck: _Deck, driven: set[str]) -> list[str]:
    """Supplies for declared voltages no output drives, the stand-in subcircuits and models, the analysis."""
    nodes = deck.nodes
    out: list[str] = []
    supplies = [n for n in deck.design.nets if n.voltage is not None and n.voltage != 0 and nodes[n.name] != "0"
                and n.name not in driven]
    if supplies:
        out += ["*", "* Supplies: the declared net voltages, as ideal DC sources"]
        out += [f"Vsupply_{nodes[n.name]} {nodes[n.name]} 0 DC {spice_number(n.voltage)}" for n in supplies]
    if deck.stubs:
        out += ["*", "* Stand-in models, one per kind (see the comment above each)"]
        for key in sorted(deck.stubs):
            kind, subname, pins = deck.stubs[key]
            out += _stub(kind, pins, subname)
    if deck.used_models:
        out += ["*", "* Placeholder device models (the simulator's defaults), not a part's data"]
        out += [_MODELS[m] for m in sorted(set(deck.used_models))]
    return out + ["*", ".options rshunt=1e12", ".op", ".end"]


def _f(v: float | None) -> float | None:
    return None if v is None else float(v)


def _driven_nets(design: Design, pin_net: dict[tuple[str, str], str]) -> set[str]:
    out = set()
    for part in design.parts:
        if part.dnp:
            continue
        for p in part.pins:
            if p.role in _DRIVEN_ROLES and (part.ref, p.number) in pin_net:
                out.add(pin_net[(part.ref, p.number)])
    return out


def _part_record(part: Part, element: str | None, pins: list[str], nodes: list[str] | None) -> str:
    pairs: list[tuple[str, Any]] = [
        ("element", element), ("ref", part.ref), ("kind", part.kind), ("package", part.package),
        ("pins", ",".join(pins)),
    ]
    if nodes is not None:
        pairs.append(("nodes", ",".join(nodes)))
    pairs += [
        ("value", _f(part.value)), ("value_text", part.value_text),
        ("tolerance", _f(part.tolerance)), ("tolerance_text", part.tolerance_text),
        ("rating_v", _f(part.rating_v)), ("rating_w", _f(part.rating_w)), ("rating_text", part.rating_text),
        ("manufacturer", part.manufacturer), ("mpn", part.mpn), ("note", part.note),
        ("dnp", True if part.dnp else None),
        ("extra", json.dumps([list(kv) for kv in part.extra], ensure_ascii=True) if part.extra else None),
    ]
    text = _record("part", pairs)
    # "pins=" must stay even when a part has no connected pin at all.
    if "pins=" not in text:
        text += " pins="
    if nodes is not None and "nodes=" not in text:
        text += " nodes="
    return text


@dataclass
class _Deck:
    """What writing the part lines needs: names given so far and lookups made once."""

    design: Design
    nodes: dict[str, str]  # net name -> node
    pin_net: dict[tuple[str, str], str]  # (ref, pin number) -> net name
    elements: _Names
    node_pool: _Names
    categories: dict[str, str]  # design-defined kind -> category
    voltages: dict[str, float | None]  # net name -> declared voltage
    stubs: dict[str, tuple[str, str, tuple[PinDef, ...]]] = field(default_factory=dict)
    used_models: list[str] = field(default_factory=list)

    def node_of(self, part: Part, pin: PinDef) -> str:
        net = self.pin_net.get((part.ref, pin.number))
        return self.nodes[net] if net is not None else ""

    def node_or_nc(self, part: Part, pin: PinDef) -> str:
        n = self.node_of(part, pin)
        return n if n else self.node_pool.take(f"nc_{_legal(part.ref) or 'part'}_{_legal(pin.number) or 'pin'}")

    def name_for(self, part: Part, letter: str) -> str:
        ref = _legal(part.ref, signs=False) or "part"
        return self.elements.take(ref if ref[:1].upper() == letter else letter + ref)


def _device(part: Part) -> tuple[str, str, list[PinDef]]:
    """Element letter (``""``: a stub instance), placeholder model and pins in node order."""
    if part.kind in _PASSIVE_LETTER and len(part.pins) == 2:
        return _PASSIVE_LETTER[part.kind], "", list(part.pins)
    for table, letter, names in ((_DIODES, "D", "AK"), (_BJT, "Q", "CBE"), (_MOS, "M", "DGS")):
        if part.kind in table and all(_pin_named(part, n) for n in names):
            return letter, table[part.kind], [_pin_named(part, n) for n in names]
    return "", "", list(part.pins)


def _part_lines(part: Part, deck: _Deck) -> list[str]:
    """The record and the line(s) of one part: a comment, a device or a stub instance."""
    letter, model, order = _device(part)
    if part.kind in deck.categories:
        category = deck.categories[part.kind]
    else:
        category = "connector" if part.kind in _CONNECTORS else ""
    if category == "connector":
        return _comment_lines(part, deck, "a connector, not simulated")
    if part.dnp:
        return _comment_lines(part, deck, "not fitted (dnp), not simulated")
    if letter in ("R", "C", "L") and part.value is None:
        return _comment_lines(part, deck, "no value, not simulated")
    if letter:
        return _device_lines(part, deck, letter, model, order)
    return _stub_lines(part, deck)


def _comment_lines(part: Part, deck: _Deck, why: str) -> list[str]:
    pins = [p.number for p in part.pins]
    pnodes = [deck.node_of(part, p) for p in part.pins]
    shown = " ".join(f"{p.number}:{n or '-'}" for p, n in zip(part.pins, pnodes))
    return [_part_record(part, None, pins, pnodes),
            f"* {_ascii(part.ref)} ({_ascii(part.kind)}, {_ascii(part.package)}): {why}; pins {shown}"]


def _device_lines(part: Part, deck: _Deck, letter: str, model: str, order: list[PinDef]) -> list[str]:
    name = deck.name_for(part, letter)
    pnodes = [deck.node_or_nc(part, p) for p in order]
    pins = [p.number if deck.node_of(part, p) else "" for p in order]
    line = f"{name} {' '.join(pnodes)}"
    if letter in ("R", "C", "L"):
        line += f" {spice_number(part.value)}"
    elif letter == "M":
        line = f"{name} {' '.join(pnodes)} {pnodes[2]}"  # bulk tied to source
    if model:
        line += f" {model}"
        deck.used_models.append(model)
    return [_part_record(part, name, pins, None), line]


def _stub_lines(part: Part, deck: _Deck) -> list[str]:
    base = f"snug_{_legal(part.kind, signs=False).lower() or 'kind'}"
    key = part.kind
    if key not in deck.stubs:
        deck.stubs[key] = (part.kind, f"{base}_{len(part.pins)}", tuple(part.pins))
    if deck.stubs[key][2] != tuple(part.pins):  # same kind, other pins (a design-defined kind clash)
        key = f"{part.kind}\x00{part.ref}"
        deck.stubs[key] = (part.kind, f"{base}_{_legal(part.ref, signs=False).lower() or 'part'}", tuple(part.pins))
    name = deck.name_for(part, "X")
    pnodes = [deck.node_or_nc(part, p) for p in part.pins]
    pins = [p.number if deck.node_of(part, p) else "" for p in part.pins]
    line = f"{name} {' '.join(pnodes)} {deck.stubs[key][1]}"
    extra = []
    if _is_regulator(part.kind, part.pins):
        out_pin = _pin_named(part, "OUT")
        net = deck.pin_net.get((part.ref, out_pin.number)) if out_pin is not None else None
        vout = deck.voltages.get(net) if net is not None else None
        if vout is None:
            extra.append(f"* {_ascii(part.ref)}: its OUT net declares no voltage; 3.3 V assumed")
            vout = 3.3
        line += f" params: vout={spice_number(vout)}"
    return [_part_record(part, name, pins, None), *extra, line]
