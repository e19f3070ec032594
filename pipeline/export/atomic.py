"""Write a set of output files completely or not at all.

Writers elsewhere in :mod:`pipeline.export` are pure functions returning
``bytes``; this module is the only one that touches the output folder.

The output folder is one set: the files of one run and :data:`MANIFEST`,
which lists exactly those files with their sizes and SHA-256 digests. A run
never edits the folder file by file. It writes the new set into a fresh
hidden folder beside it (``.NAME.snugboard-new-PID-XXXX``), then makes it
visible in one step: the two folders trade places with ``renameat2(...,
RENAME_EXCHANGE)`` (Linux 3.15+), or, where the system has no such call, by
two renames with the old set kept until the new one is in place. Only then
is the old set deleted. So at any moment the folder holds the complete old
set or the complete new one, and no file of an earlier run stays beside the
new set. Interrupt signals (SIGINT, SIGTERM, SIGHUP, SIGQUIT) are held back
while the set is written and swapped; one that arrives is acted on between
files or just before the swap, by deleting the new set and keeping the old,
and is then delivered as usual. A run killed
outright (SIGKILL, power loss) may leave its hidden folder behind: the next
run deletes it (or puts an old set back if it was caught between the two
renames of the fallback).

Because the whole folder is replaced, it must be the run's own:

* it is not a symbolic link, not the root folder and not the working folder
  or one above it;
* none of the user's inputs (every file a reader opened) lies inside it;
* every entry in it is a plain file of the last set (named in its manifest;
  for a folder written before manifests existed, a name the new set
  writes). A folder holding anything else (a user's own file, a sub-folder)
  is refused, never emptied.

Refusals raise :class:`~pipeline.errors.OutputError` before anything is
written. Cost: one write and ``fsync`` per file, a handful of renames.
"""

from __future__ import annotations

import ctypes
import errno
import hashlib
import json
import os
import re
import shutil
import signal
import stat
import tempfile
import threading
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping

from ..errors import OutputError

__all__ = ["write_all", "MANIFEST"]

#: the file in every output set that lists the set's files (name, bytes, sha256)
MANIFEST = "manifest.json"
#: signals held back while the new set is swapped in
_HELD = (signal.SIGINT, signal.SIGTERM, signal.SIGHUP, signal.SIGQUIT)
_RENAME_EXCHANGE = 2  # linux/fs.h
_AT_FDCWD = -100
#: the hidden temporary folders of a run: .NAME.snugboard-new-PID-XXXX (old: -old-)
_TEMP_RE = re.compile(r"^\.(?P<name>.+)\.snugboard-(?P<what>new|old)-(?P<pid>\d+)-[A-Za-z0-9_]+$")
#: temporary folders that versions before the manifest left inside the output folder
_OLD_TEMP_RE = re.compile(r"^\.snugboard-[A-Za-z0-9_]+$")


def write_all(
    out_dir: str | os.PathLike,
    files: Mapping[str, bytes],
    *,
    protect: Iterable[str | os.PathLike] = (),
    manifest: bool = True,
) -> list[Path]:
    """Replace the output folder ``out_dir`` with the set ``files`` in one step.

    Parameters
    ----------
    out_dir : path
        The output folder (created if missing, parents too). Not resolved:
        a symbolic link here is refused, not followed.
    files : mapping of str to bytes
        Plain file names (no folders) and their complete contents.
    protect : iterable of paths
        The user's input files; a folder holding any of them is refused.
    manifest : bool
        Write the manifest beside the files (``False`` for a folder that is
        not an output set, such as a starter project).

    Returns
    -------
    list of Path
        The written paths, in name order, the manifest included.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> [p.name for p in write_all(d / "out", {"b.txt": b"2", "a.txt": b"1"})]
    ['a.txt', 'b.txt', 'manifest.json']
    >>> [p.name for p in write_all(d / "out", {"c.txt": b"3"})]   # nothing of the last set stays
    ['c.txt', 'manifest.json']
    >>> sorted(p.name for p in d.iterdir())
    ['out']
    """
    out = Path(os.path.abspath(out_dir))
    names = sorted(files)
    _clean_leftovers(out)
    _check_names(out, names)
    _check_folder(out, protect)
    _check_owned(out, set(names))
    with _signals_held() as stop:  # an interrupt is acted on only between steps
        swapped = _write_and_swap(out, files, names, manifest, stop)
    if not swapped:  # stopped by a signal whose handler did not end the program
        raise OutputError(str(out), "stopped before the new files were in place; the previous files are unchanged")
    return [out / n for n in sorted([*names, *([MANIFEST] if manifest else [])])]


def manifest_bytes(files: Mapping[str, bytes]) -> bytes:
    """The manifest of ``files``: each name with its size and SHA-256 (FIPS 180-4), sorted by name.

    >>> manifest_bytes({"a.txt": b"abc"}).decode().count("ba7816bf")   # FIPS 180-2 example B.1
    1
    """
    listing = [{"name": n, "bytes": len(files[n]), "sha256": hashlib.sha256(files[n]).hexdigest()}
               for n in sorted(files)]
    doc = {"about": "The files of one snugboard run, written together. A file not listed here is not "
                    "from this run.", "files": listing}
    return (json.dumps(doc, indent=2) + "\n").encode("utf-8")


def _check_names(out: Path, names: list[str]) -> None:
    for name in names:
        if Path(name).name != name or name in ("", ".", "..", MANIFEST) or "\x00" in name:
            raise OutputError(str(out / name), "output names must be plain file names")


def _check_folder(out: Path, protect: Iterable[str | os.PathLike]) -> None:
    """Refuse an output folder that the swap must not replace (see module docstring)."""
    if out.parent == out:
        raise OutputError(str(out), "the root folder cannot be an output folder; choose a folder of its own")
    if out.is_symlink():
        raise OutputError(str(out), "is a symbolic link; outputs are written only into a real folder, "
                                    "so give the folder itself (a new or empty one, or an earlier output folder)")
    if out.exists() and not out.is_dir():
        raise OutputError(str(out), "output path exists and is not a folder")
    real = out.resolve()
    cwd = Path.cwd().resolve()
    if real == cwd or real in cwd.parents:
        raise OutputError(str(out), "is the working folder (or holds it); the output folder is replaced "
                                    "as a whole, so give a folder of its own such as out/")
    for p in protect:
        pr = Path(p).resolve()
        if pr == real or real in pr.parents:
            raise OutputError(str(out), f"holds your input {pr.name} ({pr}); the output folder is replaced as a "
                                        "whole and would overwrite your input files: choose another --out folder")


def _check_owned(out: Path, names: set[str]) -> None:
    """Refuse a folder holding anything but the files of an earlier set."""
    try:
        entries = sorted(os.listdir(out))
    except FileNotFoundError:
        return
    except OSError as exc:
        raise OutputError(str(out), f"cannot read the output folder ({exc.strerror})") from None
    listed = _listed(out)
    allowed = (listed | {MANIFEST}) if listed is not None else names
    for e in entries:
        st = os.lstat(out / e)
        if stat.S_ISDIR(st.st_mode) and _OLD_TEMP_RE.match(e):
            continue  # left by an older version inside the folder: goes with the old set
        if e not in allowed or not stat.S_ISREG(st.st_mode):
            raise OutputError(str(out / e), "is not a file of an earlier snugboard run; the output folder is "
                                            "replaced as a whole, so move it away or choose another --out folder")


def _listed(out: Path) -> set[str] | None:
    """The names in the folder's manifest, or ``None`` without a readable one."""
    try:
        doc = json.loads((out / MANIFEST).read_bytes())
        return {str(f["name"]) for f in doc["files"]}
    except (OSError, ValueError, TypeError, KeyError):
        return None


def _tag(out: Path) -> str:
    """The output folder's name as its temporary folders carry it (cut short to keep names legal)."""
    return out.name[:64]


def _alive(pid: int) -> bool:
    """Whether the run that made a temporary folder may still be going (our own pid: an earlier process's)."""
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError):
        return True
    return True


def _clean_leftovers(out: Path) -> None:
    """Delete the hidden folders of killed runs beside ``out``; put back an old set caught mid-swap."""
    try:
        entries = sorted(os.listdir(out.parent))
    except OSError:
        return
    for e in entries:
        m = _TEMP_RE.match(e)
        if not m or m["name"] != _tag(out) or _alive(int(m["pid"])):
            continue
        path = out.parent / e
        if m["what"] == "old" and not os.path.lexists(out):
            try:
                os.rename(path, out)  # killed between the two renames of the fallback swap
                continue
            except OSError:
                pass
        shutil.rmtree(path, ignore_errors=True)


def _mode(out: Path) -> int:
    """Permission bits for the new folder: the old folder's, else what the umask allows."""
    try:
        return stat.S_IMODE(os.stat(out).st_mode)
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o777 & ~mask


def _fill(stage: Path, files: Mapping[str, bytes], names: list[str], mode: int, manifest: bool,
          stop: list[int]) -> None:
    """Write every file, the manifest last (when asked), each flushed to disk; stop early on an interrupt."""
    last = [(MANIFEST, manifest_bytes(files))] if manifest else []
    for name, data in [*((n, files[n]) for n in names), *last]:
        if stop:
            raise _Stopped
        fd = os.open(stage / name, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW, 0o666)
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
    os.chmod(stage, mode)


@contextmanager
def _signals_held() -> Iterator[list[int]]:
    """Hold back interrupt signals; yields the list they are recorded in; the first is delivered at the end.

    A Python-level handler records the signal instead of blocking it with a
    signal mask: a mask covers only the calling thread, and a process-wide
    signal taken by another thread would still interrupt the swap. Outside
    the main thread (where handlers cannot be set) the block runs as is.
    """
    got: list[int] = []
    if threading.current_thread() is not threading.main_thread():
        yield got
        return
    old = {s: signal.signal(s, lambda n, _frame: got.append(n)) for s in _HELD}
    try:
        yield got
    finally:
        for s, handler in old.items():
            signal.signal(s, handler if handler is not None else signal.SIG_DFL)
        if got:
            _deliver(got[0], old[got[0]])


def _deliver(signum: int, handler: Any) -> None:
    """Act on a held-back signal now: a Python handler is called here (Ctrl-C's raises KeyboardInterrupt
    before the caller's next line), a default action is raised, an ignored signal stays ignored.

    Raising a signal with a Python handler only marks it for the interpreter's next check, which
    may come after the caller has already gone on; calling the handler makes the order certain.
    """
    if callable(handler):
        handler(signum, None)
    elif handler != signal.SIG_IGN:
        signal.raise_signal(signum)


class _Stopped(Exception):
    """An interrupt arrived before the swap: the new set is dropped, the old one stays."""


def _write_and_swap(out: Path, files: Mapping[str, bytes], names: list[str], manifest: bool,
                    stop: list[int]) -> bool:
    """Write the new set beside ``out`` and swap it in, with interrupt signals held.

    ``stop`` records the interrupts that came (:func:`_signals_held`); it is
    checked between files and just before the swap: if
    one came, the new set is deleted and nothing else changes; the signal is
    delivered when the caller's block ends (so Ctrl-C still stops the run).
    Returns whether the new set was swapped in.
    """
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        stage = Path(tempfile.mkdtemp(prefix=f".{_tag(out)}.snugboard-new-{os.getpid()}-", dir=out.parent))
    except OSError as exc:
        raise OutputError(str(out), f"cannot create the output folder ({exc.strerror or exc})") from None
    old = None
    try:
        _fill(stage, files, names, _mode(out), manifest, stop)
        if stop:
            raise _Stopped
        old = _swap_in(stage, out)
    except _Stopped:
        return False
    except OSError as exc:
        raise OutputError(str(out), f"cannot write outputs ({exc.strerror or exc})") from None
    finally:
        shutil.rmtree(stage, ignore_errors=True)  # not swapped in, or holding the old set after the swap
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return True


def _swap_in(stage: Path, out: Path) -> Path | None:
    """Make ``stage`` the folder ``out`` in one step; return where the old set now is (or ``None``)."""
    if not os.path.lexists(out):
        os.rename(stage, out)
        return None
    if _exchange(stage, out):
        return stage
    old = out.parent / stage.name.replace("-new-", "-old-", 1)
    os.rename(out, old)
    try:
        os.rename(stage, out)
    except OSError:
        os.rename(old, out)
        raise
    return old


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths atomically with Linux ``renameat2``; ``False`` where the system cannot."""
    try:
        fn = ctypes.CDLL(None, use_errno=True).renameat2
    except (AttributeError, OSError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(err, os.strerror(err), str(b))
