"""First estimates from the stationary single-stage formulas: what a constant weekly
volume needs (eggs, trays, diet, rack and cage slots, crew hours) at one harvest age
and one discard age, as daily averages.

This is the hand calculation a rearing manager does without an optimiser; ``broodline
check`` shows it against the facility's capacities, and the optimiser's benchmark
builds its "hand method" plan from it.

Stationary flows for a product volume V [million/week]
------------------------------------------------------
With ``y = 1 / R0(delta)`` the share of each day's eggs whose pupae go back to the
colony (egg equivalents) and ``H = 1 - y``:

- pupae released per day ``R = V 1e6 / (7 yield)``;
- eggs per day ``B = R / (l_theta H)``; trays per day ``B / rho``; diet ``d B / rho``;
- cages loaded per day ``B l_theta_c y / k``; occupied ``(delta - theta_c + 1)`` times
  that; laying on the days with ``mx > 0``;
- rack occupancy ``(A_lc - L)`` times the trays per day; pupal holding
  ``B (H sum_{A_lc}^{theta-1} lx + y sum_{A_lc}^{theta_c-1} lx)``.

The calendar
------------
Eggs laid on day d are seeded on day ``d + L`` or not at all, and the pupae of laying
day d ship only on a shipping day ``d + theta`` at an allowed harvest age. Of the seven
laying days of a week, ``n_s`` can be seeded (the kitchen is open ``L`` days later) and
``n_r <= n_s`` can also ship. The cages lay about the same number of eggs ``B`` every day
(each lays over many days), so the week's release needs ``n_r B >= E_r`` (``E_r = 7 R /
l_theta`` eggs for the week's release) and the colony its replacement from the seeded
days, ``E_r + 7 B / R0 <= n_s B``:

- ``B = max(E_r / n_r, E_r / (n_s - 7 / R0))`` eggs laid per day;
- eggs seeded per day (mean of the week) ``E_r / 7 + B / R0``; the diet is mixed on the
  kitchen's open days only, so each open day mixes the week's diet divided by ``n_s``;
- cages from ``B``: cages loaded per day ``B l_theta_c / (R0 k)``.

With every day open and shipping (``n_s = n_r = 7``) these are the formulas above.
A week with no shipping day can receive nothing; a holiday that shuts the kitchen
lowers ``n_s`` in the weeks it feeds (:func:`horizon_weeks`).
"""

from __future__ import annotations

from dataclasses import dataclass

import datetime as dt

import numpy as np

from planner.demography import single_stage_harvest
from planner.errors import DemographyError
from planner.scenario.schema import TASKS, WEEKDAYS, Scenario

__all__ = ["StationaryNeeds", "stationary_needs", "capacities", "crew_task_hours",
           "CalendarDays", "ALL_DAYS", "weekday_calendar", "calendar_days", "horizon_weeks",
           "best_pair"]


@dataclass(frozen=True)
class CalendarDays:
    """How many of a week's seven laying days the calendar lets the plan use."""

    #: laying days whose eggs can be seeded (the kitchen open L days later) [day/week]
    seeding_days: int
    #: of those, the days whose pupae can ship at an allowed harvest age [day/week]
    release_days: int


#: Every laying day seeded and shipped: the textbook stationary formulas.
ALL_DAYS = CalendarDays(7, 7)
_CALENDAR = "the calendar: "  # how the calendar's own problems begin


@dataclass(frozen=True)
class StationaryNeeds:
    """Daily averages that a constant weekly volume needs at one (theta, delta)."""

    volume: float            #: product [million/week]
    harvest_age: int         #: theta [day]
    discard_age: int         #: delta [day]
    harvest_fraction: float  #: H [-]
    output_per_female: float  #: P [female-unit pupae per adult female per day]
    eggs: float              #: eggs collected and seeded [eggs/day]
    trays: float             #: trays seeded [trays/day]
    diet: float              #: diet mixed [kg/day]
    rack_occupancy: float    #: trays in racks [tray slots]
    cages_loaded: float      #: cages loaded [cages/day]
    cage_occupancy: float    #: occupied cages [cage slots]
    laying_cages: float      #: cages laying eggs [cages]
    released: float          #: pupae harvested for release [pupae/day]
    to_colony: float         #: pupae loaded into cages [pupae/day]
    pupal_holding: float     #: pupae held between larval collection and harvest [million]
    task_hours: dict         #: hours by task [h/day]
    cost_per_week: float     #: variable cost [currency/week]
    eggs_laid: float = 0.0   #: eggs laid by the cages [eggs/day]
    seeding_days: int = 7    #: n_s, laying days a week whose eggs can be seeded [day/week]
    release_days: int = 7    #: n_r, laying days a week whose pupae can ship [day/week]

    @property
    def diet_per_open_day(self) -> float:
        """Diet mixed on each day the kitchen is open: the week's diet over n_s [kg/day]."""
        return 7.0 * self.diet / self.seeding_days

    @property
    def trays_per_open_day(self) -> float:
        """Trays seeded on each day the kitchen is open [trays/day]."""
        return 7.0 * self.trays / self.seeding_days

    @property
    def crew_hours(self) -> float:
        """All crews' hours [h/day]."""
        return float(sum(self.task_hours.values()))


def stationary_needs(scn: Scenario, volume: float, harvest_age: int,
                     discard_age: int, calendar: CalendarDays | None = None) -> StationaryNeeds:
    """Daily needs of a constant product ``volume`` [million/week] at one (theta, delta).

    Parameters
    ----------
    volume : float
        Product [million/week].
    harvest_age, discard_age : int
        theta and delta [day].
    calendar : CalendarDays, optional
        Laying days a week that can be seeded and shipped [day/week] (see the module
        notes); default :data:`ALL_DAYS`, the textbook formulas.

    Raises
    ------
    DemographyError
        When the colony cannot sustain a harvest at these ages (R0(delta) <= 1), or the
        calendar leaves too few seeding days for the colony to replace itself
        (``n_s <= 7 / R0``) or no laying day whose pupae can ship.
    """
    col = scn.colony
    re_ = col.rearing
    lt = col.to_life_table()
    lx = lt.lx
    res = single_stage_harvest(lt, harvest_age, discard_age, col.stages.emergence_age)
    h = res.harvest_fraction
    r0 = res.net_reproductive_rate
    cal = calendar or ALL_DAYS
    if cal.release_days <= 0:
        raise DemographyError(f"{_CALENDAR}no laying day of the week has its pupae reach a "
                              "shipping day at an allowed harvest age with the kitchen open "
                              "to seed it")
    if cal.seeding_days <= 7.0 / r0 * (1 + 1e-12):
        raise DemographyError(f"{_CALENDAR}the kitchen seeds the eggs of {cal.seeding_days} "
                              f"laying days a week; the colony needs more than 7 / R0 = "
                              f"{7.0 / r0:.3g} to replace itself")
    released = volume * 1e6 / (7.0 * re_.product_yield)
    release_eggs = 7.0 * released / lx[harvest_age]  # E_r, eggs seeded for release [eggs/week]
    laid = max(release_eggs / min(cal.release_days, cal.seeding_days),
               release_eggs / (cal.seeding_days - 7.0 / r0))
    colony_eggs = laid / r0                            # egg equivalents [eggs/day]
    eggs = release_eggs / 7.0 + colony_eggs            # seeded, mean of the week [eggs/day]
    trays = eggs / re_.eggs_per_tray
    diet = trays * re_.diet_per_tray
    theta_c = re_.cage_loading_age
    to_colony = colony_eggs * lx[theta_c]
    cages = to_colony / re_.pupae_per_cage
    span = discard_age - theta_c + 1
    laying_days = int(np.count_nonzero(col.female_mx()[theta_c: discard_age + 1] > 0))
    a_lc = col.stages.larval_collection_age
    holding = (release_eggs / 7.0 * lx[a_lc:harvest_age].sum()
               + colony_eggs * lx[a_lc:theta_c].sum()) / 1e6
    lab = scn.labour
    tasks = {
        "diet_mixing": lab.diet_mixing * diet,
        "egg_collection": lab.egg_collection * cages * laying_days,
        "seeding": lab.seeding * trays,
        "larval_collection": lab.larval_collection * trays,
        "harvest_packing": (lab.harvest_packing * released
                            + lab.colony_harvest_rate * to_colony) / 1e6,
        "cage_loading": lab.cage_loading * cages,
        "cage_care": lab.cage_care * cages * span,
        "cage_discard": lab.cage_discard * cages,
    }
    c = scn.costs
    cost = 7.0 * (c.diet_per_kg * diet + c.per_tray_seeded * trays + c.per_cage_loaded * cages
                  + c.per_cage_day * cages * span)
    return StationaryNeeds(
        volume=volume, harvest_age=harvest_age, discard_age=discard_age, harvest_fraction=h,
        output_per_female=res.output_per_female, eggs=eggs, trays=trays, diet=diet,
        rack_occupancy=trays * (a_lc - re_.seed_lag), cages_loaded=cages,
        cage_occupancy=cages * span, laying_cages=cages * laying_days, released=released,
        to_colony=to_colony, pupal_holding=holding, task_hours=tasks, cost_per_week=cost,
        eggs_laid=laid, seeding_days=cal.seeding_days, release_days=cal.release_days)


def best_pair(scn: Scenario, volume: float,
              calendar: CalendarDays | None = None) -> StationaryNeeds:
    """The (theta, delta) candidate pair with the lowest stationary variable cost at
    ``volume`` [million/week] under ``calendar`` (default: every day seeds and ships)."""
    best = None
    problem = None
    for theta in scn.colony.rearing.harvest_ages:
        for delta in scn.colony.rearing.discard_ages:
            try:
                n = stationary_needs(scn, volume, theta, delta, calendar)
            except DemographyError as exc:
                if problem is None or str(exc).startswith(_CALENDAR):
                    problem = str(exc)
                continue
            if best is None or n.cost_per_week < best.cost_per_week:
                best = n
    if best is None:
        if problem and problem.startswith(_CALENDAR):
            raise DemographyError(f"no allowed pair of harvest and discard ages fits "
                                  f"{problem}")
        raise DemographyError("no allowed pair of harvest and discard ages lets the colony "
                              "sustain a harvest (R0 up to every discard age is at most 1)")
    return best


def weekday_calendar(scn: Scenario) -> CalendarDays:
    """Laying days of a week without holidays whose eggs can be seeded and whose pupae
    can also ship (at some allowed harvest age) [day/week]: from the kitchen's weekly
    pattern (open where it can mix diet, > 0 kg) and the shipping days."""
    col = scn.colony
    lag = col.rearing.seed_lag
    kitchen = scn.kitchen.diet_kg.as_list()
    ship = {WEEKDAYS.index(d) for d in scn.calendar.shipping_days}
    seed = [kitchen[(j + lag) % 7] > 0 for j in range(7)]
    can_ship = [any((j + a) % 7 in ship for a in col.rearing.harvest_ages) for j in range(7)]
    return CalendarDays(sum(seed), sum(a and b for a, b in zip(seed, can_ship)))


def _by_day(weekly: list[float], weekday: np.ndarray, holiday: np.ndarray,
            holiday_value: float | None, sunday: float) -> np.ndarray:
    per = np.asarray(weekly, float)[weekday]
    return np.where(holiday, sunday if holiday_value is None else holiday_value, per)


def calendar_days(scn: Scenario, first: int, n: int) -> dict:
    """The calendar of days ``first .. first + n - 1`` from the plan start, as the
    optimiser sees it (a holiday has the kitchen's ``holiday_kg`` and each crew's
    ``holiday_hours``, default Sunday's; pupae ship on a holiday only with
    ``ship_on_holidays``).

    Parameters
    ----------
    first : int
        First day, counted from the plan start (negative: before it) [day].
    n : int
        Number of days [day].

    Returns
    -------
    dict
        ``day`` [day from the plan start], ``date``, ``weekday`` (0 = Monday),
        ``holiday`` (bool), ``kitchen`` [kg/day], ``can_ship`` (bool), ``crew_hours``
        {crew: array [h/day]}.
    """
    cal = scn.calendar
    day = np.arange(first, first + n)
    dates = [cal.start + dt.timedelta(days=int(t)) for t in day]
    weekday = np.array([d.weekday() for d in dates], int)
    hol = set(cal.holidays)
    holiday = np.array([d in hol for d in dates], bool)
    ship = {WEEKDAYS.index(d) for d in cal.shipping_days}
    can_ship = np.isin(weekday, list(ship))
    if not cal.ship_on_holidays:
        can_ship &= ~holiday
    kitchen = scn.kitchen.diet_kg.as_list()
    crews = {c.name: _by_day(c.hours.as_list(), weekday, holiday, c.holiday_hours,
                             c.hours.sun) for c in scn.crews}
    return {"day": day, "date": dates, "weekday": weekday, "holiday": holiday,
            "kitchen": _by_day(kitchen, weekday, holiday, scn.kitchen.holiday_kg, kitchen[6]),
            "can_ship": can_ship, "crew_hours": crews}


def horizon_weeks(scn: Scenario, weeks: int, harvest_age: int) -> list[dict]:
    """The calendar of each plan week 1..``weeks`` [weeks], holidays included, for the
    estimate's ``harvest_age`` theta [day].

    For plan week w: its shipping days and open kitchen days; of the seven laying days
    whose pupae reach ``harvest_age`` [day] in week w, ``seeding_days`` n_s, those whose
    eggs can be seeded, and ``release_days`` n_r, those of them whose pupae reach a
    shipping day at an allowed harvest age; ``kitchen_per_open_day`` the mean kitchen
    capacity on their seeding days [kg/day]; ``crew_hours`` the crews' mean regular
    hours over the week's days [h/day]. Days before the plan start follow the same
    calendar (weekdays and the listed holidays).
    """
    re_ = scn.colony.rearing
    lag, ages = re_.seed_lag, list(re_.harvest_ages)
    first = -max(ages + [harvest_age]) - 7
    n = 7 * weeks - first + max(ages) + lag
    days = calendar_days(scn, first, n)
    kitchen, can_ship = days["kitchen"], days["can_ship"]

    def at(t):  # day number -> index into ``days``
        return np.asarray(t) - first

    out = []
    for w in range(weeks):
        lo, hi = 7 * w, 7 * w + 7
        week = slice(at(lo), at(hi))
        window = np.arange(lo - harvest_age, hi - harvest_age)
        open_ = kitchen[at(window + lag)]
        ships = np.zeros(window.size, bool)
        for a in ages:
            ships |= can_ship[at(window + a)]
        out.append({
            "week": w + 1,
            "shipping_days": [d.isoformat() for d, ok in zip(days["date"][week],
                                                             can_ship[week]) if ok],
            "kitchen_days": int((kitchen[week] > 0).sum()),
            "holidays": [d.isoformat() for d, h in zip(days["date"][week],
                                                       days["holiday"][week]) if h],
            "release_days": int(((open_ > 0) & ships).sum()),
            "seeding_days": int((open_ > 0).sum()),
            "kitchen_per_open_day": float(open_[open_ > 0].mean()) if (open_ > 0).any()
            else 0.0,
            "crew_hours": {c: float(h[week].mean()) for c, h in days["crew_hours"].items()},
        })
    return out


def crew_task_hours(scn: Scenario, task_hours: dict) -> dict[str, float]:
    """Task hours summed by the crew that does each task [h/day]."""
    out = {c.name: 0.0 for c in scn.crews}
    for c in scn.crews:
        for t in (TASKS if c.tasks == "all" else c.tasks):
            out[c.name] += task_hours.get(t, 0.0)
    return out


def capacities(scn: Scenario) -> dict:
    """The facility's capacities, with daily averages over a week."""
    f = scn.facility
    kitchen = scn.kitchen.diet_kg.as_list()
    crews = {}
    for c in scn.crews:
        hours = c.hours.as_list()
        crews[c.name] = {"hours_by_weekday": dict(zip(WEEKDAYS, hours)),
                         "regular_per_day": sum(hours) / 7.0,
                         "with_overtime_per_day": sum(hours) / 7.0 + c.overtime_limit,
                         "overtime_limit": c.overtime_limit}
    open_days = [k for k in kitchen if k > 0]
    return {
        "cage_slots": f.cage_slots,
        "rack_slots": f.rack_slots,
        "pupal_holding": f.pupal_holding,
        "kitchen_by_weekday": dict(zip(WEEKDAYS, kitchen)),
        "kitchen_per_day": sum(kitchen) / 7.0,
        "kitchen_days": [d for d, k in zip(WEEKDAYS, kitchen) if k > 0],
        "kitchen_per_open_day": sum(open_days) / len(open_days) if open_days else 0.0,
        "crews": crews,
        "adult_rooms": {r.name: r.cage_slots for r in f.adult_rooms},
        "larval_rooms": {r.name: r.rack_slots for r in f.larval_rooms},
    }
