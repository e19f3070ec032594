"""First-order RC low-pass and high-pass blocks: f0 = 1 / (2 pi R C), the -3 dB point."""

from __future__ import annotations

from dataclasses import dataclass

from .. import formulas as F
from ..blocktype import BlockType, FigureSpec, RoleSpec


@dataclass(frozen=True)
class RCFilter(BlockType):
    """A series-R shunt-C (``lowpass``) or series-C shunt-R section."""

    lowpass: bool = True

    def evaluate(self, v, settings, options):
        return (F.rc_lowpass if self.lowpass else F.rc_highpass)(v["R"], v["C"])

    def transfer(self, v):
        return (F.rc_lowpass_tf if self.lowpass else F.rc_highpass_tf)(v["R"], v["C"])


TYPES = (
    RCFilter(
        "rc-lowpass",
        "first-order RC low-pass (series R, C to ground)",
        (RoleSpec("R", "resistor", "in series"), RoleSpec("C", "capacitor", "output to ground")),
        (FigureSpec("f0", "Hz", "-3 dB frequency"),),
        response="lowpass1",
        lowpass=True,
    ),
    RCFilter(
        "rc-highpass",
        "first-order RC high-pass (series C, R to ground)",
        (RoleSpec("C", "capacitor", "in series"), RoleSpec("R", "resistor", "output to ground")),
        (FigureSpec("f0", "Hz", "-3 dB frequency"),),
        response="highpass1",
        lowpass=False,
    ),
)
