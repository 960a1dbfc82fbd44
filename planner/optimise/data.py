"""The planner's data model: a scenario compiled into day-indexed numpy arrays.

Two variants share one data model and one model builder:

- **horizon**: days ``t = 0 .. n_days-1`` from the plan start (the reported weeks plus
  the look-ahead weeks whose orders the colony must still be able to serve); what is in
  the facility before day 0 (cages loaded, trays seeded) is data;
- **cycle** (the standard week): ``n_days = 7`` or ``14`` days taken modulo the cycle,
  no start state, a constant weekly volume.

Day arithmetic (``s + j`` for a cage loaded on day s, j days later) is done by
:meth:`PlanData.rows`: in the horizon, results outside ``[0, n_days)`` are dropped; in
the cycle they wrap around.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field

import numpy as np

from planner.errors import InputError
from planner.scenario.schema import TASKS, WEEKDAYS, Scenario

__all__ = ["PlanData", "StartBatches", "compile_horizon", "compile_cycle", "lead_time_days"]


@dataclass
class StartBatches:
    """What is in the facility before day 0, as day offsets (negative days).

    ``cages``: list of (load day s < 0, count, discard age); ``trays``: list of
    (seed day s < 0, count).
    """

    cages: list[tuple[int, int, int]] = field(default_factory=list)
    trays: list[tuple[int, int]] = field(default_factory=list)
    source: str = "scenario"
    notes: list[str] = field(default_factory=list)


def lead_time_days(scn: Scenario) -> int:
    """Days from loading a cage to harvesting its offspring [day]: the cage's pre-laying
    time plus the egg-to-harvest time (latest harvest age)."""
    col = scn.colony
    first_lay = int(np.flatnonzero(col.female_mx() > 0)[0])
    return first_lay - col.rearing.cage_loading_age + max(col.rearing.harvest_ages)


@dataclass
class PlanData:
    """Arrays the model builder needs. Days are indices; ages are days from egg laying."""

    scenario: Scenario
    mode: str                      # "horizon" or "cycle"
    n_days: int                    # days modelled [day]
    report_days: int               # days reported (horizon weeks) [day]
    start_date: dt.date | None     # date of day 0 (horizon)
    weekday: np.ndarray            # 0 = Monday, per day
    holiday: np.ndarray            # bool per day
    can_ship: np.ndarray           # bool per day: pupae may be released
    # biology and rearing
    lx: np.ndarray                 # survival from egg laying by age [-]
    mf: np.ndarray                 # female eggs per female per day = eggs per insect [1/day]
    theta_c: int                   # cage loading age [day]
    seed_lag: int                  # L [day]
    rack_days: int                 # days a tray spends in the racks [day]
    larval_collection_age: int     # [day]
    emergence_age: int             # [day]
    k: int                         # pupae per full cage [pupae]
    min_cage_fill: float           # smallest load of a cage, share of k [-]
    rho: float                     # eggs per tray, counted at collection [eggs]
    diet_per_tray: float           # [kg]
    product_yield: float           # [-]
    discard_ages: list[int]
    harvest_ages: list[int]
    # capacities per day
    cage_slots: np.ndarray         # [cage slots]
    rack_slots: np.ndarray         # [tray slots]
    kitchen: np.ndarray            # [kg/day]
    pupal_cap: float | None        # [million pupae]
    crews: list[str]
    crew_hours: np.ndarray         # (crews, days) regular hours [h]
    overtime_limit: np.ndarray     # (crews, days) [h]
    task_crew: dict[str, int]      # task -> crew index
    # orders (weeks of the model)
    n_weeks: int
    report_weeks: int
    customers: list[str]
    ordered: np.ndarray            # (customers, weeks) [million/week]
    shortfall_price: np.ndarray    # (customers, weeks) [currency/million]
    priority: np.ndarray           # (customers,) priority class, 1 served first [-]
    booked: np.ndarray             # (customers,) an order of the book, not a quote or target
    # start state and expansion
    start: StartBatches
    options: list                  # ExpansionOption
    option_ready: list[int]        # first day index each option can be used
    use_expansion: bool = False

    # -- derived -----------------------------------------------------------------------
    def span(self, delta: int) -> int:
        """Days a cage with discard age delta occupies its slot [day]."""
        return delta - self.theta_c + 1

    def egg_coef(self, delta: int) -> np.ndarray:
        """Eggs laid per full cage on each day of its life, j = 0 .. span-1
        [eggs/cage/day]; per pupa loaded, divide by k."""
        a = self.theta_c + np.arange(self.span(delta))
        return self.k * self.lx[a] / self.lx[self.theta_c] * self.mf[a]

    def laying(self, delta: int) -> np.ndarray:
        """1 on the days of a cage's life on which its females lay [-]."""
        a = self.theta_c + np.arange(self.span(delta))
        return (self.mf[a] > 0).astype(float)

    def females_coef(self, delta: int) -> np.ndarray:
        """Adult females per full cage on each day of its life (after emergence)
        [females]; per pupa loaded, divide by k."""
        a = self.theta_c + np.arange(self.span(delta))
        phi = self.scenario.colony.female_fraction
        return np.where(a >= self.emergence_age,
                        self.k * phi * self.lx[a] / self.lx[self.theta_c], 0.0)

    @property
    def take_ages(self) -> list[int]:
        """Ages at which pupae leave the pool: harvest ages and the cage loading age."""
        return sorted(set(self.harvest_ages) | {self.theta_c})

    @property
    def cohorts(self) -> np.ndarray:
        """Laying days whose pupae can be taken inside the modelled days."""
        if self.mode == "cycle":
            return np.arange(self.n_days)
        ages = self.take_ages
        return np.arange(-max(ages), self.n_days - min(ages))

    def rows(self, days: np.ndarray):
        """(row index, valid mask) of raw day numbers: dropped or wrapped by the variant."""
        days = np.asarray(days, np.int64)
        if self.mode == "cycle":
            return np.mod(days, self.n_days), np.ones(days.shape, bool)
        ok = (days >= 0) & (days < self.n_days)
        return np.where(ok, days, 0), ok

    def day_label(self, t: int) -> str:
        """A day's label: its date (horizon) or cycle day and weekday (standard week)."""
        if self.mode == "cycle":
            wk = WEEKDAYS[t % 7].capitalize()
            return wk if self.n_days == 7 else f"w{t // 7 + 1}-{wk}"
        return (self.start_date + dt.timedelta(days=int(t))).isoformat()

    def date(self, t: int) -> dt.date | None:
        return None if self.start_date is None else self.start_date + dt.timedelta(days=int(t))

    def week_of_day(self, t) -> np.ndarray:
        return np.asarray(t) // 7

    def week_label(self, w: int) -> str:
        if self.mode == "cycle":
            return f"cycle week {w + 1}"
        return f"{w + 1}"

    def option_adds(self, attr: str) -> np.ndarray:
        """(options, days) capacity added per unit bought, from each option's ready day."""
        out = np.zeros((len(self.options), self.n_days))
        for e, (opt, ready) in enumerate(zip(self.options, self.option_ready)):
            value = getattr(opt, attr)
            if value is None or value == 0:
                continue
            per_day = np.array(value.as_list())[self.weekday] if hasattr(value, "as_list") \
                else np.full(self.n_days, float(value))
            out[e, max(ready, 0):] = per_day[max(ready, 0):]
        return out


def _calendar(scn: Scenario, n_days: int, start: dt.date):
    dates = [start + dt.timedelta(days=t) for t in range(n_days)]
    weekday = np.array([d.weekday() for d in dates])
    hol = set(scn.calendar.holidays)
    holiday = np.array([d in hol for d in dates])
    ship_days = {WEEKDAYS.index(d) for d in scn.calendar.shipping_days}
    can_ship = np.array([w in ship_days for w in weekday])
    if not scn.calendar.ship_on_holidays:
        can_ship &= ~holiday
    return weekday, holiday, can_ship


def _by_day(weekly, weekday, holiday, holiday_value):
    per = np.array(weekly.as_list(), float)[weekday]
    if holiday_value is not None:
        per = np.where(holiday, holiday_value, per)
    else:
        per = np.where(holiday, weekly.sun, per)
    return per


def _common(scn: Scenario, mode, n_days, report_days, start_date, weekday, holiday, can_ship,
            n_weeks, report_weeks, customers, ordered, price, start, use_expansion,
            priority, booked=None):
    col = scn.colony
    re_ = col.rearing
    st = col.stages
    crews = [c.name for c in scn.crews]
    crew_hours = np.vstack([_by_day(c.hours, weekday, holiday, c.holiday_hours)
                            for c in scn.crews])
    overtime = np.vstack([np.full(n_days, c.overtime_limit) for c in scn.crews])
    task_crew = {}
    for i, c in enumerate(scn.crews):
        for t in (TASKS if c.tasks == "all" else c.tasks):
            task_crew[t] = i
    f = scn.facility
    options = list(scn.expansion) if use_expansion else []
    ready = [(o.ready - start_date).days if start_date else 0 for o in options]
    return PlanData(
        scenario=scn, mode=mode, n_days=n_days, report_days=report_days,
        start_date=start_date, weekday=weekday, holiday=holiday, can_ship=can_ship,
        lx=col.lx(), mf=col.female_mx(), theta_c=re_.cage_loading_age, seed_lag=re_.seed_lag,
        rack_days=st.larval_collection_age - re_.seed_lag,
        larval_collection_age=st.larval_collection_age, emergence_age=st.emergence_age,
        k=re_.pupae_per_cage, min_cage_fill=re_.min_cage_fill, rho=re_.eggs_per_tray, diet_per_tray=re_.diet_per_tray,
        product_yield=re_.product_yield, discard_ages=list(re_.discard_ages),
        harvest_ages=list(re_.harvest_ages),
        cage_slots=np.full(n_days, float(f.cage_slots)),
        rack_slots=np.full(n_days, float(f.rack_slots)),
        kitchen=_by_day(scn.kitchen.diet_kg, weekday, holiday, scn.kitchen.holiday_kg),
        pupal_cap=f.pupal_holding, crews=crews, crew_hours=crew_hours, overtime_limit=overtime,
        task_crew=task_crew, n_weeks=n_weeks, report_weeks=report_weeks, customers=customers,
        ordered=ordered, shortfall_price=price, priority=np.asarray(priority, int),
        booked=np.ones(len(customers), bool) if booked is None else np.asarray(booked, bool),
        start=start, options=options,
        option_ready=ready, use_expansion=use_expansion)


def batches_from_scenario(scn: Scenario) -> StartBatches:
    """The scenario's own start batches as day offsets from the plan start."""
    s0 = scn.calendar.start
    return StartBatches(
        cages=[((b.load_date - s0).days, b.count, b.discard_age) for b in scn.start.cages],
        trays=[((b.seed_date - s0).days, b.count) for b in scn.start.trays],
        source="scenario")


def compile_horizon(scn: Scenario, start: StartBatches | None = None,
                    horizon_weeks: int | None = None, lookahead_weeks: int | None = None,
                    extra_orders: list | None = None, use_expansion: bool = False) -> PlanData:
    """Compile the horizon plan's data.

    Parameters
    ----------
    start : StartBatches, optional
        The facility on day 0; default: the scenario's batches (a scenario that starts
        from the standard week must be given the batches made by
        :func:`planner.optimise.standard_week.start_batches`).
    horizon_weeks, lookahead_weeks : int, optional
        Override the plan settings [weeks].
    extra_orders : list of Order, optional
        Orders added to the book (quotes).
    use_expansion : bool
        Offer the scenario's expansion options as decisions.
    """
    weeks = horizon_weeks or scn.plan.horizon_weeks
    la = scn.plan.lookahead_weeks
    if lookahead_weeks is not None:
        la = lookahead_weeks
    if la is None:
        la = math.ceil(lead_time_days(scn) / 7)
    if start is None:
        if scn.start.standard_week_volume is not None:
            raise InputError("this scenario starts from the standard week: compute its start "
                             "batches first (planner.optimise.standard_week.start_batches)")
        start = batches_from_scenario(scn)
    n_weeks = weeks + la
    n_days = 7 * n_weeks
    s0 = scn.calendar.start
    weekday, holiday, can_ship = _calendar(scn, n_days, s0)
    book_scn = scn
    if extra_orders:
        book_scn = scn.model_copy(update={"orders": list(scn.orders) + list(extra_orders)})
    book = book_scn.weekly_orders(n_weeks)
    customers = list(book)
    ordered = np.array([book[c] for c in customers]) if customers else np.zeros((0, n_weeks))
    price = np.full(ordered.shape, scn.costs.shortfall_per_million)
    for o in book_scn.orders:
        if o.shortfall_per_million is not None:
            i = customers.index(o.customer)
            a = book_scn.week_of(o.first_week)
            b = book_scn.week_of(o.last_week) if o.last_week is not None else n_weeks
            price[i, max(a, 1) - 1:min(b, n_weeks)] = o.shortfall_per_million
    prio = book_scn.priorities()
    return _common(scn, "horizon", n_days, 7 * weeks, s0, weekday, holiday, can_ship, n_weeks,
                   weeks, customers, ordered, price, start, use_expansion,
                   [prio[c] for c in customers],
                   [c in {o.customer for o in scn.orders} for c in customers])


def compile_cycle(scn: Scenario, weekly_volume: float, cycle_days: int | None = None,
                  all_days_alike: bool = False) -> PlanData:
    """Compile the standard week: a cyclic plan for a constant weekly volume.

    Parameters
    ----------
    weekly_volume : float
        Product to deliver every week [million/week].
    cycle_days : int, optional
        7 or 14 [day]; default: the plan settings.
    all_days_alike : bool
        Give every weekday the mean capacity of the week and let pupae ship any day
        (for comparisons with the stationary formulas).
    """
    p = cycle_days or scn.plan.cycle_days
    weekday = np.arange(p) % 7
    holiday = np.zeros(p, bool)
    ship_days = {WEEKDAYS.index(d) for d in scn.calendar.shipping_days}
    can_ship = np.array([w in ship_days for w in weekday])
    n_weeks = p // 7
    ordered = np.full((1, n_weeks), float(weekly_volume))
    price = np.full((1, n_weeks), scn.costs.shortfall_per_million)
    data = _common(scn, "cycle", p, p, None, weekday, holiday, can_ship, n_weeks, n_weeks,
                   ["standard week"], ordered, price, StartBatches(source="none"), False, [1])
    if all_days_alike:
        data.can_ship = np.ones(p, bool)
        data.kitchen = np.full(p, data.kitchen.mean())
        data.crew_hours = np.repeat(data.crew_hours.mean(axis=1, keepdims=True), p, axis=1)
    return data
