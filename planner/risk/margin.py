"""The safety margin: plan for more than the book so that bad luck still fills it.

A margin ``m`` plans every order as ``(1 + m)`` times its volume (one solve of the same
programme) from the first week the plan can still change (the week the egg-to-harvest
lead time allows: earlier weeks ship pupae already in the trays at the start, and are
reported but not searched over); the plan is then replayed
(:func:`planner.risk.simulate.replay`) and judged against the real book. The smallest margin at which every week with orders is filled with
probability at least ``P`` is found by search over solves: doubling steps from 2 % until
the target is met (or the plan can no longer deliver the margin), then bisection to
``tolerance``. Every replay uses the same seed (common random numbers), which keeps the
fill probabilities of neighbouring margins comparable.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field

from planner.errors import InputError, NoPlanError
from planner.optimise.build import build_model
from planner.optimise.data import compile_horizon
from planner.optimise.results import PlanResult, operating_cost, read_back
from planner.optimise.solve import SolveSettings, solve
from planner.optimise.standard_week import start_batches
from planner.risk.simulate import RiskResult, replay
from planner.scenario.schema import Scenario, Variation

__all__ = ["plan_with_margin", "safety_margin", "MarginResult"]


def plan_with_margin(scn: Scenario, margin: float, settings: SolveSettings | None = None,
                     start=None, horizon_weeks: int | None = None,
                     from_week: int = 1) -> PlanResult:
    """The least-cost plan with every order from plan week ``from_week`` raised by
    ``margin`` [-] (0.1 = 10 %)."""
    from planner.optimise import settings_for
    if margin < 0:
        raise InputError(f"margin = {margin}: a safety margin cannot be negative",
                         place="margin")
    settings = settings or settings_for(scn)
    start = start or start_batches(scn, dataclasses.replace(settings, log_path=None))
    data = compile_horizon(scn, start, horizon_weeks=horizon_weeks)
    data.ordered = data.ordered.copy()
    data.ordered[:, from_week - 1:] *= 1.0 + margin
    built = build_model(data)
    return read_back(built, solve(built.model, settings))


@dataclass
class MarginResult:
    """The margin found, its plan and replay, and the search's trail."""

    target_fill: float
    from_week: int                     # first plan week the margin and target apply to
    max_margin: float                  # the largest margin tried [-]
    margin: float | None               # [-]; None: the target cannot be met
    plan: PlanResult
    risk: RiskResult
    base_plan: PlanResult
    base_risk: RiskResult
    extra_cost_per_week: float | None  # [currency/week]
    trail: list[dict] = field(default_factory=list)
    solves: int = 0
    seconds: float = 0.0

    def summary(self) -> dict:
        weeks = self.base_plan.data.report_weeks
        return {"target_fill": self.target_fill, "margin": self.margin,
                "met": self.margin is not None, "max_margin": self.max_margin,
                "from_week": self.from_week,
                "from_date": self.base_plan.data.date(7 * (self.from_week - 1)),
                "extra_cost_per_week": self.extra_cost_per_week,
                "currency": self.plan.scenario.costs.currency,
                "worst_week_fill_without_margin": self.base_risk.worst_fill(self.from_week),
                "worst_week_fill_with_margin": self.risk.worst_fill(self.from_week),
                "weeks": weeks, "trail": self.trail, "solves": self.solves,
                "seconds": self.seconds}


def safety_margin(scn: Scenario, target_fill: float, replicates: int = 2000, seed: int = 0,
                  settings: SolveSettings | None = None, variation: Variation | None = None,
                  tolerance: float = 0.005, max_margin: float = 0.64,
                  horizon_weeks: int | None = None,
                  from_week: int | None = None) -> MarginResult:
    """Smallest margin [-] at which every week with orders from ``from_week`` (default:
    the first week the lead time allows) is filled with probability at least
    ``target_fill`` [-], within ``tolerance`` [-] of margin."""
    from planner.optimise import settings_for
    from planner.optimise.quote import default_start_week
    week = from_week or default_start_week(scn)
    if not 0 < target_fill < 1:
        raise InputError(f"target fill = {target_fill}: give a probability between 0 and 1, "
                         "e.g. 0.95", place="--target-fill")
    t0 = time.perf_counter()
    settings = settings or settings_for(scn)
    start = start_batches(scn, dataclasses.replace(settings, log_path=None))
    cache: dict[float, tuple[PlanResult, RiskResult]] = {}
    trail: list[dict] = []
    base_orders = None

    def at(m: float):
        nonlocal base_orders
        m = round(m, 6)
        if m not in cache:
            plan = plan_with_margin(scn, m, settings, start, horizon_weeks, week)
            if not plan.info.has_plan:
                raise NoPlanError(f"no plan at a safety margin of {m:.1%}: "
                                  f"{plan.info.message}")
            if base_orders is None:
                base_orders = plan.data.ordered.copy()
            risk = replay(plan, variation, replicates, seed, ordered=base_orders)
            cache[m] = (plan, risk)
            trail.append({"margin": m, "worst_week_fill": risk.worst_fill(week),
                          "operating_cost": operating_cost(plan),
                          "plan_shortfall_million": float(plan.weekly["shortfall"].sum())})
        return cache[m]

    def ok(m: float) -> bool:
        return at(m)[1].worst_fill(week) >= target_fill

    base_plan, base_risk = at(0.0)
    found: float | None
    if ok(0.0):
        found = 0.0
    else:
        lo, hi = 0.0, None
        m = 0.02
        while m <= max_margin + 1e-12:
            if ok(m):
                hi = m
                break
            lo = m
            m *= 2
        if hi is None:
            found = None
        else:
            while hi - lo > tolerance:
                mid = 0.5 * (lo + hi)
                if ok(mid):
                    hi = mid
                else:
                    lo = mid
            found = hi
    plan, risk = at(found) if found is not None else (base_plan, base_risk)
    weeks = base_plan.data.report_weeks
    extra = (operating_cost(plan) - operating_cost(base_plan)) / weeks \
        if found is not None else None
    trail.sort(key=lambda r: r["margin"])
    return MarginResult(target_fill=target_fill, from_week=week, max_margin=max_margin,
                        margin=found, plan=plan, risk=risk,
                        base_plan=base_plan, base_risk=base_risk, extra_cost_per_week=extra,
                        trail=trail, solves=len(cache), seconds=time.perf_counter() - t0)
