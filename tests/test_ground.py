"""Ground names have one home (pipeline.graph): the SPICE reader and writer take theirs from it."""

from __future__ import annotations

from pathlib import Path

from pipeline.export.spice import spice_netlist
from pipeline.graph import SPICE_GROUND_NET, SPICE_GROUND_NODES, is_ground
from pipeline.library import load_library
from pipeline.model import Design, Net, Part, PinDef, PinRef
from pipeline.spice import read_spice


def test_spice_ground_is_a_ground_name():
    # node 0 and its alias gnd (ngspice manual, "circuit description": node 0 is ground; gnd from memory)
    assert is_ground(SPICE_GROUND_NET) and all(is_ground(n) for n in SPICE_GROUND_NODES)


def test_reader_puts_every_spice_ground_spelling_on_one_net(tmp_path: Path):
    (tmp_path / "g.cir").write_text("g\nR1 a 0 1k\nR2 a GND 2k\nC1 a gnd 1n\n.end\n")
    design, _ = read_spice(tmp_path / "g.cir", load_library(), display_name="g.cir")
    nets = {n.name: sorted(p.ref for p in n.pins) for n in design.nets}
    assert nets[SPICE_GROUND_NET] == ["C1", "R1", "R2"] and "0" not in nets and "gnd" not in nets


def test_writer_puts_only_the_ground_net_on_node_0():
    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = (Part("R1", "resistor", "0603", pins, value=1e3, value_text="1k"),
             Part("R2", "resistor", "0603", pins, value=2e3, value_text="2k"))
    nets = (Net("IN", (PinRef("R1", "1"), PinRef("R2", "1"))), Net(SPICE_GROUND_NET, (PinRef("R1", "2"),)),
            Net("AGND", (PinRef("R2", "2"),)))
    lines = [ln for ln in spice_netlist(Design("d", "A", "d.toml", parts, nets)).decode().splitlines()
             if ln[:1] not in "*."]
    assert lines[1:] == ["R1 IN 0 1k", "R2 IN AGND 2k"]   # AGND stays its own node, as in the design
