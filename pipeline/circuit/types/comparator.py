"""A comparator with hysteresis by positive feedback: inverting or non-inverting,
push-pull or open-collector output (thresholds by
:func:`pipeline.circuit.formulas.comparator_inverting` / ``comparator_noninverting``)."""

from __future__ import annotations

from dataclasses import dataclass

from .. import formulas as F
from ..blocktype import VOLT_KEY, BlockType, FigureSpec, RoleRules, RoleSpec, SettingsContext
from ...values import format_quantity


@dataclass(frozen=True)
class Comparator(BlockType):
    def read_options(self, items, error):
        inp = items.get("input")
        if inp not in ("inverting", "non-inverting"):
            raise error("input", "give input = \"inverting\" or \"non-inverting\" (which "
                                 "comparator input the signal drives)")
        out = items.get("output", "push-pull")
        if out == "open-drain":
            out = "open-collector"
        if out not in ("push-pull", "open-collector"):
            raise error("output", "output must be \"push-pull\" or \"open-collector\"")
        return (("input", inp), ("output", out))

    def role_rules(self, options):
        required = [r.name for r in self.roles if r.required]
        forbidden = []
        if options["input"] == "inverting":
            required.append("Rtop")
            forbidden.append(("Rin", "input"))
            pairs = ()
        else:
            required.append("Rin")
            pairs = (("Rtop", "Rbottom"), ("Rbottom", "Rtop"))
        if options["output"] == "open-collector":
            required.append("Rpull")
        else:
            forbidden.append(("Rpull", "output"))
        return RoleRules(tuple(required), tuple(forbidden), pairs)

    def settings(self, ctx: SettingsContext):
        out = self._reference(ctx)
        if ctx.options["output"] == "open-collector":
            out.append(("vpull", self._vpull(ctx)))
        else:
            out.append(("voh", self._voh(ctx)))
        vol = ctx.given("vol")
        if vol is None:
            vol = 0.0
            ctx.notes.append("output low level taken as 0 V")
        out.append(("vol", vol))
        if "vcc" in ctx.memo:
            out.append(("vcc", ctx.memo["vcc"]))
        return out

    def _vcc(self, ctx: SettingsContext) -> float:
        """The supply, looked up only when a default needs it, and once."""
        cache = ctx.memo
        if "vcc" not in cache:
            v = ctx.given("vcc")
            if v is None and "amp" in ctx.byrole:
                v = ctx.amp_supply("amp")
                if v is not None:
                    ctx.notes.append(f"vcc = {format_quantity(v, 'V')} from {ctx.byrole['amp'].ref}'s supply net")
            if v is None:
                raise ctx.error("vcc", "no supply voltage: give vcc = \"3.3V\", or name the "
                                       "comparator as amp with its supply net's voltage declared")
            cache["vcc"] = v
        return cache["vcc"]

    def _reference(self, ctx: SettingsContext) -> list[tuple[str, float]]:
        inverting = ctx.options["input"] == "inverting"
        has_div = "Rtop" in ctx.byrole
        if "vref" in ctx.items and (inverting or has_div):
            raise ctx.error("vref", "vref is the inverting input's voltage when there is no Rtop; "
                                    "with a reference divider give vtop")
        if "vtop" in ctx.items and not has_div:
            raise ctx.error("vtop", "vtop is the voltage Rtop hangs from; there is no Rtop")
        if has_div:
            vt = ctx.given("vtop")
            return [("vtop", self._vcc(ctx) if vt is None else vt)]
        vr = ctx.given("vref")
        if vr is None:
            raise ctx.error("vref", "give the reference on the inverting input (vref = "
                                    "\"1.2V\") or a divider Rtop/Rbottom")
        return [("vref", vr)]

    def _vpull(self, ctx: SettingsContext) -> float:
        if "voh" in ctx.items:
            raise ctx.error("voh", "an open-collector output's high level is the pull-up "
                                   "supply: give vpull")
        vp = ctx.given("vpull")
        if vp is not None:
            return vp
        n = ctx.far_net("Rpull", "Rfb")
        vp = ctx.net_volts(n) if n is not None else None
        if vp is not None and vp > 0:
            ctx.notes.append(f"vpull = {format_quantity(vp, 'V')} from net {n.name}")
            return vp
        vp = self._vcc(ctx)
        ctx.notes.append(f"pull-up supply taken as vcc = {format_quantity(vp, 'V')}")
        return vp

    def _voh(self, ctx: SettingsContext) -> float:
        if "vpull" in ctx.items:
            raise ctx.error("vpull", "vpull applies to output = \"open-collector\"")
        voh = ctx.given("voh")
        if voh is None:
            voh = self._vcc(ctx)
            ctx.notes.append(f"output high level taken as vcc = {format_quantity(voh, 'V')} (rail-to-rail)")
        return voh

    def evaluate(self, v, settings, options):
        s = settings
        oc = options["output"] == "open-collector"
        voh = s["vpull"] if oc else s["voh"]
        rpull = v["Rpull"] if oc else None
        if options["input"] == "inverting":
            return F.comparator_inverting(v["Rtop"], v["Rfb"], s["vtop"], voh, s["vol"],
                                          rbottom=v.get("Rbottom"), rpull=rpull)
        if "Rtop" in v:
            vref = s["vtop"] * v["Rbottom"] / (v["Rtop"] + v["Rbottom"])
        else:
            vref = s["vref"]
        return F.comparator_noninverting(v["Rin"], v["Rfb"], vref, voh, s["vol"], rpull=rpull)


TYPES = (
    Comparator(
        "comparator-hysteresis",
        "comparator with hysteresis by positive feedback, inverting or non-inverting, "
        "push-pull or open-collector output",
        (
            RoleSpec("Rin", "resistor", "signal to the non-inverting input (non-inverting only)", False),
            RoleSpec("Rfb", "resistor", "output to the non-inverting input"),
            RoleSpec("Rtop", "resistor", "reference supply (vtop) to the reference node: the "
                     "non-inverting input (inverting) or the inverting input (non-inverting)", False),
            RoleSpec("Rbottom", "resistor", "reference node to ground", False),
            RoleSpec("Rpull", "resistor", "pull-up of an open-collector output", False),
            RoleSpec("amp", "amp", "the comparator (optional; its supply pins give vcc)", False),
        ),
        (FigureSpec("v_rise", "V", "threshold, input rising"),
         FigureSpec("v_fall", "V", "threshold, input falling"),
         FigureSpec("hysteresis", "V", "hysteresis width")),
        holds=(("v_rise",), ("v_fall",)),
        keys=(
            ("input", "\"inverting\" or \"non-inverting\": the comparator input the signal drives (required)"),
            ("output", "\"push-pull\" (default) or \"open-collector\" (alias \"open-drain\"; needs Rpull)"),
            ("vcc", "supply: " + VOLT_KEY + "; default: the declared voltage of amp's supply net"),
            ("vref", "reference on the inverting input when there is no Rtop (non-inverting only)"),
            ("vtop", "voltage Rtop hangs from; default vcc"),
            ("vpull", "pull-up supply; default: Rpull's other net, else vcc"),
            ("voh", "push-pull high level; default vcc (rail-to-rail)"),
            ("vol", "low level; default 0 V"),
        ),
    ),
)
