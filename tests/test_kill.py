"""Kill real runs at many points (issue 13 items 15 and 6 of its brief).

Each case forks a child that runs the real command (``snugboard run``, the
same entry point as the console script, with every module already imported so
that the run itself, not Python's start-up, fills the time), waits a chosen
delay, and sends SIGKILL or SIGINT. The output folder must then be exactly the
complete old set or the complete new set, each checked against its manifest.
A SIGINT leaves nothing behind; what a SIGKILL leaves is cleaned by the next
run. The default run kills a dozen times; ``pytest -m fuzz tests/test_kill.py``
kills ``SNUGBOARD_KILLS`` times (300 unless set) and prints the counts.
"""

from __future__ import annotations

import collections
import hashlib
import json
import os
import random
import shutil
import signal
import time
from pathlib import Path

import pytest

from generated import chain_project
from pipeline.cli import main
from pipeline.export.atomic import MANIFEST

PARTS = 60  # about a second or more of work per run on the development machine


def _child(proj: Path, out: Path) -> int:
    """Fork a child running ``snugboard run PROJ --out OUT``; return its pid."""
    pid = os.fork()
    if pid:
        return pid
    code = 97
    try:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, 1)
        os.dup2(null, 2)
        signal.signal(signal.SIGINT, signal.default_int_handler)
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        main(["run", str(proj), "--out", str(out)], standalone_mode=True)
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else 98
    except BaseException:  # noqa: BLE001 - the child must never return into pytest
        code = 96
    os._exit(code)


def _wait(pid: int) -> int:
    _, status = os.waitpid(pid, 0)
    return os.waitstatus_to_exitcode(status)


def _set(folder: Path) -> dict[str, bytes]:
    if not folder.is_dir():
        return {}
    return {p.name: p.read_bytes() for p in folder.iterdir()}


def _consistent(files: dict[str, bytes]) -> bool:
    """The manifest lists exactly the other files, with their SHA-256 (hashlib, FIPS 180-4)."""
    if MANIFEST not in files:
        return False
    listed = {f["name"]: f["sha256"] for f in json.loads(files[MANIFEST])["files"]}
    rest = {n: hashlib.sha256(b).hexdigest() for n, b in files.items() if n != MANIFEST}
    return listed == rest


def _leftovers(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


def _campaign(tmp_path: Path, kills: int, seed: int) -> collections.Counter:
    old_proj = chain_project(tmp_path / "old", PARTS, "10k")
    new_proj = chain_project(tmp_path / "new", PARTS, "4k7")
    from click.testing import CliRunner

    # one run in this process imports every module the command loads lazily; the children inherit them
    assert CliRunner().invoke(main, ["run", str(old_proj), "--out", str(tmp_path / "warm")]).exit_code == 0
    refs = {}
    for label, proj in (("old", old_proj), ("new", new_proj)):
        t0 = time.monotonic()
        assert _wait(_child(proj, tmp_path / f"ref-{label}")) == 0
        refs[label] = _set(tmp_path / f"ref-{label}")
        span = time.monotonic() - t0
        assert _consistent(refs[label])
    print(f"run takes {span:.2f} s")
    assert refs["old"] != refs["new"]
    out = tmp_path / "work" / "out"
    out.parent.mkdir()
    rng = random.Random(seed)
    counts: collections.Counter = collections.Counter()
    for i in range(kills):
        if _set(out) != refs["old"]:
            shutil.rmtree(out, ignore_errors=True)
            shutil.copytree(tmp_path / "ref-old", out)
        sig = (signal.SIGKILL, signal.SIGINT)[i % 2]
        # a third anywhere in the run, the rest about its end, where the outputs are written
        delay = rng.uniform(0, span) if i % 3 == 0 else rng.uniform(0.8 * span, 1.5 * span)
        pid = _child(new_proj, out)
        time.sleep(delay)
        os.kill(pid, sig)
        code = _wait(pid)
        got = _set(out)
        state = next((k for k, v in refs.items() if got == v), None)
        assert state is not None and _consistent(got), f"kill {i} ({sig.name} at {delay:.2f}s): mixed set {sorted(got)}"
        counts[f"{sig.name} {state}"] += 1
        if (i + 1) % 25 == 0:
            print(f"after {i + 1} kills: {dict(sorted(counts.items()))}", flush=True)
        if sig == signal.SIGINT:
            assert code in (0, 1, 128 + signal.SIGINT), code
            mine = [n for n in _leftovers(out) if f"-{pid}-" in n]  # earlier SIGKILLs' may wait for a run
            assert mine == [], f"kill {i}: SIGINT left {mine}"
        else:
            counts["SIGKILL leftovers"] += bool(_leftovers(out))
    assert _wait(_child(new_proj, out)) == 0  # the next complete run cleans whatever the kills left
    assert _set(out) == refs["new"] and _leftovers(out) == []
    return counts


def test_defect_15_a_dozen_kills_leave_old_or_new_set(tmp_path):
    counts = _campaign(tmp_path, 12, seed=1)
    assert sum(v for k, v in counts.items() if "leftovers" not in k) == 12


@pytest.mark.fuzz
def test_defect_15_hundreds_of_kills_leave_old_or_new_set(tmp_path):
    kills = int(os.environ.get("SNUGBOARD_KILLS", "300"))
    counts = _campaign(tmp_path, kills, seed=int(os.environ.get("SNUGBOARD_SEED", "2")))
    print(f"\nkills: {kills}; outcomes: {dict(sorted(counts.items()))}")
    assert sum(v for k, v in counts.items() if "leftovers" not in k) == kills
