"""The demo's SPICE drawing (demo_project/trigger-click.cir + parts.toml) is the same board as design.toml.

Issue 5, "Done when": the demo ships a SPICE version of its design that
imports to the same graph as its TOML design. Checked three ways:

(a) the SPICE reader's design equals the TOML reader's: parts, nets, net
    voltages, and the networkx part-net graphs (networkx, PyPI: a
    general-purpose graph library, ``nx.utils.graphs_equal``);
(b) the file runs in ngspice 39 (Debian package, a general-purpose circuit
    simulator) and its AC response shows the Sallen-Key low-pass at the
    textbook f0 (REFERENCES.md section 5);
(c) ``snugboard run`` with ``--design demo_project/trigger-click.cir``
    writes the same ordering BOM as the run with the TOML design.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.design import read_design
from pipeline.graph import build_graph
from pipeline.library import load_library
from pipeline.model import Design
from pipeline.spice import read_spice

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"
CIR = DEMO / "trigger-click.cir"
PARTS_MAP = DEMO / "parts.toml"
LIB = load_library()


def _toml_design() -> Design:
    design, _ = read_design(DEMO / "design.toml", LIB, display="design.toml")
    return design


def _spice_design(folder: Path = DEMO) -> Design:
    design, _ = read_spice(folder / "trigger-click.cir", LIB, display_name="trigger-click.cir",
                           parts_map=folder / "parts.toml", root=folder)
    return design


def _parts(design: Design) -> set[tuple]:
    return {(p.ref, p.kind, p.package, p.value, p.dnp) for p in design.parts}


def _order_fields(design: Design) -> dict[str, tuple]:
    """What the ordering BOM takes from each part besides kind, value and package."""
    return {p.ref: (p.tolerance, p.tolerance_text, p.rating_v, p.rating_w, p.rating_text, p.manufacturer,
                    p.mpn, p.note) for p in design.parts}


def _nets(design: Design) -> set[tuple[str, str, str]]:
    return {(n.name, pr.ref, pr.pin) for n in design.nets for pr in n.pins}


def _voltages(design: Design) -> dict[str, tuple]:
    return {n.name: (n.voltage, n.voltage_max, n.battery) for n in design.nets}


def _edges(g: nx.MultiGraph) -> list[tuple]:
    # each edge written part -> net, so the listing does not depend on insertion order
    out = []
    for u, v, k, d in g.edges(keys=True, data=True):
        part, net = (u, v) if u[0] == "part" else (v, u)
        out.append((part, net, k, tuple(sorted(d.items()))))
    return sorted(out)


# --------------------------------------------------------------------------
# (a) the same graph
# --------------------------------------------------------------------------
def test_spice_demo_has_the_toml_parts():
    toml, spice = _toml_design(), _spice_design()
    assert len(spice.parts) == len(toml.parts) == 25
    assert _parts(spice) == _parts(toml)
    assert [p.ref for p in spice.parts] == [p.ref for p in toml.parts]  # same file order, too
    assert {p.ref for p in spice.parts if p.dnp} == {"R7"}


def test_spice_demo_has_the_toml_ordering_details():
    # tolerances, ratings and notes come from parts.toml [refs.*]
    assert _order_fields(_spice_design()) == _order_fields(_toml_design())


def test_spice_demo_has_the_toml_nets():
    toml, spice = _toml_design(), _spice_design()
    assert {n.name for n in spice.nets} == {"GND", "VBAT", "VREG", "TRIG_IN", "SK_A", "SK_B", "FILT", "VTH",
                                            "CLICK", "LED_A", "UNUSED_B"}
    assert _nets(spice) == _nets(toml)
    assert len(_nets(toml)) == sum(len(n.pins) for n in toml.nets)  # no pin listed twice
    # VBAT 3.7 V from the source, 4.2 V max and battery from the net record; VREG 2.5 V; GND 0 V
    assert _voltages(spice) == _voltages(toml)
    assert (spice.name, spice.revision) == (toml.name, toml.revision)


def test_spice_demo_graph_equals_toml_graph():
    g_toml, g_spice = build_graph(_toml_design()), build_graph(_spice_design())
    # readable difference first, then networkx's own comparison (nodes with
    # their data, adjacency with edge keys and data, graph attributes)
    assert sorted(g_spice.nodes(data="kind")) == sorted(g_toml.nodes(data="kind"))
    assert _edges(g_spice) == _edges(g_toml)
    assert g_spice.number_of_edges() == g_toml.number_of_edges() == 58  # pins listed under [nets], counted by hand
    assert nx.utils.graphs_equal(g_spice, g_toml)


def test_spice_demo_carries_the_stage_declarations():
    # parts.toml [blocks.*] repeats design.toml's, so `snugboard run` checks the same targets
    toml, spice = _toml_design(), _spice_design()
    assert [(s.name, s.items) for s in spice.stages] == [(s.name, s.items) for s in toml.stages]


# A changed copy must read to a different graph: the comparison above can fail.
MUTATIONS = [
    ("cir", "XU2A SK_B FILT ", "XU2A FILT SK_B ", "nets"),              # op-amp inputs swapped
    ("cir", "C4 SK_A FILT 22n", "C4 SK_B FILT 22n", "nets"),            # capacitor on the wrong node
    ("cir", "R10 VREG LED_A 220", "R10 LED_A VREG 220", "nets"),        # resistor pins reversed
    ("cir", "D1 LED_A CLICK LEDRED", "D1 CLICK LED_A LEDRED", "nets"),  # LED backwards
    ("map", ', dnp = true, note = "trim', ', note = "trim', "parts"),   # R7 fitted
    ("map", 'package = "pad-1.0mm"', 'package = "pad-1.5mm"', "parts"),  # test points on big pads
    ("map", '["+INB", "-INB", "VCC"', '["-INB", "+INB", "VCC"', "nets"),  # U3B inputs swapped
    ("cir", "node=VREG voltage=2.5", "node=VREG voltage=3.3", "voltages"),  # net record
]


@pytest.mark.parametrize("where, old, new, differs", MUTATIONS)
def test_a_changed_copy_reads_to_a_different_graph(tmp_path, where, old, new, differs):
    for name in ("trigger-click.cir", "parts.toml"):
        shutil.copy(DEMO / name, tmp_path / name)
    target = tmp_path / ("trigger-click.cir" if where == "cir" else "parts.toml")
    text = target.read_text()
    assert text.count(old) == 1, old
    target.write_text(text.replace(old, new))
    toml, spice = _toml_design(), _spice_design(tmp_path)
    got = {"parts": _parts(spice) != _parts(toml), "nets": _nets(spice) != _nets(toml),
           "voltages": _voltages(spice) != _voltages(toml)}
    assert got[differs]
    assert not nx.utils.graphs_equal(build_graph(spice), build_graph(toml))


# --------------------------------------------------------------------------
# (b) it simulates, and the low-pass is where the textbook puts it
# --------------------------------------------------------------------------
NGSPICE = shutil.which("ngspice")
needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")


def _read_raw(path: Path) -> tuple[list[str], np.ndarray]:
    """Vector names and values of a binary ngspice rawfile holding one plot.

    Layout (ngspice manual, "rawfile format"): a text header ending in a
    ``Binary:`` line, then point-major native doubles, two (real, imaginary)
    per value when the plot's flags say ``complex``.
    """
    data = path.read_bytes()
    m = re.search(rb"^Binary:\r?\n", data, re.M)
    assert m, "not a binary rawfile"
    header = data[: m.start()].decode("ascii", "replace")
    n_vars = int(re.search(r"No\. Variables:\s*(\d+)", header).group(1))
    n_points = int(re.search(r"No\. Points:\s*(\d+)", header).group(1))
    is_complex = "complex" in re.search(r"Flags:(.*)", header).group(1)
    var_block = re.split(r"^Variables:[ \t]*$", header, maxsplit=1, flags=re.M)[1]
    names = [ln.split()[1].lower() for ln in var_block.strip().splitlines()[:n_vars]]
    width = 2 if is_complex else 1
    body = data[m.end():]
    assert len(body) == n_points * n_vars * width * 8, "rawfile size does not match its header"
    raw = np.frombuffer(body, dtype="<f8").reshape(n_points, n_vars, width)
    values = raw[..., 0] + 1j * raw[..., 1] if is_complex else raw[..., 0]
    return names, values


@pytest.fixture(scope="module")
def ac_run(tmp_path_factory):
    if NGSPICE is None:
        pytest.skip("ngspice is not installed")
    work = tmp_path_factory.mktemp("ngspice")
    raw = work / "trigger-click.raw"
    res = subprocess.run([NGSPICE, "-b", "-r", str(raw), str(CIR)], capture_output=True, text=True,
                         timeout=60, cwd=work)
    return res, raw


@needs_ngspice
def test_spice_demo_simulates_without_error(ac_run):
    res, raw = ac_run
    out = res.stdout + res.stderr
    assert res.returncode == 0, out
    # ngspice reports problems on lines starting "Error" / "Warning" (e.g. singular matrix) and aborts with "fatal"
    bad = [ln for ln in out.splitlines() if re.match(r"\s*(error|warning|fatal)\b", ln, re.I)]
    assert not bad, out
    names, values = _read_raw(raw)
    # .ac dec 50 1 100k: 5 decades x 50 points + the end point
    assert values.shape[0] == 251
    assert {"frequency", "v(filt)", "v(trig_in)", "v(vreg)"} <= set(names)


def _phase_crossing(f: np.ndarray, phase: np.ndarray, target: float) -> float:
    """Frequency where ``phase`` (unwrapped, falling) first crosses ``target``; linear in log f."""
    i = int(np.nonzero(phase <= target)[0][0])
    assert i > 0
    x0, x1 = math.log10(f[i - 1]), math.log10(f[i])
    y0, y1 = phase[i - 1], phase[i]
    return 10 ** (x0 + (target - y0) * (x1 - x0) / (y1 - y0))


@needs_ngspice
def test_spice_demo_low_pass_f0_matches_the_textbook_formula(ac_run):
    _, raw = ac_run
    names, values = _read_raw(raw)
    f = values[:, names.index("frequency")].real
    h = values[:, names.index("v(filt)")] / values[:, names.index("v(trig_in)")]
    phase = np.unwrap(np.angle(h))
    design = _toml_design()
    r1, r2, cf, cg = (design.part(ref).value for ref in ("R1", "R2", "C4", "C5"))
    # REFERENCES.md section 5 (Op Amps For Everyone, ch. 16), unity-gain Sallen-Key low-pass:
    # f0 = 1 / (2 pi sqrt(R1 R2 Cf Cg)); Q = sqrt(R1 R2 Cf Cg) / (Cg (R1 + R2))
    f0 = 1.0 / (2 * math.pi * math.sqrt(r1 * r2 * cf * cg))
    q = math.sqrt(r1 * r2 * cf * cg) / (cg * (r1 + r2))
    assert f0 == pytest.approx(487.7, abs=0.1)  # 22k, 22k, 22n, 10n by hand
    # w0^2 / (s^2 + s w0/Q + w0^2) has -90 degrees of phase at f0 and |H(f0)| = Q (same chapter)
    f90 = _phase_crossing(f, phase, -math.pi / 2)
    assert f90 == pytest.approx(f0, rel=0.01)
    assert float(np.interp(math.log10(f0), np.log10(f), np.abs(h))) == pytest.approx(q, rel=0.01)
    # unity gain in the pass band (10 Hz)
    assert abs(h[np.argmin(abs(f - 10.0))]) == pytest.approx(1.0, abs=1e-3)
    # and the whole magnitude curve is that second-order response up to 10 f0 (-40 dB/decade above f0).
    # Higher up a real Sallen-Key low-pass leaks through Cf into the op-amp's output resistance
    # (the model's 50 ohm), so the stop band stops falling there: not compared.
    band = f <= 10 * f0
    s = 1j * f[band] / f0
    ideal = 1.0 / (s * s + s / q + 1.0)
    np.testing.assert_allclose(np.abs(h[band]), np.abs(ideal), rtol=0.01)
    assert band.sum() > 150  # 1 Hz .. 4.9 kHz at 50 points a decade


# --------------------------------------------------------------------------
# (c) the same ordering BOM from `snugboard run`
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    out = tmp_path_factory.mktemp("runs")
    here = os.getcwd()
    os.chdir(ROOT)  # paths as a user types them from the repository folder
    try:
        runner = CliRunner()
        r_cir = runner.invoke(main, ["run", "demo_project", "--design", "demo_project/trigger-click.cir",
                                     "--out", str(out / "cir")], catch_exceptions=False)
        r_toml = runner.invoke(main, ["run", "demo_project", "--out", str(out / "toml")], catch_exceptions=False)
    finally:
        os.chdir(here)
    return r_cir, r_toml, out


def test_run_with_the_spice_design_exits_0(two_runs):
    r_cir, r_toml, out = two_runs
    assert r_cir.exit_code == 0, r_cir.output
    assert r_toml.exit_code == 0, r_toml.output
    assert (out / "cir" / "bom.csv").is_file()


@pytest.mark.parametrize("name", ["bom.csv", "bom-unfitted.csv", "bom-totals.csv", "netlist.csv"])
def test_run_with_the_spice_design_writes_the_same_file(two_runs, name):
    _, _, out = two_runs
    a, b = (out / "cir" / name).read_bytes(), (out / "toml" / name).read_bytes()
    assert a == b
    if name == "bom.csv":
        # 13 order lines for 18 fitted parts (the demo's BOM without its 4 wire pads and 2 test
        # points, which are board features: board-features.csv); R7 is not ordered
        rows = a.decode().splitlines()
        assert len(rows) == 14 and rows[0].startswith("line,qty,refs,")
        assert not any(" R7 " in f" {r.split(',')[2]} " for r in rows[1:])
    if name == "bom-unfitted.csv":
        assert a.decode().splitlines()[1].startswith("R7,resistor,100k,0603,")
