"""A user's strings stay inside their field in design.cir (issue 13 item 19).

The written deck is checked against the ngspice manual's rules for what a simulator
executes (ngspice User's Manual, chapter 2 "Circuit Description": the first line is the
title; a line whose first character is ``*`` is a comment; ``+`` continues the line
before; a line starting with ``.`` is a dot command; ``.control`` ... ``.endc`` is a
control section whose lines -- ``shell`` among them -- are run as commands; lines are
separated by newlines). No line of ours may start a control block or a dot command
other than the ones the writer emits, whatever a kind name, ref, value, note or net
name holds, and every string reads back unchanged.
"""

from __future__ import annotations

import pytest

from pipeline.export.spice import spice_netlist
from pipeline.library import load_library
from pipeline.model import Design, Net, Part, PartKind, PinDef, PinRef, RawTable
from pipeline.spice import read_spice

LIB = load_library()

#: The dot commands the writer emits (module docstring of pipeline.export.spice).
OURS = {".subckt", ".ends", ".model", ".options", ".op", ".end"}
#: Element letters the writer emits: parts (R C L D Q M X), supplies (V), stub bodies (B E).
LETTERS = set("RCLDQMXVBE")

PAYLOADS = [
    "x\n.control\nshell touch pwned\n.endc\n",
    "x\r.control\rshell touch pwned\r.endc",
    "x\r\n.include /etc/passwd\r\n",
    "x\x0b.endc\x0c.param a=1\x1c.lib y",
    "x\x85.control\u2028shell rm\u2029.endc",
    "\n+ continuation\n* comment\n",
    '"; .control $ \\n \x00 \x7f \x1b[31m',
]


def _hostile(payload: str) -> Design:
    kind = PartKind(payload + "kind", "ic", (PinDef("1", "OUT" + payload, "output"),
                                              PinDef("2", "GND", "power-in"), PinDef("3", payload, "input")),
                    description=payload, source=payload)
    rpins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = (
        Part("R1", "resistor", "0603", rpins, value=1e3, value_text="1k" + payload, note=payload, mpn=payload,
             manufacturer=payload, tolerance=0.01, tolerance_text=payload, rating_text=payload,
             extra=(("supplier", payload),)),
        Part("U1", kind.name, "SOT-23", kind.pins, mpn=payload),
        Part("J1", "wire-pad", "pad-1.5mm", (PinDef("1", "1", "passive"),), note=payload),
        Part("R2", "resistor", "0603", rpins, value=2e3, dnp=True, note=payload),
    )
    nets = (
        Net("IN" + payload, (PinRef("R1", "1"), PinRef("U1", "3"), PinRef("J1", "1")), voltage=5.0),
        Net("OUT", (PinRef("R1", "2"), PinRef("U1", "1"), PinRef("R2", "1"))),
        Net("GND", (PinRef("U1", "2"), PinRef("R2", "2"))),
    )
    stages = (RawTable(payload, (("type", payload),), "design.toml", "blocks.x"),)
    return Design("Title" + payload, "A" + payload, "dir/" + payload + ".toml", parts, nets, stages=stages,
                  kinds=(kind,))


def _simulator_view(deck: bytes) -> list[tuple[int, str]]:
    """Lines as ngspice splits them, with what each is: title, comment, dot command, element."""
    text = deck.decode("ascii")  # the writer promises ASCII
    out = []
    for no, line in enumerate(text.split("\n")[:-1], start=1):
        if no == 1:
            out.append((no, "title"))
        elif line.startswith("*"):
            out.append((no, "comment"))
        elif line.startswith("."):
            out.append((no, line.split()[0].lower()))
        else:
            out.append((no, "element " + line[:1]))
    return out


@pytest.mark.parametrize("payload", PAYLOADS, ids=range(len(PAYLOADS)))
def test_defect_19_user_strings_stay_in_their_field(payload):
    deck = spice_netlist(_hostile(payload))
    assert all(32 <= b < 127 or b == 10 for b in deck), "only printable ASCII and newlines"
    assert deck.endswith(b"\n.end\n")
    for no, what in _simulator_view(deck):
        line = deck.decode().split("\n")[no - 1]
        if what.startswith("."):
            assert what in OURS, f"line {no} starts a dot command: {line!r}"
        elif what.startswith("element"):
            assert line[:1] in LETTERS, f"line {no} is not one of our element lines: {line!r}"
            assert not line.lower().startswith(("shell", "+")), line
    control = [no for no, what in _simulator_view(deck) if what in (".control", ".endc")]
    assert control == []


@pytest.mark.parametrize("payload", PAYLOADS[:5], ids=range(5))  # 5: a kind name may not start with a blank
def test_user_strings_read_back_unchanged(tmp_path, payload):
    d0 = _hostile(payload)
    (tmp_path / "design.cir").write_bytes(spice_netlist(d0))
    d1, _ = read_spice(tmp_path / "design.cir", LIB, display_name="design.cir")
    r1 = {p.ref: p for p in d1.parts}
    assert (d1.name, d1.revision) == (d0.name, d0.revision)
    assert r1["R1"].value_text == "1k" + payload and r1["R1"].note == payload
    assert (r1["R1"].mpn, r1["R1"].manufacturer, r1["R1"].tolerance_text) == (payload,) * 3
    assert dict(r1["R1"].extra)["supplier"] == payload
    assert r1["U1"].kind == payload + "kind" and r1["R2"].note == payload
    assert {n.name for n in d1.nets} == {n.name for n in d0.nets}
    assert [k.pins for k in d1.kinds] == [d0.kinds[0].pins]
