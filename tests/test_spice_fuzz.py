"""Property tests of the SPICE reader (issue 12 item 6, issue 13 "a fuzz suite").

Random netlists built from SPICE's own line grammar, and byte- and line-level mutations of
a valid one, go through :func:`pipeline.spice.read_spice`. The property: it returns a
design, or raises :class:`~pipeline.errors.DesignError` whose message starts with the name
of a file the reading involved; never any other exception, never a change to an input.

The default run tries a bounded number of inputs (a few seconds). The long run::

    .venv/bin/python -m pytest -m fuzz -s tests/test_spice_fuzz.py
    SNUGBOARD_FUZZ_EXAMPLES=20000 .venv/bin/python -m pytest -m fuzz -s tests/test_spice_fuzz.py

prints the inputs tried by outcome (design, each error kind) and the slowest case.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
import time
from collections import Counter
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pipeline.errors import DesignError
from pipeline.library import load_library
from pipeline.model import Design
from pipeline.spice import read_spice
from pipeline.spice.limits import SpiceLimits

LIB = load_library()
#: Small limits, so that every generated case is quick whatever it holds.
LIMITS = SpiceLimits(file_bytes=200_000, include_splices=50, expansion_parts=2_000, expression_depth=200)
FILES = ("main.cir", "sub.lib", "parts.toml")

SEED = """RC filter with a buffer
.param rb=10k cf={1/(2*3.14159*rb*1k)}
* snugboard: net node=vcc voltage=5
V1 vcc 0 DC 5
R1 in mid {rb}
C1 mid 0 {cf}
.include sub.lib
X1 mid out vcc 0 buf gain=2
D1 out 0 dmod
.model dmod D
Q1 vcc mid out qn
.model qn NPN
+ (BF=100)
.end
"""
SUB = """.subckt buf a y vp vn params: gain=1
R1 a n1 {gain*1k}
R2 n1 y 2.2k
C1 y vn 100p
.ends buf
"""
PARTS = """[defaults]
R = { package = "0805" }
"""

# --------------------------------------------------------------------------
# generated netlists: SPICE's line grammar, with holes
# --------------------------------------------------------------------------
_node = st.sampled_from(["0", "gnd", "in", "out", "mid", "vcc", "n1", "a", "y", "{x}", "a=b", "", "X1.n"])
_number = st.one_of(
    st.sampled_from(["1k", "10MEG", "4k7", "1e-3", "-1", "0", "1F", "1u", "1e999", ".5", "1e", "k", "nan"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
)
_expr = st.recursive(
    st.one_of(_number, st.sampled_from(["rb", "cf", "x", "gain", "undefined"])),
    lambda inner: st.one_of(
        st.tuples(inner, st.sampled_from(["+", "-", "*", "/", "^", "**", " ", ""]), inner).map("".join),
        inner.map(lambda e: f"({e})"), inner.map(lambda e: f"-{e}"), inner.map(lambda e: f"sqrt({e})")),
    max_leaves=12)
_value = st.one_of(_number, _expr.map(lambda e: "{" + e + "}"), _expr.map(lambda e: f"'{e}'"))
_name = st.text(alphabet="RCLDQMJXVIKSBEabc0123456789_.$", min_size=1, max_size=4)


@st.composite
def _element(draw) -> str:
    letter = draw(st.sampled_from("RCLDQMJXVIEBKSTZ"))
    nodes = draw(st.lists(_node, min_size=0, max_size=5))
    tail = draw(st.lists(st.one_of(_value, st.sampled_from(["dmod", "qn", "buf", "npn", "pmos", "gain=3",
                                                           "params:", "DC", "AC", "r=1k"])), max_size=3))
    return " ".join([letter + draw(_name), *nodes, *tail])


_directive = st.one_of(
    _expr.map(lambda e: f".param x={{{e}}}"),
    st.sampled_from([".subckt buf a y vp vn", ".subckt s1 p q", ".ends", ".ends buf", ".end", ".control",
                     ".endc", ".model m1 NPN", ".model", ".global vcc", ".title t", ".include sub.lib",
                     ".include main.cir", ".include ../x.cir", ".inc 'sub.lib'", '.lib "sub.lib" typ', ".lib typ",
                     ".endl", ".tran 1n 1u", ".option", ".include", ".param", ".param a", "+ continued",
                     "+", "* snugboard: net node=in voltage=x", "* snugboard: part element=R1 value=1e400",
                     '* snugboard: kind name=k pins="[[1, \\"A\\", \\"input\\"]]"',
                     "* snugboard: block name=s items={", "* snugboard: part ref=J1 nodes=in kind=header",
                     '* snugboard: design name="x', "* snugboard: bogus", "; comment", "$ x", "* comment"]),
)


@st.composite
def netlists(draw) -> dict[str, bytes]:
    lines = [draw(st.text(max_size=20).filter(lambda t: "\n" not in t and "\r" not in t))]
    lines += draw(st.lists(st.one_of(_element(), _directive), min_size=0, max_size=25))
    sub = draw(st.lists(st.one_of(_element(), _directive), max_size=6))
    files = {"main.cir": "\n".join(lines).encode(), "sub.lib": "\n".join(sub).encode()}
    if draw(st.booleans()):
        files["parts.toml"] = PARTS.encode()
    return files


# --------------------------------------------------------------------------
# mutated netlists: bytes and lines of a valid one changed
# --------------------------------------------------------------------------
@st.composite
def mutants(draw) -> dict[str, bytes]:
    files = {"main.cir": SEED.encode(), "sub.lib": SUB.encode(), "parts.toml": PARTS.encode()}
    for _ in range(draw(st.integers(1, 6))):
        name = draw(st.sampled_from(["main.cir", "main.cir", "sub.lib"]))
        data = bytearray(files[name])
        op = draw(st.sampled_from(["flip", "insert", "delete", "dup-line", "drop-line", "swap-lines"]))
        pos = draw(st.integers(0, max(len(data) - 1, 0)))
        if op == "flip" and data:
            data[pos] = draw(st.integers(0, 255))
        elif op == "insert":
            data[pos:pos] = draw(st.binary(min_size=1, max_size=8) | st.sampled_from(
                [b"{", b"}", b"(", b"'", b'"', b"\n+", b"\n.", b"\x00", b"\r", b"=", b" ", b"\n.ends\n", b"^"]))
        elif op == "delete" and data:
            del data[pos:pos + draw(st.integers(1, 10))]
        else:
            lines = bytes(data).split(b"\n")
            i, j = draw(st.integers(0, len(lines) - 1)), draw(st.integers(0, len(lines) - 1))
            if op == "dup-line":
                lines.insert(j, lines[i])
            elif op == "drop-line":
                del lines[i]
            else:
                lines[i], lines[j] = lines[j], lines[i]
            data = bytearray(b"\n".join(lines))
        files[name] = bytes(data)
    return files


# --------------------------------------------------------------------------
def _outcome(files: dict[str, bytes]) -> str:
    """Read ``files`` as a project; the outcome's name, or an AssertionError when the property fails."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for name, data in files.items():
            (folder / name).write_bytes(data)
        before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()}
        pm = folder / "parts.toml" if "parts.toml" in files else None
        try:
            design, findings = read_spice(folder / "main.cir", LIB, display_name="main.cir", parts_map=pm,
                                          root=folder, limits=LIMITS)
        except DesignError as exc:
            msg = str(exc)
            assert exc.exit_status == 2
            assert msg.split(":", 1)[0] in FILES, msg
            outcome = "error: " + _reason_kind(exc.reason)
        else:
            assert isinstance(design, Design) and design.parts
            assert all(isinstance(f.message, str) for f in findings)
            assert set(design.inputs) <= {str((folder / n).resolve()) for n in files}
            outcome = "design"
        after = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()}
        assert after == before, "an input changed"
        return outcome


def _reason_kind(reason: str) -> str:
    """A coarse class of a message, for the long run's counts."""
    words = reason.replace("'", " ").split()
    for w in ("limit", "parameter", "expression", "subcircuit", "record", "include", "node", "value", "kind",
              "package", "pins", "parts", "number"):
        if any(w in x.lower() for x in words):
            return w
    return "other"


_DEFAULT = settings(max_examples=40, deadline=None, suppress_health_check=list(HealthCheck), derandomize=True)


@_DEFAULT
@given(files=netlists())
def test_generated_netlists_give_a_design_or_a_located_error(files):
    _outcome(files)


@_DEFAULT
@given(files=mutants())
def test_mutated_netlists_give_a_design_or_a_located_error(files):
    _outcome(files)


def test_the_seed_netlist_reads():
    # The mutants start from a valid project: otherwise every mutant would be an error.
    assert _outcome({"main.cir": SEED.encode(), "sub.lib": SUB.encode(), "parts.toml": PARTS.encode()}) == "design"


# --------------------------------------------------------------------------
# the long run: pytest -m fuzz -s
# --------------------------------------------------------------------------
_LONG = int(os.environ.get("SNUGBOARD_FUZZ_EXAMPLES", "2000"))


@pytest.mark.fuzz
@pytest.mark.parametrize("strategy", [netlists(), mutants()], ids=["generated", "mutated"])
def test_fuzz_long_run_counts_outcomes(strategy, capsys):
    counts: Counter[str] = Counter()
    slowest = [0.0]

    @settings(max_examples=_LONG, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(files=strategy)
    def run(files):
        t = time.perf_counter()
        counts[_outcome(files)] += 1
        slowest[0] = max(slowest[0], time.perf_counter() - t)

    run()
    with capsys.disabled():
        total = sum(counts.values())
        print(f"\n{total} inputs: " + ", ".join(f"{k} {v}" for k, v in counts.most_common())
              + f"; slowest {slowest[0]:.2f} s")
    assert total >= min(_LONG, 100) and counts["design"] > 0
