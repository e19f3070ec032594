"""The one exception tree of snugboard.

Every error a user can cause is an :class:`InputError`. It carries the file,
the place inside it (a line, a key, a ref or pin, a DXF entity, a point in
drawing units) and the reason, and builds its message once, here. The CLI
shows ``str(error)`` and exits with :attr:`SnugboardError.exit_status`; no
other module formats error text or chooses exit codes.

Examples
--------
>>> str(InputError("design.toml", "value '4x7' is not a number", line=12, key="parts.R1.value"))
"design.toml:12: parts.R1.value: value '4x7' is not a number"
>>> str(InputError("bay.dxf", "chain does not close", entity="LINE #2F", at=(10.0, 4.5)))
'bay.dxf: LINE #2F at (10, 4.5): chain does not close'
"""

from __future__ import annotations

__all__ = [
    "SnugboardError",
    "InputError",
    "ProjectError",
    "DesignError",
    "CavityError",
    "LibraryError",
    "UnknownNameError",
    "OutputError",
]


def _num(v: float) -> str:
    return f"{v:.6g}"


class SnugboardError(Exception):
    """Base of every error snugboard raises on purpose.

    ``exit_status`` is the process status the CLI uses (CONTRACT section 4:
    2 = bad input).
    """

    exit_status = 2

    @property
    def message(self) -> str:
        return str(self)


class InputError(SnugboardError):
    """Bad input: names the file, where in it, and why.

    Parameters
    ----------
    file : str
        The file as the user named it (relative where possible, never
        made absolute here).
    reason : str
        One sentence the user can act on.
    line : int, optional
        1-based line number in a text file.
    key : str, optional
        Dotted key path in a TOML file, e.g. ``parts.R1.value``.
    ref : str, optional
        A part reference or ``REF.PIN``.
    entity : str, optional
        A DXF entity description, e.g. ``"LINE #2F on layer Outline"``.
    at : (float, float), optional
        A point in drawing units.
    """

    def __init__(
        self,
        file: str,
        reason: str,
        *,
        line: int | None = None,
        key: str | None = None,
        ref: str | None = None,
        entity: str | None = None,
        at: tuple[float, float] | None = None,
    ) -> None:
        self.file = str(file)
        self.reason = reason
        self.line = line
        self.key = key
        self.ref = ref
        self.entity = entity
        self.at = at
        super().__init__(self._build())

    def _build(self) -> str:
        head = self.file
        if self.line is not None:
            head += f":{self.line}"
        parts = [head]
        if self.key:
            parts.append(self.key)
        if self.ref:
            parts.append(self.ref)
        where = self.entity or ""
        if self.at is not None:
            pt = f"at ({_num(self.at[0])}, {_num(self.at[1])})"
            where = f"{where} {pt}" if where else pt
        if where:
            parts.append(where)
        return ": ".join(parts) + ": " + self.reason


class ProjectError(InputError):
    """Bad ``project.toml`` or command-line combination."""


class DesignError(InputError):
    """Bad design file (TOML or SPICE)."""


class CavityError(InputError):
    """Bad cavity drawing (DXF)."""


class LibraryError(InputError):
    """Bad footprint or part-kind data under ``footprints/``."""


class UnknownNameError(LibraryError, DesignError):
    """A package, kind or density level the library does not know.

    Raised where the name was written (a design file and key, the command
    line); ``name`` is what was asked for, ``suggestions`` the closest known
    names, already part of the message. It is a design error as much as a
    library one, so callers need not translate it.
    """

    def __init__(self, file: str, reason: str, *, name: str = "",
                 suggestions: tuple[str, ...] = (), **where: object) -> None:
        self.name = name
        self.suggestions = tuple(suggestions)
        super().__init__(file, reason, **where)  # type: ignore[arg-type]


class OutputError(SnugboardError):
    """An output could not be written (never overwrites the user's own files)."""

    def __init__(self, path: str, reason: str) -> None:
        self.path = str(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")
