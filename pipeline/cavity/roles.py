"""Layer roles: which drawing layers hold the cavity, keep-outs, depth zones, board, wire entries.

The roles and project.toml's ``[cavity] layers`` map are described in
:mod:`pipeline.cavity`. Layer names are compared without regard to case.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Mapping

from pipeline.errors import CavityError

__all__ = ["LayerRoles", "parse_layer_map", "ROLES"]

#: The role names, in the order messages list them.
ROLES = ("CAVITY", "KEEPOUT", "DEPTH", "BOARD", "WIRE-ENTRY")


@dataclass(frozen=True)
class LayerRoles:
    """Which layers hold which role, from project.toml's ``[cavity] layers``.

    Each field is ``None`` when the role is not mapped (its default name
    applies) or the layer names that hold it, as the user wrote them
    (matched without regard to case). ``depth`` pairs layer names with
    depths in mm.
    """

    cavity: tuple[str, ...] | None = None
    keepout: tuple[str, ...] | None = None
    board: tuple[str, ...] | None = None
    depth: tuple[tuple[str, float], ...] | None = None
    wire_entry: tuple[str, ...] | None = None

    def role_of(self, layer: str, file: str = "") -> tuple[str, float | None] | None:
        """The role of ``layer``: ``("CAVITY", None)``, ``("DEPTH", 1.5)``, ... or None.

        Raises :class:`~pipeline.errors.CavityError` naming ``file`` and
        the layer for a layer named ``DEPTH-...`` (with the depth role
        unmapped) whose name gives no depth.

        Examples
        --------
        >>> LayerRoles().role_of("depth-1.5")
        ('DEPTH', 1.5)
        >>> LayerRoles(cavity=("outline",)).role_of("CAVITY") is None
        True
        """
        key = layer.casefold()
        for role, names in (("CAVITY", self.cavity), ("KEEPOUT", self.keepout),
                            ("BOARD", self.board), ("WIRE-ENTRY", self.wire_entry)):
            if names is None:
                if key == role.casefold():
                    return role, None
            elif key in (n.casefold() for n in names):
                return role, None
        if self.depth is None:
            if key.startswith("depth-"):
                return "DEPTH", _depth_from_layer_name(layer, file)
        else:
            for name, d in self.depth:
                if key == name.casefold():
                    return "DEPTH", d
        return None


def _depth_from_layer_name(layer: str, file: str) -> float:
    text = layer[len("depth-"):].strip()
    m = re.fullmatch(r"(\d+(?:[.,]\d*)?|[.,]\d+)\s*(?:mm)?", text, flags=re.IGNORECASE)
    if not m:
        raise CavityError(file, f"layer name {layer!r} gives no depth: name a depth layer DEPTH-<mm> "
                          "with a number of millimetres, e.g. DEPTH-1.5", entity=f"layer {layer}")
    value = float(m.group(1).replace(",", "."))
    if not math.isfinite(value):
        raise CavityError(file, f"layer name {layer!r} gives no finite depth", entity=f"layer {layer}")
    return value


def parse_layer_map(layer_map: Mapping[str, Any] | None, *, source: str = "project.toml") -> LayerRoles:
    """Check project.toml's ``[cavity] layers`` value and build :class:`LayerRoles`.

    Parameters
    ----------
    layer_map : mapping or None
        ``{"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"],
        "DEPTH": {"Lid rib": 1.5}}``; role names in any case.
    source : str
        The settings file named in error messages.

    Raises
    ------
    CavityError
        Naming ``source`` and the key ``cavity.layers.<ROLE>[...]``.

    Examples
    --------
    >>> r = parse_layer_map({"CAVITY": "Outline", "DEPTH": {"Lid rib": 1.5}})
    >>> r.role_of("outline"), r.role_of("LID RIB"), r.role_of("KEEPOUT")
    (('CAVITY', None), ('DEPTH', 1.5), ('KEEPOUT', None))
    """
    if layer_map is None:
        return LayerRoles()
    if not isinstance(layer_map, Mapping):
        raise CavityError(source, "layers must be a table of role = layer name(s), e.g. "
                          '{ CAVITY = "Outline" }', key="cavity.layers")
    found: dict[str, Any] = {}
    claims = _Claims(source)
    for raw_role in sorted(layer_map, key=str):
        role = str(raw_role).strip().upper()
        key = f"cavity.layers.{raw_role}"
        if role not in ROLES:
            raise CavityError(source, f"unknown layer role {raw_role!r}: the roles are "
                              + ", ".join(ROLES), key=key)
        if role in found:
            raise CavityError(source, f"role {role} is given twice", key=key)
        value = layer_map[raw_role]
        if role == "DEPTH":
            found[role] = _depth_layers(value, key, claims)
        else:
            found[role] = _role_layers(value, role, key, claims)
    return LayerRoles(
        cavity=found.get("CAVITY"),
        keepout=found.get("KEEPOUT"),
        board=found.get("BOARD"),
        depth=found.get("DEPTH"),
        wire_entry=found.get("WIRE-ENTRY"),
    )


class _Claims:
    """Layer names already given a role: each layer may hold one role only."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.seen: dict[str, str] = {}

    def claim(self, name: Any, role: str, key: str) -> str:
        if not isinstance(name, str) or not name.strip():
            raise CavityError(self.source, f"a layer name must be non-empty text, got {name!r}", key=key)
        folded = name.strip().casefold()
        if folded in self.seen and self.seen[folded] != role:
            raise CavityError(self.source, f"layer {name!r} is mapped to both {self.seen[folded]} and "
                              f"{role}: give each layer one role", key=key)
        self.seen[folded] = role
        return name.strip()


def _role_layers(value: Any, role: str, key: str, claims: _Claims) -> tuple[str, ...]:
    names = [value] if isinstance(value, str) else value
    if not isinstance(names, (list, tuple)) or not names:
        raise CavityError(claims.source, f"{role} must be a layer name or a list of layer names, "
                          f"got {value!r}", key=key)
    return tuple(claims.claim(n, role, key) for n in names)


def _depth_layers(value: Any, key: str, claims: _Claims) -> tuple[tuple[str, float], ...]:
    source = claims.source
    if not isinstance(value, Mapping):
        raise CavityError(source, "DEPTH must be a table of layer name = depth in mm, "
                          'e.g. { "Lid rib" = 1.5 }', key=key)
    pairs = []
    for name in sorted(value, key=str):
        d = value[name]
        k2 = f"{key}.{name}"
        if isinstance(d, bool) or not isinstance(d, (int, float)):
            raise CavityError(source, f"depth must be a number of mm, got {d!r}", key=k2)
        if not math.isfinite(float(d)) or d < 0:
            raise CavityError(source, f"depth must be a finite number of mm, 0 or more, "
                              f"got {d!r}", key=k2)
        pairs.append((claims.claim(name, "DEPTH", k2), float(d)))
    return tuple(pairs)
