"""How plans respond to the facility: crew hours, and orders beyond its capacity."""


import pytest

from planner.optimise import plan_horizon, settings_for, verify_plan
from planner.optimise.results import FILL_TOLERANCE
from planner.optimise.standard_week import start_batches
from planner.scenario.schema import Order


def test_less_crew_on_wednesdays_moves_seeding_off_wednesday(fly, fly_plan):
    scn = fly.model_copy(deep=True)
    larval = next(c for c in scn.crews if c.name == "Larval crew")
    larval.hours.wed = 2.0
    res = plan_horizon(scn, settings_for(scn), horizon_weeks=6)
    base = plan_horizon(fly, settings_for(fly), horizon_weeks=6)
    for r in (res, base):
        assert r.info.has_plan and verify_plan(r) == []

    def wednesday_trays(r):
        d = r.horizon_daily
        return d.loc[d["weekday"] == "Wed", "trays_seeded"].mean()

    assert wednesday_trays(res) < 0.6 * wednesday_trays(base)
    d = res.horizon_daily
    wed = d[d["weekday"] == "Wed"]
    assert (wed["hours: Larval crew"] <= 2.0 + 8.0 + 1e-6).all()  # regular + overtime limit
    # the work went elsewhere or the shortfall is reported
    assert res.summary()["shortfall_million"] >= 0.0


def test_an_order_beyond_the_facility_is_a_reported_shortfall(fly):
    big = Order(customer="Eastvale Trial", weekly_volume=25.0, first_week=4)
    res = plan_horizon(fly, settings_for(fly), extra_orders=[big], horizon_weeks=8)
    assert res.info.has_plan
    assert verify_plan(res) == []
    short = [s for s in res.shortfalls if s["customer"] == "Eastvale Trial"]
    assert short, "the order cannot be met, so a shortfall must be reported"
    assert all(s["saturated"] for s in short)
    text = short[-1]["text"]
    assert "short by" in text and "full on" in text
    named = {r["resource"] for s in short for r in s["saturated"]}
    assert named & {"cage slots", "diet kitchen", "rack slots", "crew hours: Colony crew",
                    "crew hours: Larval crew", "pupal holding"}


def test_start_state_is_data_not_a_choice(fly, fly_plan):
    start = fly_plan.cage_batches[fly_plan.cage_batches["source"] == "start"]
    assert len(start) == len(fly_plan.data.start.cages) > 0
    assert (start["load_day"] < 0).all()
    plan = fly_plan.cage_batches[fly_plan.cage_batches["source"] == "plan"]
    assert (plan["load_day"] >= 0).all()


def test_the_lookahead_keeps_the_colony_for_later_orders(fly_plan):
    look = fly_plan.weekly_lookahead
    # within the fill tolerance: a plan within its gap may round a tray short
    assert len(look) > 0
    assert (look["shortfall"] <= FILL_TOLERANCE * look["ordered"] + 1e-9).all()
    last = fly_plan.horizon_daily.iloc[-1]
    assert last["cages_occupied"] > 0.5 * fly_plan.horizon_daily["cages_occupied"].max()


def test_policy_switches_use_one_age(fly):
    scn = fly.model_copy(deep=True)
    scn.plan.single_discard_age = True
    scn.plan.single_harvest_age = True
    # the facility's start state does not change with the policy
    start = start_batches(fly, settings_for(fly))
    res = plan_horizon(scn, settings_for(scn), start=start, horizon_weeks=6)
    assert res.info.has_plan and verify_plan(res) == []
    plan = res.cage_batches[res.cage_batches["source"] == "plan"]
    assert plan["discard_age"].nunique() == 1
    assert res.harvests.loc[res.harvests["kind"] == "release", "age"].nunique() == 1
