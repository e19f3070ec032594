"""Hostile SPICE input (issue 13): limits, includes, records. Each defect has a test named after it.

Every defect is driven through the command line (click's CliRunner, or a subprocess where
the defect was a hang): exit 2, a message naming the file and the line, no traceback.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.errors import DesignError
from pipeline.library import load_library
from pipeline.project import load_project
from pipeline.spice import read_spice
from pipeline.spice.expr import evaluate
from pipeline.spice.limits import DEFAULTS, EXPRESSION_DEPTH, SpiceLimits
from test_spice import _write

ROOT = Path(__file__).resolve().parent.parent
LIB = load_library()


def _check(folder: Path, name: str = "main.cir"):
    """``snugboard check`` run from inside ``folder``, so messages show the file as given."""
    cwd = os.getcwd()
    os.chdir(folder)
    try:
        return CliRunner().invoke(main, ["check", name])
    finally:
        os.chdir(cwd)


def _assert_located(res, file: str, line: int | None = None, *words: str) -> str:
    assert res.exit_code == 2, (res.exit_code, res.output, res.exception)
    msg = res.output
    assert "Traceback" not in msg
    head = f"{file}:{line}:" if line is not None else f"{file}:"
    assert head in msg, msg
    for w in words:
        assert w in msg, msg
    return msg


# --------------------------------------------------------------------------
# item 3: RecursionError from deep expressions and parameter chains
# --------------------------------------------------------------------------
DEEP = 5000


@pytest.mark.parametrize("expr", [
    "(" * DEEP + "1" + ")" * DEEP,          # nested brackets
    "-" * DEEP + "1",                        # unary minus signs
    "^".join(["1"] * DEEP),                  # a chain of ^ (right-associative)
    "- " * DEEP + "1",
], ids=["brackets", "unary-minus", "power-chain", "spaced-minus"])
def test_defect_03_deep_expression_exit_2(tmp_path, expr):
    _write(tmp_path, {"main.cir": f"deep\n.param a={{{expr}}}\nR1 n1 0 {{a}}\nR2 n1 0 1k\n"})
    _assert_located(_check(tmp_path), "main.cir", 2, "expression_depth", "[limits]")


def test_defect_03_deep_parameter_chain_exit_2(tmp_path):
    n = 20_000
    params = "\n".join(f".param p{i}={{p{i - 1}}}" for i in range(1, n))
    _write(tmp_path, {"main.cir": f"chain\n.param p0=1k\n{params}\nR1 n1 0 {{p{n - 1}}}\nR2 n1 0 1k\n"})
    msg = _assert_located(_check(tmp_path), "main.cir", None, "expression_depth")
    assert "more than 1000 deep" in msg


def test_deep_chain_reads_when_the_limit_is_raised(tmp_path):
    # 20,000 parameters each the one before: iterative lookup, no recursion.
    n = 20_000
    params = "\n".join(f".param p{i}={{p{i - 1}}}" for i in range(1, n))
    _write(tmp_path, {"main.cir": f"chain\n.param p0=4.7k\n{params}\nR1 n1 0 {{p{n - 1}}}\n"})
    design, _ = read_spice(tmp_path / "main.cir", LIB, display_name="main.cir",
                           limits=SpiceLimits(expression_depth=n + 1))
    assert design.parts[0].value == 4700.0


def test_raised_limit_holds_inside_subcircuits(tmp_path):
    # A subcircuit's own .param scope obeys the raised limit too, not the default.
    n = 1500
    params = "\n".join(f".param p{i}={{p{i - 1}}}" for i in range(1, n))
    _write(tmp_path, {"main.cir": f"t\n.subckt s a b\n.param p0=3.3k\n{params}\nR1 a b {{p{n - 1}}}\n.ends s\n"
                                  f"X1 in 0 s\n"})
    with pytest.raises(DesignError, match="expression_depth"):
        read_spice(tmp_path / "main.cir", LIB, display_name="main.cir")
    design, _ = read_spice(tmp_path / "main.cir", LIB, display_name="main.cir",
                           limits=SpiceLimits(expression_depth=n + 1))
    assert design.parts[0].value == 3300.0


def test_nesting_within_the_limit_evaluates(tmp_path):
    depth = EXPRESSION_DEPTH - 10
    expr = "(" * depth + "2.2k" + ")" * depth
    _write(tmp_path, {"main.cir": f"ok\nR1 n1 0 {{{expr}}}\nR2 n1 0 {{{'-' * (depth - 1)}-1k}}\n"})
    design, _ = read_spice(tmp_path / "main.cir", LIB, display_name="main.cir")
    assert design.parts[0].value == 2200.0
    assert design.parts[1].value == 1000.0  # an even number of signs


# The evaluator against Python's own arithmetic (the language reference's operator
# precedence: ** binds tighter than a unary sign on its left, is right-associative,
# and its right operand may carry a sign; * / before + -).
@pytest.mark.parametrize("expr", [
    "-2^2", "2^-2", "2^3^2", "-2^-2^2", "2*-3", "-(2+3)*4", "1-2-3", "2/4/8", "2**3**0.5", "+-+2",
    "((1+2)*(3-4))/-5", "3*2^2", "-3^2*2", "1e3/2.5e2", "2^-1*8",
])
def test_evaluator_matches_python_arithmetic(expr):
    want = eval(expr.replace("^", "**"), {"__builtins__": {}})  # reference: Python's operator rules
    assert evaluate(expr, lambda n: 0.0) == pytest.approx(want, rel=1e-15)


def test_project_limits_table_is_read(tmp_path):
    _write(tmp_path, {"project.toml": "[project]\ndesign = \"main.cir\"\n[limits]\nexpression_depth = 30000\n"
                                      "spice_include_splices = 7\n",
                      "main.cir": "t\nR1 a 0 1k\n"})
    project = load_project(tmp_path)
    assert dict(project.limits) == {"expression_depth": 30000, "spice_include_splices": 7}
    got = SpiceLimits.from_table(dict(project.limits))
    assert (got.expression_depth, got.include_splices) == (30000, 7)
    assert got.expansion_parts == DEFAULTS["spice_expansion_parts"]


@pytest.mark.parametrize("body,why", [
    ("[limits]\nexpression_depth = 0\n", "at least 1"),
    ("[limits]\nexpression_depth = 1.5\n", "whole number"),
    ("[limits]\nspice_splices = 3\n", "unknown key"),
])
def test_project_limits_table_refuses_bad_values(tmp_path, body, why):
    _write(tmp_path, {"project.toml": "[project]\ndesign = \"main.cir\"\n" + body, "main.cir": "t\nR1 a 0 1k\n"})
    res = CliRunner().invoke(main, ["run", str(tmp_path)])
    assert res.exit_code == 2 and "project.toml:" in res.output and why in res.output, res.output


# --------------------------------------------------------------------------
# item 2: a NUL byte in an include path
# --------------------------------------------------------------------------
@pytest.mark.parametrize("line", ['.include "a\x00b.cir"', ".include a\x00b.cir", ".lib 'x\x00.lib' typ"])
def test_defect_02_nul_in_include_path_exit_2(tmp_path, line):
    (tmp_path / "main.cir").write_bytes(f"nul\nR1 a 0 1k\n{line}\n".encode())
    _assert_located(_check(tmp_path), "main.cir", 3, "NUL")


# --------------------------------------------------------------------------
# item 11: exponential include graphs, FIFOs
# --------------------------------------------------------------------------
def test_defect_11_include_splices_exit_2(tmp_path):
    files = {"main.cir": "doubling\n.include f0.cir\nR1 a 0 1k\n"}
    for i in range(25):
        nxt = f".include f{i + 1}.cir\n.include f{i + 1}.cir\n" if i < 24 else "* leaf\n"
        files[f"f{i}.cir"] = nxt
    _write(tmp_path, files)
    msg = _assert_located(_check(tmp_path), "", None, "spice_include_splices", "[limits]")
    assert re.search(r"snugboard: f\d+\.cir:\d+: more than " + str(DEFAULTS["spice_include_splices"]), msg), msg


def test_include_splices_within_the_limit_read(tmp_path):
    # 2 + 4 + ... + 64 = 126 splices; the leaf (a comment) is spliced 64 times.
    files = {"main.cir": "doubling\n.include f0.cir\nR1 a 0 1k\n"}
    for i in range(6):
        files[f"f{i}.cir"] = f".include f{i + 1}.cir\n.include f{i + 1}.cir\n"
    files["f6.cir"] = "* leaf\n"
    _write(tmp_path, files)
    design, _ = read_spice(tmp_path / "main.cir", LIB, display_name="main.cir")
    assert [p.ref for p in design.parts] == ["R1"]
    with pytest.raises(DesignError, match="spice_include_splices"):
        read_spice(tmp_path / "main.cir", LIB, display_name="main.cir", limits=SpiceLimits(include_splices=125))
    read_spice(tmp_path / "main.cir", LIB, display_name="main.cir", limits=SpiceLimits(include_splices=127))


def test_spice_bytes_limit_exit_2(tmp_path):
    _write(tmp_path, {"main.cir": "big\nR1 a 0 1k\n.include part.cir\n", "part.cir": "* " + "x" * 5000 + "\n"})
    with pytest.raises(DesignError, match="spice_file_bytes") as exc:
        read_spice(tmp_path / "main.cir", LIB, display_name="main.cir", limits=SpiceLimits(file_bytes=1000))
    assert (exc.value.file, exc.value.line) == ("main.cir", 3)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_defect_11_fifo_include_refused_without_blocking(tmp_path):
    _write(tmp_path, {"main.cir": "fifo\nR1 a 0 1k\n.include pipe.cir\n"})
    os.mkfifo(tmp_path / "pipe.cir")
    # A subprocess, because the defect was a hang: a blocked open would hit the timeout.
    res = subprocess.run([sys.executable, "-m", "pipeline.cli", "check", "main.cir"], cwd=tmp_path,
                         capture_output=True, text=True, timeout=60,
                         env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert res.returncode == 2, res.stderr
    assert "main.cir:3:" in res.stderr and "not a regular file" in res.stderr, res.stderr


# --------------------------------------------------------------------------
# item 12: subcircuits that multiply
# --------------------------------------------------------------------------
def _fan(depth: int, width: int) -> str:
    lines = ["fan-out"]
    for level in range(depth):
        lines.append(f".subckt s{level} a b")
        if level == depth - 1:
            lines.append("R1 a b 1k")
        else:
            lines += [f"X{i} a b s{level + 1}" for i in range(width)]
        lines.append(f".ends s{level}")
    lines.append("X1 in 0 s0")
    return "\n".join(lines) + "\n"


def test_defect_12_subcircuit_expansion_exit_2(tmp_path):
    # 1e9 resistors if flattened. The project lowers the limit so that the test is quick; the
    # default limit is met the same way, after EXPANSION_PARTS element lines.
    _write(tmp_path, {"main.cir": _fan(10, 10),
                      "project.toml": "[project]\ndesign = \"main.cir\"\n[limits]\nspice_expansion_parts = 2000\n"})
    res = CliRunner().invoke(main, ["run", str(tmp_path), "--out", str(tmp_path / "out")])
    msg = _assert_located(res, "main.cir", None, "more than 2000 element lines", "spice_expansion_parts", "[limits]")
    assert not (tmp_path / "out").exists(), msg


def test_expansion_counts_every_element_line(tmp_path):
    # X1, then 4 + 16 + 64 instance lines, then 64 resistors: 149 element lines, 64 parts.
    _write(tmp_path, {"main.cir": _fan(4, 4)})
    design, _ = read_spice(tmp_path / "main.cir", LIB, display_name="main.cir",
                           limits=SpiceLimits(expansion_parts=149))
    assert len(design.parts) == 64
    with pytest.raises(DesignError, match="spice_expansion_parts"):
        read_spice(tmp_path / "main.cir", LIB, display_name="main.cir", limits=SpiceLimits(expansion_parts=148))


# --------------------------------------------------------------------------
# item 20: records without a file, stage records located in the design file
# --------------------------------------------------------------------------
@pytest.mark.parametrize("record,line", [
    ("* snugboard: net node=a voltage=abc", 3),
    ("* snugboard: net node=a voltage_max=1e999", 3),
    ("* snugboard: net voltage=5", 3),
    ('* snugboard: part element=R1 value="x"', 3),
    ("* snugboard: block name=s items=[1]", 3),
    ('* snugboard: kind name=k pins="[1]"', 3),
    ('* snugboard: design name="unclosed', 3),
])
def test_defect_20_malformed_record_names_file_and_line(tmp_path, record, line):
    _write(tmp_path, {"main.cir": f"records\nR1 a 0 1k\n{record}\nR2 a 0 2k\n"})
    res = _check(tmp_path)
    msg = _assert_located(res, "main.cir", line)
    assert ": :0:" not in msg and not msg.startswith("snugboard: :")


def test_defect_20_stage_record_error_names_the_spice_file(tmp_path):
    # The writer of this record read the stage from design.toml line 209; the user now
    # gives main.cir, so that is the file a message about the stage must name.
    rec = ('* snugboard: block name=lp file=design.toml key=blocks.lp line=209 '
           'items="{\\"type\\": \\"no-such-block\\", \\"parts\\": {}}"')
    _write(tmp_path, {"main.cir": f"stage\nR1 a 0 1k\nC1 a 0 1n\n{rec}\n",
                      "project.toml": "[project]\ndesign = \"main.cir\"\n"})
    res = CliRunner().invoke(main, ["run", str(tmp_path), "--out", str(tmp_path / "out")])
    msg = _assert_located(res, "main.cir", 4, "blocks.lp")
    assert "design.toml" not in msg and not (tmp_path / "out").exists()
