"""Shortfall reasons (issue 11, point 7): the calendar is a reason, a shortfall under the
fill tolerance is no shortfall, and a day without capacity is never "full".

Each scenario is the demo fly unit over a few weeks with its calendar changed; the
dates of the holidays and the weeks they touch come from Python's calendar arithmetic
(datetime), not from the planner.
"""

import dataclasses
import datetime as dt

import pytest

from planner.optimise import plan_horizon, settings_for
from planner.optimise.results import FILL_TOLERANCE, describe_bottlenecks, diagnose_shortfalls
from planner.scenario.schema import Order, Weekly

DAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
CAUSES = {"calendar", "capacity", "lead time", "eggs"}


def _dates(scn, week, weekdays):
    first = scn.calendar.start + dt.timedelta(days=7 * (week - 1))
    days = [first + dt.timedelta(days=i) for i in range(7)]
    return [d for d in days if DAYS[d.weekday()] in weekdays]


def _week(scn, day: dt.date) -> int:
    return (day - scn.calendar.start).days // 7 + 1


def _plan(scn, weeks):
    scn = scn.model_copy(update={"plan": scn.plan.model_copy(update={"horizon_weeks": weeks})})
    res = plan_horizon(scn, settings_for(scn, time_limit=60))
    assert res.info.has_plan
    return res


@pytest.fixture(scope="module")
def no_shipping(fly):
    """Every shipping day of week 4 a holiday (and no shipping on holidays): 6 weeks."""
    hol = _dates(fly, 4, fly.calendar.shipping_days)
    scn = fly.model_copy(update={"calendar": fly.calendar.model_copy(
        update={"holidays": hol, "ship_on_holidays": False})})
    return hol, _plan(scn, 6)


@pytest.fixture(scope="module")
def kitchen_holidays(fly):
    """A tight kitchen (1,800 kg on each open day) shut on two holidays of week 2;
    pupae may ship on holidays, so only the kitchen changes: 7 weeks."""
    hol = _dates(fly, 2, ("tue", "wed"))
    kitchen = Weekly(**{d: 0.0 if d == "sun" else 1800.0 for d in DAYS})
    scn = fly.model_copy(update={
        "calendar": fly.calendar.model_copy(update={"holidays": hol, "ship_on_holidays": True}),
        "kitchen": fly.kitchen.model_copy(update={"diet_kg": kitchen, "holiday_kg": 0.0})})
    return hol, _plan(scn, 7)


def test_a_week_without_shipping_day_is_the_calendar(no_shipping):
    hol, res = no_shipping
    weekly = res.weekly.groupby("week")["released"].sum()
    assert weekly[4] == 0.0  # nothing can ship in week 4
    short = [s for s in res.shortfalls if s["week"] == 4]
    ordered = res.weekly.loc[res.weekly["week"] == 4, "customer"].nunique()
    assert len(short) == ordered
    for s in short:
        assert s["cause"] == "calendar"
        assert ("no shipping day in week 4 (holidays "
                + ", ".join(d.isoformat() for d in hol) + ")") in s["text"]
        assert not s["saturated"] and "full on" not in s["text"]  # not blamed on capacity
    # the weeks with a shipping day are not short for the calendar
    assert all(s["cause"] != "calendar" for s in res.shortfalls if s["week"] != 4)


def test_a_kitchen_shut_on_holidays_is_the_calendar(fly, kitchen_holidays):
    hol, res = kitchen_holidays
    lag, ages = fly.colony.rearing.seed_lag, fly.colony.rearing.harvest_ages
    # weeks whose pupae come from eggs that the shut days could not seed
    fed = {_week(fly, h - dt.timedelta(days=lag) + dt.timedelta(days=a))
           for h in hol for a in ages}
    assert res.shortfalls, "the holidays must cost product in this tight kitchen"
    for s in res.shortfalls:
        assert s["week"] in fed
        assert s["cause"] == "calendar"
        assert "kitchen shut on" in s["text"]
        assert "(holidays " + ", ".join(d.isoformat() for d in hol) + ")" in s["text"]


def test_a_day_without_capacity_is_never_full(fly, kitchen_holidays):
    hol, res = kitchen_holidays
    start = fly.calendar.start
    lead = max(fly.colony.rearing.harvest_ages) - fly.colony.rearing.seed_lag
    for s in res.shortfalls:
        w0 = start + dt.timedelta(days=7 * (s["week"] - 1))
        first = max(w0 - dt.timedelta(days=lead), start)
        window = [first + dt.timedelta(days=i) for i in range((w0 - first).days + 7)]
        # the kitchen's open days among them: not Sunday (shut), not a holiday
        open_days = sum(1 for d in window if d.weekday() != 6 and d not in hol)
        for item in s["saturated"]:
            if item["resource"] == "diet kitchen":
                assert item["days"] == open_days and item["days_full"] <= open_days
                assert f"diet kitchen full on {item['days_full']} of {open_days} days" in s["text"]
    horizon = [start + dt.timedelta(days=i) for i in range(7 * 7)]
    open_days = sum(1 for d in horizon if d.weekday() != 6 and d not in hol)
    kitchen = [b for b in describe_bottlenecks(res) if b.startswith("diet kitchen")]
    assert kitchen and f"of {open_days} days" in kitchen[0]


def test_a_shortfall_under_the_fill_tolerance_is_not_an_unfillable_order(no_shipping):
    _, res = no_shipping
    weekly = res.weekly.copy()
    first = weekly.index[(weekly["week"] == 1)][0]
    second = weekly.index[(weekly["week"] == 2)][0]
    ordered1, ordered2 = weekly.loc[first, "ordered"], weekly.loc[second, "ordered"]
    # the figure seen in issue 11: 0.000176 million short of a 6 million order
    weekly.loc[first, ["released", "shortfall"]] = [ordered1 - 0.000176, 0.000176]
    assert 0.000176 < FILL_TOLERANCE * ordered1
    weekly.loc[second, ["released", "shortfall"]] = [ordered2 * (1 - 2 * FILL_TOLERANCE),
                                                     ordered2 * 2 * FILL_TOLERANCE]
    found = diagnose_shortfalls(dataclasses.replace(res, weekly=weekly))
    weeks = {(s["week"], s["customer"]) for s in found}
    assert (1, weekly.loc[first, "customer"]) not in weeks
    assert (2, weekly.loc[second, "customer"]) in weeks
    assert all(s["cause"] in CAUSES for s in found)


def test_an_order_beyond_the_facility_is_capacity(fly):
    # 25 million a week more than the demo, from week 4: beyond the facility's ~14.5
    big = Order(customer="Eastvale Trial", weekly_volume=25.0, first_week=4)
    scn = fly.model_copy(update={"plan": fly.plan.model_copy(update={"horizon_weeks": 6})})
    res = plan_horizon(scn, settings_for(scn, time_limit=60), extra_orders=[big])
    short = [s for s in res.shortfalls if s["customer"] == "Eastvale Trial"]
    assert short
    for s in short:
        assert s["cause"] == "capacity" and s["saturated"] and "full on" in s["text"]
        assert s["shortfall"] > FILL_TOLERANCE * s["ordered"]
