"""All-or-nothing outputs (issue 13 items 15 to 18): one-step swap, manifest, leftovers, inputs sacred."""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.errors import OutputError
from pipeline.export import atomic
from pipeline.export.atomic import MANIFEST, write_all

OLD = {"a.txt": b"old a", "b.txt": b"old b", "c.txt": b"old c"}
NEW = {"a.txt": b"new a", "d.txt": b"new d"}


def _set(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir()}


def _complete(folder: Path, files: dict[str, bytes]) -> bool:
    """The folder is exactly ``files`` plus a manifest that lists them with their SHA-256 (FIPS 180-4,
    computed here with hashlib, independently of the writer)."""
    got = _set(folder)
    doc = json.loads(got.pop(MANIFEST))
    listed = {f["name"]: f["sha256"] for f in doc["files"]}
    return got == files and listed == {n: hashlib.sha256(b).hexdigest() for n, b in files.items()}


def _dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def _beside(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name != out.name)


def test_write_then_replace_leaves_exactly_the_new_set(tmp_path):
    out = tmp_path / "out"
    write_all(out, OLD)
    assert _complete(out, OLD)
    write_all(out, NEW)
    assert _complete(out, NEW)
    assert _beside(out) == []


def test_defect_16_fewer_files_leave_no_stale_file_of_the_last_run(tmp_path):
    out = tmp_path / "out"
    write_all(out, {**NEW, "fit.json": b"{}", "fit.svg": b"<svg/>", "board-outline.dxf": b"0"})
    write_all(out, NEW)
    assert sorted(_set(out)) == ["a.txt", "d.txt", MANIFEST]


def test_manifest_bytes_are_deterministic_and_name_sorted():
    a = atomic.manifest_bytes({"b": b"1", "a": b"2"})
    assert a == atomic.manifest_bytes({"a": b"2", "b": b"1"})
    names = [f["name"] for f in json.loads(a)["files"]]
    assert names == ["a", "b"]
    # FIPS 180-2 appendix B.1: SHA-256("abc")
    assert json.loads(atomic.manifest_bytes({"x": b"abc"}))["files"][0]["sha256"] == \
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


@pytest.fixture
def ctrl_c():
    """Ctrl-C's own handler during the test, whatever the test run inherited (a shell starts a
    background job with SIGINT ignored, and then no KeyboardInterrupt could come)."""
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    yield
    signal.signal(signal.SIGINT, previous)


def _raise_interrupt():
    raise KeyboardInterrupt


def _send_sigint():
    os.kill(os.getpid(), signal.SIGINT)  # a real Ctrl-C: held back, acted on before the next file


@pytest.mark.parametrize("interrupt", [_raise_interrupt, _send_sigint])
@pytest.mark.parametrize("at", range(4))
def test_defect_15_interrupt_while_writing_keeps_old_set_and_leaves_nothing(tmp_path, monkeypatch, ctrl_c,
                                                                           interrupt, at):
    out = tmp_path / "out"
    write_all(out, OLD)
    calls = {"n": 0}
    real_write = os.write

    def write(fd, data):
        if calls["n"] == at:
            interrupt()
        calls["n"] += 1
        return real_write(fd, data)

    monkeypatch.setattr(atomic.os, "write", write)
    with pytest.raises(KeyboardInterrupt):
        write_all(out, {**NEW, "e.txt": b"e", "f.txt": b"f"})
    assert _complete(out, OLD)
    assert _beside(out) == []


def test_defect_15_sigint_during_the_swap_is_held_until_the_new_set_is_in(tmp_path, monkeypatch, ctrl_c):
    out = tmp_path / "out"
    write_all(out, OLD)
    real = atomic._exchange

    def exchange(a, b):
        os.kill(os.getpid(), signal.SIGINT)  # arrives in the middle of the swap
        return real(a, b)

    monkeypatch.setattr(atomic, "_exchange", exchange)
    with pytest.raises(KeyboardInterrupt):
        write_all(out, NEW)
    assert _complete(out, NEW)  # delivered after the swap: the set is whole
    assert _beside(out) == []


def test_defect_15_fallback_swap_without_renameat2(tmp_path, monkeypatch):
    monkeypatch.setattr(atomic, "_exchange", lambda a, b: False)
    out = tmp_path / "out"
    write_all(out, OLD)
    write_all(out, NEW)
    assert _complete(out, NEW) and _beside(out) == []


def test_defect_15_fallback_swap_failure_puts_old_set_back(tmp_path, monkeypatch):
    monkeypatch.setattr(atomic, "_exchange", lambda a, b: False)
    out = tmp_path / "out"
    write_all(out, OLD)
    real = os.rename

    def rename(a, b):
        if ".snugboard-new-" in str(a):
            raise OSError(28, "No space left on device")
        return real(a, b)

    monkeypatch.setattr(atomic.os, "rename", rename)
    with pytest.raises(OutputError, match="No space left"):
        write_all(out, NEW)
    assert _complete(out, OLD) and _beside(out) == []


def test_defect_15_leftovers_of_a_killed_run_are_cleaned_at_the_next_run(tmp_path):
    out = tmp_path / "out"
    write_all(out, OLD)
    dead = _dead_pid()
    junk = tmp_path / f".out.snugboard-new-{dead}-abc123"
    junk.mkdir()
    (junk / "a.txt").write_bytes(b"half")
    alive = tmp_path / f".out.snugboard-new-{os.getppid()}-zzz"  # a run still going: not touched
    alive.mkdir()
    other = tmp_path / f".other.snugboard-new-{dead}-abc123"  # another output folder's: not touched
    other.mkdir()
    write_all(out, NEW)
    assert _complete(out, NEW)
    assert _beside(out) == sorted([alive.name, other.name])


def test_defect_15_old_set_caught_between_two_renames_is_put_back(tmp_path):
    out = tmp_path / "out"
    write_all(out, OLD)
    old = tmp_path / f".out.snugboard-old-{_dead_pid()}-abc123"
    os.rename(out, old)  # what a SIGKILL between the fallback's two renames leaves
    with pytest.raises(OutputError):  # a refused run still restores the old set first
        write_all(out, {"manifest.json": b"x"})
    assert _complete(out, OLD)


def test_output_names_must_be_plain(tmp_path):
    for bad in ("../x", "a/b", "", MANIFEST):
        with pytest.raises(OutputError, match="plain file names"):
            write_all(tmp_path / "out", {bad: b"1"})
    assert not (tmp_path / "out").exists()


def test_defect_17_folder_holding_an_input_is_refused(tmp_path):
    out = tmp_path / "out"
    (tmp_path / "sub").mkdir()
    inc = tmp_path / "sub" / "models.inc"
    inc.write_text("* included\n")
    for folder in (tmp_path, tmp_path / "sub"):
        with pytest.raises(OutputError, match="holds your input models.inc"):
            write_all(folder, NEW, protect=[inc])
    assert inc.read_text() == "* included\n"
    assert not out.exists() and sorted(p.name for p in (tmp_path / "sub").iterdir()) == ["models.inc"]


def test_defect_17_folder_with_files_not_from_a_run_is_refused_not_emptied(tmp_path):
    out = tmp_path / "out"
    write_all(out, OLD)
    (out / "notes.txt").write_text("mine")
    with pytest.raises(OutputError, match="notes.txt: is not a file of an earlier snugboard run"):
        write_all(out, NEW)
    assert (out / "notes.txt").read_text() == "mine" and (out / "a.txt").read_bytes() == b"old a"


def test_folder_from_before_manifests_is_adopted_when_it_holds_only_output_names(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "a.txt").write_bytes(b"legacy")
    (out / ".snugboard-x1y2").mkdir()  # a temporary folder the old writer left inside
    write_all(out, NEW)
    assert _complete(out, NEW)


def test_defect_18_symlink_out_folder_is_refused_and_not_written_into(tmp_path):
    system = tmp_path / "etc"
    system.mkdir()
    (system / "passwd").write_text("root:x:0:0\n")
    link = tmp_path / "out"
    link.symlink_to(system)
    with pytest.raises(OutputError, match="symbolic link"):
        write_all(link, NEW)
    assert sorted(p.name for p in system.iterdir()) == ["passwd"]
    empty = tmp_path / "empty"
    empty.mkdir()
    link2 = tmp_path / "out2"
    link2.symlink_to(empty)
    with pytest.raises(OutputError, match="symbolic link"):
        write_all(link2, NEW)
    assert list(empty.iterdir()) == []


def test_working_folder_is_refused(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for folder in (".", str(tmp_path), str(tmp_path.parent)):
        with pytest.raises(OutputError, match="working folder"):
            write_all(folder, NEW)
    assert list(tmp_path.iterdir()) == []


def test_new_folder_takes_the_old_folders_permissions(tmp_path):
    out = tmp_path / "out"
    write_all(out, OLD)
    os.chmod(out, 0o750)
    write_all(out, NEW)
    assert (out.stat().st_mode & 0o777) == 0o750


# --------------------------------------------------------------------------
# through the command
DESIGN = """[design]
name = "pads"
[parts.P1]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.R1]
kind = "resistor"
value = "1k"
package = "0603"
[parts.P2]
kind = "wire-pad"
package = "pad-1.5mm"
[nets]
A = ["P1.1", "R1.1"]
B = ["P2.1", "R1.2"]
"""


def _proj(tmp_path: Path) -> Path:
    d = tmp_path / "proj"
    d.mkdir()
    (d / "design.toml").write_text(DESIGN)
    (d / "project.toml").write_text('[project]\ndesign = "design.toml"\n')
    return d


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_defect_17_out_equal_to_project_folder_refused_exit_2(tmp_path):
    proj = _proj(tmp_path)
    before = _snapshot(tmp_path)
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(proj)])
    assert r.exit_code == 2
    assert "holds your input" in r.stderr and "choose another --out folder" in r.stderr
    assert _snapshot(tmp_path) == before and sorted(os.listdir(tmp_path)) == ["proj"]


def test_defect_17_out_holding_a_spice_include_refused(tmp_path):
    """A SPICE design whose .include lies in the chosen --out folder: never written over."""
    proj = tmp_path / "proj"
    lib = tmp_path / "lib"
    proj.mkdir()
    lib.mkdir()
    (lib / "pads.inc").write_text("R1 a b 1k\n")
    (proj / "d.cir").write_text("pads\n.include ../lib/pads.inc\nV1 a 0 1\nR2 b 0 1k\n.end\n")
    (proj / "project.toml").write_text('[project]\ndesign = "d.cir"\n')
    before = _snapshot(tmp_path)
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(lib)])
    assert r.exit_code == 2, r.output
    assert "pads.inc" in r.stderr
    assert _snapshot(tmp_path) == before


def test_defect_18_out_symlink_to_system_folder_refused_exit_2(tmp_path):
    proj = _proj(tmp_path)
    system = tmp_path / "sys"
    system.mkdir()
    (system / "hosts").write_text("127.0.0.1 localhost\n")
    (tmp_path / "link").symlink_to(system)
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(tmp_path / "link")])
    assert r.exit_code == 2 and "symbolic link" in r.stderr
    assert sorted(os.listdir(system)) == ["hosts"]


def test_defect_16_run_without_cavity_after_one_with_leaves_no_fit_files(tmp_path):
    import ezdxf

    proj = _proj(tmp_path)
    doc = ezdxf.new("R2010", units=ezdxf.units.MM)
    doc.modelspace().add_lwpolyline([(0, 0), (40, 0), (40, 30), (0, 30)], close=True,
                                    dxfattribs={"layer": "CAVITY"})
    doc.saveas(tmp_path / "bay.dxf")
    r = CliRunner().invoke(main, ["run", str(proj), "--cavity", str(tmp_path / "bay.dxf")])
    assert r.exit_code in (0, 1), r.output
    assert (proj / "out" / "fit.json").exists()
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code in (0, 1), r.output
    names = set(os.listdir(proj / "out"))
    assert not names & {"fit.json", "fit.svg", "board-outline.dxf"}
    listed = {f["name"] for f in json.loads((proj / "out" / MANIFEST).read_text())["files"]}
    assert names == listed | {MANIFEST}


class _Handled(Exception):
    pass


def _raising_handler(signum, frame):
    raise _Handled(signum)


@pytest.mark.parametrize("handler, expected", [
    (_raising_handler, _Handled),              # the user's Python handler runs before write_all returns
    (signal.SIG_IGN, OutputError),             # an ignored signal stays ignored: the old set stays, said so
])
def test_defect_15_a_held_signal_goes_to_the_handler_that_was_there(tmp_path, monkeypatch, handler, expected):
    out = tmp_path / "out"
    write_all(out, OLD)
    real_write = os.write

    def write(fd, data):
        os.kill(os.getpid(), signal.SIGTERM)
        return real_write(fd, data)

    previous = signal.signal(signal.SIGTERM, handler)
    try:
        monkeypatch.setattr(atomic.os, "write", write)
        with pytest.raises(expected):
            write_all(out, NEW)
    finally:
        signal.signal(signal.SIGTERM, previous)
    assert _complete(out, OLD)
    assert _beside(out) == []
