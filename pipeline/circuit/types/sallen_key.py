"""Second-order Sallen-Key low-pass and high-pass blocks, unity gain or with gain resistors.

Figures by :func:`pipeline.circuit.formulas.sallen_key_lowpass` /
``sallen_key_highpass`` (nodal analysis, ideal op-amp); the retune adds, for
every capacitor pair, the resistor pair that solves f0 and Q exactly.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from .. import formulas as F
from ..blocktype import AMP, BlockType, FigureSpec, RoleRules, RoleSpec
from ...model import Finding
from ...values import format_quantity

_GAIN = (
    RoleSpec("Ra", "resistor", "output to the inverting input (gain 1 + Ra/Rb; with Rb)", False),
    RoleSpec("Rb", "resistor", "inverting input to ground (with Ra)", False),
)
_FIGURES = (
    FigureSpec("f0", "Hz", "natural frequency f0"),
    FigureSpec("q", "", "quality factor Q"),
    FigureSpec("gain", "", "pass-band gain (V/V)"),
    FigureSpec("f_3db", "Hz", "-3 dB frequency"),
)


def _gain(v: Mapping[str, Any]) -> Any:
    return 1.0 + v["Ra"] / v["Rb"] if "Ra" in v else 1.0


@dataclass(frozen=True)
class SallenKey(BlockType):
    """A Sallen-Key section; ``lowpass`` picks the form (roles named after their place)."""

    lowpass: bool = True

    @property
    def caps(self) -> tuple[str, str]:
        return ("Cf", "Cg") if self.lowpass else ("C1", "C2")

    @property
    def resistors(self) -> tuple[str, str]:
        return ("R1", "R2") if self.lowpass else ("Rf", "Rg")

    def role_rules(self, options: Mapping[str, str]) -> RoleRules:
        return RoleRules(tuple(r.name for r in self.roles if r.required), pairs=(("Ra", "Rb"), ("Rb", "Ra")))

    def evaluate(self, v, settings, options):
        if self.lowpass:
            return F.sallen_key_lowpass(v["R1"], v["R2"], v["Cf"], v["Cg"], _gain(v))
        return F.sallen_key_highpass(v["C1"], v["C2"], v["Rf"], v["Rg"], _gain(v))

    def transfer(self, v):
        if self.lowpass:
            return F.sallen_key_lowpass_tf(v["R1"], v["R2"], v["Cf"], v["Cg"], _gain(v))
        return F.sallen_key_highpass_tf(v["C1"], v["C2"], v["Rf"], v["Rg"], _gain(v))

    def retune_seeds(self, decl: Any, grids: Sequence[np.ndarray], wides: Mapping[str, np.ndarray],
                     best: np.ndarray, nominal: Mapping[str, float]) -> np.ndarray:
        """Every capacitor pair with the resistors solved for f0 and Q, then snapped.

        For each (C, C) pair of the capacitor grids the two resistors that give
        the aimed f0 and Q exactly (gain fixed at the best candidate's) solve
        ``a x^2 - B x + c = 0`` (see :mod:`pipeline.circuit.formulas`); each is
        then snapped to the series values just below and above it.
        """
        n = len(decl.numeric)
        aim = {t.figure: t.aim for t in decl.targets}
        q = aim.get("q", nominal["q"])
        if "f0" in aim:
            f0 = aim["f0"]
        elif "f_3db" in aim:
            ratio = float(F.lowpass2_3db_ratio(q))
            f0 = aim["f_3db"] / ratio if self.lowpass else aim["f_3db"] * ratio
        else:
            f0 = nominal["f0"]
        if not (np.isfinite(f0) and np.isfinite(q) and f0 > 0 and q > 0):
            return np.empty((0, n))
        idx = {r: i for i, r in enumerate(decl.numeric)}
        k = 1.0 + best[idx["Ra"]] / best[idx["Rb"]] if "Ra" in idx else 1.0
        w0 = 2 * np.pi * f0
        ca, cb = self.caps
        ra, rb = self.resistors
        c1, c2 = np.meshgrid(grids[idx[ca]], grids[idx[cb]], indexing="ij")
        c1, c2 = c1.ravel(), c2.ravel()
        prod = 1.0 / (w0 * w0 * c1 * c2)         # product of the two resistors
        big_b = 1.0 / (w0 * q)
        if self.lowpass:   # (Cg + Cf (1 - k)) R1^2 - B R1 + Cg P = 0
            x1, x2 = F.solve_quadratic_positive(c2 + c1 * (1 - k), big_b, c2 * prod)
        else:              # (C1 + C2) Rf^2 - B Rf + (1 - k) C2 P = 0
            x1, x2 = F.solve_quadratic_positive(c1 + c2, big_b, (1 - k) * c2 * prod)
        wide = wides["resistor"]
        rows = []
        for x in (x1, x2):
            y = prod / x
            for xs in F.snap_to_grid(wide, x):
                for ys in F.snap_to_grid(wide, y):
                    m = np.repeat(best[None, :], len(c1), axis=0)
                    m[:, idx[ca]], m[:, idx[cb]] = c1, c2
                    m[:, idx[ra]], m[:, idx[rb]] = xs, ys
                    rows.append(m[np.isfinite(xs) & np.isfinite(ys)])
        return np.vstack(rows) if rows else np.empty((0, n))

    def checks(self, decl, report, title, subject):
        q = report.figure("q").nominal
        if math.isfinite(q) and q > 0:
            return []
        return [Finding("error", "block.unstable", subject,
                        f"{title}: the gain 1 + Ra/Rb = {format_quantity(report.figure('gain').nominal, '')} "
                        f"is too high for these values, so the section oscillates; lower the "
                        f"gain or change the capacitor ratio.")]


TYPES = (
    SallenKey(
        "sallen-key-lowpass",
        "second-order Sallen-Key low-pass, unity gain or with gain resistors Ra/Rb",
        (
            RoleSpec("R1", "resistor", "input to the middle node"),
            RoleSpec("R2", "resistor", "middle node to the non-inverting input"),
            RoleSpec("Cf", "capacitor", "middle node to the output"),
            RoleSpec("Cg", "capacitor", "non-inverting input to ground"),
            *_GAIN,
            AMP,
        ),
        _FIGURES,
        response="lowpass2",
        holds=(("f0", "f_3db"), ("q",), ("gain",)),
        lowpass=True,
    ),
    SallenKey(
        "sallen-key-highpass",
        "second-order Sallen-Key high-pass, unity gain or with gain resistors Ra/Rb",
        (
            RoleSpec("C1", "capacitor", "input to the middle node"),
            RoleSpec("C2", "capacitor", "middle node to the non-inverting input"),
            RoleSpec("Rf", "resistor", "middle node to the output"),
            RoleSpec("Rg", "resistor", "non-inverting input to ground"),
            *_GAIN,
            AMP,
        ),
        _FIGURES,
        response="highpass2",
        holds=(("f0", "f_3db"), ("q",), ("gain",)),
        lowpass=False,
    ),
)
