"""Scale benchmark (issue 11): the whole ``snugboard run`` from 250 to 16,000 parts.

Run from the repository root::

    .venv/bin/python bench/bench_scale.py                 # 250, 1,000, 4,000, 16,000 parts
    .venv/bin/python bench/bench_scale.py 250 1000        # chosen sizes
    .venv/bin/python -m pytest -m bench bench/bench_scale.py -q -s   # the same, targets asserted

For each size it writes a generated project (:mod:`bench.generate`: op-amp
blocks with local nets, 0402/0603 passives, SOIC-8/TSSOP-14, wire pads; a
2,000-vertex superellipse bay with bosses and two depth zones; courtyards
65 % of the usable region) and runs ``python -m pipeline.cli run`` on it in
a child process, so the figures cover reading, every check, the placement
and every export. It prints, side by side:

* CPU seconds (user + system of the child, ``os.wait4``), wall seconds and
  peak resident memory (``ru_maxrss``);
* time(4N) / time(N) in CPU seconds;
* ours / rectangle-packer: our whole run against ``rpack.pack`` alone on
  the same courtyards (integers of 0.01 mm, in a child process stopped at
  ``RPACK_LIMIT`` seconds; a stopped run is shown as ``>limit``);
* wirelength ours / random: the half-perimeter wirelength over every net
  of our placement (``fit.json``) against the mean of three seeded random
  permutations of the parts over our own slots, each part only into a slot
  of a part of the same package and side (a legal placement);

and then the tightest-cavity densities (courtyard sum over the enclosing or
usable area) against the reference packers (:mod:`bench.bench_place`), and
every target as a ratio with pass or fail.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
for p in (str(ROOT), str(ROOT / "bench")):
    if p not in sys.path:
        sys.path.insert(0, p)

import generate  # noqa: E402

SIZES = (250, 1000, 4000, 16000)
RPACK_LIMIT = 120.0
PERMUTATIONS = 3
#: targets (issue 11)
T_SCALE = 4.5          # time(4N) / time(N) from 4,000 to 16,000 parts, at most
T_CPU_16K = 25.0       # CPU seconds at 16,000 parts, under
T_WIRE = 0.45          # wirelength / random permutation, at most
T_DENSITY = {50: 0.944, 500: 0.976}  # rectangle, not worse than
T_DENSITY_KEEPOUT = 0.87             # 500 parts, keep-outs and a shallow rib, not worse than


def _child(cmd, limit=None, cwd=None) -> dict:
    """Run ``cmd``; CPU and wall seconds, peak RSS (MiB), exit status; killed at ``limit`` s.

    The child is reaped here with ``os.wait4``, which returns its own resource usage."""
    t = time.perf_counter()
    log = tempfile.TemporaryFile()  # a file, not a pipe: a chatty child cannot block on it
    proc = subprocess.Popen(cmd, cwd=cwd, stdout=subprocess.DEVNULL, stderr=log)
    deadline = None if limit is None else t + limit
    stopped = False
    while True:
        pid, status, ru = os.wait4(proc.pid, os.WNOHANG)
        if pid:
            break
        if deadline is not None and time.perf_counter() > deadline:
            proc.kill()
            stopped = True
            pid, status, ru = os.wait4(proc.pid, 0)
            break
        time.sleep(0.05)
    proc.returncode = 0  # reaped here
    log.seek(0)
    err = log.read()
    log.close()
    return {"cpu": ru.ru_utime + ru.ru_stime, "wall": time.perf_counter() - t, "rss": ru.ru_maxrss / 1024,
            "status": os.waitstatus_to_exitcode(status) if not stopped else None, "stopped": stopped,
            "err": err}


def _hpwl(nets: dict[str, list[str]], at: dict[str, tuple[float, float]]) -> float:
    total = 0.0
    for refs in nets.values():
        pts = np.array([at[r] for r in refs if r in at])
        if len(pts) >= 2:
            total += float(np.ptp(pts[:, 0]) + np.ptp(pts[:, 1]))
    return total


def wirelength_ratio(gen: generate.Generated, fit: dict) -> tuple[float, float]:
    """(ours, mean of random legal permutations of our slots), mm."""
    at = {p["ref"]: (p["x_mm"], p["y_mm"]) for p in fit["placements"]}
    side = {p["ref"]: p["side"] for p in fit["placements"]}
    ours = _hpwl(gen.nets, at)
    groups: dict[tuple, list[str]] = {}
    for r in sorted(at):
        groups.setdefault((gen.packages[r], side[r]), []).append(r)
    rng = np.random.default_rng(7)
    rand = []
    for _ in range(PERMUTATIONS):
        moved = {}
        for refs in groups.values():
            perm = rng.permutation(len(refs))
            for r, k in zip(refs, perm):
                moved[r] = at[refs[k]]
        rand.append(_hpwl(gen.nets, moved))
    return ours, float(np.mean(rand))


def rpack_cmd(folder: Path) -> list[str]:
    code = ("import json,sys,rpack; s=json.load(open(sys.argv[1])); "
            "pos=rpack.pack([tuple(x) for x in s]); print(len(pos))")
    return [sys.executable, "-c", code, str(folder / "sizes.json")]


def courtyard_sizes(gen: generate.Generated) -> list[tuple[int, int]]:
    from pipeline.library import load_library

    lib = load_library()
    out = []
    for r in sorted(gen.packages):
        c = lib.package(gen.packages[r]).courtyard("nominal")
        out.append((int(round(c.length_mm * 100)), int(round(c.width_mm * 100))))
    return out


def one_size(n: int, tmp: Path) -> dict:
    folder = tmp / f"p{n}"
    gen = generate.write_project(folder, n)
    # --no-route: issue 11 measures reading, checks, placement and every export; routing has its own
    # benchmark (bench_route.py) and no coarse global stage yet for thousands of parts
    res = _child([sys.executable, "-m", "pipeline.cli", "run", str(folder), "--no-route"], cwd=ROOT)
    if not (folder / "out" / "fit.json").exists():
        raise RuntimeError(f"snugboard run failed on {n} parts: {res['err'].decode(errors='replace')[-2000:]}")
    fit = json.loads((folder / "out" / "fit.json").read_text())
    ours_wl, rand_wl = wirelength_ratio(gen, fit)
    (folder / "sizes.json").write_text(json.dumps(courtyard_sizes(gen)))
    rp = _child(rpack_cmd(folder), limit=RPACK_LIMIT)
    return {"n": n, **{k: res[k] for k in ("cpu", "wall", "rss", "status")}, "fits": fit["fits"],
            "wl": ours_wl, "wl_rand": rand_wl, "rpack": rp["cpu"], "rpack_stopped": rp["stopped"]}


def tightest_keepout(n: int = 500) -> dict:
    """Smallest scale of a pocket with two bosses and a shallow rib that still fits ``n`` parts
    (bisection to 0.25 %); density = courtyard sum / usable region area there."""
    from shapely.geometry import Point, box

    from bench_place import make_items
    from pipeline.model import BoardOptions, Cavity, DepthZone
    from pipeline.place import place_and_fit
    from pipeline.region import usable_region

    items, _ = make_items(n)
    lb = sum(i.length_mm * i.width_mm for i in items)
    board = BoardOptions(edge_clearance_mm=0.0)

    def trial(s: float):
        w, h = s * 1.4, s / 1.4
        pocket = box(0, 0, w, h)
        bosses = (Point(w * 0.2, h * 0.25).buffer(2.5), Point(w * 0.8, h * 0.75).buffer(2.5))
        rib = DepthZone(box(w * 0.55, 0, w * 0.55 + 3, h), 2.2, "DEPTH-2.2")
        cavity = Cavity("bench.dxf", pocket, bosses, (rib,), None, 6.0, "mm", 1.0)
        region, _ = usable_region(cavity, board)
        return place_and_fit(items, region, board, improve=False).fits, region.area_mm2

    lo, hi = math.sqrt(lb), math.sqrt(lb) * 1.5
    ok, area = trial(hi)
    assert ok, "the largest pocket tried must fit"
    while hi / lo > 1.0025:
        mid = math.sqrt(lo * hi)
        fits, a = trial(mid)
        if fits:
            hi, area = mid, a
        else:
            lo = mid
    return {"density": lb / area, "lb": lb, "area": area}


def run(sizes=SIZES, out=print) -> dict:
    rows = []
    with tempfile.TemporaryDirectory() as t:
        tmp = Path(t)
        for n in sizes:
            rows.append(one_size(n, tmp))
            print(f"  ran {n} parts: {rows[-1]['cpu']:.1f} s CPU", file=sys.stderr)
    head = (f"{'parts':>6} | {'CPU s':>6} {'wall s':>6} {'peak MiB':>8} | {'t(N)/t(N/4)':>11} | "
            f"{'rpack s':>8} {'ours/rpack':>10} | {'WL ours mm':>10} {'WL random':>10} {'ours/rand':>9} | fits")
    out("snugboard run end to end (child process: read, check, place, every export)")
    out(head)
    out("-" * len(head))
    by_n = {r["n"]: r for r in rows}
    for r in rows:
        prev = by_n.get(r["n"] // 4)
        scale = f"{r['cpu'] / prev['cpu']:11.2f}" if prev else f"{'-':>11}"
        rp = f">{RPACK_LIMIT:.0f}" if r["rpack_stopped"] else f"{r['rpack']:.2f}"
        vs = (f"<{r['cpu'] / RPACK_LIMIT:.3f}" if r["rpack_stopped"] else f"{r['cpu'] / max(r['rpack'], 1e-3):.2f}")
        out(f"{r['n']:6d} | {r['cpu']:6.2f} {r['wall']:6.2f} {r['rss']:8.1f} | {scale} | {rp:>8} {vs:>10} | "
            f"{r['wl']:10.0f} {r['wl_rand']:10.0f} {r['wl'] / r['wl_rand']:9.3f} | {r['fits']}")
    out(f"(rpack stopped at {RPACK_LIMIT:.0f} s where marked '>'; ours/rpack is then an upper bound)")
    out("")
    from bench_place import make_items, ours, ref_rectpack, ref_rpack

    dens = {}
    out("tightest-cavity density (courtyard sum / enclosing rectangle; bench_place's method)")
    out(f"{'parts':>6} | {'ours':>6} {'rectpack':>8} {'rpack':>6}")
    for n in (50, 500):
        items, nets = make_items(n)
        lb = sum(i.length_mm * i.width_mm for i in items)
        o, a, b = ours(items, nets), ref_rectpack(items, nets), ref_rpack(items, nets)
        dens[n] = lb / o["area"]
        out(f"{n:6d} | {dens[n]:6.3f} {lb / a['area']:8.3f} {lb / b['area']:6.3f}")
    k = tightest_keepout(500)
    out(f"   500 | {k['density']:6.3f}  (pocket with two bosses and a 2.2 mm rib: courtyards / usable region; "
        f"the reference packers take no keep-outs)")
    out("")
    checks = []
    if 4000 in by_n and 16000 in by_n:
        checks.append(("time(16,000)/time(4,000)", by_n[16000]["cpu"] / by_n[4000]["cpu"], "<=", T_SCALE))
    if 16000 in by_n:
        checks.append(("CPU s at 16,000 parts / 25 s", by_n[16000]["cpu"] / T_CPU_16K, "<", 1.0))
    for r in rows:
        checks.append((f"wirelength / random at {r['n']}", r["wl"] / r["wl_rand"], "<=", T_WIRE))
    for n, t in T_DENSITY.items():
        checks.append((f"density at {n} / {t}", dens[n] / t, ">=", 1.0))
    checks.append((f"density with keep-outs at 500 / {T_DENSITY_KEEPOUT}", k["density"] / T_DENSITY_KEEPOUT,
                   ">=", 1.0))
    out("targets (issue 11)")
    ok_all = True
    for name, v, op, t in checks:
        ok = {"<=": v <= t, "<": v < t, ">=": v >= t}[op]
        ok_all &= ok
        out(f"  {name:45s} {v:8.3f} {op} {t:<6} {'pass' if ok else 'FAIL'}")
    return {"rows": rows, "density": dens, "keepout": k, "ok": ok_all}


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    run(tuple(int(a) for a in argv) or SIZES)
    return 0


try:  # `pytest -m bench bench/bench_scale.py`
    import pytest

    @pytest.mark.bench
    def test_bench_scale():
        assert run()["ok"]
except ImportError:  # pragma: no cover
    pass


if __name__ == "__main__":
    sys.exit(main())
