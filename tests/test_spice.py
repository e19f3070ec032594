"""SPICE in (pipeline.spice) and out (pipeline.export.spice).

External references used here:
- ngspice 39 (/usr/bin/ngspice, Debian package), a general-purpose circuit
  simulator: how SPICE numbers read, that the written deck runs, and the AC
  response of the written Sallen-Key filter.
- ngspice manual, chapter 2 "Circuit description", section "Conventions":
  the scale factors T G MEG K MIL M U N P F and that letters after them are
  ignored.
- "Op Amps For Everyone", chapter 16, Example 16-2 (REFERENCES.md section 5):
  unity-gain Sallen-Key low-pass, f0 = 1/(2 pi sqrt(R1 R2 Cf Cg)),
  Q = sqrt(R1 R2 Cf Cg) / (Cg (R1 + R2)); Cg 22 nF, Cf 150 nF, R1 1.26 k,
  R2 1.30 k -> f0 about 2.16 kHz, Q about 1.30.
- CONTRACT.md section 2 (diode pins 1 = K, 2 = A) and the library's
  SOT-23 pinout (npn 1 B, 2 E, 3 C), common practice.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pipeline.errors import DesignError, ValueTextError
from pipeline.export.spice import spice_netlist, spice_number
from pipeline.library import load_library
from pipeline.model import Design, Net, Part, PartKind, PinDef, PinRef, RawTable
from pipeline.spice import parse_number, read_spice

NGSPICE = shutil.which("ngspice") or ("/usr/bin/ngspice" if Path("/usr/bin/ngspice").exists() else None)
needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")
LIB = load_library()


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def _write(folder: Path, files: dict[str, str]) -> None:
    for name, text in files.items():
        p = folder / name
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text)


def _read(folder: Path, name: str = "main.cir", parts_map: str | None = None, root: Path | None = None):
    return read_spice(folder / name, LIB, display_name=name,
                      parts_map=(folder / parts_map) if parts_map else None, root=root or folder)


def _graph(design: Design) -> set[tuple[str, str, str]]:
    return {(n.name, p.ref, p.pin) for n in design.nets for p in n.pins}


def _no_errors(res: subprocess.CompletedProcess) -> None:
    """ngspice reports problems on lines starting "Error" (and aborts with "fatal")."""
    out = res.stdout + res.stderr
    bad = [ln for ln in out.splitlines() if re.match(r"\s*(error|fatal)\b", ln, re.I) or "failed!" in ln]
    assert not bad, out


def _run_ngspice(deck: Path) -> subprocess.CompletedProcess:
    return subprocess.run([NGSPICE, "-b", str(deck)], capture_output=True, text=True, timeout=60,
                          cwd=deck.parent)


def _part(ref: str, kind: str, package: str, value: float | None = None, **kw) -> Part:
    k = LIB.kind(kind)
    p = LIB.package(package)
    return Part(ref, k.name, p.name, LIB.pins_for(k, p), value=value, **kw)


# --------------------------------------------------------------------------
# numbers
# --------------------------------------------------------------------------
# Scale factors as the ngspice manual ("Conventions") lists them.
SCALE_CASES = [
    ("1T", 1e12), ("2g", 2e9), ("3MEG", 3e6), ("3meg", 3e6), ("4K", 4e3), ("4k", 4e3),
    ("5M", 5e-3), ("5m", 5e-3), ("6MIL", 6 * 25.4e-6), ("6mil", 6 * 25.4e-6), ("7U", 7e-6),
    ("8N", 8e-9), ("9P", 9e-12), ("10F", 10e-15), ("10f", 10e-15),
    # trailing letters are ignored (manual: "letters immediately following a number
    # that are not scale factors are ignored")
    ("10kOhm", 1e4), ("1uF", 1e-6), ("100pF", 1e-10), ("10V", 10.0), ("47Ohm", 47.0),
    ("1MOhm", 1e-3), ("2k2", 2e3), ("1.5e3", 1500.0), (".5", 0.5), ("1e3k", 1e6), ("1MEGA", 1e6),
]


@pytest.mark.parametrize("token,expected", SCALE_CASES)
def test_parse_number_scale_factors(token, expected):
    # Source: ngspice manual, section "Conventions" (scale factor table).
    assert parse_number(token) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("token", ["abc", "k10", "", "--1", "e3"])
def test_parse_number_rejects(token):
    with pytest.raises(ValueTextError):
        parse_number(token)


@needs_ngspice
def test_parse_number_agrees_with_reference_simulator(tmp_path):
    # Source: ngspice 39 itself reads each token as a resistance; we print it back.
    lines = ["scale factors", "V1 1 0 1"]
    for i, (tok, _) in enumerate(SCALE_CASES, start=1):
        lines.append(f"R{i} 1 0 {tok}")
    lines += [".control", "op"]
    for i in range(1, len(SCALE_CASES) + 1):
        lines.append(f"print @r{i}[resistance]")
    lines += [".endc", ".end"]
    deck = tmp_path / "scale.cir"
    deck.write_text("\n".join(lines) + "\n")
    res = _run_ngspice(deck)
    # (the exit status is 1 here only because the deck itself names no analysis)
    _no_errors(res)
    got = {int(m.group(1)): float(m.group(2))
           for m in re.finditer(r"@r(\d+)\[resistance\]\s*=\s*(\S+)", res.stdout)}
    assert len(got) == len(SCALE_CASES)
    for i, (tok, _) in enumerate(SCALE_CASES, start=1):
        assert parse_number(tok) == pytest.approx(got[i], rel=1e-6), tok


@pytest.mark.parametrize("value", [4700.0, 1e6, 2.2e-6, 1e-3, 1.0 / 3.0, 123456789.0, 1e-18, 0.1, 7.5e12, 1e15])
def test_spice_number_reads_back_exactly(value):
    # Exactness is checked against Python's own float parser of the same digits.
    text = spice_number(value)
    assert parse_number(text) == value
    assert not text.lower().endswith("m") or value < 1  # never "M" meaning mega


# --------------------------------------------------------------------------
# reading a hand-written netlist
# --------------------------------------------------------------------------
MAIN = """Test board: every feature
* a comment line
.param rload=4.7k cap={2*50n}
.model QGEN NPN(BF=100)
.include lib/sub.lib
* one scale factor per element
R1 in a 1T
R2 a b 2G
R3 b c 3MEG
R4 c d 4K
R5 d e 5M
R6 e f 6MIL
R7 f g 7U
R8 g h 8N
C1 h i 9P
C2 i 0 10F
L1 in 0 11mH   ; 11 milli: the H is ignored
R9 a 0 10kOhm $ ngspice-style comment
C3 b 0 1uF
C4 c 0 100pF
R10 d 0
* a comment between a line and its continuation
+ {rload}
C5 e 0 {cap}
D1 f GND dgen
Q1 g h 0 QGEN
r11 A 0 1k
X1 in out 0 divider
XU1 out a vcc 0 amp
V1 vcc 0 DC 5
Vin in 0 AC 1
.ac dec 10 1 1meg
.control
run
print v(out)
.endc
.end
R99 never read after .end
"""
SUB = """* library file: no title line
.model dgen D
.subckt divider top bot gnd_
RA top mid 1k
RB mid bot 2k
CA mid gnd_ 1n
.ends divider
.subckt amp inp inn vp vn
E1 inp 0 inp inn 1e5
.ends amp
"""
PARTS = """
[defaults]
R = { package = "0805" }

[subckt.amp]
kind = "opamp-single"
package = "SOT-23-5"
pins = ["+IN", "4", "V+", "2"]

[refs.X1_RB]
package = "1206"
"""

EXPECTED = {
    ("in", "R1", "1"), ("a", "R1", "2"), ("a", "R2", "1"), ("b", "R2", "2"),
    ("b", "R3", "1"), ("c", "R3", "2"), ("c", "R4", "1"), ("d", "R4", "2"),
    ("d", "R5", "1"), ("e", "R5", "2"), ("e", "R6", "1"), ("f", "R6", "2"),
    ("f", "R7", "1"), ("g", "R7", "2"), ("g", "R8", "1"), ("h", "R8", "2"),
    ("h", "C1", "1"), ("i", "C1", "2"), ("i", "C2", "1"), ("GND", "C2", "2"),
    ("in", "L1", "1"), ("GND", "L1", "2"), ("a", "R9", "1"), ("GND", "R9", "2"),
    ("b", "C3", "1"), ("GND", "C3", "2"), ("c", "C4", "1"), ("GND", "C4", "2"),
    ("d", "R10", "1"), ("GND", "R10", "2"), ("e", "C5", "1"), ("GND", "C5", "2"),
    # D: anode f, cathode GND -> diode pin 2 = A, pin 1 = K (CONTRACT section 2)
    ("f", "D1", "2"), ("GND", "D1", "1"),
    # Q: collector g, base h, emitter 0 -> SOT-23 1 B, 2 E, 3 C
    ("g", "Q1", "3"), ("h", "Q1", "1"), ("GND", "Q1", "2"),
    # node names are case-insensitive in SPICE: A is a
    ("a", "r11", "1"), ("GND", "r11", "2"),
    # X1 flattened: hierarchical refs, inside node X1.mid
    ("in", "X1_RA", "1"), ("X1.mid", "X1_RA", "2"), ("X1.mid", "X1_RB", "1"), ("out", "X1_RB", "2"),
    ("X1.mid", "X1_CA", "1"), ("GND", "X1_CA", "2"),
    # XU1 mapped to one opamp-single: +IN = 3, -IN = 4, V+ = 5, V- = 2
    ("out", "U1", "3"), ("a", "U1", "4"), ("vcc", "U1", "5"), ("GND", "U1", "2"),
}
VALUES = {
    "R1": 1e12, "R2": 2e9, "R3": 3e6, "R4": 4e3, "R5": 5e-3, "R6": 6 * 25.4e-6, "R7": 7e-6, "R8": 8e-9,
    "C1": 9e-12, "C2": 1e-14, "L1": 11e-3, "R9": 1e4, "C3": 1e-6, "C4": 1e-10, "R10": 4.7e3, "C5": 1e-7,
    "r11": 1e3, "X1_RA": 1e3, "X1_RB": 2e3, "X1_CA": 1e-9,
}


@pytest.fixture
def project(tmp_path):
    _write(tmp_path, {"main.cir": MAIN, "lib/sub.lib": SUB, "parts.toml": PARTS})
    return tmp_path


def test_handwritten_netlist_imports_to_expected_graph(project):
    design, findings = _read(project, parts_map="parts.toml")
    assert _graph(design) == EXPECTED
    assert design.name == "Test board: every feature"
    assert design.source == "main.cir"
    got = {p.ref: p.value for p in design.parts if p.value is not None}
    assert got.keys() == VALUES.keys()
    for ref, v in VALUES.items():
        assert got[ref] == pytest.approx(v, rel=1e-12), ref
    kinds = {p.ref: (p.kind, p.package) for p in design.parts}
    assert kinds["R1"] == ("resistor", "0805")          # [defaults] R
    assert kinds["X1_RB"] == ("resistor", "1206")       # [refs.X1_RB]
    assert kinds["X1_RA"] == ("resistor", "0805")
    assert kinds["C1"] == ("capacitor", "0603")         # CONTRACT default
    assert kinds["L1"] == ("inductor", "0603")
    assert kinds["D1"] == ("diode", "SOD-123")
    assert kinds["Q1"] == ("npn", "SOT-23")             # from .model QGEN NPN
    assert kinds["U1"] == ("opamp-single", "SOT-23-5")
    assert design.net("vcc").voltage == 5.0             # V1 vcc 0 DC 5
    assert design.net("in").voltage is None             # an AC source is a signal
    assert "R99" not in kinds
    checks = {(f.check, f.subject) for f in findings}
    assert ("spice.not-a-part", ("V1",)) in checks
    assert ("spice.not-a-part", ("Vin",)) in checks
    assert any(f.check == "spice.number" and f.subject == ("C2",) for f in findings)  # 10F = 10 fF
    assert not any(f.severity == "error" for f in findings)


def test_parts_map_absent_keeps_contract_defaults(project):
    (project / "main.cir").write_text(MAIN.replace("XU1 out a vcc 0 amp\n", ""))
    design, _ = _read(project)
    kinds = {p.ref: (p.kind, p.package) for p in design.parts}
    assert kinds["R1"] == ("resistor", "0603")
    assert kinds["X1_RB"] == ("resistor", "0603")


def test_unmapped_subckt_with_only_a_source_is_flattened_to_nothing(project):
    # Without the parts map, XU1's subcircuit is flattened; its only element
    # is a source, so XU1 gives no board part.
    design, findings = _read(project)
    assert not any(p.ref.startswith("XU1") or p.ref == "U1" for p in design.parts)
    assert any(f.subject == ("XU1.E1",) for f in findings)


def test_refused_include_leaving_the_project(tmp_path):
    proj = tmp_path / "proj"
    _write(tmp_path, {"outside.lib": ".model dgen D\n"})
    _write(proj, {"main.cir": "t\nR1 a 0 1k\n.include ../outside.lib\n.end\n"})
    with pytest.raises(DesignError) as exc:
        _read(proj)
    assert exc.value.line == 3 and exc.value.file == "main.cir"
    assert "outside the project folder" in str(exc.value)


def test_refused_absolute_include_and_link(tmp_path):
    proj = tmp_path / "proj"
    _write(tmp_path, {"outside.lib": ".model dgen D\n"})
    _write(proj, {"main.cir": f"t\nR1 a 0 1k\n\n.inc '{tmp_path / 'outside.lib'}'\n.end\n"})
    with pytest.raises(DesignError) as exc:
        _read(proj)
    assert exc.value.line == 4
    (proj / "link.lib").symlink_to(tmp_path / "outside.lib")
    (proj / "main.cir").write_text("t\nR1 a 0 1k\n.include link.lib\n")
    with pytest.raises(DesignError) as exc:
        _read(proj)
    assert exc.value.line == 3


def test_include_error_names_the_included_file(tmp_path):
    _write(tmp_path, {"main.cir": "t\nR1 a 0 1k\n.include sub/x.lib\n",
                      "sub/x.lib": "* x\nR2 a 0 1k\nR3 a\n"})
    with pytest.raises(DesignError) as exc:
        _read(tmp_path)
    assert exc.value.file == "sub/x.lib" and exc.value.line == 3


def test_inputs_list_every_file_read(tmp_path):
    # Design.inputs: the design, each include (nested, .lib sections, through a link), the parts
    # map; resolved, each once, sorted. Outputs refuse to write over any of them.
    _write(tmp_path, {
        "main.cir": "t\n.include sub/a.cir\n.lib models.lib typ\n.include link.cir\nR1 a 0 1k\n",
        "sub/a.cir": ".include ../b.cir\n.include ../b.cir\n",
        "b.cir": "* a comment only\n",
        "models.lib": ".lib typ\n.model dx D\n.endl\n",
        "real.cir": "C1 a 0 1n\n",
        "parts.toml": "[defaults]\nR = { package = \"0805\" }\n",
    })
    (tmp_path / "link.cir").symlink_to(tmp_path / "real.cir")
    d, _ = _read(tmp_path, parts_map="parts.toml")
    root = tmp_path.resolve()
    want = sorted(str(root / n) for n in ("main.cir", "sub/a.cir", "b.cir", "models.lib", "real.cir", "parts.toml"))
    assert list(d.inputs) == want


def test_lib_section(tmp_path):
    _write(tmp_path, {
        "main.cir": "t\n.lib models.lib typ\nR1 a 0 1k\nD1 a 0 dx\n",
        "models.lib": ".lib fast\n.model dx D(IS=1e-9)\nR8 a 0 1\n.endl\n.lib typ\n.model dx D\nR9 a 0 2k\n.endl\n",
    })
    design, _ = _read(tmp_path)
    assert {p.ref for p in design.parts} == {"R1", "D1", "R9"}


BAD = [
    ("too few nodes", "R1 a\n", 2),
    ("not a number", "R1 a b abc\n", 2),
    ("negative value", "R1 a 0 1k\nC1 a b -1u\n", 3),
    ("zero capacitor", "C1 a b 0\n", 2),
    ("no value", "R1 a b\n", 2),
    ("duplicate name", "R1 a b 1k\nr1 b 0 1k\n", 3),
    ("undefined subcircuit", "R1 a 0 1k\nX1 a b nosuch\n", 3),
    ("subckt without ends", "R1 a 0 1k\n.subckt foo a b\nR2 a b 1k\n", 3),
    ("stray ends", "R1 a 0 1k\n.ends\n", 3),
    ("continuation with nothing before", "+ 1k\n", 2),
    ("missing include", "R1 a 0 1k\n\n.include nothere.lib\n", 4),
    ("undefined parameter", "R1 a b {nop}\n", 2),
    ("parameter loop", ".param a={b} b={a}\nR1 a 0 {a}\n", 2),
    ("wrong model type", ".model qm D\nQ1 c b e qm\n", 3),
    ("port count", ".subckt s a b c\nR1 a b 1k\n.ends\nX1 n1 n2 s\n", 5),
    ("control without endc", "R1 a 0 1k\n.control\nrun\n", 3),
    ("unusable ref", "R1.5 a b 1k\n", 2),
    ("bad expression", "R1 a b {1k +* 2}\n", 2),
    ("function call", "R1 a b {sqrt(2)}\n", 2),
    ("node clash", "R1 X1.mid 0 1k\n.subckt s a\nR2 a mid 1k\n.ends\nX1 n s\n", 4),
    ("self-calling subcircuit", ".subckt s a\nX2 a s\n.ends\nX1 n s\n", 3),
    ("semiconductor without model", "D1 a\n", 2),
    ("jfet kind unknown", "J1 d g s jm\n.model jm NJF\n", 2),
    ("expression as node", "R1 {a} b 1k\n", 2),
]


@pytest.mark.parametrize("what,body,line", BAD, ids=[b[0] for b in BAD])
def test_bad_lines_give_line_numbers(tmp_path, what, body, line):
    _write(tmp_path, {"main.cir": "title line\n" + body})
    with pytest.raises(DesignError) as exc:
        _read(tmp_path)
    assert exc.value.file == "main.cir", str(exc.value)
    assert exc.value.line == line, str(exc.value)
    assert str(exc.value).startswith(f"main.cir:{line}: ")


def test_empty_file_and_no_parts(tmp_path):
    _write(tmp_path, {"main.cir": "", "src.cir": "only sources\nV1 a 0 1\n"})
    with pytest.raises(DesignError):
        _read(tmp_path)
    with pytest.raises(DesignError) as exc:
        _read(tmp_path, "src.cir")
    assert "no board parts" in str(exc.value)


@pytest.mark.parametrize("line,check,subject", [
    ("R1 a 0 2k2", "spice.number", ("R1",)),       # SPICE reads 2k2 as 2k: no RKM code
    ("R1 a 0 10MOhm", "spice.number", ("R1",)),    # M is milli
    ("C1 a 0 1F", "spice.number", ("C1",)),        # F is femto
    ("S1 a 0 c 0 sw", "spice.not-a-part", ("S1",)),
    ("K1 L1 L2 0.9", "spice.not-a-part", ("K1",)),
    (".foo bar", "spice.unknown-directive", ("main.cir",)),
    (".tran 1u 1m", "spice.not-a-part", ("main.cir",)),
])
def test_warnings_and_infos(tmp_path, line, check, subject):
    _write(tmp_path, {"main.cir": f"t\nR9 a 0 1k\n{line}\n"})
    _, findings = _read(tmp_path)
    hits = [f for f in findings if f.check == check and f.subject == subject]
    assert hits and hits[0].message.startswith("main.cir:3: ")


def test_title_line_that_looks_like_an_element_warns(tmp_path):
    _write(tmp_path, {"main.cir": "R1 a 0 1k\nR2 a 0 1k\n"})
    design, findings = _read(tmp_path)
    assert [p.ref for p in design.parts] == ["R2"]  # SPICE: the first line is the title
    assert any(f.check == "spice.title-line" for f in findings)


def test_dot_title_and_global_nodes(tmp_path):
    _write(tmp_path, {"main.cir": "first\n.title The real name\n.global vdd\n.subckt s a\nR1 a vdd 1k\n"
                                  "R2 a mid 1k\n.ends\nX1 n s\nX2 n s\nR3 vdd 0 1k\n"})
    design, _ = _read(tmp_path)
    assert design.name == "The real name"
    g = _graph(design)
    assert {("vdd", "X1_R1", "2"), ("vdd", "X2_R1", "2"), ("vdd", "R3", "1")} <= g
    assert {("X1.mid", "X1_R2", "2"), ("X2.mid", "X2_R2", "2")} <= g


# --------------------------------------------------------------------------
# parts map
# --------------------------------------------------------------------------
DUAL = """dual op-amp drawn as two sections
.subckt amp inp inn out vp vn
E1 out 0 inp inn 1e5
.ends
XU1A p1 n1 o1 vcc vee amp
XU1B p2 n2 o2 vcc vee amp
R1 o1 n1 10k
"""
DUAL_MAP = """
[refs.XU1A]
ref = "U1"
kind = "opamp-dual"
package = "SOIC-8"
pins = ["3", "2", "1", "8", "4"]
mpn = "ANY-DUAL"

[refs.XU1B]
ref = "U1"
kind = "opamp-dual"
package = "SOIC-8"
pins = ["+INB", "-INB", "OUTB", "V+", "V-"]
"""


def test_sections_merge_into_one_part(tmp_path):
    _write(tmp_path, {"main.cir": DUAL, "parts.toml": DUAL_MAP})
    design, _ = _read(tmp_path, parts_map="parts.toml")
    assert [p.ref for p in design.parts] == ["U1", "R1"]
    u1 = design.part("U1")
    assert (u1.kind, u1.package, u1.mpn) == ("opamp-dual", "SOIC-8", "ANY-DUAL")
    g = _graph(design)
    assert {(n, pin) for n, r, pin in g if r == "U1"} == {
        ("p1", "3"), ("n1", "2"), ("o1", "1"), ("vcc", "8"), ("vee", "4"),
        ("p2", "5"), ("n2", "6"), ("o2", "7")}
    assert len([1 for n, r, pin in g if r == "U1" and pin == "8"]) == 1


def test_sections_on_different_nets_are_an_error(tmp_path):
    _write(tmp_path, {"main.cir": DUAL.replace("XU1B p2 n2 o2 vcc vee", "XU1B p2 n2 o2 vdd vee"),
                      "parts.toml": DUAL_MAP})
    with pytest.raises(DesignError) as exc:
        _read(tmp_path, parts_map="parts.toml")
    assert exc.value.line == 6


@pytest.mark.parametrize("text,key", [
    ('[refs.XU1A]\nkind = "no-such-kind"\n', "refs.XU1A.kind"),
    ('[refs.XU1A]\nkind = "opamp-dual"\npackage = "SOIC-99"\n', "refs.XU1A.package"),
    ('[refs.XU1A]\ncolour = "red"\n', "refs.XU1A.colour"),
    ('[defaults]\nX = { package = "0603" }\n', "defaults.X"),
    ('[wrong]\n', "wrong"),
    ('[refs.XU1A]\nref = "1U"\n', "refs.XU1A.ref"),
])
def test_parts_map_errors_name_the_key(tmp_path, text, key):
    _write(tmp_path, {"main.cir": DUAL, "parts.toml": text})
    with pytest.raises(DesignError) as exc:
        _read(tmp_path, parts_map="parts.toml")
    assert exc.value.file == "parts.toml"
    assert exc.value.key == key
    assert exc.value.line is not None


def test_parts_map_pin_count_mismatch(tmp_path):
    _write(tmp_path, {"main.cir": DUAL, "parts.toml": DUAL_MAP.replace('"8", "4"]', '"8"]')})
    with pytest.raises(DesignError) as exc:
        _read(tmp_path, parts_map="parts.toml")
    assert exc.value.line == 5 and "4 entries" in str(exc.value)


def test_parts_map_unused_entry_warns(tmp_path):
    _write(tmp_path, {"main.cir": DUAL, "parts.toml": DUAL_MAP + '\n[refs.XU9]\nkind = "opamp-dual"\n'})
    _, findings = _read(tmp_path, parts_map="parts.toml")
    assert any(f.check == "spice.parts-map-unused" and f.subject == ("refs.XU9",) for f in findings)


def test_models_map_and_mos_bulk(tmp_path):
    _write(tmp_path, {
        "main.cir": "t\nD1 a k ledr\nD2 a k ledr\nM1 d g s s nch\nM2 d g s b pch\n"
                    ".model ledr D\n.model nch NMOS\n.model pch PMOS\n",
        "parts.toml": '[models.LEDR]\nkind = "led"\npackage = "0805"\n',
    })
    design, findings = _read(tmp_path, parts_map="parts.toml")
    assert design.part("D1").kind == "led" and design.part("D2").package == "0805"
    assert design.part("M2").kind == "pmos"
    g = _graph(design)
    # M: drain, gate, source -> nmos/pmos SOT-23 pins 1 G, 2 S, 3 D
    assert {("d", "M1", "3"), ("g", "M1", "1"), ("s", "M1", "2")} <= g
    assert any(f.check == "spice.mos-bulk" and f.subject == ("M2",) for f in findings)
    assert not any(f.check == "spice.mos-bulk" and f.subject == ("M1",) for f in findings)


def test_substrate_node_is_ignored(tmp_path):
    _write(tmp_path, {"main.cir": "t\nQ1 c b e sub qp\n.model qp PNP\nQ2 c b e qp 1.5\n"})
    design, _ = _read(tmp_path)
    g = _graph(design)
    assert design.part("Q1").kind == "pnp"
    assert {("c", "Q1", "3"), ("b", "Q1", "1"), ("e", "Q1", "2")} <= g
    assert not any(n == "sub" for n, _, _ in g)
    assert {("c", "Q2", "3"), ("b", "Q2", "1"), ("e", "Q2", "2")} <= g


def test_params_in_subcircuits(tmp_path):
    _write(tmp_path, {"main.cir": "t\n.param base=1k\n.subckt rr a b params: r=2k\n.param twice={2*r}\n"
                                  "R1 a b {r}\nR2 a b {twice+base}\n.ends\nX1 n1 n2 rr r={3*base}\nX2 n1 n2 rr\n"})
    design, _ = _read(tmp_path)
    v = {p.ref: p.value for p in design.parts}
    assert v == {"X1_R1": 3000.0, "X1_R2": 7000.0, "X2_R1": 2000.0, "X2_R2": 5000.0}


# --------------------------------------------------------------------------
# writing: round trip and ngspice
# --------------------------------------------------------------------------
def _sallen_key() -> Design:
    # "Op Amps For Everyone" Example 16-2: Cg 22 nF, Cf 150 nF, R1 1.26 k, R2 1.30 k.
    parts = (
        _part("R1", "resistor", "0603", 1.26e3, value_text="1.26k", tolerance=0.01, tolerance_text="1%"),
        _part("R2", "resistor", "0603", 1.30e3, value_text="1.3k", tolerance=0.01, tolerance_text="1%"),
        _part("C1", "capacitor", "0805", 150e-9, value_text="150n", rating_v=16.0, rating_text="16V"),
        _part("C2", "capacitor", "0603", 22e-9, value_text="22n"),
        _part("C3", "capacitor", "0603", 100e-9, value_text="100n"),
        _part("U1", "opamp-single", "SOT-23-5", mpn="GENERIC-1", extra=(("supplier", "any"),)),
        _part("J1", "header", "header-1x3-2.54"),
        _part("R9", "resistor", "0603", 1e6, dnp=True, note='spare; "maybe"'),
    )
    P = PinRef
    nets = (
        Net("IN", (P("R1", "1"), P("J1", "2"))),
        Net("A", (P("R1", "2"), P("R2", "1"), P("C1", "1"))),
        Net("B", (P("R2", "2"), P("C2", "1"), P("U1", "3"))),
        Net("OUT", (P("C1", "2"), P("U1", "1"), P("U1", "4"), P("R9", "1"))),
        Net("V+", (P("U1", "5"), P("C3", "1"), P("J1", "1")), voltage=5.0),
        Net("GND", (P("C2", "2"), P("U1", "2"), P("C3", "2"), P("J1", "3"), P("R9", "2"))),
    )
    return Design("Sallen-Key low-pass", "A", "design.toml", parts, nets,
                  stages=(RawTable("lowpass", (("type", "sallen-key-lowpass"), ("parts", ["R1", "R2"])),
                                   "design.toml", "blocks.lowpass", 40),))


def _same(d0: Design, d1: Design) -> None:
    strip = lambda d: {p.ref: dataclasses.replace(p, line=0) for p in d.parts}  # noqa: E731
    assert strip(d1) == strip(d0)
    nets = lambda d: {n.name: (frozenset(n.pins), n.voltage, n.voltage_max, n.battery) for n in d.nets if n.pins}  # noqa: E731
    assert nets(d1) == nets(d0)
    assert (d1.name, d1.revision) == (d0.name, d0.revision)
    assert {k.name: k for k in d1.kinds} == {k.name: k for k in d0.kinds}


def test_round_trip_sallen_key(tmp_path):
    d0 = _sallen_key()
    (tmp_path / "out.cir").write_bytes(spice_netlist(d0))
    d1, _ = _read(tmp_path, "out.cir")
    _same(d0, d1)
    assert [(s.name, s.items, s.key) for s in d1.stages] == [(s.name, s.items, s.key) for s in d0.stages]


def test_round_trip_awkward_names_and_user_kind(tmp_path):
    trig = PartKind("trigger-ic", "ic", (PinDef("1", "OUT", "output"), PinDef("2", "GND", "power-in"),
                                         PinDef("3", "VDD", "power-in")), source="defined in design.toml")
    lib = LIB.with_kinds([trig])
    pins = lib.pins_for(trig, lib.package("SOT-23"))
    parts = (
        _part("R1", "resistor", "0402", 4.7e3, value_text="4k7"),
        _part("R2", "resistor", "0402", 1e6, value_text="1M"),
        _part("LED1", "led", "0603"),
        Part("U7", "trigger-ic", "SOT-23", pins),
        _part("TP1", "test-point", "pad-1.5mm"),
        _part("Q1", "pnp", "SOT-23"),
        _part("M1", "nmos", "SOT-23"),
        _part("FB1", "ferrite", "0603", 600.0, value_text="600R"),
        _part("U2", "ldo-regulator", "SOT-23-5"),
    )
    P = PinRef
    nets = (
        Net("in", (P("R1", "1"), P("LED1", "2"), P("TP1", "1"))),
        Net("IN", (P("R1", "2"), P("R2", "1"), P("U7", "1"))),
        Net("gnd", (P("R2", "2"), P("Q1", "1"))),  # not the ground net: only GND is
        Net("GND", (P("LED1", "1"), P("U7", "2"), P("M1", "2"), P("U2", "2"))),
        Net("V-", (P("Q1", "3"), P("M1", "3"), P("FB1", "1"))),
        Net("X1.mid", (P("Q1", "2"), P("M1", "1"), P("FB1", "2"))),
        Net("0", (P("U7", "3"), P("U2", "5")), voltage=3.3),
        Net("VBAT", (P("U2", "1"), P("U2", "3")), voltage=3.7, voltage_max=4.2, battery=True),
    )
    d0 = Design("awkward names", "", "x.toml", parts, nets, kinds=(trig,))
    (tmp_path / "out.cir").write_bytes(spice_netlist(d0))
    d1, _ = _read(tmp_path, "out.cir")
    _same(d0, d1)


@needs_ngspice
def test_written_deck_runs_in_reference_simulator(tmp_path):
    deck = tmp_path / "design.cir"
    deck.write_bytes(spice_netlist(_sallen_key()))
    res = _run_ngspice(deck)
    assert res.returncode == 0, res.stdout + res.stderr
    _no_errors(res)
    # the declared 5 V supply is in the deck, so the op point shows it
    assert re.search(r"\bvp\s+5\.0+e\+00", res.stdout), res.stdout


@needs_ngspice
def test_awkward_deck_runs_in_reference_simulator(tmp_path):
    d = Design("mixed", "", "x.toml", (
        _part("U1", "opamp-quad", "SOIC-14"), _part("U2", "comparator-quad", "SOIC-14"),
        _part("U3", "and2-quad", "SOIC-14"), _part("U4", "ldo-regulator", "SOT-23-5"),
        _part("U5", "analog-switch-spdt", "SOT-23-6"), _part("D1", "diode", "SOD-123"),
        _part("Q1", "npn", "SOT-23"), _part("M1", "pmos", "SOT-23"), _part("L1", "inductor", "0805", 1e-5),
        _part("R1", "resistor", "0603", 0.0, value_text="0R"),
    ), (
        Net("VBAT", (PinRef("U4", "1"), PinRef("U4", "3")), voltage=4.0),
        Net("VCC", (PinRef("U4", "5"), PinRef("U1", "4"), PinRef("U2", "3"), PinRef("U3", "14"),
                    PinRef("U5", "2"), PinRef("Q1", "3")), voltage=3.3),
        Net("GND", (PinRef("U4", "2"), PinRef("U1", "11"), PinRef("U2", "12"), PinRef("U3", "7"),
                    PinRef("U5", "3"), PinRef("D1", "1"), PinRef("Q1", "2"), PinRef("R1", "2"))),
        Net("S", (PinRef("U1", "1"), PinRef("U1", "2"), PinRef("U2", "5"), PinRef("U3", "1"),
                  PinRef("D1", "2"), PinRef("M1", "1"), PinRef("L1", "1"), PinRef("R1", "1"))),
    ))
    deck = tmp_path / "mixed.cir"
    deck.write_bytes(spice_netlist(d))
    res = _run_ngspice(deck)
    assert res.returncode == 0, res.stdout + res.stderr
    _no_errors(res)
    # the regulator stub holds VCC at its declared 3.3 V from a 4 V input
    assert re.search(r"\bvcc\s+3\.30*e\+00", res.stdout), res.stdout


def _ngspice_ac(tmp_path: Path, design: Design, f0: float) -> dict[str, float]:
    """Append a source and an AC sweep to the written deck; return the measurements."""
    text = spice_netlist(design).decode()
    assert text.endswith(".op\n.end\n")
    bench = (
        "Vin IN 0 DC 0 AC 1\n"
        ".control\n"
        "ac dec 2000 10 100k\n"
        "let phs = cph(v(out))\n"
        "let mg = mag(v(out))\n"
        "meas ac f90 when phs=-1.5707963267948966\n"
        f"meas ac gf0 find mg at={f0!r}\n"
        "meas ac g10 find mg at=10\n"
        ".endc\n"
    )
    deck = tmp_path / "bench.cir"
    deck.write_text(text.replace(".op\n.end\n", bench + ".end\n"))
    res = _run_ngspice(deck)
    _no_errors(res)
    return {m.group(1): float(m.group(2)) for m in re.finditer(r"^(\w+)\s*=\s*([-+0-9.eE]+)", res.stdout, re.M)}


@needs_ngspice
def test_sallen_key_ac_matches_formula(tmp_path):
    r1, r2, cf, cg = 1.26e3, 1.30e3, 150e-9, 22e-9
    # REFERENCES.md section 5: f0 = 1/(2 pi sqrt(R1 R2 Cf Cg)).
    f0 = 1.0 / (2 * math.pi * math.sqrt(r1 * r2 * cf * cg))
    meas = _ngspice_ac(tmp_path, _sallen_key(), f0)
    # A second-order low-pass has -90 degrees of phase at f0 (property of
    # w0^2 / (s^2 + s w0/Q + w0^2), same textbook chapter).
    assert meas["f90"] == pytest.approx(f0, rel=0.005)
    # Published figure (Op Amps For Everyone, Example 16-2): f0 about 2.16 kHz.
    assert meas["f90"] == pytest.approx(2.16e3, rel=0.01)
    # Q = sqrt(R1 R2 Cf Cg) / (Cg (R1 + R2)) is the gain magnitude at f0; about 1.30 published.
    q = math.sqrt(r1 * r2 * cf * cg) / (cg * (r1 + r2))
    assert q == pytest.approx(1.30, rel=0.02)
    assert meas["gf0"] == pytest.approx(q, rel=0.005)
    assert meas["g10"] == pytest.approx(1.0, abs=1e-3)  # unity gain in the pass band


# hypothesis: random designs survive design -> SPICE -> design
_KINDS = [("resistor", "0603"), ("capacitor", "0805"), ("inductor", "1206"), ("diode", "SOD-323"),
          ("led", "0603"), ("npn", "SOT-23"), ("pmos", "SOT-23"), ("opamp-dual", "SOIC-8"),
          ("ldo-regulator", "SOT-23-5"), ("header", "header-1x4-2.54"), ("wire-pad", "pad-2mm"),
          ("capacitor-polarized", "tantalum-B"), ("comparator-single", "SOT-23-5")]
_NET_NAMES = st.text(alphabet="abcXYZ019_+-.", min_size=1, max_size=6)


@st.composite
def designs(draw):
    n = draw(st.integers(1, 7))
    parts = []
    for i in range(n):
        kind, pkg = draw(st.sampled_from(_KINDS))
        k = LIB.kind(kind)
        value = None
        text = ""
        if k.value_unit:
            value = draw(st.sampled_from([1.0, 4.7e3, 1e6, 2.2e-6, 1.234567e-7, 33e-12, 0.5]))
            text = draw(st.sampled_from(["", "x1", "4k7"]))
        parts.append(_part(f"{kind[0].upper()}{i + 1}", kind, pkg, value, value_text=text,
                           dnp=draw(st.booleans()), tolerance=draw(st.sampled_from([None, 0.01, 0.05]))))
    names = draw(st.lists(_NET_NAMES, min_size=1, max_size=6, unique=True))
    names = [nm for nm in names if nm != "GND"] + ["GND"]
    members: dict[str, list[PinRef]] = {nm: [] for nm in names}
    for p in parts:
        for pin in p.pins:
            choice = draw(st.integers(-1, len(names) - 1))
            if choice >= 0:
                members[names[choice]].append(PinRef(p.ref, pin.number))
    voltages = {nm: draw(st.sampled_from([None, 3.3, -5.0])) for nm in names}
    nets = tuple(Net(nm, tuple(pins), voltage=None if nm == "GND" else voltages[nm])
                 for nm, pins in members.items() if pins)
    return Design("generated", "A", "gen.toml", tuple(parts), nets)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(d0=designs())
def test_round_trip_generated(tmp_path, d0):
    (tmp_path / "gen.cir").write_bytes(spice_netlist(d0))
    d1, _ = _read(tmp_path, "gen.cir")
    _same(d0, d1)


# The demo project's TOML design (read with the design reader) through SPICE and back.
DEMO = Path(__file__).resolve().parents[1] / "demo_project" / "design.toml"
needs_demo = pytest.mark.skipif(not DEMO.exists(), reason="no demo design")


def _demo() -> Design:
    from pipeline.design import read_design

    d, _ = read_design(DEMO, LIB, display="design.toml")
    return d


@needs_demo
def test_demo_round_trip(tmp_path):
    d0 = _demo()
    (tmp_path / "design.cir").write_bytes(spice_netlist(d0))
    d1, _ = _read(tmp_path, "design.cir")
    _same(d0, d1)
    assert [(s.name, s.items) for s in d1.stages] == [(s.name, s.items) for s in d0.stages]


@needs_demo
@needs_ngspice
def test_demo_filter_ac_in_reference_simulator(tmp_path):
    d = _demo()
    parts = {p.ref: p.value for p in d.parts}
    # the demo's anti-noise stage: R1, R2 with Cf = C4, Cg = C5 (design.toml [blocks.antinoise])
    r1, r2, cf, cg = parts["R1"], parts["R2"], parts["C4"], parts["C5"]
    f0 = 1.0 / (2 * math.pi * math.sqrt(r1 * r2 * cf * cg))  # REFERENCES.md section 5
    text = spice_netlist(d).decode()
    bench = ("Vin TRIG_IN 0 DC 0 AC 1\n.control\nac dec 2000 10 100k\nlet phs = cph(v(filt))\n"
             "let mg = mag(v(filt))\nmeas ac f90 when phs=-1.5707963267948966\nmeas ac g10 find mg at=10\n.endc\n")
    deck = tmp_path / "demo.cir"
    deck.write_text(text.replace(".op\n.end\n", bench + ".end\n"))
    res = _run_ngspice(deck)
    _no_errors(res)
    meas = {m.group(1): float(m.group(2)) for m in re.finditer(r"^(\w+)\s*=\s*([-+0-9.eE]+)", res.stdout, re.M)}
    assert meas["f90"] == pytest.approx(f0, rel=0.005)
    assert meas["g10"] == pytest.approx(1.0, abs=1e-3)


# Bad input of any shape is a DesignError, never another exception.
_WORDS = st.sampled_from([
    "R1", "C2", "L3", "D4", "Q5", "M6", "J7", "X8", "V9", "a", "b", "0", "gnd", "1k", "10MEG", "{p}", "{p*2}",
    "'p/0'", "=", "p=1", ".subckt", ".ends", ".param", ".model", "npn", "nmos", "D", ".include", ".lib", "x.lib",
    "+", "*", ";", "$", "(", ")", ",", ".end", ".control", ".endc", "params:", "1e999", "-1", "sub", "{", "}",
    "\"q\"", "-", "1e-999", "2k2", "..", "/", "µ",
])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(lines=st.lists(st.lists(_WORDS, min_size=1, max_size=6).map(" ".join), min_size=1, max_size=8))
def test_garbage_gives_design_error_only(tmp_path, lines):
    (tmp_path / "x.lib").write_text(".model D D\n.subckt sub a b\nR1 a b 1k\n.ends\n")
    (tmp_path / "main.cir").write_text("title\n" + "\n".join(lines) + "\n")
    try:
        design, findings = _read(tmp_path)
    except DesignError as exc:
        assert exc.file in ("main.cir", "x.lib") and str(exc)
    else:
        assert design.parts and all(isinstance(f.message, str) for f in findings)


# --------------------------------------------------------------------------
# determinism
# --------------------------------------------------------------------------
# Two calls in one process share one hash seed and prove little: the reader and
# writer are compared across processes with different PYTHONHASHSEED below.
_SCRIPT = """
import dataclasses, hashlib, sys
from pathlib import Path
from pipeline.library import load_library
from pipeline.spice import read_spice
from pipeline.export.spice import spice_netlist
folder = Path(sys.argv[1])
d, f = read_spice(folder / "main.cir", load_library(), display_name="main.cir",
                  parts_map=folder / "parts.toml", root=folder)
inputs = [Path(p).relative_to(folder.resolve()).as_posix() for p in d.inputs]
blob = spice_netlist(d) + repr((dataclasses.replace(d, inputs=()), f, inputs)).encode()
print(hashlib.sha256(blob).hexdigest())
"""


def test_same_bytes_across_hash_seeds_and_folders(tmp_path):
    outs = []
    for seed, folder in (("0", "one"), ("12345", "two"), ("random", "three")):
        proj = tmp_path / folder / "deeper"
        _write(proj, {"main.cir": MAIN, "lib/sub.lib": SUB, "parts.toml": PARTS})
        env = dict(os.environ, PYTHONHASHSEED=seed)
        res = subprocess.run([sys.executable, "-c", _SCRIPT, str(proj)], capture_output=True, text=True,
                             env=env, timeout=60, cwd=Path(__file__).resolve().parent.parent)
        assert res.returncode == 0, res.stderr
        outs.append(res.stdout.strip())
    assert len(set(outs)) == 1 and len(outs[0]) == 64



# worked by hand from the rule (ASCII letters/digits/_ kept, + -> p, a sign-like - -> n, anything
# else _, runs of _ merged, ends stripped): already-legal names take the fast path unchanged
@pytest.mark.parametrize("name, signed, plain", [
    ("VCC", "VCC", "VCC"), ("net_1", "net_1", "net_1"), ("Ab9_c7", "Ab9_c7", "Ab9_c7"),
    ("_a", "a", "a"), ("a__b", "a_b", "a_b"), ("b_", "b", "b"), ("V+", "Vp", "V"),
    ("IN-", "INn", "IN"), ("A-B", "A_B", "A_B"), ("\u00b51", "1", "1"), ("x y", "x_y", "x_y"), ("", "", ""),
])
def test_legal_names(name, signed, plain):
    from pipeline.export.spice import _legal
    assert _legal(name) == signed and _legal(name, signs=False) == plain
