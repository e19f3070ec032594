"""Declared blocks: ``[blocks.NAME]``, and the previous release's ``[stages.NAME]`` read with a warning."""

from __future__ import annotations

from pathlib import Path

import pytest

from pipeline.errors import DesignError
from pipeline.library import load_library
from pipeline.spice import read_spice
from pipeline.tomlsrc import TomlSource
from pipeline.blocktables import block_tables

BODY = 'type = "rc-lowpass"\nparts = { R = "R1", C = "C1" }\n'


@pytest.mark.parametrize("top,warned", [("blocks", False), ("stages", True)])
def test_both_table_names_read_the_same_block(top, warned):
    src = TomlSource.from_text("d.toml", f"# head\n[{top}.lp]\n{BODY}")
    (table,), notes = block_tables(src, DesignError)
    assert (table.name, table.key, table.line, table.get("type")) == ("lp", f"{top}.lp", 2, "rc-lowpass")
    assert [(n.severity, n.check) for n in notes] == ([("warning", "design.old-table-name")] if warned else [])
    if warned:
        assert "[stages.NAME]" in notes[0].message and "[blocks.NAME]" in notes[0].message


@pytest.mark.parametrize("text,key", [
    (f"[blocks.lp]\n{BODY}[stages.hp]\n{BODY}", "stages"),     # both spellings in one file
    ("blocks = 3\n", "blocks"),
    ("[blocks]\nlp = 3\n", "blocks.lp"),
])
def test_bad_block_tables_are_located(text, key):
    with pytest.raises(DesignError) as e:
        block_tables(TomlSource.from_text("d.toml", text), DesignError)
    assert e.value.key == key and "d.toml" in str(e.value)


CIR = "rc\nR1 in out 1k\nC1 out 0 100n\n"
ITEMS = 'items="{\\"type\\": \\"rc-lowpass\\", \\"parts\\": {\\"R\\": \\"R1\\", \\"C\\": \\"C1\\"}}"'


@pytest.mark.parametrize("rtype,warned", [("block", False), ("stage", True)])
def test_spice_record_old_and_new_spelling(tmp_path: Path, rtype, warned):
    (tmp_path / "rc.cir").write_text(CIR + f"* snugboard: {rtype} name=lp {ITEMS}\n.end\n")
    design, findings = read_spice(tmp_path / "rc.cir", load_library(), display_name="rc.cir")
    assert [(s.name, s.key, s.get("type")) for s in design.stages] == [("lp", "blocks.lp", "rc-lowpass")]
    old = [f for f in findings if f.check == "design.old-table-name"]
    assert len(old) == warned and (not warned or "rc.cir:4" in old[0].message)


@pytest.mark.parametrize("top,warned", [("blocks", False), ("stages", True)])
def test_parts_map_old_and_new_table_name(tmp_path: Path, top, warned):
    (tmp_path / "rc.cir").write_text(CIR + ".end\n")
    (tmp_path / "parts.toml").write_text(f"[{top}.lp]\n{BODY}")
    design, findings = read_spice(tmp_path / "rc.cir", load_library(), display_name="rc.cir",
                                  parts_map=tmp_path / "parts.toml")
    assert [(s.name, s.key) for s in design.stages] == [("lp", f"{top}.lp")]
    assert len([f for f in findings if f.check == "design.old-table-name"]) == warned
