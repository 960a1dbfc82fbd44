"""Quotes, capacity and expansion: the manager's questions answered by the same model."""

import math

import numpy as np
import pytest

from planner.optimise import plan_standard_week, settings_for, verify_plan
from planner.optimise.capacity import capacity
from planner.optimise.data import lead_time_days
from planner.optimise.expansion import expand, sweep
from planner.optimise.quote import _Quoter, quote
from planner.optimise.standard_week import start_batches
from planner.scenario.schema import ExpansionOption, Weekly


@pytest.fixture(scope="module")
def short_fly(fly):
    """The demo on an 8-week horizon (quotes solve many times)."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 8
    return scn


@pytest.fixture(scope="module")
def big_quote(short_fly):
    return quote(short_fly, 1.0, 3, start_week=2, settings=settings_for(short_fly))


def test_a_small_order_is_taken_with_its_ramp_up(short_fly):
    q = quote(short_fly, 0.5, 4, settings=settings_for(short_fly))
    s = q.summary()
    assert s["feasible"] and s["shortfall_million"] <= 1e-3
    assert s["extra_cost_per_week"] > 0 and s["cost_per_million"] > 0
    assert s["ramp_up_start"] is not None
    assert s["ramp_up_start"] < q.week_date(q.start_week)  # eggs come weeks before harvest
    # the plan keeps the old one before the ramp-up day
    t = (s["ramp_up_start"] - short_fly.calendar.start).days
    a, b = q.baseline.horizon_daily, q.with_order.horizon_daily
    assert (a["cages_loaded"].iloc[:t] == b["cages_loaded"].iloc[:t]).all()
    assert (a["trays_seeded"].iloc[:t] == b["trays_seeded"].iloc[:t]).all()


def test_largest_volume_is_feasible_and_one_percent_more_is_not(short_fly, big_quote):
    s = big_quote.summary()
    assert not s["feasible"] and s["limiting_resources"]
    v = s["max_weekly_volume"]
    assert 0 < v < 1.0 and v <= s["max_weekly_volume_bound"]
    q = _Quoter(short_fly, settings_for(short_fly), start_batches(short_fly, settings_for(
        short_fly)), "Quote (quote)", 3)
    q.keep_book(big_quote.baseline)
    # feasible: the plan promised delivers it, and keeps every rule when re-checked from
    # its own numbers (planner.optimise.verify, independent of the solver)
    plan = big_quote.with_order
    assert s["plan_volume"] == v and s["shortfall_million"] <= q.tolerance(v)
    book = plan.weekly[plan.weekly["customer"] != "Quote (quote)"]
    assert book["shortfall"].sum() <= 1e-6  # the book is not robbed
    assert verify_plan(plan) == []
    # one per cent more: no whole plan within a check's time (the gap of the search)
    assert not q.feasible(1.01 * v, big_quote.start_week)


def test_earliest_full_start_respects_the_lead_time(short_fly, big_quote):
    s = big_quote.summary()
    start = s["earliest_full_start"]
    if start is None:
        pytest.skip("the full volume cannot be delivered within the search window")
    # new capacity lays only after the cage's pre-laying time, and its eggs need the
    # egg-to-harvest time: the order's last day cannot come before that lead time
    lead = lead_time_days(short_fly) - (max(short_fly.colony.rearing.harvest_ages)
                                        - min(short_fly.colony.rearing.harvest_ages))
    assert 7 * start > lead
    # and the search is tight: the full volume from that week, not from the week before
    q = _Quoter(short_fly, settings_for(short_fly), start_batches(short_fly, settings_for(
        short_fly)), "Quote (quote)", 3)
    q.keep_book(big_quote.baseline)
    assert start > big_quote.start_week
    assert q.feasible(1.0, start)
    assert not q.feasible(1.0, start - 1)


def test_capacity_is_the_edge_of_the_standard_week(fly):
    res = capacity(fly, settings_for(fly))
    v = res.max_weekly_volume
    assert res.table["binding_volume"].min() == pytest.approx(v, rel=0.01)
    ok = plan_standard_week(fly, 0.99 * v, settings_for(fly, relative_gap=1e-4))
    assert ok.summary()["shortfall_million"] <= 1e-6
    over = plan_standard_week(fly, 1.03 * v, settings_for(fly, relative_gap=1e-4))
    assert over.summary()["shortfall_million"] > 1e-3


@pytest.fixture(scope="module")
def room_scenario(fly):
    """Cage slots the only limit; two rooms that add the same slots at different costs."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 12
    for r in scn.facility.larval_rooms:
        r.rack_slots = 100000
    scn.kitchen.diet_kg = Weekly.every_day(1e6)
    scn.kitchen.holiday_kg = 1e6
    scn.facility.pupal_holding = None
    for c in scn.crews:
        c.hours = Weekly.every_day(500.0)
        c.holiday_hours = 500.0
    ready = scn.calendar.start
    scn.expansion = [
        ExpansionOption(name="Room dear", cage_slots=20, weekly_cost=900.0, ready=ready),
        ExpansionOption(name="Room cheap", cage_slots=20, weekly_cost=500.0, ready=ready),
    ]
    return scn


def test_the_cheaper_of_two_equal_options_is_bought(room_scenario):
    res = expand(room_scenario, 19.0, 8, settings_for(room_scenario))
    assert res.summary()["meets_target"]
    assert res.bought == {"Room dear": 0, "Room cheap": 1}


def test_nothing_is_bought_when_the_facility_suffices(room_scenario):
    res = expand(room_scenario, 11.0, 8, settings_for(room_scenario))
    assert res.summary()["meets_target"] and not any(res.bought.values())


@pytest.fixture(scope="module")
def local_sweep(room_scenario):
    return sweep(room_scenario, [12.0, 15.0, 18.0, 20.0, 22.0], from_week=8,
                 settings=settings_for(room_scenario), workers=2)


def test_sweep_cost_curve_and_bought_sets(local_sweep):
    df = local_sweep
    bought = df[[c for c in df.columns if c.startswith("bought: ")]].to_numpy()
    assert (np.diff(bought, axis=0) >= 0).all(), "the bought set grows with the target"
    assert bought[0].sum() == 0 and bought[-1].sum() >= 1
    # between capacity steps (same options bought) the cost per million does not rise
    cpm = df["cost_per_million"].to_numpy()
    for i in range(len(df) - 1):
        if (bought[i] == bought[i + 1]).all() and df["meets_target"].iloc[i + 1]:
            assert cpm[i + 1] <= cpm[i] * (1 + 0.005)


def test_sweep_on_a_dask_cluster_gives_the_same_table(room_scenario, local_sweep):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        df = sweep(room_scenario, [12.0, 15.0, 18.0, 20.0, 22.0], from_week=8,
                   settings=settings_for(room_scenario), scheduler=client)
    cols = [c for c in local_sweep.columns if c not in ("seconds",)]
    a, b = local_sweep[cols], df[cols]
    assert list(a.columns) == list(b.columns)
    for c in cols:
        if a[c].dtype.kind in "fi":
            np.testing.assert_allclose(a[c].to_numpy(float), b[c].to_numpy(float), rtol=1e-9)
        else:
            assert list(a[c]) == list(b[c])
    assert not math.isnan(df["cost_per_million"].iloc[0])
