"""What a circuit block type is: its roles, figures, keys and behaviour, as one object.

A block type is an instance of :class:`BlockType` (or of a subclass that
overrides some of its methods), written in one file of
:mod:`pipeline.circuit.types`. The declaration, spread, retune and analysis
modules ask the type for everything that differs from type to type:

* ``roles`` and ``figures``: the parts it needs and what it computes;
* ``keys``: extra keys of its ``[blocks.NAME]`` table, with their meaning;
* :meth:`BlockType.read_options` / :meth:`BlockType.role_rules`: text
  options and the roles they make required, forbidden or paired;
* :meth:`BlockType.settings`: voltages it needs (from keys or nets);
* :meth:`BlockType.evaluate`: the figures from part values, vectorised;
* :meth:`BlockType.transfer`: H(s) for a filter (``response`` names it);
* :meth:`BlockType.retune_seeds`: extra candidates for the retune search;
* :meth:`BlockType.checks`: type-specific findings (instability, ...).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

import numpy as np

from ..values import format_value

if TYPE_CHECKING:  # pragma: no cover
    from ..errors import DesignError
    from ..model import BlockReport, Finding, Net

__all__ = ["RoleSpec", "FigureSpec", "BlockType", "RoleRules", "SettingsContext", "VOLT_KEY", "AMP",
           "part_value_text"]

#: How a voltage key is described in a type's ``keys``.
VOLT_KEY = "a voltage (\"3.3V\") or the name of a net with a declared voltage"


def part_value_text(v: float, kind: str) -> str:
    """A role's value as a part value is written: ``4.7k`` (resistor), ``100nF`` (capacitor)."""
    return format_value(v, "F" if kind == "capacitor" else "")


@dataclass(frozen=True)
class RoleSpec:
    """A part a block type needs: role name, part kind and where it sits."""

    name: str
    kind: str          # "resistor", "capacitor", "amp" or "led"
    where: str
    required: bool = True


#: The optional op-amp role of amplifier and filter blocks.
AMP = RoleSpec("amp", "amp", "the op-amp (optional; checked to be an op-amp or comparator)", False)


@dataclass(frozen=True)
class FigureSpec:
    """A figure a block type computes: name (the target key), unit, label."""

    name: str
    unit: str          # "Hz", "V", "A", "W", "ohm" or "" (ratio)
    label: str


@dataclass(frozen=True)
class RoleRules:
    """Which roles a declaration must, must not, or must jointly give."""

    required: tuple[str, ...]
    forbidden: tuple[tuple[str, str], ...] = ()  # (role, the option that rules it out)
    pairs: tuple[tuple[str, str], ...] = ()      # (a, b): a given needs b given


@dataclass
class SettingsContext:
    """What :meth:`BlockType.settings` may ask about the declaration and the design.

    ``given(key)`` reads a voltage key (a number, a voltage text or a
    declared net's name; ``None`` when absent); ``far_net(role, other)`` is
    the net at the far end of a two-terminal role's part (away from
    ``other``'s part) and ``net_volts`` its declared voltage; ``amp_supply``
    the highest declared voltage on a part's supply pins; ``error`` builds
    the located :class:`~pipeline.errors.DesignError` for a key.
    """

    items: Mapping[str, Any]
    byrole: Mapping[str, Any]
    options: Mapping[str, str]
    given: Callable[[str], float | None]
    far_net: Callable[[str, str], "Net | None"]
    net_volts: Callable[["Net"], float | None]
    amp_supply: Callable[[str], float | None]
    error: Callable[[str, str], "DesignError"]
    notes: list[str] = field(default_factory=list)
    memo: dict[str, float] = field(default_factory=dict)    # for a type's own lookups


@dataclass(frozen=True)
class BlockType:
    """One block type: its roles, figures, extra keys and response kind.

    Subclasses override the methods below where the type needs to; the
    defaults fit a block with fixed roles, no options and no voltages.
    """

    name: str
    description: str
    roles: tuple[RoleSpec, ...]
    figures: tuple[FigureSpec, ...]
    keys: tuple[tuple[str, str], ...] = ()    # (key, meaning)
    response: str = ""                        # "lowpass2", "highpass2", "lowpass1", "highpass1"
    #: retune holds the first figure of each group near its present value
    #: when no figure of the group has a target (a weak pull, see retune)
    holds: tuple[tuple[str, ...], ...] = ()

    def role(self, name: str) -> RoleSpec:
        for r in self.roles:
            if r.name == name:
                return r
        raise LookupError(name)

    # -- declaration ------------------------------------------------------
    def read_options(self, items: Mapping[str, Any], error: Callable[[str, str], Exception]
                     ) -> tuple[tuple[str, str], ...]:
        """Text options of the declaration, checked (none by default)."""
        return ()

    def role_rules(self, options: Mapping[str, str]) -> RoleRules:
        """Required roles (those marked so), none forbidden, no pairs."""
        return RoleRules(tuple(r.name for r in self.roles if r.required))

    def settings(self, ctx: SettingsContext) -> list[tuple[str, float]]:
        """Voltages the figures need, as ``(key, volts)``; notes go to ``ctx.notes``."""
        return []

    def available(self, settings: Mapping[str, float]) -> tuple[set[str], str]:
        """Figures computable with these settings, and why the others are not."""
        return {f.name for f in self.figures}, ""

    # -- figures ----------------------------------------------------------
    def evaluate(self, v: Mapping[str, np.ndarray], settings: Mapping[str, float],
                 options: Mapping[str, str]) -> dict[str, np.ndarray]:
        """Figures from role values (arrays of any one shape)."""
        raise NotImplementedError(self.name)

    def transfer(self, v: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray]:
        """H(s) numerator and denominator (descending powers of s); filters only."""
        raise NotImplementedError(self.name)

    # -- retune and findings ---------------------------------------------
    def retune_seeds(self, decl: Any, grids: Sequence[np.ndarray], wides: Mapping[str, np.ndarray],
                     best: np.ndarray, nominal: Mapping[str, float]) -> np.ndarray | None:
        """Extra retune candidates (rows in ``decl.numeric`` order), or None."""
        return None

    def checks(self, decl: Any, report: "BlockReport", title: str,
               subject: tuple[str, ...]) -> list["Finding"]:
        """Findings only this type gives (after the assumptions, before the targets)."""
        return []
