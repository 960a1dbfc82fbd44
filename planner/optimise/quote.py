"""Answering a customer: can we take this weekly order, at what cost, from when?

The quote adds the order to the book and uses the same programme (no second model).

- **Can it be taken?** The programme is solved for the least unmet volume of the quoted
  order (the orders already in the book weighted a thousand times more); whatever a
  booked order would lose against the plan without the quote counts as unmet too (a
  quote never takes pupae from a customer already promised). Its LP relaxation answers
  "no" at once when even fractional cages and trays fall short; otherwise the MILP
  looks for a whole plan with no shortfall. A plan it cannot find within its time
  limit counts as "no".
- **From when must the ramp-up begin?** The latest day T such that the plan without the
  order can be kept unchanged on every day before T (its cages and trays fixed) and the
  order still be filled: bisection on T. The plan with the order keeps the old plan
  before T, so what changes first is read off day T. (For an order that cannot be
  filled in full, the first day on which the least-cost plans with and without it
  differ.)
- **At what cost?** Both plans are solved for least cost; the extra cost is the
  difference of their operating costs over the reported weeks (the solver gaps bound its
  error, which is reported).
- If the order cannot be taken in full: the largest constant weekly volume from the same
  start (bisection on the volume: with LP checks for an upper bound, then with whole-plan
  checks below it; the volume promised has a whole plan, the bound is reported beside
  it) and the earliest start at which the full volume can be delivered (forward steps
  that double, then bisection on the week), each by search over
  solves, and the resources that stop it (the shortfall diagnosis of the full order's LP
  relaxation). The plan, ramp-up and extra cost are then those of the largest volume that
  can be promised.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

import numpy as np

from planner.errors import NoPlanError
from planner.optimise.build import build_model
from planner.optimise.data import StartBatches, compile_horizon
from planner.optimise.results import PlanResult, operating_cost, read_back
from planner.optimise.solve import SolveSettings, solve
from planner.optimise.standard_week import start_batches
from planner.scenario.schema import Order, Scenario

__all__ = ["QuoteResult", "quote", "default_start_week", "TOLERANCE", "FILL_SHARE"]

#: A shortfall below this is no shortfall [million over the whole order] ...
TOLERANCE = 1e-3
#: ... nor one below this share of the whole order [-] (pupae counts are estimates far
#: coarser than this; whole-plan checks near the edge stop sooner with it).
FILL_SHARE = 1e-3
#: While costing a quote, an unmet million of the quote costs this many times the
#: scenario's shortfall price, and of the orders already in the book this factor squared.
PRIORITY = 10.0
#: Time limit of one search solve [s] (the scenario's, if shorter). A check that runs
#: out of time without a plan that fills the order counts as "no": the search errs on
#: the side of promising less.
SEARCH_SECONDS = 8.0
#: A check that started from a filling plan of a smaller volume and stops at its time
#: limit with less than this share of the order unmet [-] is run once more from the plan
#: without the quote.
NEAR_SHARE = 0.02
#: Time limit of the least-cost plan at the largest volume that can be promised [s] (the
#: scenario's, if shorter): a plan at the edge of capacity is hard to prove cheapest, so
#: its cost is reported with the gap it reached.
EDGE_SECONDS = 20.0


def default_start_week(scn: Scenario) -> int:
    """The first plan week whose pupae can all come from eggs laid in the plan: the week
    that starts on or after the latest harvest age [week number, 1-based]."""
    return math.ceil(max(scn.colony.rearing.harvest_ages) / 7) + 1


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
    solves: int = 0
    seconds: float = 0.0

    def week_date(self, week: int | None):
        if week is None:
            return None
        return self.baseline.data.date(7 * (week - 1))

    def summary(self) -> dict:
        return {
            "customer": self.customer, "weekly_volume": self.weekly_volume,
            "start_week": self.start_week, "start_date": self.week_date(self.start_week),
            "weeks": self.weeks, "feasible": self.feasible,
            "extra_cost_total": self.extra_cost_total,
            "extra_cost_per_week": self.extra_cost_per_week,
            "cost_per_million": self.cost_per_million,
            "cost_uncertainty": self.cost_uncertainty,
            "delivered_million": self.delivered, "shortfall_million": self.shortfall,
            "ramp_up_start": self.ramp_up_start, "first_changes": self.first_changes,
            "max_weekly_volume": self.max_weekly_volume,
            "max_weekly_volume_bound": self.max_weekly_volume_bound,
            "earliest_full_start": self.earliest_full_start,
            "earliest_full_start_date": self.week_date(self.earliest_full_start),
            "limiting_resources": self.limiting_resources,
            "plan_volume": self.promised_volume,
            "status": self.with_order.info.status,
            "time_limited": self.with_order.info.time_limited
                            or self.baseline.info.time_limited,
            "currency": self.baseline.scenario.costs.currency,
            "solves": self.solves, "seconds": self.seconds,
        }


class _Quoter:
    """Builds and solves the quote's programmes, counting the solves."""

    def __init__(self, scn: Scenario, settings: SolveSettings, start: StartBatches,
                 customer: str, weeks: int):
        self.scn = scn
        self.settings = settings
        self.start = start
        self.customer = customer
        self.weeks = weeks
        self.solves = 0
        #: the whole plan of the last MILP check that filled the order (None if it did not)
        self.last_plan: np.ndarray | None = None
        #: the plan without the order's shortfall of each book order and week [million]:
        #: a plan with the quote may not fall shorter of them
        self.book_shortfall: dict[tuple, float] = {}
        #: time limit of one MILP check [s]
        self.search_seconds = SEARCH_SECONDS
        #: the plan without the quote (the checks' starting plan)
        self.base: PlanResult | None = None
        #: filling plans found, by (start week, fixed days): (volume, built, x)
        self.filled: dict[tuple, list] = {}

    def keep_book(self, base: PlanResult) -> None:
        """Remember the plan without the quote: its shortfalls, and its solve time (a
        check may take twice as long, at least :data:`SEARCH_SECONDS`)."""
        short = base.built.blocks["shortfall"]
        self.book_shortfall = dict(zip(short.labels, short.values(base.solution.x)))
        self.base = base
        self.search_seconds = max(SEARCH_SECONDS, 2.0 * base.info.seconds)

    def _unmet(self, short, x: np.ndarray, quoted: np.ndarray) -> float:
        """The quote's unmet volume plus whatever the book loses against the plan without
        the quote [million]: a plan that robs a booked order does not fill the quote."""
        vals = short.values(x)
        robbed = sum(max(v - self.book_shortfall.get(lab, 0.0), 0.0)
                     for lab, v, q in zip(short.labels, vals, quoted) if not q)
        return float(vals[quoted].sum()) + robbed

    def tolerance(self, volume: float) -> float:
        """Unmet volume that still counts as filled [million over the order]."""
        return max(TOLERANCE, FILL_SHARE * volume * self.weeks)

    def order(self, volume: float, start_week: int) -> Order:
        return Order(customer=self.customer, weekly_volume=volume, first_week=start_week,
                     last_week=start_week + self.weeks - 1)

    def horizon_for(self, start_week: int) -> int:
        return max(self.scn.plan.horizon_weeks, start_week + self.weeks - 1)

    def data(self, volume: float | None, start_week: int):
        horizon = self.horizon_for(start_week)
        orders = [self.order(volume, start_week)] if volume else None
        data = compile_horizon(self.scn, self.start, horizon_weeks=horizon, extra_orders=orders)
        quoted = np.array([c == self.customer for c in data.customers])
        # the book first, then the quote, then cost
        data.shortfall_price[~quoted] *= PRIORITY * PRIORITY
        data.shortfall_price[quoted] *= PRIORITY
        return data

    @staticmethod
    def _fix(built, reference: PlanResult | None, before_day: int) -> None:
        """Fix cages and trays on days before ``before_day`` to the reference plan's."""
        if reference is None or before_day <= 0:
            return
        ref_b = reference.built.blocks
        for name in ("cages", "trays"):
            blk, rblk = built.blocks[name], ref_b[name]
            ref_vals = dict(zip(rblk.labels, rblk.values(reference.solution.x)))
            for i, lab in enumerate(blk.labels):
                if lab[0] < before_day and lab in ref_vals:
                    blk.lb[i] = blk.ub[i] = ref_vals[lab]

    def cost_plan(self, volume: float | None, start_week: int,
                  reference: PlanResult | None = None, before_day: int = 0,
                  relax: bool = False, time_limit: float | None = None,
                  promise: np.ndarray | None = None) -> PlanResult:
        """Least-cost plan. ``promise``: a whole plan of the same programme (from the
        search) that fills the order; the plan then may not fall shorter of the quoted
        order in any week than it does, and the solver starts from it."""
        built = build_model(self.data(volume, start_week), relax=relax)
        self._fix(built, reference, before_day)
        if promise is not None:
            short = built.blocks["shortfall"]
            short.ub[:] = np.maximum(short.values(promise), 0.0) + 1e-9
        self.solves += 1
        settings = self.settings
        if time_limit is not None:
            settings = dataclasses.replace(settings, time_limit=min(settings.time_limit,
                                                                    time_limit))
        return read_back(built, solve(built.model, settings, initial=promise))

    def _start_plan(self, built, source=None) -> np.ndarray | None:
        """A whole plan of another programme, ``(built, x)`` (default: the plan without
        the quote), as a whole plan of this one: every variable by its label, the
        shortfalls raised to what the orders now ask. CBC starts from it, so that a check
        always has a plan to improve on."""
        if source is None:
            if self.base is None:
                return None
            source = (self.base.built, self.base.solution.x)
        x0 = np.zeros(built.model.n)
        base_blocks, xb = source[0].blocks, source[1]
        for name, blk in built.blocks.items():
            old = base_blocks.get(name)
            if old is None:
                continue
            vals = dict(zip(old.labels, old.values(xb)))
            x0[blk.offset:blk.offset + blk.size] = [vals.get(lab, 0.0) for lab in blk.labels]
        ship, short = built.blocks["ship"], built.blocks["shortfall"]
        ordered = {}
        for fam in ("orders", "end"):
            f = built.families.get(fam)
            if f is not None:
                ordered.update(zip(f.labels, f.b))
        for i, lab in enumerate(short.labels):
            need = ordered.get(lab, 0.0) - x0[ship.offset + i]
            x0[short.offset + i] = max(need, 0.0)
        return x0

    def unmet(self, volume: float, start_week: int, reference: PlanResult | None = None,
              before_day: int = 0, lp_only: bool = False) -> float:
        """Least unmet volume of the quoted order [million]: the LP relaxation first (if
        even it falls short, that is the answer), then the MILP (time-limited; inf when
        no plan was found)."""
        self.last_plan = None
        key = (start_week, before_day if reference is not None else 0)
        data = self.data(volume, start_week)
        built = build_model(data)
        self._fix(built, reference, before_day)
        m = built.model
        short = m.blocks["shortfall"]
        quoted = np.array([lab[0] == self.customer for lab in short.labels])
        integers = [b.integer for b in m.blocks.values()]
        weights = np.where(quoted, 1.0, 1000.0)
        m.cost_terms = {"unmet": (short.offset + np.arange(short.size), weights)}
        m.c0 = 0.0
        for b in m.blocks.values():
            b.integer = False
        self.solves += 1
        lp = solve(m, self.settings.for_lp())
        for b, was in zip(m.blocks.values(), integers):
            b.integer = was
        if not lp.info.has_plan:
            return math.inf
        lp_short = self._unmet(short, lp.x, quoted)
        tol = self.tolerance(volume)
        if lp_short > tol or lp_only:
            return lp_short
        # start from the closest filling plan found so far; near the edge a check that
        # runs out of time from there is tried once more from the plan without the quote,
        # where the solver takes another path
        nearest = self._nearest(key, volume)
        starts = [self._start_plan(built)]
        if nearest is not None:
            starts.insert(0, self._start_plan(built, nearest))
        unmet, sol = math.inf, None
        for start in starts:
            self.solves += 1
            sol = solve(m, dataclasses.replace(self.settings, log_path=None, duals=False,
                                               relative_gap=1e-6, absolute_gap=tol / 2,
                                               time_limit=min(self.settings.time_limit,
                                                              self.search_seconds)),
                        initial=start)
            if not sol.info.has_plan:
                break
            unmet = self._unmet(short, sol.x, quoted)
            near = unmet <= NEAR_SHARE * volume * self.weeks
            if unmet <= tol or not near or not sol.info.time_limited:
                break
        if not math.isfinite(unmet):
            return math.inf
        if unmet <= tol:
            self.last_plan = sol.x
            self.filled.setdefault(key, []).append((volume, built, sol.x))
        return unmet

    def _nearest(self, key, volume: float):
        """The filling plan of the largest volume below ``volume`` found so far for the
        same start and fixings (None: start from the plan without the quote)."""
        below = [(v, b, x) for v, b, x in self.filled.get(key, []) if v <= volume]
        if not below:
            return None
        _, b, x = max(below, key=lambda t: t[0])
        return b, x

    def feasible(self, volume: float, start_week: int, **fix) -> bool:
        return self.unmet(volume, start_week, **fix) <= self.tolerance(volume)


def _first_changes(base: PlanResult, new: PlanResult, from_day: int, window: int = 7):
    """The first day the plans differ, and what differs over the week from that day (the
    plan is re-optimised from then on, so single days differ more than the week does)."""
    a, b = base.horizon_daily, new.horizon_daily
    n = min(len(a), len(b))
    first = None
    for t in range(max(from_day, 0), n):
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


def _ramp_day(q: _Quoter, volume: float, start_week: int,
              base: PlanResult) -> tuple[int, np.ndarray | None]:
    """Latest day before which the plan without the order can be kept: bisection with the
    LP relaxation, then the MILP at that day, backing off (2, 4, 8 ... days earlier)
    until a whole plan fills the order. Returns the day and that whole plan (None for
    day 0 when no check found one)."""
    lo, hi = 0, 7 * (start_week - 1) + 7
    tol = q.tolerance(volume)
    if q.unmet(volume, start_week, reference=base, before_day=hi, lp_only=True) <= tol:
        lo = hi
    else:
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if q.unmet(volume, start_week, reference=base, before_day=mid,
                       lp_only=True) <= tol:
                lo = mid
            else:
                hi = mid
    back = 0
    while True:
        day = max(lo - back, 0)
        if q.unmet(volume, start_week, reference=base, before_day=day) <= tol:
            return day, q.last_plan
        if day == 0:
            return 0, None
        back = 2 if back == 0 else 2 * back


def quote(scn: Scenario, weekly_volume: float, weeks: int, start_week: int | None = None,
          customer: str = "Quote", settings: SolveSettings | None = None,
          search: bool = True) -> QuoteResult:
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
    search : bool
        If the order cannot be taken in full, search the largest volume and the earliest
        full start.
    """
    from planner.optimise import settings_for
    t0 = time.perf_counter()
    settings = settings or settings_for(scn)
    start = start_batches(scn, dataclasses.replace(settings, log_path=None))
    name = f"{customer} (quote)"
    q = _Quoter(scn, settings, start, name, weeks)
    first = start_week or default_start_week(scn)
    base = q.cost_plan(None, first)
    if not base.info.has_plan:
        raise NoPlanError(f"no plan even without the quote: {base.info.message}")
    q.keep_book(base)
    least = q.unmet(weekly_volume, first)
    feasible = least <= q.tolerance(weekly_volume)
    limiting: list[str] = []
    max_volume = max_bound = earliest = None
    promised = weekly_volume
    if not feasible:
        # what stops it: the shortfall diagnosis of the full order's LP relaxation
        relaxed = q.cost_plan(weekly_volume, first, relax=True)
        limiting = _limiting(relaxed, name)
        if search:
            max_volume, max_bound = _max_volume(q, weekly_volume, first)
            earliest = _earliest_start(q, weekly_volume, first)
            promised = max_volume
    new, ramp = base, None
    if promised > 0:
        ramp, filled = _ramp_day(q, promised, first, base)
        limit = None if feasible else EDGE_SECONDS
        new = q.cost_plan(promised, first, reference=base, before_day=ramp,
                          time_limit=limit, promise=filled)
        if not new.info.has_plan:  # no plan within the promise in time: price it instead
            new = q.cost_plan(promised, first, reference=base, before_day=ramp,
                              time_limit=limit)
    ramp_date, changes = _first_changes(base, new, ramp or 0)
    short = float(new.weekly.loc[new.weekly["customer"] == name, "shortfall"].sum())
    delivered = float(new.weekly.loc[new.weekly["customer"] == name, "released"].sum())
    in_horizon = min(weeks, max(0, scn.plan.horizon_weeks - first + 1))
    extra = operating_cost(new) - operating_cost(base)
    plans = [base] if new is base else [base, new]
    noise = sum((r.info.gap or 0.0) * abs(r.info.objective or 0.0) for r in plans)
    res = QuoteResult(
        customer=customer, weekly_volume=weekly_volume, start_week=first, weeks=weeks,
        feasible=feasible and short <= q.tolerance(weekly_volume), baseline=base,
        with_order=new,
        extra_cost_total=extra,
        extra_cost_per_week=extra / in_horizon if in_horizon else None,
        cost_per_million=extra / delivered if delivered > 1e-9 else None,
        cost_uncertainty=noise, delivered=delivered, shortfall=short,
        ramp_up_start=ramp_date or (new.data.date(ramp) if ramp is not None else None),
        first_changes=changes, max_weekly_volume=max_volume,
        max_weekly_volume_bound=max_bound, earliest_full_start=earliest,
        limiting_resources=limiting, promised_volume=promised)
    res.solves = q.solves
    res.seconds = time.perf_counter() - t0
    return res


def _limiting(res: PlanResult, customer: str) -> list[str]:
    """Resources full in the days that feed the weeks where the quoted order is short,
    most often full first."""
    count: dict[str, int] = {}
    for s in res.shortfalls:
        if s["customer"] != customer:
            continue
        for item in s["saturated"]:
            count[item["resource"]] = count.get(item["resource"], 0) + item["days_full"]
    if not count and any(s["customer"] == customer for s in res.shortfalls):
        return ["eggs: the cages cannot lay enough in time"]
    return [r for r, _ in sorted(count.items(), key=lambda kv: -kv[1])]


def _max_volume(q: _Quoter, full: float, start_week: int,
                rel_tol: float = 0.005) -> tuple[float, float]:
    """Largest constant weekly volume [million/week] that can be promised from the start,
    and an upper bound on it. The LP relaxation's largest volume bounds it from above
    (bisection with LP checks, cheap); below that bound, bisection with whole-plan
    checks, each to ``rel_tol`` of the volume. The promised volume has a whole plan that
    fills it; between it and the bound no whole plan was found within a check's time.
    The bisection ends with a climb in steps of half ``rel_tol``, each check starting from
    the last plan found, until a step fails."""
    lo, hi = 0.0, full
    while hi - lo > rel_tol * hi:
        mid = 0.5 * (lo + hi)
        if q.unmet(mid, start_week, lp_only=True) <= q.tolerance(mid):
            lo = mid
        else:
            hi = mid
    upper = hi
    if lo > 0 and q.feasible(lo, start_week):
        return lo, upper
    top, lo = lo, 0.0
    while top - lo > rel_tol * top:
        mid = 0.5 * (lo + top)
        if q.feasible(mid, start_week):
            lo = mid
        else:
            top = mid
    # climb in small steps, each check starting from the plan just found (a check near
    # the edge finds a plan far more surely from a plan close to it than from afar)
    while lo > 0:
        step = lo * (1 + rel_tol / 2)
        if step > upper or not q.feasible(step, start_week):
            break
        lo = step
    return lo, upper


def _earliest_start(q: _Quoter, volume: float, first: int) -> int | None:
    """Earliest plan week, within the scenario's horizon, from which the full volume can be
    delivered (None: no start within the horizon)."""
    limit = q.scn.plan.horizon_weeks
    last_bad, step, week = first, 1, first + 1
    good = None
    while week <= limit:
        if q.feasible(volume, week):
            good = week
            break
        last_bad = week
        if week == limit:
            break
        step *= 2
        week = min(first + step, limit)
    if good is None:
        return None
    lo, hi = last_bad, good
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if q.feasible(volume, mid):
            hi = mid
        else:
            lo = mid
    return hi
