"""EDIF 2 0 0 netlist writer (pipeline.export.edif).

External reference: spydrnet 1.13 (PyPI), a general-purpose EDIF netlist
reader, parses every file written here; the connectivity it reports must be
exactly the design's. Per LIBRARY-NOTES.md: walk
``nl.top_instance.reference.cables -> wires -> pins``; an OuterPin's
``.instance.name`` and ``.inner_pin.port.name``; spydrnet gives an object
the original name of a ``(rename id "original")`` and keeps the identifier
as metadata ``"EDIF.identifier"``; it does not decode ``%N%`` string escapes
(its stringToken grammar accepts them), so the tests decode them.

EDIF identifier rule checked here (EIA-548 / EDIF 2 0 0, as spydrnet's
tokenizer also encodes it): a letter or ``&`` first, then letters, digits
and ``_``; identifiers compare without regard to case (from memory of the
standard; the writer is built so either reading holds).
"""

from __future__ import annotations

import datetime
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

spydrnet = pytest.importorskip("spydrnet")

from pipeline.export.edif import edif_identifier, edif_netlist, edif_string  # noqa: E402
from pipeline.library import load_library  # noqa: E402
from pipeline.model import Design, Net, Part, PinDef, PinRef  # noqa: E402

LIB = load_library()
_ID = re.compile(r"^(?:[A-Za-z]|&)[A-Za-z0-9_]*$")


def _decode(text: str) -> str:
    return re.sub(r"%(\d+)%", lambda m: chr(int(m.group(1))), text)


def _parse(tmp_path: Path, design: Design, name: str = "netlist.edf", **kw):
    path = tmp_path / name
    path.write_bytes(edif_netlist(design, **kw))
    nl = spydrnet.parse(str(path))
    assert nl.top_instance is not None
    return nl


def _connectivity(nl) -> set[tuple[str, str, str]]:
    out = set()
    for cable in nl.top_instance.reference.cables:
        for wire in cable.wires:
            for pin in wire.pins:
                out.add((_decode(cable.name), _decode(pin.instance.name), _decode(pin.inner_pin.port.name)))
    return out


def _wanted(design: Design) -> set[tuple[str, str, str]]:
    return {(n.name, p.ref, p.pin) for n in design.nets for p in n.pins}


def _check_identifiers(nl) -> None:
    """Every identifier legal, and unique without regard to case in its name space."""
    top = nl.top_instance.reference
    spaces = [
        [i["EDIF.identifier"] for i in top.children],
        [c["EDIF.identifier"] for c in top.cables],
        [lib["EDIF.identifier"] for lib in nl.libraries],
    ]
    for lib in nl.libraries:
        spaces.append([d["EDIF.identifier"] for d in lib.definitions])
        for d in lib.definitions:
            spaces.append([p["EDIF.identifier"] for p in d.ports])
    for ids in spaces:
        for ident in ids:
            assert _ID.match(ident) and len(ident) <= 255, ident
        assert len({i.lower() for i in ids}) == len(ids), ids


def _pins(*spec: tuple[str, str, str]) -> tuple[PinDef, ...]:
    return tuple(PinDef(n, nm, r) for n, nm, r in spec)


def _nasty() -> Design:
    two = _pins(("1", "1", "passive"), ("2", "2", "passive"))
    odd = _pins(("1", "+IN", "input"), ("2", "-IN", "input"), ("A1", "OUT", "output"), ("+", "V+", "power-in"),
                ("-", "V-", "power-in"), ("b 2", "x y", "passive"), ("B_2", "q", "passive"))
    parts = (
        Part("R1", "resistor", "0603", two, 1e3, "1k"),
        Part("r1", "resistor", "0603", two, 2e3, "2k"),          # differs from R1 only in case
        Part("1R", "resistor", "0402", two, 4.7, "4R7"),         # leading digit
        Part("U 2", "my chip", "SOIC-8", odd),                   # space in ref, kind with a space
        Part("Q.3", "resistor", "0603", two, 5.0, 'say "hi" 100%'),
        Part("X+", "resistor", "0603", two, None, "", dnp=True),
        Part("Xp", "capacitor", "0603", two, 1e-9, "1n"),         # "X+" also legalises to Xp
        Part("µ1", "capacitor", "0603", two, 1e-6, "1µ"),
    )
    P = PinRef
    nets = (
        Net("in", (P("R1", "1"), P("U 2", "1"))),
        Net("IN", (P("r1", "1"), P("U 2", "2"))),
        Net("my net", (P("R1", "2"), P("1R", "1"))),
        Net("V+", (P("U 2", "+"), P("X+", "1"))),
        Net("V-", (P("U 2", "-"), P("Xp", "1"))),
        Net("Vp", (P("X+", "2"), P("Xp", "2"))),
        Net("1st", (P("U 2", "A1"), P("Q.3", "1"))),
        Net("a.b", (P("Q.3", "2"), P("µ1", "1"))),
        Net('say "hi"', (P("r1", "2"), P("U 2", "b 2"))),
        Net("100%", (P("1R", "2"), P("U 2", "B_2"))),
        Net("µA", (P("µ1", "2"),)),
        Net("D[3]", ()),
        Net("D_3_", ()),
        Net("D", ()),
        Net("n" * 300, ()),  # longer than any identifier may be
    )
    return Design('nasty "names" µ', "A", "nasty.toml", parts, nets)


def test_nasty_names_read_back_exactly(tmp_path):
    d = _nasty()
    nl = _parse(tmp_path, d)
    assert _connectivity(nl) == _wanted(d)
    _check_identifiers(nl)
    top = nl.top_instance.reference
    assert sorted(_decode(i.name) for i in top.children) == sorted(p.ref for p in d.parts)
    assert sorted(_decode(c.name) for c in top.cables) == sorted(n.name for n in d.nets)
    # one cell per kind + package
    cells = {_decode(c.name) for lib in nl.libraries for c in lib.definitions}
    assert {"resistor/0603", "resistor/0402", "my chip/SOIC-8", "capacitor/0603"} <= cells


def test_properties_and_dnp(tmp_path):
    d = _nasty()
    nl = _parse(tmp_path, d)
    props = {}
    for inst in nl.top_instance.reference.children:
        props[_decode(inst.name)] = {p["identifier"]: _decode(p["value"]) for p in inst.get("EDIF.properties", [])}
    assert props["Q.3"]["value"] == 'say "hi" 100%'
    assert props["µ1"]["value"] == "1µ"
    assert props["X+"]["dnp"] == "true"      # unfitted parts stay in the netlist (CONTRACT section 2)
    assert "dnp" not in props["R1"]
    assert props["U 2"]["kind"] == "my chip"


def _library_design() -> Design:
    def part(ref, kind, pkg, value=None, **kw):
        k, p = LIB.kind(kind), LIB.package(pkg)
        return Part(ref, k.name, p.name, LIB.pins_for(k, p), value=value, **kw)

    parts = (part("R1", "resistor", "0603", 1.26e3, value_text="1.26k"), part("C1", "capacitor", "0805", 150e-9),
             part("U1", "opamp-dual", "SOIC-8"), part("J1", "header", "header-1x3-2.54"),
             part("D1", "led", "0603"), part("U2", "ldo-regulator", "SOT-23-5"))
    P = PinRef
    nets = (Net("IN", (P("R1", "1"), P("J1", "2"))), Net("A", (P("R1", "2"), P("C1", "1"), P("U1", "3"))),
            Net("OUT", (P("C1", "2"), P("U1", "1"), P("U1", "2"), P("D1", "2"))),
            Net("V+", (P("U1", "8"), P("U2", "5"))), Net("VBAT", (P("U2", "1"), P("U2", "3"), P("J1", "1"))),
            Net("GND", (P("U1", "4"), P("U2", "2"), P("J1", "3"), P("D1", "1"))))
    return Design("Filter board", "A", "design.toml", parts, nets)


def test_library_design_reads_back(tmp_path):
    d = _library_design()
    nl = _parse(tmp_path, d)
    assert _connectivity(nl) == _wanted(d)
    _check_identifiers(nl)
    # ports per pin, named by pin number; directions from the pin roles
    dual = next(c for lib in nl.libraries for c in lib.definitions if _decode(c.name) == "opamp-dual/SOIC-8")
    ports = {p.name: p.direction for p in dual.ports}
    assert set(ports) == {str(i) for i in range(1, 9)}
    assert ports["1"] == spydrnet.Port.Direction.OUT and ports["3"] == spydrnet.Port.Direction.IN
    header = next(c for lib in nl.libraries for c in lib.definitions if _decode(c.name).startswith("header/"))
    assert sorted(p.name for p in header.ports) == ["1", "2", "3"]


DEMO = Path(__file__).resolve().parents[1] / "demo_project" / "design.toml"


@pytest.mark.skipif(not DEMO.exists(), reason="no demo design")
def test_demo_reads_back(tmp_path):
    from pipeline.design import read_design

    d, _ = read_design(DEMO, LIB, display="design.toml")
    nl = _parse(tmp_path, d)
    assert _connectivity(nl) == _wanted(d)
    _check_identifiers(nl)
    assert len(list(nl.top_instance.reference.children)) == len(d.parts)


@pytest.mark.parametrize("name,ident", [
    ("R1", "R1"), ("1", "&1"), ("+INA", "pINA"), ("-INA", "nINA"), ("V-", "Vn"), ("my net", "my_net"),
    ("SOIC-8", "SOIC_8"), ("a..b", "a_b"), ("", "&x"), ("___", "&x"), ("_a", "a"), ("µ", "&x"),
])
def test_identifier_rule(name, ident):
    assert edif_identifier(name) == ident
    assert _ID.match(edif_identifier(name))


def test_string_escapes():
    # EDIF 2 0 0 asciiCharacter escapes %code% (spydrnet's stringToken grammar).
    assert edif_string("a%b") == '"a%37%b"'
    assert edif_string("D[3]") == '"D%91%3%93%"'  # never read as a bus member
    assert _decode(edif_string('q"µ\n')[1:-1]) == 'q"µ\n'


def test_timestamp_from_source_date_epoch():
    d = _library_design()
    assert b"(timeStamp 1970 1 1 0 0 0)" in edif_netlist(d)
    # 1700000000 s after the epoch is 2023-11-14 22:13:20 UTC (checked with the
    # standard library's calendar conversion below, independent of the writer's).
    t = datetime.datetime(1970, 1, 1, tzinfo=datetime.timezone.utc) + datetime.timedelta(seconds=1700000000)
    assert (t.year, t.month, t.day, t.hour, t.minute, t.second) == (2023, 11, 14, 22, 13, 20)
    assert b"(timeStamp 2023 11 14 22 13 20)" in edif_netlist(d, timestamp=1700000000)
    assert b'(program "snugboard")' in edif_netlist(d)
    head = edif_netlist(d).decode().splitlines()[:4]
    assert head[1:] == ["  (edifVersion 2 0 0)", "  (edifLevel 0)", "  (keywordMap (keywordLevel 0))"]


# --------------------------------------------------------------------------
# generated designs
# --------------------------------------------------------------------------
_NAME = st.text(alphabet="aAbB01_ +-.%\"µ[]", min_size=1, max_size=8)


@st.composite
def designs(draw):
    refs = draw(st.lists(_NAME, min_size=1, max_size=6, unique=True))
    parts = []
    for ref in refs:
        numbers = draw(st.lists(st.sampled_from(["1", "2", "3", "A", "a", "+", "-", "B 1"]), min_size=1,
                                max_size=4, unique=True))
        pins = tuple(PinDef(n, draw(_NAME), draw(st.sampled_from(["input", "output", "passive", "power-in"])))
                     for n in numbers)
        kind = draw(st.sampled_from(["resistor", "chip", "Chip", "my-kind"]))
        parts.append(Part(ref, kind, draw(st.sampled_from(["0603", "SOIC-8"])), pins,
                          value_text=draw(st.sampled_from(["", "10k", "%%"])), dnp=draw(st.booleans())))
    nets = draw(st.lists(_NAME, min_size=1, max_size=6, unique=True))
    members: dict[str, list[PinRef]] = {n: [] for n in nets}
    for p in parts:
        for pin in p.pins:
            k = draw(st.integers(-1, len(nets) - 1))
            if k >= 0:
                members[nets[k]].append(PinRef(p.ref, pin.number))
    return Design(draw(_NAME), "", "gen.toml", tuple(parts), tuple(Net(n, tuple(m)) for n, m in members.items()))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(d=designs())
def test_generated_designs_read_back(tmp_path, d):
    nl = _parse(tmp_path, d)
    assert _connectivity(nl) == _wanted(d)
    _check_identifiers(nl)


# --------------------------------------------------------------------------
# determinism
# --------------------------------------------------------------------------
# Two calls in one process share a hash seed and prove little: compared across processes.
_SCRIPT = """
import hashlib, sys
sys.path.insert(0, sys.argv[1])
import test_edif
from pipeline.export.edif import edif_netlist
blob = edif_netlist(test_edif._nasty()) + edif_netlist(test_edif._library_design(), timestamp=1700000000)
print(hashlib.sha256(blob).hexdigest())
"""


def test_same_bytes_across_hash_seeds():
    here = Path(__file__).resolve().parent
    outs = set()
    for seed in ("0", "1", "4242"):
        res = subprocess.run([sys.executable, "-c", _SCRIPT, str(here)], capture_output=True, text=True,
                             env=dict(os.environ, PYTHONHASHSEED=seed), timeout=60, cwd=here.parent)
        assert res.returncode == 0, res.stderr
        outs.add(res.stdout.strip())
    assert len(outs) == 1


# --------------------------------------------------------------------------
# issue 13 item 19: a user's strings stay inside their EDIF string token
# --------------------------------------------------------------------------
# EDIF 2 0 0 (EIA-548) lexical rules, from memory of the standard: a string token is
# text between double quotes holding no double quote; any character may be written as
# %N% with N its ASCII code; tokens are separated by blanks and brackets.
_TOKEN = re.compile(r'\s*(?:(\()|(\))|"([^"]*)"|([^\s()"]+))')
_PAYLOADS = ["x\n.control\nshell touch pwned\n.endc\n", 'q") (instance EVIL', "%34%\r\n\x00\x1b[31m\x7f",
             ")))(((", "µ\u2028\u202e"]


def _tokens(text: str) -> list[tuple[str, str]]:
    out, pos = [], 0
    while pos < len(text.rstrip()):
        m = _TOKEN.match(text, pos)
        assert m and m.end() > pos, text[pos:pos + 40]
        kind = ("open", "close", "string", "word")[next(i for i in range(4) if m.group(i + 1) is not None)]
        out.append((kind, m.group(m.lastindex)))
        pos = m.end()
    return out


@pytest.mark.parametrize("payload", _PAYLOADS, ids=range(len(_PAYLOADS)))
def test_defect_19_user_strings_stay_inside_edif_strings(tmp_path, payload):
    pins = _pins(("1", "IN" + payload, "input"), ("2", "2", "passive"))
    d = Design(payload, "", "d.toml",
               (Part("R1", "resistor", "0603", _pins(("1", "1", "passive"), ("2", "2", "passive")), 1e3,
                     "1k" + payload, mpn=payload, manufacturer=payload),
                Part("U" + payload, "kind" + payload, "SOT-23", pins)),
               (Net("N" + payload, (PinRef("R1", "1"), PinRef("U" + payload, "1"))),
                Net("GND", (PinRef("R1", "2"), PinRef("U" + payload, "2")))))
    data = edif_netlist(d)
    assert all(32 <= b < 127 or b == 10 for b in data), "printable ASCII and newlines only"
    toks = _tokens(data.decode("ascii"))
    depth = 0
    for kind, _ in toks:
        depth += {"open": 1, "close": -1}.get(kind, 0)
        assert depth >= 0
    assert depth == 0 and toks[0] == ("open", "(") and toks[1] == ("word", "edif")
    strings = [_decode(v) for k, v in toks if k == "string"]
    for want in ("1k" + payload, payload, "IN" + payload, "N" + payload, "U" + payload, "kind" + payload + "/SOT-23"):
        assert want in strings, want
    # The instances are exactly the two parts: no payload opened another.
    assert sum(1 for i, t in enumerate(toks) if t == ("word", "instance") and toks[i - 1][0] == "open") == 2
    nl = _parse(tmp_path, d)  # and an independent reader takes it
    assert {_decode(i.name) for i in nl.top_instance.reference.children} == {"R1", "U" + payload}


_WORDS = st.text(alphabet="abcXYZ09_", min_size=1, max_size=45)
_LEAF_LISTS = st.lists(_WORDS, min_size=1, max_size=4)
_TREES = st.recursive(_LEAF_LISTS, lambda kids: st.tuples(st.lists(_WORDS, min_size=1, max_size=2),
                                                           st.lists(kids, min_size=1, max_size=4)),
                      max_leaves=12)


def _as_lists(tree, leaf):
    """The tree as the writer's nested lists; a list of words only becomes ``leaf(*words)``."""
    if isinstance(tree, list):
        return leaf(*tree)
    words, kids = tree
    return [*words, *(_as_lists(k, leaf) for k in kids)]


@given(st.tuples(st.lists(_WORDS, min_size=1, max_size=2), st.lists(_TREES, min_size=1, max_size=4)),
       st.integers(0, 40))
@settings(max_examples=150, deadline=None)
def test_prewritten_word_lists_render_as_plain_lists(tree, indent):
    # reference: the renderer on plain nested lists (issue 11 writes lists of words as text once,
    # _Leaf); the bytes must not change, long leaves (over the 100-character line) included
    from pipeline.export.edif import _Leaf, _render

    plain = _render(_as_lists(tree, lambda *w: list(w)), indent)
    assert _render(_as_lists(tree, _Leaf), indent) == plain


@given(st.tuples(st.lists(_WORDS, min_size=1, max_size=2), st.lists(_TREES, min_size=1, max_size=5)),
       st.integers(0, 40), st.data())
@settings(max_examples=150, deadline=None)
def test_lists_written_ahead_render_as_plain_lists(tree, indent, data):
    # reference: the renderer on plain nested lists; children written ahead at their indent
    # (_done: how the contents' instances and nets are written, issue 11) must give the same bytes
    from pipeline.export.edif import _Leaf, _done, _render

    plain = _render(_as_lists(tree, lambda *w: list(w)), indent)
    words, kids = tree
    ahead = [data.draw(st.booleans()) for _ in kids]
    mixed = [*words, *(_done(_as_lists(k, _Leaf), indent + 2) if a and not isinstance(k, list)
                       else _as_lists(k, _Leaf) for k, a in zip(kids, ahead))]
    assert _render(mixed, indent) == plain
