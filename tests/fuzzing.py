"""Shared parts of the fuzz suites (tests/test_fuzz_*.py): input strategies, the runner, the properties.

Two runners, one set of properties (issue 13, "a fuzz suite in the project"):

* :func:`run_inprocess` drives the command through click's runner: the bounded default run;
* :func:`run_forked` runs the real command in a forked child (every module already imported, so the
  case, not Python's start-up, fills the time) under a memory limit (``RLIMIT_AS``) and a time limit,
  for ``pytest -m fuzz``.

The properties (:func:`check_case`): exit status 0, 1 or 2 only; for 2 the message names one of the
input files; no input file changed; nothing written for 2; no traceback and no Python warning on
stderr; (forked) within the time and memory bound.
"""

from __future__ import annotations

import collections
import json
import math
import os
import re
import resource
import signal
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

#: per-case bounds of the long campaign (the default run's cases are far smaller)
CASE_SECONDS = 60
CASE_BYTES = 2 << 30

OUTCOMES: collections.Counter = collections.Counter()


# --------------------------------------------------------------------------
# TOML text from Python values, written by hand so that hostile values survive
def toml_value(v) -> str:
    """A TOML literal for ``v`` (str, bool, int, float incl. nan/inf, list)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    return json.dumps(v)  # JSON string escapes are TOML basic-string escapes (\uXXXX, \", \\, \n...)


def toml_key(k: str) -> str:
    return k if k and all(c.isascii() and (c.isalnum() or c in "_-") for c in k) else json.dumps(k)


def toml_tables(tables: dict[str, dict]) -> str:
    out = []
    for name, body in tables.items():
        out.append(f"[{name}]")
        out.extend(f"{toml_key(k)} = {toml_value(v)}" for k, v in body.items())
    return "\n".join(out) + "\n"


HOSTILE_TEXT = st.sampled_from(["", " ", "x", "\x00", "a\x00b", "\x1b[2J", "\u202e", "+A1", "=1+1", "../x",
                                "/etc/passwd", "a" * 300, "é", "\ud7ff", "1e308", "nan", "-", "0"])
NUMBERS = st.one_of(st.integers(-2**63, 2**63 - 1), st.floats(allow_nan=True, allow_infinity=True),
                    st.sampled_from([0, 1, -1, 2, 5, 100, 1e-300, 1e300, 1e308, 0.02]))
ANY_VALUE = st.one_of(HOSTILE_TEXT, NUMBERS, st.booleans(), st.text(max_size=12),
                      st.lists(st.one_of(HOSTILE_TEXT, st.integers(-3, 3)), max_size=3))


@st.composite
def mutated(draw, text: str) -> bytes:
    """``text`` as UTF-8 with a few bytes flipped, inserted or deleted (byte-level mutation)."""
    data = bytearray(text.encode("utf-8"))
    for _ in range(draw(st.integers(0, 4))):
        if not data:
            break
        i = draw(st.integers(0, len(data) - 1))
        op = draw(st.sampled_from(["flip", "insert", "delete", "dup"]))
        if op == "flip":
            data[i] = draw(st.integers(0, 255))
        elif op == "insert":
            data[i:i] = draw(st.sampled_from([b"\x00", b"\xff", b"[", b"]", b"\"", b"=", b"\n", b"nan", b"9" * 30]))
        elif op == "delete":
            del data[i:i + draw(st.integers(1, 8))]
        else:
            j = draw(st.integers(i, min(len(data), i + 40)))
            data[j:j] = data[i:j]
    return bytes(data)


# --------------------------------------------------------------------------
@dataclass
class Case:
    """One fuzz input: files to write into a fresh project folder and the command's arguments."""

    files: dict[str, bytes]
    args: tuple[str, ...] = ("run", "{proj}")


@dataclass
class Outcome:
    code: int
    stderr: str
    seconds: float = 0.0
    killed: str = ""


def _snapshot(root: Path) -> dict[str, bytes]:
    return {str(p.relative_to(root)): p.read_bytes() for p in sorted(root.rglob("*"))
            if p.is_file() and "out" not in p.relative_to(root).parts}


def _materialise(case: Case, root: Path) -> list[str]:
    proj = root / "proj"
    proj.mkdir()
    for name, data in case.files.items():
        (proj / name).write_bytes(data)
    return [a.format(proj=proj) for a in case.args]


def run_inprocess(args: list[str]) -> Outcome:
    from click.testing import CliRunner

    from pipeline.cli import main

    t0 = time.monotonic()
    r = CliRunner().invoke(main, args)
    return Outcome(r.exit_code, r.stderr, time.monotonic() - t0)


def run_forked(args: list[str]) -> Outcome:
    """The real command in a forked child, limited to :data:`CASE_BYTES` of memory and :data:`CASE_SECONDS`."""
    err = tempfile.TemporaryFile()
    t0 = time.monotonic()
    pid = os.fork()
    if pid == 0:  # the child: never returns into pytest
        code = 97
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, 1)
            os.dup2(err.fileno(), 2)
            resource.setrlimit(resource.RLIMIT_AS, (CASE_BYTES, CASE_BYTES))
            from pipeline.cli import main
            main(args, standalone_mode=True)
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else 98
        except MemoryError:
            code = 95
        except BaseException:  # noqa: BLE001
            code = 96
        os._exit(code)
    killed = ""
    while True:
        done, status = os.waitpid(pid, os.WNOHANG)
        if done:
            break
        if time.monotonic() - t0 > CASE_SECONDS:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
            killed, status = "timeout", 0
            break
        time.sleep(0.01)
    err.seek(0)
    text = err.read().decode("utf-8", "replace")
    code = os.waitstatus_to_exitcode(status) if not killed else -9
    return Outcome(code, text, time.monotonic() - t0, killed)


def check_case(case: Case, runner=run_inprocess) -> Outcome:
    """Run ``case`` in a fresh folder and assert the properties; count the outcome."""
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        args = _materialise(case, root)
        before = _snapshot(root)
        o = runner(args)
        OUTCOMES["timeout" if o.killed else f"exit {o.code}"] += 1
        assert not o.killed, f"{args}: over {CASE_SECONDS} s"
        assert o.code in (0, 1, 2), f"{args}: exit {o.code}\n{o.stderr}"
        assert "Traceback" not in o.stderr and "Warning" not in o.stderr, o.stderr
        assert _snapshot(root) == before, "an input file changed"
        if o.code == 2:
            first = o.stderr.strip().splitlines()[0] if o.stderr.strip() else ""
            # "snugboard: FILE[:LINE]: ...": the file is one of the inputs, or a path one of them names
            assert re.match(r"snugboard: [^:\s][^:]*(:\d+)?: \S", first), o.stderr
            assert not (root / "proj" / "out").exists(), "bad input, yet something was written"
        return o


def report(title: str) -> str:
    n = sum(OUTCOMES.values())
    return f"{title}: {n} inputs; " + ", ".join(f"{k}: {v}" for k, v in sorted(OUTCOMES.items()))


def warm() -> None:
    """Import every module the command loads lazily, so that forked children start warm."""
    with tempfile.TemporaryDirectory() as tmp:
        p = Path(tmp)
        (p / "project.toml").write_bytes(b'[project]\ndesign = "design.toml"\n')
        (p / "design.toml").write_text('[design]\nname = "w"\n[parts.P1]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n'
                                       '[parts.P2]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n[nets]\nA = ["P1.1", "P2.1"]\n')
        run_inprocess(["run", str(p), "--out", str(p / "out")])


def long_run(cases, title: str) -> None:
    """The long campaign of the fuzz group: ``SNUGBOARD_FUZZ_EXAMPLES`` (2000) cases of the strategy
    ``cases``, each through the real command in a forked child; prints the counts by outcome."""
    n = int(os.environ.get("SNUGBOARD_FUZZ_EXAMPLES", "2000"))
    OUTCOMES.clear()

    @settings(max_examples=n, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(cases)
    def run(case):
        check_case(case, run_forked)

    warm()
    try:
        run()
    finally:
        print("\n" + report(title))
