"""Physical lines to logical lines, and ``.include`` / ``.lib`` files spliced in."""

from __future__ import annotations

import json
import posixpath
import re
import stat
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from ..errors import DesignError, limit_hint
from ..model import Finding
from .limits import SpiceLimits

_RECORD_RE = re.compile(r"^\*\s*snugboard:\s*(\w+)\s*(.*)$", re.I)


_KV_RE = re.compile(r'\s*([A-Za-z_][\w]*)=("(?:[^"\\]|\\.)*"|\S*)')


@dataclass(frozen=True)
class Line:
    file: str  # display name
    line: int  # 1-based line the logical line starts on
    text: str  # comments removed, continuations joined


@dataclass
class Reader:
    """Mutable state of one :func:`read_spice` call (never escapes it)."""

    root: Path
    shown: str
    findings: list[Finding] = field(default_factory=list)
    records: list[tuple[str, dict[str, str], str, int]] = field(default_factory=list)
    title: str = ""
    dot_title: str = ""
    limits: SpiceLimits = field(default_factory=SpiceLimits)
    inputs: set[str] = field(default_factory=set)  # resolved paths of every file read
    splices: int = 0
    bytes_read: int = 0

    def note(self, severity: str, check: str, subject: Iterable[str], message: str) -> None:
        self.findings.append(Finding(severity, check, tuple(subject), message))


def read_text(path: Path, shown: str, where: tuple[str, int] | None, rd: Reader) -> str:
    """The text of a SPICE file, refused unless it is a regular file within the size limit.

    The file is checked with ``stat`` before it is opened, so a FIFO or a
    device is refused without blocking; its bytes count towards
    ``rd.limits.file_bytes`` (every splice of a file counts). UTF-8, else
    Latin-1 (older simulators write it; every byte decodes, so nothing is
    lost). The resolved path joins ``rd.inputs``.
    """
    def fail(reason: str) -> DesignError:
        if where is not None:
            return DesignError(where[0], f"{reason}: {shown}", line=where[1])
        return DesignError(shown, reason)

    try:
        info = path.stat()
    except FileNotFoundError:
        raise fail("file not found") from None
    except (OSError, ValueError) as exc:
        raise fail(f"cannot read the file ({getattr(exc, 'strerror', None) or exc})") from None
    if stat.S_ISDIR(info.st_mode):
        raise fail("is a folder, expected a file")
    if not stat.S_ISREG(info.st_mode):
        raise fail("is not a regular file (a pipe, socket or device); only files are read")
    room = rd.limits.file_bytes - rd.bytes_read
    if info.st_size > room:
        raise fail(f"more than {rd.limits.file_bytes} bytes of SPICE text in one reading; "
                   f"{limit_hint('spice_file_bytes')}")
    try:
        with open(path, "rb") as fh:
            raw = fh.read(room + 1)
    except OSError as exc:
        raise fail(f"cannot read the file ({exc.strerror})") from None
    if len(raw) > room:
        raise fail(f"more than {rd.limits.file_bytes} bytes of SPICE text in one reading; "
                   f"{limit_hint('spice_file_bytes')}")
    rd.bytes_read += len(raw)
    rd.inputs.add(str(path))
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def _strip_inline(text: str) -> str:
    """Drop ``;`` comments and ngspice ``$`` comments (outside quotes)."""
    out = []
    quote = ""
    n = len(text)
    for i, ch in enumerate(text):
        if quote:
            out.append(ch)
            if ch == quote:
                quote = ""
            continue
        if ch == '"':
            quote = ch
        elif ch == ";":
            break
        elif ch == "$" and (i == 0 or text[i - 1] in " \t") and (i + 1 == n or text[i + 1] in " \t"):
            break
        out.append(ch)
    return "".join(out).rstrip()


def logical_lines(text: str, shown: str, rd: Reader, *, has_title: bool) -> list[Line]:
    """Physical lines -> logical lines (continuations joined, comments gone)."""
    lines = text.splitlines()
    out: list[Line] = []
    start = 0
    if has_title:
        if not lines:
            raise DesignError(shown, "the file is empty; a SPICE file starts with a title line", line=1)
        rd.title = lines[0].strip().lstrip("*").strip()
        start = 1
        first = lines[0].strip()
        if first[:1] == "." or (first[:1].isalpha() and len(first.split()) >= 3
                                and first[:1].lower() in "rcldqmjxvi"):
            rd.note("warning", "spice.title-line", (shown,),
                    f"{shown}:1: the first line '{first[:40]}' is read as the title, as SPICE does; "
                    f"put a title line before it if it should count.")
    for no in range(start, len(lines)):
        raw = lines[no]
        stripped = raw.strip()
        if not stripped:
            continue
        if stripped.startswith("*"):
            m = _RECORD_RE.match(stripped)
            if m:
                rd.records.append((m.group(1).lower(), _parse_kv(m.group(2), shown, no + 1), shown, no + 1))
            continue
        body = _strip_inline(raw).strip()
        if stripped.startswith("+"):
            if not out:
                raise DesignError(shown, "a '+' continuation line with no line before it to continue",
                                  line=no + 1)
            rest = _strip_inline(stripped[1:]).strip()
            prev = out[-1]
            out[-1] = Line(prev.file, prev.line, (prev.text + " " + rest).strip())
            continue
        if not body:
            continue
        out.append(Line(shown, no + 1, body))
    return out


def _parse_kv(text: str, shown: str, line: int) -> dict[str, str]:
    out: dict[str, str] = {}
    pos = 0
    text = text.rstrip()
    while pos < len(text):
        m = _KV_RE.match(text, pos)
        if not m or m.end() == pos:
            raise DesignError(shown, f"cannot read the snugboard record near '{text[pos:pos + 30].strip()}'",
                              line=line)
        val = m.group(2)
        if val.startswith('"'):
            try:
                val = json.loads(val)
            except json.JSONDecodeError:
                raise DesignError(shown, f"bad quoted text in the snugboard record: {val}", line=line) from None
        out[m.group(1).lower()] = val
        pos = m.end()
    return out


def _child_display(parent: str, target: str) -> str:
    parent_dir = posixpath.dirname(parent.replace("\\", "/"))
    joined = posixpath.join(parent_dir, target.replace("\\", "/"))
    return posixpath.normpath(joined)


def expand_includes(lines: list[Line], here: Path, rd: Reader, stack: tuple[Path, ...],
            section: str | None = None, section_where: tuple[str, int] | None = None) -> list[Line]:
    """Splice includes into ``lines``; with ``section``, keep only that .lib section."""
    out: list[Line] = []
    in_section = section is None
    found = section is None
    in_control: Line | None = None
    for ln in lines:
        words = ln.text.split()
        head = words[0].lower()
        if in_control is not None:
            if head == ".endc":
                in_control = None
            continue
        if section is not None:
            if head == ".lib" and len(words) == 2:
                if in_section:
                    raise DesignError(ln.file, f".lib section '{words[1]}' starts inside section '{section}'",
                                      line=ln.line)
                in_section = words[1].lower() == section.lower()
                found = found or in_section
                continue
            if head == ".endl":
                in_section = False
                continue
            if not in_section:
                continue
        if head == ".control":
            in_control = ln
            rd.note("info", "spice.not-a-part", (ln.file,),
                    f"{ln.file}:{ln.line}: the .control block holds simulator commands, not board parts; left out.")
            continue
        if head in (".include", ".inc", ".lib"):
            target, sect = _include_target(ln, words)
            out.extend(_include(target, sect, ln, here, rd, stack))
            continue
        if head == ".end":
            break
        out.append(ln)
    if in_control is not None:
        raise DesignError(in_control.file, ".control has no .endc", line=in_control.line)
    if section is not None and not found:
        where = section_where or (lines[0].file if lines else "", 0)
        raise DesignError(where[0], f"no .lib section '{section}' in the library file", line=where[1])
    return out


def _include_target(ln: Line, words: list[str]) -> tuple[str, str | None]:
    """The file (quotes removed) and the ``.lib`` section an include line names."""
    head = words[0].lower()
    if len(words) < 2:
        raise DesignError(ln.file, f"{words[0]} needs a file name", line=ln.line)
    rest = ln.text.split(None, 1)[1].strip()
    if rest[:1] in "\"'":
        end = rest.find(rest[0], 1)
        if end < 0:
            raise DesignError(ln.file, f"{words[0]}: the file name's closing quote is missing", line=ln.line)
        target, more = rest[1:end], rest[end + 1:].split()
    else:
        target, *more = rest.split()
    if head == ".lib":
        if len(more) > 1:
            raise DesignError(ln.file, ".lib takes a file and at most one section name", line=ln.line)
        return target, (more[0] if more else None)
    if more:
        raise DesignError(ln.file, f"{words[0]} takes one file name; found more: {' '.join(more)}", line=ln.line)
    return target, None


def _include(target: str, section: str | None, ln: Line, here: Path, rd: Reader,
             stack: tuple[Path, ...]) -> list[Line]:
    if "\x00" in target:
        raise DesignError(ln.file, f"the file name {target!r} holds a NUL character", line=ln.line)
    rd.splices += 1
    if rd.splices > rd.limits.include_splices:
        raise DesignError(ln.file, f"more than {rd.limits.include_splices} .include/.lib splices in one reading; "
                          f"{limit_hint('spice_include_splices')}", line=ln.line)
    path = Path(target)
    full = (path if path.is_absolute() else here.parent / path)
    try:
        resolved = full.resolve()
    except (OSError, RuntimeError, ValueError):
        raise DesignError(ln.file, f"cannot follow the path '{target}'", line=ln.line) from None
    root = rd.root
    if not resolved.is_relative_to(root):
        raise DesignError(ln.file, f"'{target}' lies outside the project folder; only files inside it may be included",
                          line=ln.line)
    if resolved in stack:
        raise DesignError(ln.file, f"'{target}' includes itself (through {len(stack)} file(s))", line=ln.line)
    shown = _child_display(ln.file, target)
    text = read_text(resolved, shown, (ln.file, ln.line), rd)
    sub = logical_lines(text, shown, rd, has_title=False)
    return expand_includes(sub, resolved, rd, stack + (resolved,), section, (ln.file, ln.line))
