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

from pipeline.errors import CavityError
from pipeline.model import Finding

from .limits import Limits

__all__ = ["load_dxf", "LoaderLog", "short"]


def load_dxf(path: Path, name: str, findings: list[Finding], limits: Limits):
    """The ezdxf document of ``path``, refusing what is not a readable DXF file.

    Repairs made by the loader are added to ``findings`` as warnings.
    """
    import ezdxf
    from ezdxf import recover
    from ezdxf.lldxf.validator import dwg_version, is_binary_dxf_file, is_dxf_file

    if not path.exists():
        raise CavityError(name, "file not found")
    if not path.is_file():
        raise CavityError(name, "is not a file")
    size = path.stat().st_size
    if size > limits.dxf_bytes:
        raise CavityError(name, f"the file is {size / 2**20:.0f} MiB, more than the "
                          f"{limits.dxf_bytes // 2**20} MiB snugboard reads: save a drawing with only "
                          "the cavity layers")
    try:
        fs = os.fspath(path)
        if dwg_version(fs) is not None:
            raise CavityError(name, "is a DWG drawing, not DXF: save or export it as DXF")
        looks_dxf = is_binary_dxf_file(fs) or is_dxf_file(fs)
    except OSError as exc:
        raise CavityError(name, f"cannot be read: {exc.strerror or exc}") from None
    if size == 0:
        raise CavityError(name, "is empty: not a DXF drawing")
    if not looks_dxf:
        # ezdxf's own test: the file must start with a DXF tag pair; a
        # damaged start still gets a chance with the recovering loader.
        try:
            head = path.read_bytes()[:4096].decode("latin-1")
        except OSError as exc:
            raise CavityError(name, f"cannot be read: {exc}") from None
        if not re.search(r"^\s*0\s*\r?\n\s*SECTION\s*$", head, flags=re.MULTILINE):
            raise CavityError(name, "is not a DXF drawing (no DXF SECTION near its start)")
    try:
        doc = ezdxf.readfile(fs)
        auditor = doc.audit()
        strict_failure = None
    except Exception as exc:  # any structure problem: try the recovering loader
        strict_failure = f"{type(exc).__name__}: {exc}"
        try:
            doc, auditor = recover.readfile(fs)
        except Exception as exc2:
            raise CavityError(name, "is damaged beyond what the recovering loader can repair "
                              f"({type(exc2).__name__}: {short(str(exc2))})") from None
    if strict_failure is not None:
        findings.append(Finding(
            "warning", "cavity.repaired", (name,),
            f"The drawing is damaged ({short(strict_failure)}); it was read with the recovering "
            "loader: check the cavity in fit.svg and re-save the drawing from its CAD program."))
    groups: dict[str, list[str]] = {}
    for entry in list(auditor.fixes) + list(auditor.errors):
        code = getattr(getattr(entry, "code", None), "name", str(getattr(entry, "code", "")))
        groups.setdefault(code, []).append(str(getattr(entry, "message", entry)))
    for code in sorted(groups):
        msgs = groups[code]
        findings.append(Finding(
            "warning", "cavity.repaired", (name, code),
            f"The DXF loader repaired {len(msgs)} problem(s) of kind {code} in the drawing "
            f"(first: {short(msgs[0])}); check the cavity in fit.svg."))
    return doc


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
    text = " ".join(str(text).split())
    return text if len(text) <= n else text[: n - 3] + "..."
