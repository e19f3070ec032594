"""Write a set of output files completely or not at all.

Writers elsewhere in :mod:`pipeline.export` are pure functions returning
``bytes``; this module is the only one that touches the output folder.
All files are first written into a temporary folder beside the target, then
moved into place one by one with :func:`os.replace` (atomic per file on
POSIX). If anything fails before the moves, nothing in the output folder has
changed. A target that is one of the user's inputs is refused.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path
from typing import Iterable, Mapping

from ..errors import OutputError

__all__ = ["write_all"]


def write_all(
    out_dir: str | os.PathLike,
    files: Mapping[str, bytes],
    *,
    protect: Iterable[str | os.PathLike] = (),
) -> list[Path]:
    """Write ``files`` (name -> content) into ``out_dir`` all together.

    Parameters
    ----------
    out_dir : path
        Created if missing.
    files : mapping of str to bytes
        Plain file names (no folders) and their complete contents.
    protect : iterable of paths
        The user's input files; a target resolving to one of them raises
        :class:`~pipeline.errors.OutputError` before anything is written.

    Returns
    -------
    list of Path
        The written paths, in name order.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> [p.name for p in write_all(d / "out", {"b.txt": b"2", "a.txt": b"1"})]
    ['a.txt', 'b.txt']
    """
    out = Path(out_dir)
    protected = {Path(p).resolve() for p in protect}
    names = sorted(files)
    for name in names:
        if Path(name).name != name or name in ("", ".", ".."):
            raise OutputError(str(out / name), "output names must be plain file names")
        if (out / name).resolve() in protected:
            raise OutputError(str(out / name), "would overwrite one of your input files; choose another --out folder")
    if out.exists() and not out.is_dir():
        raise OutputError(str(out), "output path exists and is not a folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=".snugboard-", dir=out))
    except OSError as exc:
        raise OutputError(str(out), f"cannot create the output folder ({exc.strerror})") from None
    try:
        for name in names:
            target = out / name
            if target.is_symlink() or (target.exists() and not target.is_file()):
                raise OutputError(str(target), "is in the way of an output file (not a plain file); remove it")
            (tmp / name).write_bytes(files[name])
        _swap_in(tmp, out, names)
        return [out / name for name in names]
    except OSError as exc:
        raise OutputError(str(out), f"cannot write outputs ({exc.strerror or exc})") from None
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _swap_in(tmp: Path, out: Path, names: list[str]) -> None:
    """Move ``tmp/name`` to ``out/name`` for every name, or change nothing.

    Existing targets are first moved aside into ``tmp/.old``; if any move
    fails, the new files already moved are removed and the old ones put
    back, so the folder is as it was.
    """
    old = tmp / ".old"
    old.mkdir()
    moved_aside: list[str] = []
    moved_in: list[str] = []
    try:
        for name in names:
            if (out / name).exists():
                os.replace(out / name, old / name)
                moved_aside.append(name)
        for name in names:
            os.replace(tmp / name, out / name)
            moved_in.append(name)
    except OSError:
        for name in moved_in:
            try:
                os.remove(out / name)
            except OSError:
                pass
        for name in moved_aside:
            try:
                os.replace(old / name, out / name)
            except OSError:
                pass
        raise
