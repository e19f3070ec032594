"""An LED with its series resistor: current (vcc - vf - vdrop) / R and the resistor's dissipation."""

from __future__ import annotations

from dataclasses import dataclass

from .. import formulas as F
from ..blocktype import VOLT_KEY, BlockType, FigureSpec, RoleSpec
from ...model import Finding
from ...values import format_quantity


@dataclass(frozen=True)
class LedResistor(BlockType):
    def settings(self, ctx):
        if "vf" not in ctx.items:
            raise ctx.error("vf", "give the LED forward voltage, e.g. vf = \"2.0V\"")
        vf = ctx.given("vf")
        vcc = ctx.given("vcc")
        if vcc is None:
            n = ctx.far_net("R", "led")
            vcc = ctx.net_volts(n) if n is not None else None
            if vcc is None:
                raise ctx.error("vcc", "no supply voltage: give vcc = \"3.3V\" or declare the "
                                       "voltage of the net at R's other end")
            ctx.notes.append(f"vcc = {format_quantity(vcc, 'V')} from net {n.name}")
        vdrop = ctx.given("vdrop")
        if vdrop is None:
            vdrop = 0.0
            ctx.notes.append("the LED's return is taken as ground (vdrop = 0 V)")
        return [("vcc", vcc), ("vf", vf), ("vdrop", vdrop)]

    def evaluate(self, v, settings, options):
        return F.led_resistor(v["R"], settings["vcc"], settings["vf"], settings["vdrop"])

    def checks(self, decl, report, title, subject):
        if report.figure("current").nominal > 0:
            return []
        s = dict(decl.settings)
        head = s["vcc"] - s["vf"] - s["vdrop"]
        return [Finding("error", "block.led-off", subject,
                        f"{title}: vcc - vf - vdrop = {format_quantity(head, 'V')}, so the LED never lights; "
                        f"raise the supply or pick an LED with a lower forward voltage.")]


TYPES = (
    LedResistor(
        "led-resistor",
        "LED with its series resistor",
        (RoleSpec("R", "resistor", "in series with the LED"),
         RoleSpec("led", "led", "the LED")),
        (FigureSpec("current", "A", "LED current"),
         FigureSpec("power", "W", "dissipation in R")),
        keys=(
            ("vf", "LED forward voltage, e.g. \"2.0V\" (required)"),
            ("vcc", "supply: " + VOLT_KEY + "; default: the declared voltage of R's other net"),
            ("vdrop", "drop of the driver (transistor or logic pin); default 0 V"),
        ),
        holds=(("current", "power"),),
    ),
)
