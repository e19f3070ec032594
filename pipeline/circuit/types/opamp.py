"""Inverting and non-inverting op-amp gain blocks (ideal op-amp)."""

from __future__ import annotations

from dataclasses import dataclass

from .. import formulas as F
from ..blocktype import AMP, BlockType, FigureSpec, RoleSpec


@dataclass(frozen=True)
class Inverting(BlockType):
    def evaluate(self, v, settings, options):
        return F.opamp_inverting(v["Rin"], v["Rf"])


@dataclass(frozen=True)
class NonInverting(BlockType):
    def evaluate(self, v, settings, options):
        return F.opamp_noninverting(v["Rf"], v["Rg"])


TYPES = (
    Inverting(
        "opamp-inverting",
        "inverting amplifier",
        (RoleSpec("Rin", "resistor", "input to the inverting input"),
         RoleSpec("Rf", "resistor", "output to the inverting input"), AMP),
        (FigureSpec("gain", "", "gain -Rf/Rin (V/V, negative)"),),
    ),
    NonInverting(
        "opamp-noninverting",
        "non-inverting amplifier",
        (RoleSpec("Rf", "resistor", "output to the inverting input"),
         RoleSpec("Rg", "resistor", "inverting input to ground"), AMP),
        (FigureSpec("gain", "", "gain 1 + Rf/Rg (V/V)"),),
    ),
)
