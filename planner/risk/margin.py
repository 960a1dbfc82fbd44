"""The safety margin: plan for more than the book so that bad luck still fills it.

A margin ``m`` plans every order as ``(1 + m)`` times its volume (one solve of the same
programme) from the first week the plan can still change (the week the egg-to-harvest
lead time allows: earlier weeks ship pupae already in the trays at the start, and are
reported but not searched over); the plan is then replayed
(:func:`planner.risk.simulate.replay`) and judged against the real book. The smallest
margin at which every week with orders is filled with probability at least ``P`` is found
by search over solves: doubling steps from 2 % up to the largest margin allowed, then
bisection to ``tolerance``. The doubling stops early when a margin has no plan (the
solver found none within its time limit) or when the plan cannot deliver the margin in
the week least likely to be filled (it is short of the raised orders there and plans no
more there than at the margin before: a larger margin cannot raise that week's
product; a shortfall alone is no proof, a solve within its gap may leave one). Every replay uses the same seed (common random
numbers), which keeps the fill probabilities of neighbouring margins comparable.

A search that meets no margin is an answer, not an error: the result carries the plan
without a margin, its replay and every margin tried. Only a base plan (no margin) that
the solver cannot find raises :class:`planner.errors.NoPlanError`.
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
from planner.risk import MAX_MARGIN
from planner.risk.simulate import RiskResult, replay
from planner.scenario.schema import Scenario, Variation

__all__ = ["plan_with_margin", "safety_margin", "MarginResult", "FIRST_STEP", "MAX_MARGIN",
           "PLAN_SHORT_SHARE"]

#: The first margin the doubling tries [-].
FIRST_STEP = 0.02
# MAX_MARGIN, the largest margin the search tries unless told otherwise [-], is five
# doublings of FIRST_STEP; it lives in the package so the command line reads it cheaply.
#: A plan week short of its raised orders by more than this share cannot deliver the
#: margin there [-].
PLAN_SHORT_SHARE = 1e-3


def plan_with_margin(scn: Scenario, margin: float, settings: SolveSettings | None = None,
                     start=None, horizon_weeks: int | None = None,
                     from_week: int = 1) -> PlanResult:
    """The least-cost plan with every order from plan week ``from_week`` [week number,
    1-based] raised by ``margin`` [-] (0.1 = 10 %); ``start`` the start batches (default:
    from the scenario's standard week), ``horizon_weeks`` [weeks] (default: the
    scenario's)."""
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
    """The margin found (or not), its plan and replay, and every margin tried.

    ``tried`` holds one row per margin solved, in increasing order: ``margin`` [-],
    ``has_plan``, ``worst_week`` [week number], ``worst_week_fill_probability`` [-] and
    ``all_weeks_filled_probability`` [-] (both over the weeks with orders from
    ``from_week``, judged against the real book; None without a plan), ``met``,
    ``operating_cost`` [currency over the horizon], ``plan_shortfall_million`` (against the
    raised orders) [million], the solver's ``status``, ``time_limited`` and ``gap`` [-].
    """

    target_fill: float                 # [-]
    from_week: int                     # first plan week the margin and target apply to
    max_margin: float                  # the largest margin the search may try [-]
    margin: float | None               # [-]; None: no margin tried meets the target
    plan: PlanResult                   # with the margin found; else the base plan
    risk: RiskResult                   # the replay of ``plan``
    base_plan: PlanResult
    base_risk: RiskResult
    extra_cost_per_week: float | None  # [currency/week]
    tried: list[dict] = field(default_factory=list)
    stopped: str = ""                  # why the search ended where it did
    solves: int = 0
    seconds: float = 0.0               # [s]

    @property
    def met(self) -> bool:
        """Whether a margin meets the target."""
        return self.margin is not None

    @property
    def largest_tried(self) -> float:
        """The largest margin tried that had a plan [-]."""
        return max(r["margin"] for r in self.tried if r["has_plan"])

    def summary(self) -> dict:
        weeks = self.base_plan.data.report_weeks
        return {"target_fill": self.target_fill, "margin": self.margin,
                "met": self.met, "max_margin": self.max_margin,
                "largest_margin_tried": self.largest_tried, "stopped": self.stopped,
                "from_week": self.from_week,
                "from_date": self.base_plan.data.date(7 * (self.from_week - 1)),
                "extra_cost_per_week": self.extra_cost_per_week,
                "currency": self.plan.scenario.costs.currency,
                "worst_week_fill_without_margin": self.base_risk.worst_fill(self.from_week),
                "worst_week_fill_with_margin": self.risk.worst_fill(self.from_week),
                "all_weeks_filled_without_margin": self.base_risk.all_filled(self.from_week),
                "all_weeks_filled_with_margin": self.risk.all_filled(self.from_week),
                "weeks": weeks, "tried": self.tried, "solves": self.solves,
                "seconds": self.seconds}


def _pct(share: float) -> str:
    """A share [-] as a percentage with one decimal."""
    return f"{100 * share:.1f} %"


def _at_its_limit(plan: PlanResult, before: PlanResult, week: int) -> bool:
    """Whether ``plan`` is short of its own (raised) orders in plan week ``week`` [week
    number] by more than :data:`PLAN_SHORT_SHARE` of them and releases no more there than
    ``before`` (the plan at a smaller margin), within that share."""
    w = plan.weekly[plan.weekly["week"] == week]
    ordered = float(w["ordered"].sum())
    if ordered <= 0 or float(w["shortfall"].sum()) <= PLAN_SHORT_SHARE * ordered:
        return False
    earlier = float(before.weekly.loc[before.weekly["week"] == week, "released"].sum())
    return float(w["released"].sum()) <= earlier + PLAN_SHORT_SHARE * ordered


def safety_margin(scn: Scenario, target_fill: float, replicates: int = 2000, seed: int = 0,
                  settings: SolveSettings | None = None, variation: Variation | None = None,
                  tolerance: float = 0.005, max_margin: float = MAX_MARGIN,
                  horizon_weeks: int | None = None,
                  from_week: int | None = None) -> MarginResult:
    """Smallest margin [-] at which every week with orders from ``from_week`` [week number,
    1-based] (default: the first week the lead time allows) is filled with probability at
    least ``target_fill`` [-], within ``tolerance`` [-] of margin, trying margins up to
    ``max_margin`` [-]; each plan replayed ``replicates`` [-] times with ``seed``.

    When no margin tried meets the target the result has ``margin = None``, the plan
    without a margin and its replay, and the margins tried with their fill probabilities.
    Raises :class:`planner.errors.NoPlanError` only when there is no plan without a margin.
    """
    from planner.optimise import settings_for
    from planner.answers.quote import default_start_week
    week = from_week or default_start_week(scn)
    if not 0 < target_fill < 1:
        raise InputError(f"target fill = {target_fill}: give a probability between 0 and 1, "
                         "e.g. 0.95", place="--target-fill")
    if not max_margin >= 0:
        raise InputError(f"largest margin = {max_margin}: a safety margin cannot be "
                         "negative; give e.g. 0.3 for 30 %", place="--max-margin")
    t0 = time.perf_counter()
    settings = settings or settings_for(scn)
    start = start_batches(scn, dataclasses.replace(settings, log_path=None))
    cache: dict[float, tuple[PlanResult, RiskResult | None]] = {}
    tried: list[dict] = []
    base_orders = None

    def at(m: float) -> tuple[PlanResult, RiskResult | None]:
        """The plan at margin ``m`` [-] and its replay (None without a plan)."""
        nonlocal base_orders
        m = round(m, 6)
        if m not in cache:
            plan = plan_with_margin(scn, m, settings, start, horizon_weeks, week)
            row = {"margin": m, "has_plan": plan.info.has_plan, "status": plan.info.status,
                   "time_limited": plan.info.time_limited, "gap": plan.info.gap}
            if not plan.info.has_plan:
                if m == 0:
                    raise NoPlanError(f"no plan to replay, even without a safety margin: "
                                      f"{plan.info.message}")
                cache[m] = (plan, None)
                row |= {"worst_week": None, "worst_week_fill_probability": None,
                        "all_weeks_filled_probability": None, "met": False,
                        "operating_cost": None, "plan_shortfall_million": None,
                        "message": plan.info.message}
            else:
                if base_orders is None:
                    base_orders = plan.data.ordered.copy()
                risk = replay(plan, variation, replicates, seed, ordered=base_orders)
                cache[m] = (plan, risk)
                worst = risk.worst_fill(week)
                row |= {"worst_week": risk.worst_week(week),
                        "worst_week_fill_probability": worst,
                        "all_weeks_filled_probability": risk.all_filled(week),
                        "met": worst >= target_fill,
                        "operating_cost": operating_cost(plan),
                        "plan_shortfall_million": float(plan.weekly["shortfall"].sum())}
            tried.append(row)
        return cache[m]

    def ok(m: float) -> bool:
        risk = at(m)[1]
        return risk is not None and risk.worst_fill(week) >= target_fill

    base_plan, base_risk = at(0.0)
    found: float | None = None
    stopped = ""
    if ok(0.0):
        found = 0.0
        stopped = "the plan without a margin meets the target"
    else:
        lo, hi = 0.0, None
        m = min(FIRST_STEP, max_margin)
        while m > lo:
            if ok(m):
                hi = m
                break
            plan, risk = at(m)
            if risk is None:
                stopped = (f"no plan at a margin of {_pct(m)} ({plan.info.message}); larger "
                           "margins were not tried")
                break
            worst = risk.worst_week(week)
            if worst is not None and _at_its_limit(plan, at(lo)[0], worst):
                stopped = (f"at a margin of {_pct(m)} the plan is short of the raised orders "
                           f"in week {worst}, the week least likely to be filled, and plans no "
                           f"more there than at {_pct(lo)}: the facility cannot plan more "
                           "there, so a larger margin cannot help")
                if plan.info.time_limited:
                    stopped += (" (that plan stopped at the solver's time limit: a longer "
                                "--time-limit may find more)")
                break
            lo = m
            if m >= max_margin:
                stopped = f"{_pct(max_margin)} is the largest margin the search may try"
                break
            m = min(2 * m, max_margin)
        if hi is not None:
            while hi - lo > tolerance:
                mid = 0.5 * (lo + hi)
                if ok(mid):
                    hi = mid
                else:
                    lo = mid
            found = hi
            stopped = f"bisection to within {_pct(tolerance)} of margin"
        elif not stopped:
            stopped = "no margin above 0 may be tried (largest margin 0)"
    plan, risk = at(found) if found is not None else (base_plan, base_risk)
    weeks = base_plan.data.report_weeks
    extra = (operating_cost(plan) - operating_cost(base_plan)) / weeks \
        if found is not None else None
    tried.sort(key=lambda r: r["margin"])
    return MarginResult(target_fill=target_fill, from_week=week, max_margin=max_margin,
                        margin=found, plan=plan, risk=risk,
                        base_plan=base_plan, base_risk=base_risk, extra_cost_per_week=extra,
                        tried=tried, stopped=stopped, solves=len(cache),
                        seconds=time.perf_counter() - t0)
