"""The netlist as EDIF 2 0 0 (EIA-548, IEC 61690-1): ``netlist.edf``.

Entry point: :func:`edif_netlist`.

What the file holds
-------------------
::

    (edif NAME (edifVersion 2 0 0) (edifLevel 0) (keywordMap (keywordLevel 0))
      (status (written (timeStamp Y M D h m s) (program "snugboard")))
      (library SNUG_PARTS ...            one cell per kind and package:
        (cell (rename resistor_0603 "resistor/0603") (cellType GENERIC)
          (view netlist (viewType NETLIST)
            (interface (port (rename &1 "1") (direction INOUT)
                         (property pin_name (string "1"))) ...))
          (property kind (string "resistor")) (property package (string "0603"))))
      (library SNUG_DESIGN ...           the board:
        (cell NAME (cellType GENERIC)
          (view netlist (viewType NETLIST) (interface)
            (contents
              (instance R1 (viewRef netlist (cellRef resistor_0603 (libraryRef SNUG_PARTS)))
                (property value (string "10k")) ...)
              (net GND (joined (portRef &2 (instanceRef R1)) ...))))))
      (design NAME (cellRef NAME (libraryRef SNUG_DESIGN))))

* Ports are named by **pin number** (what a layout program matches to a
  footprint's pads); the pin's name is the port property ``pin_name``.
  Directions follow the pin roles: ``in`` and ``supply`` INPUT;
  ``out``, ``open-drain`` and ``supply-out`` OUTPUT; others INOUT.
* Instances carry the properties ``value`` (the design's text, else
  :func:`pipeline.values.format_value` of the number), ``kind``, ``package``, ``mpn``,
  ``manufacturer``, and ``dnp`` ``"true"`` for unfitted parts (which stay
  in the netlist, CONTRACT section 2).
* **Names.** An EDIF identifier starts with a letter (or ``&``, which lets
  it start with a digit) followed by letters, digits and ``_``; identifiers
  are compared without regard to case. Every name that is not such an
  identifier is written with EDIF's ``(rename legal "original")``, so the
  original survives: characters outside the set become ``_`` (``+`` and
  ``-`` become ``p`` and ``n``), runs of ``_`` shrink to one, a leading
  digit gets ``&``; a clash (``in`` next to ``IN``, ``V+`` next to ``Vp``)
  gets ``_2``, ``_3`` ... Names that are legal already keep their spelling
  and are placed first. Identifiers stay under 200 characters.
* **Strings** are ASCII: ``"`` and ``%`` and any character outside
  printable ASCII are written as EDIF escapes ``%N%`` (N the character's
  code point), which the standard defines for ASCII codes. ``[`` and ``]``
  are escaped too (``%91%``, ``%93%``), so that no reader takes a net such
  as ``D[3]`` for a member of a bus ``D`` (every snugboard net is a single
  wire), and because one general-purpose reader fails on a name ending in
  ``[``.
* The time stamp is ``timestamp`` (seconds since 1970, UTC: pass
  ``SOURCE_DATE_EPOCH``), else 1970-01-01 00:00:00; never the clock.
  The output is identical for identical designs and holds no path.
"""

from __future__ import annotations

import datetime as _dt
import functools
import re
from typing import Iterable

from ..model import Design, Part, PinDef
from ..order import natural_key
from ..values import format_value

__all__ = ["edif_netlist", "edif_identifier", "edif_string"]

_PARTS_LIB = "SNUG_PARTS"
_DESIGN_LIB = "SNUG_DESIGN"
_ID_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_MAX_ID = 200
_DIRECTION = {"in": "INPUT", "supply": "INPUT", "out": "OUTPUT", "open-drain": "OUTPUT",
              "supply-out": "OUTPUT"}
#: printable ASCII but '"', '%', '[' and ']': written as it is inside an EDIF string
_PLAIN_RE = re.compile(r"[\x20\x21\x23\x24\x26-\x5a\x5c\x5e-\x7e]*")
_MAX_EPOCH = 253402300799  # 9999-12-31 23:59:59 UTC


@functools.lru_cache(maxsize=4096)
def edif_string(text: str) -> str:
    """An EDIF string token: quoted, with ``%N%`` escapes.

    Kept for the last 4,096 texts (a netlist repeats its kinds, packages and values).

    Examples
    --------
    >>> edif_string('say "hi" 100%')
    '"say %34%hi%34% 100%37%"'
    """
    text = str(text)
    if _PLAIN_RE.fullmatch(text):  # the common case: nothing to escape
        return '"' + text + '"'
    out = []
    for ch in text:
        code = ord(ch)
        if ch in '"%[]' or code < 32 or code > 126:
            out.append(f"%{code}%")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _between_words(text: str, i: int) -> bool:
    """Whether ``text[i]`` stands between two letters or digits (a hyphen, not a sign)."""
    return 0 < i < len(text) - 1 and text[i - 1].isalnum() and text[i + 1].isalnum()


def edif_identifier(name: str) -> str:
    """The legal identifier a name is written as (before clash suffixes).

    Examples
    --------
    >>> edif_identifier("R1"), edif_identifier("1"), edif_identifier("+INA"), edif_identifier("my net.2")
    ('R1', '&1', 'pINA', 'my_net_2')
    """
    text = str(name)
    chars = []
    for i, ch in enumerate(text):
        if ch.isascii() and (ch.isalnum() or ch == "_"):
            chars.append(ch)
        elif ch == "+":
            chars.append("p")
        elif ch == "-" and not _between_words(text, i):
            chars.append("n")
        else:
            chars.append("_")
    s = re.sub(r"_+", "_", "".join(chars)).strip("_")[:_MAX_ID].rstrip("_")
    if not s:
        return "&x"
    if not s[0].isalpha():
        return "&" + s
    return s


class _Scope:
    """One EDIF name space: original name -> unique legal identifier."""

    def __init__(self, names: Iterable[str]) -> None:
        self.ids: dict[str, str] = {}
        used: set[str] = set()
        unique = sorted(set(names), key=lambda n: (not _ID_RE.match(n) or len(n) > _MAX_ID, n))
        for name in unique:
            base = name if (_ID_RE.match(name) and len(name) <= _MAX_ID) else edif_identifier(name)
            ident, n = base, 2
            while ident.lower() in used:
                ident = f"{base}_{n}"
                n += 1
            used.add(ident.lower())
            self.ids[name] = ident

    def ref(self, name: str) -> str:
        return self.ids[name]

    def define(self, name: str) -> str:
        ident = self.ids[name]
        return ident if ident == name else f"(rename {ident} {edif_string(name)})"


def _cell_name(part: Part) -> str:
    return f"{part.kind}/{part.package}"


def _value(part: Part) -> str:
    if part.value_text:
        return part.value_text
    if part.value is None:
        return ""
    return format_value(part.value)


def _stamp(timestamp: int | None) -> list:
    ts = 0 if timestamp is None else min(max(int(timestamp), 0), _MAX_EPOCH)
    t = _dt.datetime.fromtimestamp(ts, tz=_dt.timezone.utc)
    return ["timeStamp", *(str(x) for x in (t.year, t.month, t.day, t.hour, t.minute, t.second))]


def edif_netlist(design: Design, *, timestamp: int | None = None) -> bytes:
    """Write ``design``'s parts and nets as an EDIF 2 0 0 netlist.

    Parameters
    ----------
    design : Design
        The sized design.
    timestamp : int, optional
        Seconds since 1970-01-01 UTC for the ``written`` time stamp
        (``SOURCE_DATE_EPOCH``); default 0. Clamped to years 1970 .. 9999.

    Returns
    -------
    bytes
        ASCII text, ``\\n`` line ends, identical for identical input.

    Examples
    --------
    >>> from pipeline.model import Design, Net, Part, PinDef, PinRef
    >>> pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    >>> d = Design("demo", "A", "d.toml", (Part("R1", "resistor", "0603", pins, 1e3, "1k"),),
    ...            (Net("IN", (PinRef("R1", "1"),)), Net("GND", (PinRef("R1", "2"),))))
    >>> text = edif_netlist(d).decode()
    >>> "(portRef (rename &1 \\"1\\")" in text, "(portRef &1 (instanceRef R1))" in text
    (False, True)
    """
    cells, cell_info = _cells(design)
    top_original = design.name or "design"
    cell_scope = _Scope(list(cells) + [top_original])
    inst_scope = _Scope(p.ref for p in design.parts)
    port_scopes = {c: _Scope(pins) for c, pins in cells.items()}
    top = cell_scope.ref(top_original)
    top_def = cell_scope.define(top_original)
    library = _parts_library(cells, cell_info, cell_scope, port_scopes)
    contents = _contents(design, cell_scope, inst_scope, port_scopes)
    tree = [
        "edif", top_def,
        ["edifVersion", "2", "0", "0"],
        ["edifLevel", "0"],
        ["keywordMap", ["keywordLevel", "0"]],
        ["status", ["written", _stamp(timestamp), ["program", edif_string("snugboard")]]],
        library,
        ["library", _DESIGN_LIB, ["edifLevel", "0"], ["technology", ["numberDefinition"]],
         ["cell", top_def, ["cellType", "GENERIC"],
          ["view", "netlist", ["viewType", "NETLIST"], ["interface"], contents]]],
        ["design", top_def, ["cellRef", top, ["libraryRef", _DESIGN_LIB]]],
    ]
    return (_render(tree, 0) + "\n").encode("ascii")


def _cells(design: Design) -> tuple[dict[str, dict[str, PinDef]], dict[str, tuple[str, str]]]:
    """One cell per kind and package: its ports by pin number, and its (kind, package)."""
    cells: dict[str, dict[str, PinDef]] = {}
    cell_info: dict[str, tuple[str, str]] = {}
    cell_of: dict[str, str] = {}  # ref -> its cell name
    for part in design.parts:
        cname = _cell_name(part)
        cell_of[part.ref] = cname
        pins = cells.setdefault(cname, {})
        cell_info[cname] = (part.kind, part.package)
        for p in part.pins:
            pins.setdefault(p.number, p)
    # Pins a net names that the part does not list still need a port.
    for net in design.nets:
        for pr in net.pins:
            cname = cell_of.get(pr.ref)
            if cname is not None and pr.pin not in cells[cname]:
                cells[cname][pr.pin] = PinDef(pr.pin, pr.pin, "passive")
    return cells, cell_info


def _parts_library(cells: dict[str, dict[str, PinDef]], cell_info: dict[str, tuple[str, str]], cell_scope: _Scope,
                   port_scopes: dict[str, _Scope]) -> list:
    """The ``SNUG_PARTS`` library: each cell's ports (direction from the pin role) and properties."""
    library: list = ["library", _PARTS_LIB, ["edifLevel", "0"], ["technology", ["numberDefinition"]]]
    for cname in sorted(cells, key=natural_key):
        kind, package = cell_info[cname]
        scope = port_scopes[cname]
        interface: list = ["interface"]
        for number in sorted(cells[cname], key=natural_key):
            pin = cells[cname][number]
            interface.append(["port", scope.define(number), ["direction", _DIRECTION.get(pin.role, "INOUT")],
                              ["property", "pin_name", ["string", edif_string(pin.name)]]])
        library.append(["cell", cell_scope.define(cname), ["cellType", "GENERIC"],
                        ["view", "netlist", ["viewType", "NETLIST"], interface],
                        ["property", "kind", ["string", edif_string(kind)]],
                        ["property", "package", ["string", edif_string(package)]]])
    return library


def _contents(design: Design, cell_scope: _Scope, inst_scope: _Scope, port_scopes: dict[str, _Scope]) -> list:
    """The board cell's contents: one instance per part, one net per net (a dict lookup per pin).

    Each instance and net is written as soon as it is built (:func:`_done`, at
    the level the contents' children stand at), so the tree never holds a
    list per pin; a cell's ``viewRef`` and a repeated property are written once.
    """
    contents: list = ["contents"]
    ports_of = {}
    parts_lib = _Leaf("libraryRef", _PARTS_LIB)
    view_refs: dict[str, _Done] = {}
    properties: dict[tuple[str, str], _Done] = {}
    for part in design.parts:
        cname = _cell_name(part)
        ports_of[part.ref] = port_scopes[cname]
        if cname not in view_refs:
            view_refs[cname] = _done(["viewRef", "netlist", ["cellRef", cell_scope.ref(cname), parts_lib]],
                                     _CONTENTS_LEVEL + 4)
        inst: list = ["instance", inst_scope.define(part.ref), view_refs[cname]]
        for k, v in (("value", _value(part)), ("kind", part.kind), ("package", part.package),
                     ("manufacturer", part.manufacturer), ("mpn", part.mpn), ("dnp", "true" if part.dnp else "")):
            if v:
                prop = properties.get((k, v))
                if prop is None:
                    prop = properties[(k, v)] = _done(["property", k, _Leaf("string", edif_string(v))],
                                                      _CONTENTS_LEVEL + 4)
                inst.append(prop)
        contents.append(_done(inst, _CONTENTS_LEVEL + 2))
    net_scope = _Scope(n.name for n in design.nets)
    for net in design.nets:
        joined: list = ["joined"]
        for pr in net.pins:
            scope = ports_of.get(pr.ref)
            if scope is not None:
                joined.append(["portRef", scope.ref(pr.pin), _Leaf("instanceRef", inst_scope.ref(pr.ref))])
        contents.append(_done(["net", net_scope.define(net.name), joined], _CONTENTS_LEVEL + 2))
    return contents


#: Widest line, indent included, that a list is written on as a whole.
_WIDTH = 100


class _Leaf(str):
    """A list of words only (no list inside), already written: ``(word word ...)``.

    Such a list is written the same way wherever it stands (on its parent's line or on a line
    of its own, however long), so it is built as text once; :func:`_one_line` and
    :func:`_render` treat it as a list (its own line when the parent is broken), not as a word.

    >>> _Leaf("libraryRef", "SNUG_PARTS")
    '(libraryRef SNUG_PARTS)'
    """

    def __new__(cls, *words: str) -> "_Leaf":
        return super().__new__(cls, "(" + " ".join(words) + ")")


class _Done:
    """A list already written: ``text`` as :func:`_render` writes it at indent ``level``, and
    ``one``, its one-line form (``""`` when too long for a line, as :func:`_one_line` maps it).

    :func:`_one_line` and :func:`_render` take it as the list it was made from; its parent
    must stand at ``level - 2`` (:func:`_render` checks).
    """

    __slots__ = ("one", "text", "level")

    def __init__(self, one: str, text: str, level: int) -> None:
        self.one, self.text, self.level = one, text, level


#: Indent of the board cell's ``contents`` whenever it is broken over lines: the fifth list down
#: (edif, library, cell, view, contents), each broken one two deeper (a list holding a broken list
#: is broken itself).
_CONTENTS_LEVEL = 8


def _done(node: list, level: int) -> _Done:
    """``node`` written now, as it will stand at indent ``level`` (:class:`_Done`)."""
    flat = _one_line(node)
    return _Done(flat[id(node)], _emit(node, level, flat), level)


def _one_line(tree: list) -> dict[int, str]:
    """The one-line form of every list short enough to be written whole, by ``id``.

    One post-order pass: a list's form is joined from its children's, so
    each character is built once per enclosing short list (at most
    ``_WIDTH`` characters each). A longer list maps to ``""``; its length
    is all :func:`_render` needs of it. Recursion is as deep as the tree,
    which the EDIF layout written here fixes (under ten levels).
    """
    flat: dict[int, str] = {}

    def visit(node: list) -> str:
        parts: list[str] = []
        long = False
        for c in node:
            if type(c) is str:
                parts.append(c)
            elif type(c) is _Leaf:  # a list of words: a long one makes its parent long by its length
                parts.append(c)
            elif type(c) is _Done:
                long = long or not c.one
                parts.append(c.one)
            else:
                text = visit(c)
                long = long or not text
                parts.append(text)
        joined = "" if long else " ".join(parts)
        text = "" if long or len(joined) + 2 > _WIDTH else "(" + joined + ")"
        flat[id(node)] = text
        return text

    visit(tree)
    return flat


def _render(tree: list, indent: int) -> str:
    """Pretty-print an S-expression: short lists on one line, others one child a line.

    A list is written on one line when that line, indent included, is at
    most ``_WIDTH`` characters (or it holds no list); otherwise its words
    open the line and each child list follows on a line of its own, indented
    two more. Cost: linear in the output (:func:`_one_line`); recursion as
    deep as the tree.
    """
    return _emit(tree, indent, _one_line(tree))


def _emit(tree: list, indent: int, flat: dict[int, str]) -> str:
    """The text of ``tree`` at ``indent`` (:func:`_render`), given its lists' one-line forms ``flat``."""
    out: list[str] = []

    def emit(node: list, level: int) -> None:
        one = flat[id(node)]
        if one and len(one) + level <= _WIDTH:
            out.append(one)
            return
        kids = [c for c in node if type(c) is not str]
        if not kids:
            out.append("(" + " ".join(node) + ")")
            return
        out.append("(" + " ".join(c for c in node if type(c) is str))
        pad = "\n" + " " * (level + 2)
        for c in kids:
            out.append(pad)
            if type(c) is _Leaf:
                out.append(c)
            elif type(c) is _Done:
                if c.level != level + 2:
                    raise AssertionError(f"a list written at indent {c.level} stands at {level + 2}")
                out.append(c.text)
            else:
                emit(c, level + 2)
        out.append(")")

    emit(tree, indent)
    return "".join(out)
