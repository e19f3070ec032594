"""route_fit: the spreading loop (first placement that routes wins; one time budget for all attempts).

The placer and the router are replaced by fakes here: what is tested is the loop's own rule (its
docstring), so the fakes only record what the loop asks of them.
"""

from dataclasses import dataclass

import pytest

import pipeline.place
import pipeline.route as route
from pipeline.route import OPEN, ROUTED, SPREAD_STEPS, CopperRules, RouteOutcome, RouteVerdict


@dataclass(frozen=True)
class _Fit:
    placements: tuple = ()
    board_outline: object = None
    wirelength_mm: float = 0.0
    fits: bool = True


@dataclass(frozen=True)
class _Item:
    ref: str = "R1"
    length_mm: float = 1.0
    width_mm: float = 0.5


def _run(monkeypatch, budget_s, open_counts, clock_step=0.0):
    """route_fit with a fake router returning ``open_counts[i]`` open nets on attempt i."""
    calls, now = [], [0.0]

    def fake_route(outline, placements, design, library, rules, *, time_budget_s=None, **kw):
        n = open_counts[len(calls)]
        calls.append(time_budget_s)
        now[0] += clock_step                       # each routing "takes" clock_step seconds
        nets = tuple(f"N{i}" for i in range(n))
        return RouteOutcome(RouteVerdict(ROUTED if n == 0 else OPEN, nets), None, None, {})

    monkeypatch.setattr(route, "route_placed", fake_route)
    monkeypatch.setattr(pipeline.place, "place_and_fit", lambda *a, **k: _Fit())
    monkeypatch.setattr(route, "_head_rings", lambda region: ())
    monkeypatch.setattr("time.monotonic", lambda: now[0])
    rules = CopperRules(time_budget_s=budget_s)
    _, out = route.route_fit(_Fit(), (_Item(),), None, type("O", (), {"density": "nominal"})(), None, None, rules)
    return calls, out


def test_first_placement_that_routes_wins(monkeypatch):
    calls, out = _run(monkeypatch, 60.0, [3, 2, 0, 0, 0, 0])
    assert len(calls) == 3 and out.verdict.status == ROUTED
    assert out.verdict.spread_mm == pytest.approx(SPREAD_STEPS[2] * CopperRules().pitch_mm)


def test_fewest_open_nets_kept_when_nothing_routes(monkeypatch):
    counts = [5, 2, 4, 3, 6, 7]
    calls, out = _run(monkeypatch, 60.0, counts)
    assert len(calls) == len(SPREAD_STEPS) and out.verdict.open_nets == ("N0", "N1")


@pytest.mark.parametrize("budget, step, attempts", [
    (0.0, 1.0, 1),     # no time at all: the compact placement is still routed once, with a zero budget
    (25.0, 10.0, 3),   # 10 s per routing: attempts start at 0, 10 and 20 s; the fourth would start at 30
    (1000.0, 1.0, 6),  # room for every spread step
])
def test_one_budget_covers_all_attempts(monkeypatch, budget, step, attempts):
    calls, _ = _run(monkeypatch, budget, [1] * len(SPREAD_STEPS), clock_step=step)
    assert len(calls) == attempts
    # each routing gets what the earlier ones left: budget - elapsed (closed form of the fake clock)
    assert calls == pytest.approx([max(budget - i * step, 0.0) for i in range(attempts)])
