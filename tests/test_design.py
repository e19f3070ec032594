"""Design reader: CONTRACT.md section 2 plus our extensions; every bad input located."""

from __future__ import annotations

import dataclasses

import pytest

from pipeline.errors import DesignError

# A design written only from CONTRACT.md section 2 (not from the demo).
CONTRACT_DESIGN = """
[design]
name = "contract example"
revision = "A"

[parts.R1]
kind = "resistor"
value = "10k"
package = "0603"
tolerance = "1%"
rating = "0.1W"
manufacturer = "Acme"
mpn = "R-10K-0603"
note = "pull-up"

[parts.U1]
kind = "opamp-single"
package = "SOT-23-5"

[parts.C1]
kind = "capacitor"
value = "100n"
package = "0603"
rating = "16V"

[parts.R2]
kind = "resistor"
value = "4k7"
package = "0402"
dnp = true

[nets]
GND = ["R1.2", "U1.2", "C1.2", "R2.2"]
VCC = ["U1.V+", "C1.1"]
OUT = ["U1.OUT", "U1.-IN", "R1.1"]
IN = ["U1.+IN", "R2.1"]
"""


def test_contract_design_reads(design_from):
    d, warnings = design_from(CONTRACT_DESIGN)
    # the only note: chip capacitors take the package (capacitor) height
    assert [w.check for w in warnings] in ([], ["design.height-default"])
    assert d.name == "contract example" and d.revision == "A"
    r1 = d.part("R1")
    assert (r1.value, r1.tolerance, r1.rating_w, r1.rating_v) == (10_000.0, 0.01, 0.1, None)
    assert (r1.manufacturer, r1.mpn, r1.note) == ("Acme", "R-10K-0603", "pull-up")
    assert d.part("C1").rating_v == 16.0
    assert d.part("R2").dnp and d.part("R2").value == 4700.0
    # Pin names resolve to the contract's pin numbers (opamp-single: 1 OUT, 2 V-, 3 +IN, 4 -IN, 5 V+).
    assert [str(p) for p in d.net("OUT").pins] == ["U1.1", "U1.4", "R1.1"]
    assert [str(p) for p in d.net("VCC").pins] == ["U1.5", "C1.1"]
    assert [str(p) for p in d.net("IN").pins] == ["U1.3", "R2.1"]


@pytest.mark.parametrize("vdd,out,old", [("supply", "out", 0), ("power-in", "output", 3)])
def test_user_kind_and_pins_by_name(design_from, vdd, out, old):
    d, warnings = design_from(f"""
[kinds.trigger-sensor]
category = "ic"
package = "SOT-23"
pins = [ {{ number = 1, name = "VDD", role = "{vdd}" }},
         {{ number = 2, name = "OUT", role = "{out}" }},
         {{ number = 3, name = "GND", role = "{vdd}" }} ]
[parts.U7]
kind = "trigger-sensor"
[parts.C1]
kind = "capacitor"
value = "100nF"
package = "0402"
[nets]
VDD = ["U7.VDD", "C1.1"]
GND = ["U7.gnd", "C1.2"]
""")
    u7 = d.part("U7")
    # the previous release's role spellings are read as the new names, each with a warning
    assert u7.package == "SOT-23" and [p.role for p in u7.pins] == ["supply", "out", "supply"]
    assert [w.check for w in warnings if w.severity == "warning"] == ["design.old-role-name"] * old
    assert [str(p) for p in d.net("GND").pins] == ["U7.3", "C1.2"]
    assert d.kinds[0].name == "trigger-sensor"


def test_header_pins_from_package_and_voltages_and_stages(design_from):
    d, _ = design_from("""
[parts.J1]
kind = "header"
package = "header-1x4-2.54"
[parts.R1]
kind = "resistor"
value = "1R0"
package = "0805"
[nets]
VBAT = ["J1.1", "R1.1"]
GND = ["J1.4", "R1.2"]
[voltages]
VBAT = { nominal = "3.7V", max = "4.2V", battery = true }
GND = "0V"
[blocks.lp]
type = "rc-lowpass"
parts = { R = "R1" }
""")
    assert [p.number for p in d.part("J1").pins] == ["1", "2", "3", "4"]
    vb = d.net("VBAT")
    assert (vb.voltage, vb.voltage_max, vb.battery) == (3.7, 4.2, True)
    assert d.net("GND").voltage == 0.0
    assert d.stages[0].name == "lp" and d.stages[0].get("type") == "rc-lowpass"
    assert d.stages[0].key == "blocks.lp" and d.stages[0].line > 0


def test_duplicate_pin_in_net_warns(design_from):
    d, w = design_from("""
[parts.R1]
kind = "resistor"
value = "1k"
package = "0603"
[nets]
A = ["R1.1", "R1.1"]
B = ["R1.2"]
""")
    assert [str(p) for p in d.net("A").pins] == ["R1.1"]
    assert w[0].check == "design.duplicate-pin"


_OK_PART = '[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\n'

# (text, expected line, substring of the message); each must name the key or pin.
BAD = [
    ('[parts.R1]\nkind = "resistor"\nvalue = "4x7"\npackage = "0603"\n', 3, "parts.R1.value"),
    ('[parts.R1]\nkind = "resistor"\npackage = "0603"\n', 1, "needs a value"),
    ('[parts.R1]\nkind = "resistr"\nvalue = "1k"\npackage = "0603"\n', 2, "parts.R1.kind"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0604"\n', 4, "parts.R1.package"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\n', 1, "needs a package"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\ncolour = "blue"\n', 5, "unknown key 'colour'"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\ntolerance = "lots"\n', 5, "parts.R1.tolerance"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\nrating = "big"\n', 5, "parts.R1.rating"),
    ('[parts.R1]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\ndnp = "yes"\n', 5, "dnp must be"),
    (_OK_PART + '[nets]\nA = ["R9.1"]\n', 6, "no part 'R9'"),
    (_OK_PART + '[nets]\nA = ["R1.3"]\n', 6, "has no pin '3'"),
    (_OK_PART + '[nets]\nA = ["R1"]\n', 6, "REF.PIN"),
    (_OK_PART + '[nets]\nA = "R1.1"\n', 6, "list of pins"),
    (_OK_PART + '[nets]\n"A B" = ["R1.1"]\n', 6, "must not"),
    (_OK_PART + '[nets]\nA = ["R1.1", "R1.2"]\n[voltages]\nB = "5V"\n', 8, "no net 'B'"),
    (_OK_PART + '[nets]\nA = ["R1.1", "R1.2"]\n[voltages]\nA = "five"\n', 8, "not a voltage"),
    (_OK_PART + '[wires]\nA = 1\n', 5, "unknown key 'wires'"),
    ('[parts.1R]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\n', 1, "not a usable reference"),
    ('[design]\nname = "x"\n', None, "no parts"),
    ('[parts.R1\nkind = "resistor"\n', 1, "not valid TOML"),
    ('[kinds.x]\npins = []\n' + _OK_PART, 2, "list of pins"),
    ('[kinds.x]\npins = [ { number = 1, role = "sideways" } ]\n' + _OK_PART, 2, "unknown role"),
    ('[kinds.resistor]\npins = [ { number = 1 } ]\n' + _OK_PART, 1, "already exists"),
    ('[parts.U1]\nkind = "opamp-single"\npackage = "SOIC-8"\n', 3, "has 8 pins but kind opamp-single has 5"),
]


@pytest.mark.parametrize("text, line, needle", BAD, ids=[b[2] for b in BAD])
def test_bad_design_is_located(design_from, text, line, needle):
    with pytest.raises(DesignError) as ei:
        design_from(text, display="bad.toml")
    msg = str(ei.value)
    assert msg.startswith("bad.toml"), msg
    assert needle in msg, msg
    assert ei.value.line == line, msg


def test_missing_file_is_input_error(library, tmp_path):
    from pipeline.design import read_design

    with pytest.raises(DesignError, match="file not found"):
        read_design(tmp_path / "nope.toml", library, display="nope.toml")
    (tmp_path / "bin.toml").write_bytes(b"\xff\xfe[parts]")
    with pytest.raises(DesignError, match="not UTF-8"):
        read_design(tmp_path / "bin.toml", library, display="bin.toml")


@pytest.mark.parametrize("height,ok", [("1.25", True), ("0", False), ("\"tall\"", False), ("true", False)])
def test_part_height_override(design_from, height, ok):
    text = f"""
[parts.C1]
kind = "capacitor"
value = "10uF"
package = "0603"
height_mm = {height}
[parts.C2]
kind = "capacitor"
value = "100nF"
package = "0603"
[nets]
A = ["C1.1", "C2.1"]
B = ["C1.2", "C2.2"]
"""
    if not ok:
        with pytest.raises(DesignError) as info:
            design_from(text)
        assert info.value.key == "parts.C1.height_mm" and info.value.line == 6  # the key's line
        return
    d, warnings = design_from(text)
    assert d.part("C1").height_mm == 1.25 and d.part("C2").height_mm is None
    # the note names only the capacitor that takes the package height
    note = [w for w in warnings if w.check == "design.height-default"]
    assert len(note) == 1 and note[0].subject == ("C2",) and "0603 0.90 mm" in note[0].message


# --------------------------------------------------------------------------
# Packages defined in the design file ([packages.NAME])
# --------------------------------------------------------------------------
_CUSTOM_PARTS = """
[kinds.sensor]
category = "ic"
pins = [ { number = 1, name = "VDD", role = "supply" }, { number = 2, name = "OUT", role = "out" },
         { number = 3, name = "GND", role = "supply" }, { number = 4, name = "NC", role = "nc" } ]
[parts.U1]
kind = "sensor"
package = "my-pkg"
height_mm = 1.1
[parts.C1]
kind = "capacitor"
value = "100n"
package = "0402"
[nets]
VDD = ["U1.VDD", "C1.1"]
GND = ["U1.GND", "C1.2"]
"""


@pytest.mark.parametrize("table,pads", [
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npattern = { layout = "two-rows", pins = 4, pitch = 1.27, '
     'span = 3.6, pad = [0.6, 1.2] }',
     [("1", -0.635, -1.8), ("2", 0.635, -1.8), ("3", 0.635, 1.8), ("4", -0.635, 1.8)]),
    ('body = [4.0, 2.0]\nheight_mm = 1.0\npattern = { layout = "one-row", pins = 4, pitch = 1.0, '
     'pad = [0.6, 1.5], drill = 0.4 }',
     [("1", -1.5, 0.0), ("2", -0.5, 0.0), ("3", 0.5, 0.0), ("4", 1.5, 0.0)]),
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npattern = { layout = "grid", rows = 2, columns = 2, '
     'pitch = 2.0, row_pitch = 1.6, pad = [0.8, 0.8] }',
     [("1", -1.0, -0.8), ("2", 1.0, -0.8), ("3", -1.0, 0.8), ("4", 1.0, 0.8)]),
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npads = [ { number = 1, x = -1, y = 0, size = [0.5, 0.5] }, '
     '{ number = 2, x = 1, y = 0, size = [0.5, 0.5] }, { number = 3, x = 0, y = 1, size = [0.5, 0.5] }, '
     '{ number = 4, x = 0, y = -1, size = [0.5, 0.5], shape = "circle" } ]',
     [("1", -1.0, 0.0), ("2", 1.0, 0.0), ("3", 0.0, 1.0), ("4", 0.0, -1.0)]),
])
def test_design_defined_packages(design_from, table, pads):
    d, _ = design_from(f"[packages.my-pkg]\n{table}\n{_CUSTOM_PARTS}")
    (pkg,) = d.packages
    # pad centres by closed form: (i - (n - 1) / 2) x pitch along a row, +- span / 2 across
    assert [(p.number, p.x_mm, p.y_mm) for p in pkg.pads] == pads
    assert d.part("U1").package == "my-pkg" and d.part("U1").height_mm == 1.1
    # the courtyard holds every pad at every level (IPC-7351B general excess)
    for lv in ("most", "nominal", "least"):
        cy = pkg.courtyard(lv)
        assert all(abs(p.x_mm) + p.width_mm / 2 <= cy.length_mm / 2 for p in pkg.pads_at(lv))


@pytest.mark.parametrize("table,key,why", [
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npads = [ { number = 1, x = 9, y = 0, size = [0.5, 0.5] }, '
     '{ number = 2, x = 1, y = 0, size = [0.5, 0.5] }, { number = 3, x = 0, y = 1, size = [0.5, 0.5] }, '
     '{ number = 4, x = 0, y = -1, size = [0.5, 0.5] } ]', "packages.my-pkg.pads", "clear of"),
    ('body = [3.0, 3.0]\nheight_mm = 1.0\ncourtyard = [2.0, 2.0]\npattern = { layout = "two-rows", '
     'pins = 4, pitch = 1.27, span = 3.6, pad = [0.6, 1.2] }', "packages.my-pkg.pattern", "courtyard"),
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npattern = { layout = "zigzag", pins = 4, pitch = 1.0, '
     'pad = [0.6, 1.2] }', "packages.my-pkg.pattern.layout", "unknown layout"),
    ('body = [3.0, 3.0]\npattern = { layout = "one-row", pins = 4, pitch = 1.0, pad = [0.6, 1.2] }',
     "packages.my-pkg.height_mm", "number"),
    ('body = [3.0, 3.0]\nheight_mm = 1.0\npattern = { layout = "two-rows", pins = 3, pitch = 1.0, '
     'span = 2, pad = [0.6, 1.2] }', "packages.my-pkg.pattern.pins", "divisible"),
])
def test_bad_design_defined_packages(design_from, table, key, why):
    with pytest.raises(DesignError) as info:
        design_from(f"[packages.my-pkg]\n{table}\n{_CUSTOM_PARTS}")
    assert info.value.key == key and why in info.value.reason and info.value.line is not None


def test_design_package_may_not_shadow_the_library(design_from):
    with pytest.raises(DesignError) as info:
        design_from('[packages.SOIC-8]\nbody = [1, 1]\nheight_mm = 1\npattern = { layout = "one-row", '
                    'pins = 1, pitch = 0, pad = [0.5, 0.5] }\n' + _CUSTOM_PARTS)
    assert info.value.key == "packages.SOIC-8" and "already exists" in info.value.reason


class _CountingRef(str):
    """A reference that counts its equality tests (a cost guard: calls, not seconds)."""

    compared = 0

    def __eq__(self, other):
        type(self).compared += 1
        return str.__eq__(self, other)

    __hash__ = str.__hash__


@pytest.mark.parametrize("n", [50, 400])
def test_height_note_is_linear_in_parts(n):
    """Issue 11: naming the chip capacitors' sizes scanned the list of names once per part
    (n^2 / 2 string comparisons, 12 s at 16,000 parts). With a set, a lookup compares only on
    a hash match, so the comparisons grow at most linearly."""
    from types import SimpleNamespace

    from pipeline.design import _height_notes

    lib = SimpleNamespace(package=lambda name: SimpleNamespace(family="chip", height_mm=0.5))
    parts = tuple(SimpleNamespace(ref=_CountingRef(f"C{i}"), kind="capacitor", height_mm=None,
                                  package="0402" if i % 2 else "0603") for i in range(n))
    _CountingRef.compared = 0
    notes = _height_notes(parts, lib)
    assert notes[0].subject == tuple(p.ref for p in parts)  # every capacitor named, in order
    assert "0402 0.50 mm, 0603 0.50 mm" in notes[0].message
    assert _CountingRef.compared <= 2 * n  # a list scan would make n * (n + 1) / 2


def _repeated_parts(n: int, bad_at: int | None = None) -> str:
    """n resistors of three values (a bad value text at part ``bad_at``, counted from 1)."""
    tables = []
    for i in range(1, n + 1):
        value = "4k7x" if i == bad_at else ("10k", "4k7", "1R5")[i % 3]
        tables.append(f'[parts.R{i}]\nkind = "resistor"\npackage = "0603"\nvalue = "{value}"\n'
                      f'tolerance = "1%"\nrating = "50V"\n')
    return "\n".join(tables)


@pytest.mark.parametrize("n", [30, 300])
def test_repeated_value_texts_are_parsed_once(design_from, monkeypatch, n):
    """Issue 11: each distinct value / tolerance / rating text and kind + package pair is parsed
    or looked up once per file, whatever the part count; the parts read are the same as read
    one file a part (reference: 10k = 10,000 ohm, 4k7 = 4,700 ohm, 1R5 = 1.5 ohm, IEC 60062
    RKM code)."""
    import pipeline.design as dz

    calls = {"value": 0, "kind": 0}
    real_value, real_kind = dz._values.parse_value, dz._part_kind

    def counted_value(*a, **k):
        calls["value"] += 1
        return real_value(*a, **k)

    def counted_kind(*a, **k):
        calls["kind"] += 1
        return real_kind(*a, **k)

    monkeypatch.setattr(dz._values, "parse_value", counted_value)
    monkeypatch.setattr(dz, "_part_kind", counted_kind)
    d, _ = design_from(_repeated_parts(n))
    assert calls == {"value": 3, "kind": 1}
    assert [p.value for p in d.parts[:3]] == [4700.0, 1.5, 10000.0]
    for p in d.parts[:4]:
        alone, _ = design_from(_repeated_parts(n)[: _repeated_parts(n).index(f"[parts.R{int(p.ref[1:]) + 1}]")])
        assert alone.parts[-1] == p
    assert (d.parts[0].tolerance, d.parts[0].rating_v) == (0.01, 50.0)


def test_a_bad_value_after_good_ones_is_still_located(design_from):
    # the memo keeps only text read without error: the bad text at part 7 is reported at its own line
    text = _repeated_parts(9, bad_at=7)
    with pytest.raises(DesignError) as e:
        design_from(text)
    assert e.value.line == text.splitlines().index("[parts.R7]") + 4 and "R7" in str(e.value)


def test_alike_part_tables_are_read_once(design_from, monkeypatch):
    """Issue 11: part tables of the same plain keys and values (each with its type) are read once
    per file; the parts are the same as read one by one, each with its own ref and line."""
    import pipeline.design as dz

    calls = []
    real = dz._part_fields
    monkeypatch.setattr(dz, "_part_fields", lambda src, key, *a: calls.append(key) or real(src, key, *a))
    body = 'kind = "resistor"\npackage = "0603"\nvalue = "10k"\ndnp = true\n'
    text = "".join(f"[parts.R{i}]\n{body}" for i in range(1, 21))
    d, _ = design_from(text)
    assert calls == ["parts.R1"]
    assert [(p.ref, p.line) for p in d.parts[:3]] == [("R1", 1), ("R2", 6), ("R3", 11)]  # 5 lines a part
    alone, _ = design_from(f"[parts.R7]\n{body}")
    assert d.parts[6] == dataclasses.replace(alone.parts[0], line=31) and d.parts[6].dnp is True


@pytest.mark.parametrize("second, where", [
    ('dnp = 1', "dnp"),             # 1 == True in Python: the memo must tell them apart by type
    ('dnp = "true"', "dnp"),
])
def test_a_table_like_a_read_one_but_of_another_type_is_still_refused(design_from, second, where):
    first = '[parts.R1]\nkind = "resistor"\npackage = "0603"\nvalue = "10k"\ndnp = true\n'
    text = first + f'[parts.R2]\nkind = "resistor"\npackage = "0603"\nvalue = "10k"\n{second}\n'
    with pytest.raises(DesignError) as e:
        design_from(text)
    assert e.value.line == 10 and f"parts.R2.{where}" in str(e.value)


def test_placed_parts_keep_their_own_lines(design_from):
    # a table that places its part (at = [x, y]) is read on its own: its Fixed carries its line
    body = 'kind = "resistor"\npackage = "0603"\nvalue = "10k"\nat = [1.0, 2.0]\n'
    d, _ = design_from(f"[parts.R1]\n{body}[parts.R2]\n{body}")
    assert [p.fixed.line for p in d.parts] == [1, 6]
