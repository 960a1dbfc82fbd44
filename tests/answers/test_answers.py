"""Quotes, capacity and expansion: the manager's questions answered by the same model."""

import math

import numpy as np
import pytest

from planner.optimise import plan_standard_week, settings_for, verify_plan
from planner.answers.capacity import capacity
from planner.answers.expansion import expand, sweep
from planner.answers.quote import quote
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
    """An order beyond capacity in weeks 5-8 (the book asks 10 of about 14.5)."""
    return quote(short_fly, 6.0, 4, start_week=5, settings=settings_for(short_fly))


def test_a_small_order_is_taken_with_its_ramp_up(short_fly):
    q = quote(short_fly, 0.5, 4, settings=settings_for(short_fly))
    s = q.summary()
    assert s["feasible"] and s["shortfall_million"] <= 1e-3
    assert s["full_from_week"] == q.start_week and not s["partial_weeks"]
    assert s["extra_cost_per_week"] > 0 and s["cost_per_million"] > 0
    assert s["ramp_up_start"] is not None
    assert s["ramp_up_start"] < q.week_date(q.start_week)  # eggs come weeks before harvest
    assert s["solves"] <= 20 and s["booked_shortfall_million"] <= 1e-6
    assert {c["customer"] for c in s["customers"]} >= {"Quote (quote)"}
    assert verify_plan(q.with_order) == []


def _fills(short_fly, volume, weeks_on, held, start):
    """Bisection's check: one whole plan with the quote at ``volume`` in ``weeks_on``."""
    from planner.optimise import build_model, compile_horizon, read_back, solve
    from planner.optimise.build import Question
    from planner.scenario.schema import Order
    order = Order(customer="Quote (quote)", weekly_volume=volume, first_week=min(weeks_on),
                  last_week=max(weeks_on), priority=2)
    data = compile_horizon(short_fly, start, extra_orders=[order])
    built = build_model(data, question=Question(shortfall_cap=held))
    res = read_back(built, solve(built.model, settings_for(short_fly, duals=False)))
    w = res.weekly[res.weekly["customer"] == "Quote (quote)"]
    return float(w["shortfall"].sum()) <= 1e-3 * volume * len(weeks_on)


def test_largest_volume_agrees_with_a_bisection_over_plans(short_fly, big_quote):
    """The one-MILP largest volume against a bisection over whole plans (the method it
    replaced), within the bisection's resolution and the solver gap."""
    s = big_quote.summary()
    assert not s["feasible"] and not s["lead_time_limited"] and s["limiting_resources"]
    v, bound = s["max_weekly_volume"], s["max_weekly_volume_bound"]
    assert 0 < v < 6.0 and v <= bound * (1 + 1e-9)
    plan = big_quote.with_order
    assert s["plan_volume"] == v
    assert plan.booked_shortfall() <= big_quote.baseline.booked_shortfall() + 1e-6
    assert verify_plan(plan) == []  # every rule re-checked from the plan's own numbers
    weeks_on = [w for w in range(5, 9) if w not in s["lead_time_weeks"]]
    start = start_batches(short_fly, settings_for(short_fly))
    short = big_quote.baseline.built.blocks["shortfall"]
    held = {lab: x + 1e-6 for lab, x in zip(short.labels,
                                            short.values(big_quote.baseline.solution.x))}
    # bracketed from 3 % below the answer (checked to fill) to just above its bound;
    # two halvings resolve it to 0.8 %
    lo, hi = 0.97 * v, bound * 1.001
    assert _fills(short_fly, lo, weeks_on, held, start)
    for _ in range(2):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if _fills(short_fly, mid, weeks_on, held, start) else (lo, mid)
    assert v <= hi * (1 + 0.01)
    assert lo <= bound * (1 + 0.01), "the bound the answer states is a true bound"
    # within 1 % of the bisection, or, when the volume MILP stopped at its time cap (a
    # busy machine), at most the gap to its own stated bound below it
    assert v >= lo * (1 - 0.01) - max(bound - v, 0.0)


def _roomy(short_fly):
    """The 8-week demo with every capacity doubled: only the start state limits."""
    scn = short_fly.model_copy(deep=True)
    for room in scn.facility.adult_rooms:
        room.cage_slots *= 2
    for room in scn.facility.larval_rooms:
        room.rack_slots *= 2
    scn.kitchen.diet_kg = Weekly(**{d: 2 * v for d, v in zip(
        ("mon", "tue", "wed", "thu", "fri", "sat", "sun"), scn.kitchen.diet_kg.as_list())})
    scn.kitchen.holiday_kg = 2 * (scn.kitchen.holiday_kg or 0)
    for crew in scn.crews:
        crew.hours = Weekly(**{d: 2 * v for d, v in zip(
            ("mon", "tue", "wed", "thu", "fri", "sat", "sun"), crew.hours.as_list())})
    return scn


def test_an_order_only_lead_time_shortens_is_yes_from_a_later_week(short_fly):
    scn = _roomy(short_fly)
    q = quote(scn, 3.0, 5, start_week=2, settings=settings_for(scn))
    s = q.summary()
    assert s["lead_time_limited"] and not s["feasible"]
    assert s["full_from_week"] is not None and 2 < s["full_from_week"] <= 6
    assert s["partial_weeks"] and all(p["cause"] == "lead time" for p in s["partial_weeks"])
    # pupae harvested before the youngest harvest age after the plan start come from
    # eggs laid before it (common practice, no source: the lead time of a rearing line)
    rear = scn.colony.rearing
    first_free = max(rear.harvest_ages) - rear.seed_lag + 7 * 2  # and a ramp of new cages
    assert all(7 * (p["week"] - 1) < first_free for p in s["partial_weeks"])
    assert s["max_weekly_volume"] is None and s["solves"] <= 20


def test_expand_never_takes_from_a_booked_order(short_fly):
    from planner.optimise import plan_horizon
    base = plan_horizon(short_fly, settings_for(short_fly))
    res = expand(short_fly, 17.0, from_week=5, settings=settings_for(short_fly))
    s = res.summary()
    # the 8-week horizon ends before the options bought can serve: not reachable
    assert s["reachable"] is False and not s["meets_target"] and s["ramp"] == []
    assert s["booked_shortfall_million"] <= base.booked_shortfall() + 1e-6
    booked = res.plan.weekly[res.plan.weekly["customer"] != "growth target"]
    for row in booked.itertuples():
        assert row.shortfall <= 1e-6 * row.ordered + 1e-9


def test_expand_holds_the_target_after_a_ramp_that_lead_time_sets(fly):
    """16 million/week asked from week 5 of an 11-week demo: no plan fills weeks 5-9 (the
    options are ready from weeks 3, 5 and 7 and pupae take three weeks from egg laying),
    so those weeks are the ramp-up, and the target is held in full from the week after."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 11
    res = expand(scn, 16.0, from_week=5, settings=settings_for(scn))
    s = res.summary()
    assert res.ramp_weeks and res.ramp_weeks[0] == 5
    assert s["meets_target"] and s["shortfall_after_ramp_million"] <= 1e-3
    assert s["full_from_week"] == max(res.ramp_weeks) + 1
    assert all(r["short_million"] > 0 for r in s["ramp"][:3])
    assert s["shortfall_in_ramp_million"] == pytest.approx(
        sum(r["short_million"] for r in s["ramp"]))
    # the booked orders are served in full, so a ramp week delivers the target less its
    # growth order's shortfall
    assert s["booked_shortfall_million"] <= 1e-6
    for r in s["ramp"]:
        assert r["delivered_million"] == pytest.approx(16.0 - r["short_million"], abs=1e-6)
    # lead time (common practice, no source): pupae harvested in a week come from eggs
    # laid at least the youngest harvest age earlier, seeded seed_lag days after laying;
    # rack slots ready on day r first serve eggs laid on day r - seed_lag
    rear = scn.colony.rearing
    start = scn.calendar.start
    ready = [(o.ready - start).days for o in scn.expansion if res.bought[o.name]]
    first_served = max(ready) - rear.seed_lag + min(rear.harvest_ages)
    assert max(res.ramp_weeks) <= first_served // 7 + 1
    assert verify_plan(res.plan) == []


def test_equal_priorities_share_a_short_week_pro_rata(short_fly):
    """Two customers of one class, a facility too small for both: each week's shortfall
    is the same share of each order (the largest relative shortfall minimised)."""
    from planner.optimise import plan_horizon
    scn = short_fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 6
    for o in scn.orders:
        o.weekly_volume *= 1.6  # 16 million/week against about 14.5 the plant can make
    res = plan_horizon(scn, settings_for(scn, time_limit=30))
    w = res.weekly[res.weekly["shortfall"] > 1e-6]
    assert len(w) >= 2
    for week, g in w.groupby("week"):
        all_rows = res.weekly[res.weekly["week"] == week]
        shares = (all_rows["shortfall"] / all_rows["ordered"]).to_numpy()
        assert shares.max() - shares.min() <= 1e-4, (week, shares)
    # a lower class takes the whole shortfall first
    scn.orders[1].priority = 2
    scn.orders[2].priority = 2
    low = plan_horizon(scn, settings_for(scn, time_limit=30))
    first = low.weekly[low.weekly["customer"] == scn.orders[0].customer]
    second = low.weekly[low.weekly["customer"] == scn.orders[1].customer]
    assert first["shortfall"].sum() <= 1e-6 * first["ordered"].sum()
    assert second["shortfall"].sum() > 0
    assert verify_plan(res) == [] and verify_plan(low) == []


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
    return sweep(room_scenario, [12.0, 15.0, 22.0], from_week=8,
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
        # two of the local targets: each row is its own solve, so a subset must match
        df = sweep(room_scenario, [12.0, 22.0], from_week=8,
                   settings=settings_for(room_scenario), scheduler=client)
    cols = [c for c in local_sweep.columns if c not in ("seconds",)]
    a = local_sweep[local_sweep["target"].isin([12.0, 22.0])][cols].reset_index(drop=True)
    b = df[cols]
    assert list(a.columns) == list(b.columns)
    for c in cols:
        if a[c].dtype.kind in "fi":
            np.testing.assert_allclose(a[c].to_numpy(float), b[c].to_numpy(float), rtol=1e-9)
        else:
            assert list(a[c]) == list(b[c])
    assert not math.isnan(df["cost_per_million"].iloc[0])


def test_a_fill_plan_not_found_in_time_is_never_a_yes(short_fly, monkeypatch):
    """Seen on the demo: the plan with the order found no plan within its time, the
    answer fell back to the book alone and said "feasible" with nothing delivered. A
    quote whose fill plan is missing promises nothing (the stage is made to fail here)."""
    import dataclasses

    from planner.answers import quote as quote_module

    real = quote_module._Asker.plan

    def failing_fill(self, orders, question=None, relax=False, horizon=None, what="",
                     seconds=None):
        res = real(self, orders, question, relax, horizon, what, seconds)
        if what.startswith("plan with the quote"):
            info = dataclasses.replace(res.info, status="not solved", time_limited=True)
            res = dataclasses.replace(res, solution=dataclasses.replace(res.solution,
                                                                        info=info))
        return res

    monkeypatch.setattr(quote_module._Asker, "plan", failing_fill)
    q = quote(short_fly, 0.5, 2, start_week=5, settings=settings_for(short_fly),
              search=False)
    s = q.summary()
    assert not s["feasible"] and s["full_from_week"] is None
    assert s["shortfall_million"] == pytest.approx(1.0)
    # no cause is made up and no fill of 0 is claimed where none was measured
    assert s["fill_plan_found"] is False and s["limiting_resources"] == []
    for p in s["partial_weeks"]:
        assert (p["fill"] is None) == (p["cause"] != "lead time")
    from planner.cli.answer_cmds import quote_text
    assert "fill not known" in quote_text(q, short_fly.costs.currency)
