"""Declared-stage benchmark: our vectorised analysis against plain-Python loops.

Run from the repository root::

    .venv/bin/python bench/bench_circuit.py
    .venv/bin/python -m pytest -m bench bench/bench_circuit.py -q -s

The circuit is a unity-gain Sallen-Key low-pass (``REFERENCES.md``
section 5: in - R1 - node A - R2 - (+), Cf from A to the output, Cg from
(+) to ground), declared the way a design file does it: a
:class:`pipeline.model.RawTable` ``[stages.aa]`` over
:class:`pipeline.model.Part` objects, analysed by the public entry
:func:`pipeline.circuit.analyse_blocks`. It prints, side by side:

1. **Retune.** The sized values (R1 = R2 = 10k 1 %, Cf = 22n, Cg = 10n
   5 %) give f0 = 1073 Hz, Q = 0.742 and miss the targets f0 = 1 kHz
   +-2 %, Q = 0.707 +-2 %; the stage allows E96 resistors and E12
   capacitors. Ours: ``analyse_blocks(design, draws=0)`` (the retune is
   all it does beyond the nominal figures, 16 tolerance corners and the
   frequency response; the same call on the passing, retuned design is
   timed too, so the difference is the search itself), best of 5. The
   reference: four nested plain-Python loops over the whole candidate grid
   the retune documents (every series value from a tenth to ten times the
   present one: 193 x 193 E96 resistors x 25 x 25 E12 capacitors, 23.3
   million combinations, grid built with the reference package
   ``eseries``), f0 and Q from the closed forms of ``REFERENCES.md``
   section 5, ranked the way the retune documents its ranking (meets every
   target first, then fewest changed parts, then the combined error
   sum(((figure - aim) / allowed error)^2) plus the weak pull
   0.01 sum(ln(value / present)^2); the pull of untargeted figures toward
   their present value is zero here, since the only one, the gain, is
   exactly 1 for every candidate). Being exhaustive, the reference finds
   the best combination of the grid; the check is that ours is just as
   good (same ranking class, same error to 1e-9) and lies on the grid.
   For context a third row runs the same exhaustive search and ranking by
   numpy broadcasting, which separates what vectorisation buys from what
   the retune's narrower search (part pairs plus solved Sallen-Key seeds)
   buys.
   Target (issue 4): an E96 x E12 search well under 1 s.
2. **Monte Carlo, 10,000 draws** on the retuned (passing) stage, seed 1.
   Ours: :func:`pipeline.circuit.block_samples` plus ``numpy.percentile``
   and the share of builds out of target (the Monte Carlo work alone), and
   the whole ``analyse_blocks`` call. The reference: a plain-Python loop
   over the same draws (the same ``numpy.random.default_rng(1)`` stream,
   taken one scalar at a time), each part ``v (1 + u t)``, f0 and Q from
   the closed forms, the -3 dB frequency from |H|^2 = 1/2, percentiles by
   linear interpolation between order statistics (numpy's default
   method). Check: the 1st / 50th / 99th percentiles agree to 1e-9
   relative and the share out of target is the same count.
3. **Peak memory** traced by ``tracemalloc`` during one ``analyse_blocks``
   call at 10,000 and 100,000 draws, for the passing stage and for the
   missing one (which adds the retune and a Monte Carlo of each proposal).

The whole run takes about 8 s on the shared 2-core machine, nearly all of
it the plain-Python retune reference (full grid, no subset, no scaling).
"""

from __future__ import annotations

import math
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from pipeline.model import Design, Part, RawTable  # noqa: E402
from pipeline.circuit import analyse_blocks, block_samples  # noqa: E402

SEED = 1
DRAWS = 10_000
#: the sized values that miss their targets (ohm, F) and their tolerances
MISSING = {"R1": 10e3, "R2": 10e3, "Cf": 22e-9, "Cg": 10e-9}
TOLERANCE = {"R1": 0.01, "R2": 0.01, "Cf": 0.05, "Cg": 0.05}
#: targets: (aim, allowed error as a fraction of the aim); Butterworth Q 1/sqrt(2) ~ 0.707
TARGETS = {"f0": (1000.0, 0.02), "q": (0.707, 0.02)}
SERIES = {"resistor": "E96", "capacitor": "E12"}
ROLES = ("R1", "R2", "Cf", "Cg")            # analyse_blocks' numeric order for this type
REFS = {"R1": "R1", "R2": "R2", "Cf": "C1", "Cg": "C2"}
RETUNE_TARGET_S = 1.0
PCT = (1.0, 50.0, 99.0)
TWO_PI = 2.0 * math.pi


# --------------------------------------------------------------------------
# the design, built from pipeline.model objects
# --------------------------------------------------------------------------
def make_design(values: dict[str, float]) -> Design:
    """A design holding one declared unity-gain Sallen-Key low-pass stage."""
    parts = tuple(
        Part(REFS[role], "resistor" if role.startswith("R") else "capacitor", "0603", (),
             value=values[role], value_text=f"{values[role]:g}", tolerance=TOLERANCE[role],
             tolerance_text=f"{TOLERANCE[role] * 100:g}%")
        for role in ROLES
    )
    targets = {k: f"{aim:g}{'Hz' if k == 'f0' else ''} ±{frac * 100:g}%" for k, (aim, frac) in TARGETS.items()}
    table = RawTable("aa", (("type", "sallen-key-lowpass"), ("parts", dict(REFS)), ("targets", targets),
                            ("series", dict(SERIES))), "bench.toml", "stages.aa", 1)
    return Design("bench", "A", "bench.toml", parts, (), (table,))


def best_of(fn, repeat: int = 5) -> tuple[float, object]:
    best, out = math.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def bounds(aim: float, frac: float) -> tuple[float, float]:
    """Target range with the same hair of float slack as ``Target.contains``."""
    half = abs(aim) * frac
    lo, hi = aim - half, aim + half
    eps = 1e-12 * max(abs(lo), abs(hi))
    return lo - eps, hi + eps


# --------------------------------------------------------------------------
# closed forms, REFERENCES.md section 5 (unity gain), scalar
# --------------------------------------------------------------------------
def sk_lowpass_scalar(r1: float, r2: float, cf: float, cg: float) -> tuple[float, float]:
    """f0 = 1 / (2 pi sqrt(R1 R2 Cf Cg)); Q = sqrt(R1 R2 Cf Cg) / (Cg (R1 + R2))."""
    tau = math.sqrt(r1 * r2 * cf * cg)
    return 1.0 / (TWO_PI * tau), tau / (cg * (r1 + r2))


def f3db_lowpass2(f0: float, q: float) -> float:
    """-3 dB frequency of 1 / (s^2/w0^2 + s/(Q w0) + 1): |H|^2 = 1/2 gives
    x^4 - 2 a x^2 - 1 = 0 for x = f / f0, a = 1 - 1 / (2 Q^2), so
    x^2 = a + sqrt(a^2 + 1) (closed-form algebra)."""
    a = 1.0 - 1.0 / (2.0 * q * q)
    return f0 * math.sqrt(a + math.sqrt(a * a + 1.0))


# --------------------------------------------------------------------------
# 1. retune
# --------------------------------------------------------------------------
def reference_grid(role: str, present: float) -> list[float]:
    """Series values from present / 10 to 10 x present, from the ``eseries`` package."""
    import eseries

    series = getattr(eseries, SERIES["resistor" if role.startswith("R") else "capacitor"])
    return [float(x) for x in eseries.erange(series, present / 10 * (1 - 1e-9), present * 10 * (1 + 1e-9))]


def reference_retune(present: dict[str, float]) -> dict:
    """Exhaustive plain-Python search of the retune grid (see the module docstring).

    Ranking key, smaller is better: (class, total) where class is the number
    of changed parts for a candidate meeting every target, 99 for one that
    misses; total = target error + 0.01 sum(ln(value / present)^2). The
    present combination itself is not a candidate (as in the retune).
    """
    grids = {r: reference_grid(r, present[r]) for r in ROLES}
    (af, ff), (aq, fq) = TARGETS["f0"], TARGETS["q"]
    hf, hq = af * ff, aq * fq
    flo, fhi = bounds(af, ff)
    qlo, qhi = bounds(aq, fq)

    def changed(r, x):
        return 0 if abs(x / present[r] - 1.0) <= 1e-9 else 1

    def pull(r, x):
        return 0.01 * math.log(x / present[r]) ** 2

    g1 = [(x, changed("R1", x), pull("R1", x)) for x in grids["R1"]]
    g2 = [(x, changed("R2", x), pull("R2", x)) for x in grids["R2"]]
    gf = [(x, changed("Cf", x), pull("Cf", x)) for x in grids["Cf"]]
    gg = [(x, changed("Cg", x), pull("Cg", x)) for x in grids["Cg"]]
    two_pi = TWO_PI
    sqrt = math.sqrt
    best_cls, best_total, best_err, best_vals = 100, math.inf, math.inf, None
    min_err, min_vals = math.inf, None
    n = n_pass = 0
    t = time.perf_counter()
    for cf, chf, plf in gf:
        for cg, chg, plg in gg:
            for r1, ch1, pl1 in g1:
                p = r1 * cf * cg
                chb, plb = chf + chg + ch1, plf + plg + pl1
                for r2, ch2, pl2 in g2:
                    n += 1
                    tau = sqrt(p * r2)                   # sqrt(R1 R2 Cf Cg)
                    f0 = 1.0 / (two_pi * tau)
                    q = tau / (cg * (r1 + r2))
                    e = ((f0 - af) / hf) ** 2 + ((q - aq) / hq) ** 2
                    if e < min_err:
                        min_err, min_vals = e, (r1, r2, cf, cg)
                    ch = chb + ch2
                    if ch == 0:
                        continue
                    if flo <= f0 <= fhi and qlo <= q <= qhi:
                        n_pass += 1
                        cls = ch
                    else:
                        cls = 99
                    if cls <= best_cls:
                        total = e + plb + pl2
                        if cls < best_cls or total < best_total:
                            best_cls, best_total, best_err, best_vals = cls, total, e, (r1, r2, cf, cg)
    dt = time.perf_counter() - t
    return {"time": dt, "n": n, "n_pass": n_pass, "sizes": tuple(len(grids[r]) for r in ROLES),
            "grids": grids, "cls": best_cls, "total": best_total, "err": best_err, "vals": best_vals,
            "min_err": min_err, "min_vals": min_vals}


def numpy_exhaustive(present: dict[str, float], grids: dict[str, list[float]]) -> dict:
    """The same exhaustive search and ranking as :func:`reference_retune`, by numpy
    broadcasting over (R1, R2, Cg) for each Cf: context for how much of the
    speed-up is vectorisation and how much is the retune's narrower search."""
    (af, ff), (aq, fq) = TARGETS["f0"], TARGETS["q"]
    hf, hq = af * ff, aq * fq
    flo, fhi = bounds(af, ff)
    qlo, qhi = bounds(aq, fq)
    g = {r: np.asarray(grids[r]) for r in ROLES}
    ch = {r: (np.abs(g[r] / present[r] - 1.0) > 1e-9).astype(int) for r in ROLES}
    pl = {r: 0.01 * np.log(g[r] / present[r]) ** 2 for r in ROLES}
    r1, r2, cg = g["R1"][:, None, None], g["R2"][None, :, None], g["Cg"][None, None, :]
    best = (100, math.inf, math.inf, None)
    t = time.perf_counter()
    for k, cf in enumerate(g["Cf"]):
        tau = np.sqrt(r1 * r2 * cf * cg)
        f0 = 1.0 / (TWO_PI * tau)
        q = tau / (cg * (r1 + r2))
        e = ((f0 - af) / hf) ** 2 + ((q - aq) / hq) ** 2
        c = ch["R1"][:, None, None] + ch["R2"][None, :, None] + ch["Cg"][None, None, :] + ch["Cf"][k]
        ok = (f0 >= flo) & (f0 <= fhi) & (q >= qlo) & (q <= qhi)
        cls = np.where(c == 0, 100, np.where(ok, c, 99))
        total = e + pl["R1"][:, None, None] + pl["R2"][None, :, None] + pl["Cg"][None, None, :] + pl["Cf"][k]
        m = int(cls.min())
        tot = np.where(cls == m, total, np.inf)
        i = np.unravel_index(int(np.argmin(tot)), tot.shape)
        if m < best[0] or (m == best[0] and tot[i] < best[1]):
            best = (m, float(tot[i]), float(e[i]), (float(g["R1"][i[0]]), float(g["R2"][i[1]]), float(cf),
                                                    float(g["Cg"][i[2]])))
    dt = time.perf_counter() - t
    return {"time": dt, "cls": best[0], "total": best[1], "err": best[2], "vals": best[3]}


def ours_retune() -> dict:
    missing = make_design(MISSING)
    t0, (reps, findings) = best_of(lambda: analyse_blocks(missing, draws=0))
    rep = reps[0]
    best = rep.proposals[0]
    vals = dict((role, v) for role, _, v in best.values)
    passing = make_design(vals)
    t_pass, (reps_p, _) = best_of(lambda: analyse_blocks(passing, draws=0))
    t_full, _ = best_of(lambda: analyse_blocks(missing, draws=DRAWS), repeat=3)
    changed = len(best.changed)
    total = best.error + sum(0.01 * math.log(vals[r] / MISSING[r]) ** 2 for r in ROLES)
    return {"time": t0, "time_passing": t_pass, "time_full": t_full, "proposal": best, "vals": vals,
            "cls": changed if best.passes else 99, "total": total, "err": best.error,
            "missed": rep.passes is False, "n_proposals": len(rep.proposals), "applied_passes": reps_p[0].passes,
            "codes": sorted({f.check for f in findings})}


def vtxt(v) -> str:
    """R1, R2 (ohm), Cf, Cg (F) as short text."""
    return f"R1 {v[0]:g}, R2 {v[1]:g}, Cf {v[2] * 1e9:g}n, Cg {v[3] * 1e9:g}n"


def compare_retune(out=print) -> dict:
    o = ours_retune()
    r = reference_retune(MISSING)
    x = numpy_exhaustive(MISSING, r["grids"])
    f0_0, q_0 = sk_lowpass_scalar(*(MISSING[role] for role in ROLES))
    on_grid = all(any(math.isclose(o["vals"][role], x, rel_tol=1e-9) for x in r["grids"][role]) for role in ROLES)
    # the reference's closed forms evaluate our proposal to the figures we report
    f0, q = sk_lowpass_scalar(*(o["vals"][role] for role in ROLES))
    figs = dict(o["proposal"].figures)
    forms_agree = math.isclose(f0, figs["f0"], rel_tol=1e-12) and math.isclose(q, figs["q"], rel_tol=1e-12)
    same_class = o["cls"] == r["cls"]
    same_err = math.isclose(o["err"], r["err"], rel_tol=1e-9, abs_tol=1e-12)
    as_good = r["cls"] < o["cls"] or (r["cls"] == o["cls"] and r["total"] <= o["total"] * (1 + 1e-9) + 1e-12)
    ratio = r["time"] / o["time"]
    sizes = " x ".join(str(s) for s in r["sizes"])

    out("1. retune, unity-gain Sallen-Key low-pass, E96 resistors x E12 capacitors "
        f"(targets f0 1 kHz ±2 %, Q 0.707 ±2 %; sized {vtxt([MISSING[k] for k in ROLES])}: "
        f"f0 {f0_0:.1f} Hz, Q {q_0:.4f}, missed={o['missed']}; findings {', '.join(o['codes'])})")
    head = (f"{'':28} | {'time s':>9} | {'ranking class':>13} | {'error':>10} | {'total':>10} | best combination")
    out(head)
    out("-" * (len(head) + 30))
    out(f"{'ours: analyse_blocks draws=0':28} | {o['time']:9.4f} | {o['cls']:13d} | {o['err']:10.6f} | "
        f"{o['total']:10.6f} | {vtxt([o['vals'][k] for k in ROLES])}")
    out(f"{'reference: plain-Python grid':28} | {r['time']:9.2f} | {r['cls']:13d} | {r['err']:10.6f} | "
        f"{r['total']:10.6f} | {vtxt(r['vals'])}")
    out(f"{'context: numpy exhaustive':28} | {x['time']:9.3f} | {x['cls']:13d} | {x['err']:10.6f} | "
        f"{x['total']:10.6f} | {vtxt(x['vals'])}")
    out(f"  ours: best of 5; the same call on the passing retuned design (no retune) {o['time_passing']:.4f} s, "
        f"so the search itself is about {max(o['time'] - o['time_passing'], 0.0):.4f} s; "
        f"with draws={DRAWS} (Monte Carlo of the stage and of each of the {o['n_proposals']} proposals) "
        f"{o['time_full']:.4f} s")
    out(f"  reference: full grid {sizes} = {r['n']:,} combinations, evaluated once, no subset, no scaling "
        f"({r['time'] / r['n'] * 1e6:.2f} us each); {r['n_pass']:,} meet both targets")
    out(f"  context: the same full grid and ranking by numpy broadcasting, one Cf at a time: "
        f"{r['time'] / x['time']:,.0f}x faster than the loops, {x['time'] / o['time']:,.0f}x slower than "
        f"the retune, which searches part pairs and solved Sallen-Key seeds instead of all combinations")
    out(f"  ranking class = number of changed parts of a candidate meeting every target (99: misses one); "
        f"total = error + 0.01 sum(ln(value / present)^2)")
    out(f"  smallest target error anywhere on the grid (any number of changes): {r['min_err']:.3g} at "
        f"{vtxt(r['min_vals'])} (the ranking prefers fewer changed parts)")
    out(f"  fairness: our combination on the reference grid {on_grid}; closed forms give our f0 and Q to "
        f"1e-12 {forms_agree}; reference at least as good {as_good}; same class {same_class}, same error "
        f"to 1e-9 {same_err}; the proposal applied passes {o['applied_passes']}")
    verdict = "PASS" if o["time"] < RETUNE_TARGET_S else "FAIL"
    out(f"  speed-up reference / ours: {ratio:,.0f}x; target < {RETUNE_TARGET_S:g} s (issue 4: well under a "
        f"second): {verdict}, {o['time']:.4f} s = {o['time'] / RETUNE_TARGET_S * 100:.1f} % of it")
    return {"ours": o, "ref": r, "numpy": x, "ratio": ratio, "on_grid": on_grid, "forms_agree": forms_agree,
            "as_good": as_good, "same_class": same_class, "same_err": same_err, "verdict": verdict}


# --------------------------------------------------------------------------
# 2. Monte Carlo
# --------------------------------------------------------------------------
def percentile_linear(sorted_x: list[float], p: float) -> float:
    """Linear interpolation between order statistics at rank p/100 (n - 1)."""
    h = (len(sorted_x) - 1) * p / 100.0
    lo = math.floor(h)
    hi = min(lo + 1, len(sorted_x) - 1)
    return sorted_x[lo] + (h - lo) * (sorted_x[hi] - sorted_x[lo])


def reference_mc(values: dict[str, float], draws: int, seed: int) -> dict:
    """Plain-Python loop over the draws: same generator, seed and order as the analysis."""
    t = time.perf_counter()
    rng = np.random.default_rng(seed)
    uni = rng.uniform
    vals = [values[r] for r in ROLES]
    tols = [TOLERANCE[r] for r in ROLES]
    flo, fhi = bounds(*TARGETS["f0"])
    qlo, qhi = bounds(*TARGETS["q"])
    f0s, qs, f3s = [], [], []
    out_f0 = out_q = out_any = 0
    for _ in range(draws):
        r1, r2, cf, cg = [v * (1.0 + uni(-1.0, 1.0) * tl) for v, tl in zip(vals, tols)]
        f0, q = sk_lowpass_scalar(r1, r2, cf, cg)
        f0s.append(f0)
        qs.append(q)
        f3s.append(f3db_lowpass2(f0, q))
        bf, bq = not (flo <= f0 <= fhi), not (qlo <= q <= qhi)
        out_f0 += bf
        out_q += bq
        out_any += bf or bq
    res = {}
    for name, xs in (("f0", f0s), ("q", qs), ("f_3db", f3s)):
        s = sorted(xs)
        res[name] = tuple(percentile_linear(s, p) for p in PCT)
    dt = time.perf_counter() - t
    return {"time": dt, "pct": res, "out": {"f0": out_f0, "q": out_q, "any": out_any}}


def ours_mc(values: dict[str, float], draws: int, seed: int) -> dict:
    design = make_design(values)
    table = design.stages[0]

    def samples():
        s = block_samples(design, table, draws=draws, seed=seed)
        pct = {k: tuple(float(x) for x in np.percentile(s[k], PCT)) for k in ("f0", "q", "f_3db")}
        f0, q = s["f0"], s["q"]
        flo, fhi = bounds(*TARGETS["f0"])
        qlo, qhi = bounds(*TARGETS["q"])
        bf, bq = ~((f0 >= flo) & (f0 <= fhi)), ~((q >= qlo) & (q <= qhi))
        return pct, {"f0": int(bf.sum()), "q": int(bq.sum()), "any": int((bf | bq).sum())}

    t_s, (pct_s, out_s) = best_of(samples)
    t_a, (reps, _) = best_of(lambda: analyse_blocks(design, draws=draws, seed=seed))
    rep = reps[0]
    pct_a = {k: (rep.figure(k).p01, rep.figure(k).p50, rep.figure(k).p99) for k in ("f0", "q", "f_3db")}
    out_a = {"f0": round(rep.figure("f0").share_out * draws), "q": round(rep.figure("q").share_out * draws),
             "any": round(rep.share_out * draws)}
    return {"time_samples": t_s, "time_call": t_a, "pct_samples": pct_s, "out_samples": out_s,
            "pct": pct_a, "out": out_a, "passes": rep.passes}


def compare_mc(values: dict[str, float], out=print) -> dict:
    o = ours_mc(values, DRAWS, SEED)
    r = reference_mc(values, DRAWS, SEED)
    worst = 0.0
    for k in r["pct"]:
        for a, b, c in zip(o["pct"][k], o["pct_samples"][k], r["pct"][k]):
            worst = max(worst, abs(a - c) / abs(c), abs(b - c) / abs(c))
    same_out = o["out"] == r["out"] == o["out_samples"]
    out("")
    out(f"2. Monte Carlo, {DRAWS:,} draws, seed {SEED}, on the retuned stage "
        f"({vtxt([values[k] for k in ROLES])}; nominal passes={o['passes']})")
    head = (f"{'':36} | {'time s':>8} | {'f0 p1 / p50 / p99 Hz':>30} | {'Q p1 / p50 / p99':>26} | "
            f"{'f-3dB p50 Hz':>12} | out f0 / Q / any")
    out(head)
    out("-" * (len(head) + 4))

    def row(name, t, pct, outs):
        f, q, f3 = pct["f0"], pct["q"], pct["f_3db"]
        out(f"{name:36} | {t:8.4f} | {f[0]:9.3f} {f[1]:9.3f} {f[2]:9.3f}  | {q[0]:8.5f} {q[1]:8.5f} {q[2]:8.5f} | "
            f"{f3[1]:12.3f} | {outs['f0']} / {outs['q']} / {outs['any']}")

    row("ours: block_samples + percentiles", o["time_samples"], o["pct_samples"], o["out_samples"])
    row("ours: analyse_blocks (whole call)", o["time_call"], o["pct"], o["out"])
    row("reference: plain-Python loop", r["time"], r["pct"], r["out"])
    ok = worst <= 1e-9 and same_out
    out(f"  ours best of 5; speed-up reference / ours: {r['time'] / o['time_samples']:,.0f}x (Monte Carlo "
        f"alone), {r['time'] / o['time_call']:,.0f}x (whole analyse_blocks call)")
    out(f"  worst relative percentile difference {worst:.2e} (target <= 1e-9); builds out of target "
        f"identical: {same_out} -> {'PASS' if ok else 'FAIL'}")
    return {"ours": o, "ref": r, "worst_rel": worst, "same_out": same_out, "ok": ok,
            "ratio": r["time"] / o["time_samples"]}


# --------------------------------------------------------------------------
# 3. peak memory
# --------------------------------------------------------------------------
def peak_memory(design: Design, draws: int) -> tuple[int, float]:
    tracemalloc.start()
    t = time.perf_counter()
    analyse_blocks(design, draws=draws, seed=SEED)
    dt = time.perf_counter() - t
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak, dt


def compare_memory(passing_values: dict[str, float], out=print) -> dict:
    rows = {}
    out("")
    out("3. peak memory traced by tracemalloc during one analyse_blocks call (time under tracing, for scale)")
    head = f"{'stage':46} | {'draws':>7} | {'peak MiB':>8} | {'time s':>7}"
    out(head)
    out("-" * len(head))
    for label, vals in (("passing (retuned) stage", passing_values),
                        ("missing stage (adds retune + 5 proposals' MC)", MISSING)):
        design = make_design(vals)
        for draws in (10_000, 100_000):
            peak, dt = peak_memory(design, draws)
            rows[(label, draws)] = peak
            out(f"{label:46} | {draws:7,d} | {peak / 2 ** 20:8.2f} | {dt:7.3f}")
    return rows


# --------------------------------------------------------------------------
# 4. import cost: what evaluating H(jw) without scipy.signal saves
# --------------------------------------------------------------------------
def _import_seconds(code: str, repeat: int = 3) -> float:
    """Median wall time of a fresh interpreter running ``code`` (s)."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT)
        times.append(time.perf_counter() - t)
    return sorted(times)[len(times) // 2]


def compare_imports(out=print) -> dict:
    out("")
    out("4. start-up: fresh interpreter, median of 3 wall times")
    rows = {
        "bare": _import_seconds("pass"),
        "circuit": _import_seconds("import pipeline.circuit, pipeline.export.blocks"),
        "circuit+signal": _import_seconds("import pipeline.circuit, pipeline.export.blocks, scipy.signal"),
    }
    for k, v in rows.items():
        out(f"  {k:16} {v:7.3f} s")
    rows["ratio"] = rows["circuit+signal"] / rows["circuit"]
    out(f"  block analysis imports with scipy.signal / without: {rows['ratio']:.2f}x "
        f"(H(jw) is evaluated with numpy.polyval; scipy.signal is the tests' reference only)")
    return rows


# --------------------------------------------------------------------------
def run(out=print) -> dict:
    t = time.perf_counter()
    rows = {"retune": compare_retune(out)}
    retuned = rows["retune"]["ours"]["vals"]
    rows["mc"] = compare_mc(retuned, out)
    rows["memory"] = compare_memory(retuned, out)
    rows["imports"] = compare_imports(out)
    rows["total"] = time.perf_counter() - t
    out("")
    out(f"whole benchmark: {rows['total']:.1f} s")
    return rows


def main(argv=None) -> int:
    run()
    return 0


try:  # `pytest -m bench bench/bench_circuit.py`
    import pytest

    @pytest.mark.bench
    def test_bench_circuit():
        rows = run()
        r = rows["retune"]
        assert r["ours"]["missed"] and r["ours"]["applied_passes"]
        assert r["ours"]["time"] < RETUNE_TARGET_S
        assert r["on_grid"] and r["forms_agree"]
        assert r["as_good"] and r["same_class"] and r["same_err"]
        assert rows["mc"]["ok"]
except ImportError:  # pragma: no cover
    pass


if __name__ == "__main__":
    sys.exit(main())
