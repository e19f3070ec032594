"""Loading a DXF file: refusing what is not one, and recovering damaged ones.

The file is loaded strictly (``ezdxf.readfile``) and audited; if that fails
on the file's structure, the recovering loader (``ezdxf.recover.readfile``)
is used. Every repair becomes a ``cavity.repaired`` warning. ezdxf's log
records are collected while reading (:class:`LoaderLog`) so that nothing
reaches stderr.
"""

from __future__ import annotations

import logging
import os
import re
from pathlib import Path

from typing import Any

from pipeline.dxflib import import_ezdxf
from pipeline.errors import CavityError
from pipeline.model import Finding

from .limits import Limits
from .prescan import Prescan, prescan

__all__ = ["load_dxf", "LoaderLog", "short", "printable"]


def load_dxf(path: Path, name: str, findings: list[Finding], limits: Limits) -> tuple[Any, Prescan | None]:
    """The ezdxf document of ``path`` and what the pre-scan saw, refusing what is not a readable DXF file.

    The file's size and (for ASCII DXF) its entity count are checked before
    ezdxf builds the document (:mod:`pipeline.cavity.prescan`). Repairs made
    by the loader are added to ``findings`` as warnings.
    """
    import_ezdxf()
    from ezdxf.lldxf.validator import dwg_version, is_binary_dxf_file, is_dxf_file

    data = _read_bytes(path, name, limits)
    fs = os.fspath(path)
    try:
        if dwg_version(fs) is not None:
            raise CavityError(name, "is a DWG drawing, not DXF: save or export it as DXF")
        looks_dxf = is_binary_dxf_file(fs) or is_dxf_file(fs)
    except OSError as exc:
        raise CavityError(name, f"cannot be read: {exc.strerror or exc}") from None
    if not data:
        raise CavityError(name, "is empty: not a DXF drawing")
    if not looks_dxf:
        # ezdxf's own test: the file must start with a DXF tag pair; a
        # damaged start still gets a chance with the recovering loader.
        head = data[:4096].decode("latin-1")
        if not re.search(r"^\s*0\s*\r?\n\s*SECTION\s*$", head, flags=re.MULTILINE):
            raise CavityError(name, "is not a DXF drawing (no DXF SECTION near its start)")
    scan = prescan(data, name, limits)
    del data
    doc, auditor, strict_failure = _strict_or_recovered(fs, name)
    if strict_failure is not None:
        findings.append(Finding(
            "warning", "cavity.repaired", (name,),
            f"The drawing is damaged ({short(strict_failure)}); it was read with the recovering "
            "loader: check the cavity in fit.svg and re-save the drawing from its CAD program."))
    findings += _repair_findings(auditor, name)
    return doc, scan


def _read_bytes(path: Path, name: str, limits: Limits) -> bytes:
    """The file's bytes, after checking it is a file within ``limits.dxf_bytes``."""
    try:
        if not path.exists():
            raise CavityError(name, "file not found")
        if not path.is_file():
            raise CavityError(name, "is not a file")
        size = path.stat().st_size
        if size > limits.dxf_bytes:
            raise CavityError(name, f"the file is {size / 2**20:.0f} MiB, more than the "
                              f"{limits.dxf_bytes // 2**20} MiB snugboard reads: save a drawing with "
                              f"only the cavity layers; {Limits.how_to_raise('dxf_bytes')}")
        return path.read_bytes()
    except (OSError, ValueError) as exc:  # a name too long, a NUL byte, no permission
        raise CavityError(name, f"cannot be read: {getattr(exc, 'strerror', None) or exc}") from None


def _strict_or_recovered(fs: str, name: str):
    """(document, auditor, strict loader's failure or None): strict loading first, then recovery."""
    ezdxf = import_ezdxf()
    from ezdxf import recover

    try:
        doc = ezdxf.readfile(fs)
        return doc, doc.audit(), None
    except Exception as exc:  # any structure problem: try the recovering loader
        strict_failure = f"{type(exc).__name__}: {exc}"
    try:
        doc, auditor = recover.readfile(fs)
    except Exception as exc2:
        raise CavityError(name, "is damaged beyond what the recovering loader can repair "
                          f"({type(exc2).__name__}: {short(str(exc2))})") from None
    return doc, auditor, strict_failure


def _repair_findings(auditor, name: str) -> list[Finding]:
    """One warning per kind of repair the auditor made."""
    groups: dict[str, list[str]] = {}
    for entry in list(auditor.fixes) + list(auditor.errors):
        code = getattr(getattr(entry, "code", None), "name", str(getattr(entry, "code", "")))
        groups.setdefault(printable(code), []).append(str(getattr(entry, "message", entry)))
    return [Finding(
        "warning", "cavity.repaired", (name, code),
        f"The DXF loader repaired {len(msgs)} problem(s) of kind {code} in the drawing "
        f"(first: {short(msgs[0])}); check the cavity in fit.svg.") for code, msgs in sorted(groups.items())]


def printable(text: str) -> str:
    """``text`` from a drawing made safe to print and to write as UTF-8.

    A damaged file's bytes that are not UTF-8 reach Python as lone
    surrogates (ezdxf's recovering loader decodes with ``surrogateescape``):
    each is shown as the byte it stands for, ``\\xNN``. Control characters
    are shown the same way, so a name can neither fail an output's encoding
    nor move the terminal's cursor.

    Examples
    --------
    >>> printable("KEEP\\udcff\\x1b[2J")
    'KEEP\\\\xff\\\\x1b[2J'
    """
    out = []
    for ch in str(text):
        o = ord(ch)
        if 0xDC80 <= o <= 0xDCFF:
            out.append(f"\\x{o - 0xDC00:02x}")
        elif 0xD800 <= o <= 0xDFFF:
            out.append(f"\\u{o:04x}")
        elif o < 0x20 or 0x7F <= o < 0xA0:
            out.append(f"\\x{o:02x}")
        else:
            out.append(ch)
    return "".join(out)


class LoaderLog(logging.Handler):
    """Collects ezdxf's log records while reading, so nothing reaches stderr."""

    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        try:
            self.messages.append(record.getMessage())
        except Exception:
            self.messages.append(str(record.msg))

    def __enter__(self) -> "LoaderLog":
        self._logger = logging.getLogger("ezdxf")
        self._propagate = self._logger.propagate
        self._logger.addHandler(self)
        self._logger.propagate = False
        return self

    def __exit__(self, *exc) -> None:
        self._logger.removeHandler(self)
        self._logger.propagate = self._propagate


def short(text: str, n: int = 160) -> str:
    """``text`` on one line, printable, at most ``n`` characters."""
    text = printable(" ".join(str(text).split()))
    return text if len(text) <= n else text[: n - 3] + "..."
