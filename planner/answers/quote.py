"""Answering a customer: can we take this weekly order, at what cost, from when?

Each question is a decision of one programme (the same builder, with a
:class:`~planner.optimise.build.Question`), not a search over many solves:

1. **Base plan**: the least-cost plan of the book alone.
2. **Fill plan**: the book plus the quoted order, at a lower priority class than every
   booked order (so no booked order loses a pupa: its shortfall is also held at the base
   plan's), least unmet quote first, then least cost. It answers "can we take it", the
   extra cost (operating cost against the base plan) and the ramp-up day (the first day
   on which the two plans differ).
3. If the quote is short in some week, **what the start state allows**: the LP of the
   fill plan with every capacity lifted. A week that even it cannot fill is short
   because of the egg-to-harvest lead time (the pupae of that week are already laid or
   seeded), not because of capacity: such an order is "yes in full from week N, with
   these fills before".
4. If capacity limits too: the **largest constant weekly volume** ``V`` over the weeks
   that lead time leaves free (one MILP that maximises ``V`` with the booked orders
   held; its LP relaxation bounds it), and the **earliest full start** (one MILP that
   chooses the first week among the later ones, binary, with each week later priced).

At most seven solves (start state, base, fill, lifted LP, volume MILP and its LP,
earliest start); every solve gets at most the time left of the command's budget.
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from planner.errors import NoPlanError
from planner.optimise.build import Question, build_model
from planner.optimise.data import compile_horizon
from planner.optimise.results import FILL_TOLERANCE, PlanResult, operating_cost, read_back
from planner.optimise.solve import SolveSettings, solve
from planner.optimise.standard_week import start_batches
from planner.scenario.schema import Order, Scenario

__all__ = ["QuoteResult", "quote", "default_start_week", "Budget"]

#: Objective weight of one million a week of the asked volume [currency per million/week]
#: (far above any cost, so costs only break ties).
VOLUME_WEIGHT = 1e7
#: Time of the largest-volume MILP and of the earliest-start MILP, at most [s]: near the
#: edge of capacity a whole plan is found quickly but proving it the largest is slow; the
#: answer then gives the volume found with the LP bound beside it. (Scaling it with the
#: base plan's time was tried: the 26-week quote beyond capacity took 30 s, not 17 s.)
VOLUME_SECONDS = 8.0
START_SECONDS = 6.0
#: Time of the fill plan, at most [s] (or three times the base plan's, if longer): an
#: order beyond capacity makes it a hard MILP whose unmet volume is found early and
#: proven late; the answer then carries its gap.
FILL_SECONDS = 8.0


def default_start_week(scn: Scenario) -> int:
    """The first plan week whose pupae can all come from eggs laid in the plan: the week
    that starts on or after the latest harvest age [week number, 1-based]."""
    return math.ceil(max(scn.colony.rearing.harvest_ages) / 7) + 1


class Budget:
    """The time budget of one whole answer [s]: every solve gets at most what is left,
    and the answer says when it ran out."""

    def __init__(self, seconds: float, progress: Callable[[str], None] | None = None):
        self.seconds = float(seconds)
        self.t0 = time.perf_counter()
        self.solves = 0
        self.exhausted = False
        self.progress = progress or (lambda text: None)

    def elapsed(self) -> float:
        return time.perf_counter() - self.t0

    def left(self) -> float:
        return self.seconds - self.elapsed()

    def settings(self, settings: SolveSettings, share: float = 1.0) -> SolveSettings:
        """The settings of the next solve: at most ``share`` of the time left [-]."""
        left = self.left()
        if left < 1.0:
            self.exhausted = True
        return dataclasses.replace(settings, time_limit=max(share * left, 1.0))

    def say(self, text: str) -> None:
        self.progress(f"[{self.elapsed():5.1f} s] {text}")


@dataclass
class QuoteResult:
    """The answer to a quote; money in the scenario's currency, volumes in million."""

    customer: str
    weekly_volume: float
    start_week: int
    weeks: int
    feasible: bool
    baseline: PlanResult
    with_order: PlanResult
    extra_cost_total: float
    extra_cost_per_week: float | None
    cost_per_million: float | None
    cost_uncertainty: float
    delivered: float
    shortfall: float
    ramp_up_start: object | None
    first_changes: list[str]
    max_weekly_volume: float | None = None
    max_weekly_volume_bound: float | None = None
    earliest_full_start: int | None = None
    limiting_resources: list[str] = field(default_factory=list)
    promised_volume: float | None = None
    lead_time_limited: bool = False
    full_from_week: int | None = None
    partial_weeks: list[dict] = field(default_factory=list)
    fill_plan_found: bool = True  #: a plan with the whole order was found in its time
    lead_time_weeks: list[int] = field(default_factory=list)
    base_short: bool = False
    solves: int = 0
    seconds: float = 0.0
    time_limited: bool = False
    budget_exhausted: bool = False

    def week_date(self, week: int | None):
        if week is None:
            return None
        return self.baseline.data.date(7 * (week - 1))

    def summary(self) -> dict:
        plan = self.with_order
        return {
            "customer": self.customer, "weekly_volume": self.weekly_volume,
            "start_week": self.start_week, "start_date": self.week_date(self.start_week),
            "weeks": self.weeks, "feasible": self.feasible,
            "lead_time_limited": self.lead_time_limited,
            "full_from_week": self.full_from_week,
            "full_from_date": self.week_date(self.full_from_week),
            "partial_weeks": self.partial_weeks,
            "fill_plan_found": self.fill_plan_found,
            "lead_time_weeks": self.lead_time_weeks,
            "extra_cost_total": self.extra_cost_total,
            "extra_cost_per_week": self.extra_cost_per_week,
            "cost_per_million": self.cost_per_million,
            "cost_uncertainty": self.cost_uncertainty,
            "delivered_million": self.delivered, "shortfall_million": self.shortfall,
            "booked_shortfall_million": plan.booked_shortfall(),
            "base_booked_shortfall_million": self.baseline.booked_shortfall(),
            "customers": plan.customer_table(),
            "ramp_up_start": self.ramp_up_start, "first_changes": self.first_changes,
            "max_weekly_volume": self.max_weekly_volume,
            "max_weekly_volume_bound": self.max_weekly_volume_bound,
            "earliest_full_start": self.earliest_full_start,
            "earliest_full_start_date": self.week_date(self.earliest_full_start),
            "limiting_resources": self.limiting_resources,
            "plan_volume": self.promised_volume,
            "status": plan.info.status,
            "time_limited": self.time_limited,
            "budget_exhausted": self.budget_exhausted,
            "currency": self.baseline.scenario.costs.currency,
            "solves": self.solves, "seconds": self.seconds,
        }


class _Asker:
    """Builds and solves the quote's programmes within one budget."""

    def __init__(self, scn: Scenario, settings: SolveSettings, budget: Budget, start,
                 customer: str, weeks: int):
        self.scn, self.settings, self.budget = scn, settings, budget
        self.start, self.customer, self.weeks = start, customer, weeks
        self.priority = max([o.priority for o in scn.orders], default=1) + 1
        self.base: PlanResult | None = None
        self.hit = False
        #: the quote's price of an unmet million [currency/million]: set from the base
        #: plan so that the smallest shortfall that counts costs more than the gap allows
        self.price = scn.costs.shortfall_per_million

    def price_for(self, weekly_volume: float) -> None:
        """Price the quote's shortfall so that a shortfall of the fill tolerance costs
        twice what the solver's relative gap may leave on the table."""
        cost = abs(self.base.info.objective or 0.0) if self.base is not None else 0.0
        need = 2.0 * max(self.settings.relative_gap, 1e-4) * cost / (FILL_TOLERANCE * weekly_volume)
        self.price = max(self.scn.costs.shortfall_per_million, need)

    def order(self, volume: float, first: int, last: int) -> Order:
        return Order(customer=self.customer, weekly_volume=volume, first_week=first,
                     last_week=last, priority=self.priority, shortfall_per_million=self.price)

    def held(self) -> dict:
        """Booked shortfall cells held at the base plan's [million]."""
        if self.base is None:
            return {}
        short = self.base.built.blocks["shortfall"]
        tol = 1e-6
        return {lab: v + tol for lab, v in zip(short.labels, short.values(self.base.solution.x))}

    def plan(self, orders, question: Question | None = None, relax: bool = False,
             horizon: int | None = None, what: str = "",
             seconds: float | None = None) -> PlanResult:
        data = compile_horizon(self.scn, self.start, extra_orders=orders,
                               horizon_weeks=horizon or self.scn.plan.horizon_weeks)
        built = build_model(data, relax=relax, question=question)
        settings = self.budget.settings(self.settings if not relax else self.settings.for_lp())
        if seconds is not None:
            settings = dataclasses.replace(settings, time_limit=min(settings.time_limit,
                                                                    seconds))
        self.budget.say(what)
        self.budget.solves += 1
        res = read_back(built, solve(built.model, settings))
        self.hit |= res.info.time_limited
        return res

    def quote_weeks(self, res: PlanResult) -> dict[int, tuple[float, float]]:
        """(asked, released) of the quote by week [million]."""
        w = res.weekly[res.weekly["customer"] == self.customer]
        return {int(r.week): (float(r.ordered), float(r.released)) for r in w.itertuples()}


def _partial(week: int, qweeks: dict, lifted_weeks: dict, lead_weeks: list[int],
             fill_solved: bool) -> dict:
    """One short week of the quote: its fill [-] and cause. A lead-time week's fill is the
    one every capacity lifted allows; without a plan that carries the order, another
    week's fill is not known (None), not 0."""
    if week in lead_weeks:
        asked, released = (qweeks if fill_solved else lifted_weeks)[week]
        return {"week": week, "fill": released / asked, "cause": "lead time"}
    if not fill_solved:
        return {"week": week, "fill": None,
                "cause": "no plan with the whole order was found in the time given"}
    asked, released = qweeks[week]
    return {"week": week, "fill": released / asked, "cause": "capacity"}


def _short_weeks(weeks: dict[int, tuple[float, float]]) -> list[int]:
    return [w for w, (a, r) in sorted(weeks.items()) if r < a * (1 - FILL_TOLERANCE) - 1e-9]


def quote(scn: Scenario, weekly_volume: float, weeks: int, start_week: int | None = None,
          customer: str = "Quote", settings: SolveSettings | None = None,
          search: bool = True, progress: Callable[[str], None] | None = None) -> QuoteResult:
    """Quote a constant weekly order.

    Parameters
    ----------
    weekly_volume : float
        Product per week [million/week].
    weeks : int
        How many weeks the order runs [weeks].
    start_week : int, optional
        First plan week of the order (default :func:`default_start_week`).
    customer : str
        Name of the customer (shown as '<name> (quote)' in the plan).
    settings : SolveSettings, optional
        Solver settings; ``time_limit`` [s] bounds the whole answer, every solve in it.
    search : bool
        If capacity keeps the order from being filled in full, also answer the largest
        volume and the earliest full start.
    progress : callable(str), optional
        Called with a line at every stage.
    """
    from planner.optimise import settings_for
    settings = settings or settings_for(scn)
    budget = Budget(settings.time_limit, progress)
    # an answer needs no shadow prices: its plans skip the dual solves
    settings = dataclasses.replace(settings, log_path=None, duals=False)
    budget.say("solving the routine before the plan (standard week)")
    budget.solves += 1
    start = start_batches(scn, budget.settings(settings, 0.2))
    name = f"{customer} (quote)"
    a = _Asker(scn, settings, budget, start, name, weeks)
    first = start_week or default_start_week(scn)
    last = first + weeks - 1
    horizon = max(scn.plan.horizon_weeks, last)
    base = a.plan(None, horizon=horizon, what="least-cost plan of the book alone")
    if not base.info.has_plan:
        raise NoPlanError(f"no plan even without the quote: {base.info.message}")
    a.base = base
    a.price_for(weekly_volume)
    base_short = base.booked_shortfall() > FILL_TOLERANCE * max(
        float(base.weekly["ordered"].sum()), 1e-9)
    if base_short:
        budget.say(f"note: the book alone is already short by {base.booked_shortfall():.3g} "
                   "million; the quote may not make it shorter")
    held = a.held()
    fill = a.plan([a.order(weekly_volume, first, last)], Question(shortfall_cap=held),
                  horizon=horizon, what="plan with the quote (booked orders first)",
                  seconds=max(FILL_SECONDS, 3.0 * base.info.seconds))
    fill_solved = fill.info.has_plan
    if not fill_solved:
        # no plan with the order within its time: nothing is promised, and the order is
        # not called feasible (the base plan carries no quote to read fills from)
        budget.say("note: no plan with the whole order within its time; searching what "
                   "can be promised")
        fill = base
    qweeks = a.quote_weeks(fill) if fill_solved else {
        w: (weekly_volume, 0.0) for w in range(first, min(last, horizon) + 1)}
    short_weeks = _short_weeks(qweeks)
    res_kw: dict = {"full_from_week": None if short_weeks else first}
    promised_plan, promised = fill, weekly_volume
    lead_weeks: list[int] = []
    if short_weeks:
        lifted = a.plan([a.order(weekly_volume, first, last)],
                        Question(shortfall_cap=held, lift=("cage_slots", "racks", "diet",
                                                           "pupal_holding", "labour")),
                        relax=True, horizon=horizon,
                        what="what the start state allows (every capacity lifted, LP)")
        lifted_weeks = a.quote_weeks(lifted) if lifted.info.has_plan else {}
        lead_weeks = _short_weeks(lifted_weeks)
        capacity_weeks = [w for w in short_weeks if w not in lead_weeks]
        later = [w for w in range(first, last + 1) if w not in lead_weeks]
        res_kw["lead_time_limited"] = not capacity_weeks
        res_kw["full_from_week"] = next(
            (w for w in range(first, last + 1) if all(x not in short_weeks
                                                       for x in range(w, last + 1))), None)
        res_kw["partial_weeks"] = [_partial(w, qweeks, lifted_weeks, lead_weeks, fill_solved)
                                   for w in short_weeks]
        res_kw["lead_time_weeks"] = lead_weeks
        # without a plan that carries the order there is nothing to read a cause from
        res_kw["limiting_resources"] = (_limiting(fill, name, set(capacity_weeks))
                                        if fill_solved else [])
        if capacity_weeks and search and later:
            vol_plan = a.plan([a.order(1.0, first, last)],
                              Question(volume=(name, tuple(later)),
                                       volume_weight=VOLUME_WEIGHT, shortfall_cap=held),
                              horizon=horizon, what="largest constant weekly volume (one MILP)",
                              seconds=VOLUME_SECONDS)
            if vol_plan.info.has_plan:
                v = float(vol_plan.built.blocks["volume"].values(vol_plan.solution.x)[0])
                res_kw["max_weekly_volume"] = v
                promised_plan, promised = vol_plan, v
            vol_lp = a.plan([a.order(1.0, first, last)],
                            Question(volume=(name, tuple(later)), volume_weight=VOLUME_WEIGHT,
                                     shortfall_cap=held),
                            relax=True, horizon=horizon, what="its bound (LP relaxation)")
            if vol_lp.info.has_plan:
                res_kw["max_weekly_volume_bound"] = float(
                    vol_lp.built.blocks["volume"].values(vol_lp.solution.x)[0])
            res_kw["earliest_full_start"] = _earliest_start(a, weekly_volume, first, held)
    extra = operating_cost(promised_plan) - operating_cost(base)
    ramp_date, changes = _first_changes(base, promised_plan)
    qw = promised_plan.weekly[promised_plan.weekly["customer"] == name]
    delivered = float(qw["released"].sum())
    in_horizon = min(weeks, max(0, horizon - first + 1))
    plans = [base] if promised_plan is base else [base, promised_plan]
    noise = sum((r.info.gap or 0.0) * abs(operating_cost(r)) for r in plans)
    feasible = not short_weeks
    result = QuoteResult(
        customer=customer, weekly_volume=weekly_volume, start_week=first, weeks=weeks,
        feasible=feasible, baseline=base, with_order=promised_plan,
        extra_cost_total=extra,
        extra_cost_per_week=extra / in_horizon if in_horizon else None,
        cost_per_million=extra / delivered if delivered > 1e-9 else None,
        cost_uncertainty=noise, delivered=delivered,
        shortfall=float(sum(max(a_ - r, 0.0) for a_, r in qweeks.values())),
        ramp_up_start=ramp_date, first_changes=changes, promised_volume=promised,
        base_short=base_short, fill_plan_found=fill_solved, **res_kw)
    result.solves = budget.solves
    result.seconds = budget.elapsed()
    result.time_limited = a.hit
    result.budget_exhausted = budget.exhausted
    budget.say("done")
    return result


def _earliest_start(a: _Asker, volume: float, first: int, held: dict) -> int | None:
    """Earliest first week, after ``first`` and within the scenario's horizon, from which
    the full order can be delivered: one MILP choosing the first week (binary), each week
    later priced below the quote's unmet volume (None: no start fills it)."""
    limit = a.scn.plan.horizon_weeks
    firsts = list(range(first + 1, limit + 1))
    if not firsts:
        return None
    horizon = limit + a.weeks - 1
    penalty = 0.5 * a.price * FILL_TOLERANCE * volume
    res = a.plan([a.order(volume, first + 1, horizon)],
                 Question(start_choice=(a.customer, volume, a.weeks, firsts, penalty),
                          shortfall_cap=held),
                 horizon=horizon, what="earliest full start (one MILP over first weeks)",
                 seconds=START_SECONDS)
    if not res.info.has_plan:
        return None
    y = res.built.blocks["start_week"].values(res.solution.x)
    chosen = firsts[int(np.argmax(y))]
    if _short_weeks(a.quote_weeks(res)):
        return None
    return chosen


def _first_changes(base: PlanResult, new: PlanResult, window: int = 7):
    """The first day the plans differ, and what differs over the week from that day."""
    a, b = base.horizon_daily, new.horizon_daily
    n = min(len(a), len(b))
    first = None
    for t in range(n):
        if any(abs(float(b[c].iloc[t] - a[c].iloc[t])) >= 0.5
               for c in ("cages_loaded", "trays_seeded")):
            first = t
            break
    if first is None:
        return None, []
    changes = []
    hi = min(first + window, n)
    for col, what in (("cages_loaded", "cages loaded"), ("trays_seeded", "trays seeded")):
        d = float(b[col].iloc[first:hi].sum() - a[col].iloc[first:hi].sum())
        if abs(d) >= 0.5:
            changes.append(f"{abs(d):.0f} {'more' if d > 0 else 'fewer'} {what} in the "
                           f"{hi - first} days from {new.data.date(first)}")
    return new.data.date(first), changes


def _limiting(res: PlanResult, customer: str, weeks: set[int]) -> list[str]:
    """Resources full in the days that feed the weeks where capacity keeps the quote
    short, most often full first."""
    count: dict[str, int] = {}
    for s in res.shortfalls:
        if s["customer"] != customer or s["week"] not in weeks:
            continue
        for item in s.get("saturated", []):
            count[item["resource"]] = count.get(item["resource"], 0) + item["days_full"]
    if not count and weeks:
        return ["eggs: the cages cannot lay enough in time"]
    return [r for r, _ in sorted(count.items(), key=lambda kv: -kv[1])]
