"""The one table of finding codes: each code, the severities it may carry, and what it means.

Every :class:`~pipeline.model.Finding` is checked against this table when it is
made, so a code that is not here (or a severity the table does not allow for it)
is a programming error caught by the first test that makes such a finding.
README's "Checks and findings" table is this table as Markdown
(:func:`markdown_table`); ``tests/test_codes.py`` fails when the two differ.

To add a code: add a row here, paste ``markdown_table()`` into README between the
``codes:start`` / ``codes:end`` markers, and use the code in a ``Finding``.

Examples
--------
>>> CODES["connect.empty-net"].severities
('error',)
>>> allowed("fit.fits", "info"), allowed("fit.fits", "error"), allowed("no.such", "info")
(True, False, False)
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Code", "CODES", "allowed", "markdown_table"]


@dataclass(frozen=True)
class Code:
    """A finding code's allowed severities (most severe first) and its one-line meaning."""

    severities: tuple[str, ...]
    meaning: str


def _c(severities: str, meaning: str) -> Code:
    return Code(tuple(severities.split("/")), meaning)


#: code -> Code. Grouped by the step that makes the finding; README lists them in this order.
CODES: dict[str, Code] = {
    # connection checks (pipeline/check.py)
    "connect.empty-net": _c("error", "a net with no pin"),
    "connect.single-pin-net": _c("error", "a net with only one pin"),
    "connect.pin-on-two-nets": _c("error", "one pin listed on two nets (they are shorted)"),
    "connect.unconnected-part": _c("error", "a part connected to nothing"),
    "connect.unconnected-pin": _c("error", "an IC input or supply pin, or a passive's pin, on no net "
                                           "(NC pins excepted)"),
    "connect.floating-output": _c("warning", "an IC output on no net"),
    "connect.undriven-input": _c("error", "inputs on a net that no output, supply, passive or connector drives"),
    "connect.output-conflict": _c("error", "two push-pull outputs on one net"),
    "connect.supply-short": _c("error", "an IC whose supply pins are not on two different nets"),
    "connect.no-decoupling": _c("warning", "no capacitor across an IC's supply nets "
                                           "(common practice: 100 nF at every IC)"),
    "connect.case-clash": _c("warning", "net names that differ only in case"),
    # design readers (pipeline/design.py, pipeline/spice.py)
    "design.duplicate-pin": _c("warning", "a pin listed twice on one net"),
    "design.height-default": _c("info", "chip capacitors that take their package's height (a thick "
                                        "capacitor's) because the design gives no height_mm"),
    "design.old-role-name": _c("warning", "a pin role in the previous release's spelling (power-in, "
                                          "passive, ...): read as its new name for one more release"),
    "spice.title-line": _c("warning", "the first line of a SPICE file is read as its title, as SPICE does"),
    "spice.not-a-part": _c("warning/info", "a SPICE element or line that is not a board part "
                                           "(sources, analyses, couplings)"),
    "spice.number": _c("warning", "a SPICE number written in a way that is easy to misread"),
    "spice.unknown-directive": _c("warning", "a dot command the reader does not know; ignored"),
    "spice.mos-bulk": _c("warning", "a MOSFET whose bulk is not on its source net: the board part has no bulk pin"),
    "spice.record": _c("warning", "an unknown `* snugboard:` record; ignored"),
    "spice.parts-map-unused": _c("warning", "a parts-map entry that matches no element"),
    "spice.default-kind": _c("info", "R, C, L or D elements given the default kind and package"),
    "spice.net-voltage": _c("info", "a net voltage taken from a DC source in the netlist"),
    # values and ratings (pipeline/ratings.py)
    "values.series": _c("info", "the parts on IEC 60063 preferred values, grouped by the coarsest series "
                                "holding each"),
    "values.off-series": _c("warning", "a value in no E-series: the nearest values below and above in E192 "
                                       "and in the series its tolerance suggests"),
    "ratings.capacitor-voltage": _c("error/warning/info", "voltage across a capacitor above its rating (error) or "
                                    "above the derated limit (warning): class II ceramics at most 50 % of rating, "
                                    "C0G / film 80 %, aluminium 80 %, tantalum 50 % (common practice)"),
    "ratings.capacitor-polarity": _c("error", "a polarised capacitor reverse-biased by the declared voltages"),
    "design.old-table-name": _c("warning", "a declared block under the previous release's name ([stages.NAME] "
                                          "or a '* snugboard: stage' record): read as a block for one more release"),
    "ratings.resistor-power": _c("error/warning", "V^2/R above the power rating (error) or above 50 % of it "
                                                  "(warning)"),
    "values.zero": _c("error", "a capacitor or inductor of value 0 (a 0 ohm resistor is a link and fine)"),
    "ratings.missing": _c("info", "parts without a rating they need, one note per kind of rating: the voltage "
                                  "across them is unknown, or they need more than the smallest common rating"),
    "ratings.no-voltages": _c("info", "no net voltage declared, so ratings could not be checked"),
    "safety.caution": _c("warning", "a net above 30 V or a battery supply: the usual caution"),
    # declared circuit blocks (pipeline/circuit/)
    "block.summary": _c("info", "a declared block's figures with their 1st..99th percentiles and the share "
                                "of builds out of target"),
    "block.target-met": _c("info", "a target passes at nominal values"),
    "block.target-missed": _c("error", "a target misses at nominal values"),
    "block.spread": _c("warning", "nominal passes but tolerance corners or Monte Carlo builds fall outside"),
    "block.retune": _c("info", "preferred-value combinations that meet the targets"),
    "block.retune-none": _c("warning", "no preferred-value combination meets the targets"),
    "block.unstable": _c("error", "a Sallen-Key gain of 3 or more"),
    "block.led-off": _c("error", "an LED that cannot light"),
    "block.tolerance-assumed": _c("info", "a tolerance the analysis assumed because the design gives none"),
    "block.assumption": _c("info", "an assumption the analysis took"),
    "block.no-targets": _c("info", "a declared block with no targets"),
    # cavity drawing (pipeline/cavity.py)
    "cavity.repaired": _c("warning", "the drawing was damaged and the recovering loader fixed it: what it fixed"),
    "cavity.units": _c("warning/info", "the units the drawing was read in, and where they came from"),
    "cavity.loader": _c("info", "messages the DXF library reported while reading the drawing"),
    "cavity.blocks": _c("warning", "block references (INSERTs) were expanded"),
    "cavity.ignored-layers": _c("warning", "layers with no cavity role"),
    "cavity.ignored-entities": _c("warning", "entity types that hold no outline"),
    "cavity.degenerate": _c("warning", "entities with no length or area"),
    "cavity.not-flat": _c("warning", "entities not in the drawing's plane"),
    "cavity.outside": _c("warning", "a keep-out or depth zone outside the cavity"),
    "cavity.implausible-size": _c("warning", "a cavity whose size suggests the wrong units"),
    "cavity.mesh-floor": _c("info", "a shell mesh's board plane, grid step, zone step and default depth"),
    "cavity.mesh-repaired": _c("warning", "a shell mesh with holes or flipped faces that the mesh library repaired"),
    # usable region (pipeline/region.py)
    "region.board-outside": _c("error", "a drawn BOARD outline closer to the wall than the clearance"),
    "region.board-over-keepout": _c("error", "a drawn BOARD outline over a keep-out"),
    "region.board-too-shallow": _c("error", "a drawn BOARD outline where the depth is less than the board"),
    "region.too-shallow": _c("warning", "a depth zone shallower than the board: left out of the region"),
    "region.empty": _c("warning", "no usable region is left"),
    "region.split": _c("info", "the usable region falls into separate pieces"),
    "region.mount": _c("info", "a mounting boss the board covers: its screw hole, head ring and head height"),
    "region.mount-outside": _c("error", "a mounting boss whose screw hole is not inside the usable board region"),
    "region.mount-head": _c("error", "a mounting screw's head taller than the room under the lid over its boss"),
    # placement and fit (pipeline/place.py, pipeline/project.py)
    "fit.fits": _c("info", "every fitted part is placed inside the cavity"),
    "fit.blocked": _c("error", "a reason the parts do not fit"),
    "fit.tight": _c("warning", "every part fits, but the board is smaller than the routing rule of thumb suggests"),
    "fit.region-split": _c("warning", "the usable region is in separate pieces; the proposed board uses the largest"),
    "fit.bottom-side": _c("info", "parts placed on the bottom side"),
    "fit.self-check": _c("warning", "the placement self-check rejected parts; they are reported as unplaced"),
    "fit.no-cavity": _c("info", "no cavity drawing given: the fit was not checked"),
    "place.rule-unmet": _c("warning", "a part is not where a default placement rule wants it (a decoupling "
                                      "capacitor too far from its IC's supply pins, a wire pad or connector "
                                      "off the edge by the wire entry); a near rule the design asks for "
                                      "blocks the fit instead"),
    # routing (pipeline/route/, pipeline/verdict.py)
    "route.open": _c("error", "nets the router could not complete on this board"),
    "route.routed": _c("info", "every connection routed and the independent copper check is clean"),
    "route.smallest": _c("info", "the smallest board that places and routes, against the courtyard sum and the "
                                 "rule of thumb"),
    "route.skipped": _c("info", "routing switched off or not tried: the verdict is placement only"),
    "route.demand": _c("info", "routing demand (RUDY) and where the router found congestion, for open nets"),
    "route.defect": _c("error", "the independent copper check rejects a routing the router called complete "
                                "(a defect of the router)"),
    # project file (pipeline/project.py)
    "project.thickness": _c("warning", "a board thickness that is not a common stock thickness"),
}


def allowed(code: str, severity: str) -> bool:
    """Whether ``code`` is in the table and may carry ``severity``."""
    c = CODES.get(code)
    return c is not None and severity in c.severities


def markdown_table() -> str:
    """README's table of finding codes, generated from :data:`CODES` (one row a code)."""
    rows = ["| code | severity | meaning |", "|---|---|---|"]
    rows += [f"| `{k}` | {' / '.join(c.severities)} | {c.meaning} |" for k, c in CODES.items()]
    return "\n".join(rows) + "\n"
