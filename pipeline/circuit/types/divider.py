"""Unloaded resistor divider: ratio, source resistance and (with vin) output voltage."""

from __future__ import annotations

from dataclasses import dataclass

from .. import formulas as F
from ..blocktype import VOLT_KEY, BlockType, FigureSpec, RoleSpec
from ...values import format_quantity


@dataclass(frozen=True)
class Divider(BlockType):
    def settings(self, ctx):
        vin = ctx.given("vin")
        if vin is None:
            n = ctx.far_net("Rtop", "Rbottom")
            vin = ctx.net_volts(n) if n is not None else None
            if vin is not None:
                ctx.notes.append(f"vin = {format_quantity(vin, 'V')} from net {n.name}")
        return [] if vin is None else [("vin", vin)]

    def available(self, settings):
        names = {f.name for f in self.figures}
        if "vin" in settings:
            return names, ""
        return names - {"vout"}, ("a vout target needs the input voltage: give vin or declare the "
                                  "voltage of Rtop's input net")

    def evaluate(self, v, settings, options):
        return F.divider(v["Rtop"], v["Rbottom"], settings.get("vin"))


TYPES = (
    Divider(
        "divider",
        "unloaded resistor divider",
        (RoleSpec("Rtop", "resistor", "input to the output"),
         RoleSpec("Rbottom", "resistor", "output to ground")),
        (FigureSpec("ratio", "", "division ratio (V/V)"),
         FigureSpec("rout", "ohm", "source resistance of the output"),
         FigureSpec("vout", "V", "output voltage (needs vin)")),
        keys=(("vin", "input voltage: " + VOLT_KEY + "; default: the declared voltage of "
               "Rtop's other net"),),
        holds=(("ratio", "vout"), ("rout",)),
    ),
)
