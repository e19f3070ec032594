"""Stage 1, SPICE form: read a sized design from a SPICE netlist.

Entry point: :func:`read_spice`. One job per module: ``numbers`` (SPICE
numbers), ``expr`` (parameter expressions), ``lines`` (logical lines and
includes), ``tokens``, ``partsmap``, ``collect`` (subcircuits, models,
parameters), ``elaborate`` (element lines, subcircuit flattening),
``mapping`` (element to board part), ``records`` (``* snugboard:``
records), ``assemble`` (parts and nets), ``limits``, ``reader`` (the
entry point's steps). CONTRACT.md section 2 says what a SPICE
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

    [blocks.lowpass]                # passed on to the block analysis ([stages.*] read with a warning)
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
Comment lines ``* snugboard: design|kind|net|part|block key=value ...``
(values bare or JSON strings) are what :func:`pipeline.export.spice.spice_netlist`
writes so a written file reads back to the same design: part kinds,
packages and values, net names SPICE cannot spell, and parts it does not
simulate (connectors, unfitted parts) with their nodes. Any other SPICE
program reads them as comments.
"""

from __future__ import annotations

from typing import Any

__all__ = ["read_spice", "parse_number", "SCALE_FACTORS", "RECORD_PREFIX"]

_HOMES = {"read_spice": "reader", "parse_number": "numbers", "SCALE_FACTORS": "numbers", "RECORD_PREFIX": "records"}


def __getattr__(name: str) -> Any:
    """Import the reader on first use, so that ``pipeline.spice.limits`` alone stays cheap."""
    if name in _HOMES:
        from importlib import import_module

        return getattr(import_module(f".{_HOMES[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
