"""The safety-margin search when it cannot meet its target: an answer with the base plan's
replay and every margin tried, never an exception (unless there is no plan at all)."""

import copy

import numpy as np
import pytest

from planner.cli.format import dumps
from planner.errors import InputError, NoPlanError
from planner.optimise import available_solvers, settings_for
from planner.risk import margin as margin_mod
from planner.risk import replay, safety_margin
from planner.risk.margin import plan_with_margin

FAST = "highs" if "highs" in available_solvers() else "cbc"


@pytest.fixture(scope="module")
def six_weeks(fly):
    """The demo over six weeks: weeks 1-4 ship pupae already in the trays, weeks 5-6 are
    the ones a margin can change."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 6
    return scn


@pytest.fixture(scope="module")
def settings6(six_weeks):
    return settings_for(six_weeks, solver=FAST, time_limit=30)


def _without_plan(plan):
    """A copy of ``plan`` whose solver found nothing (as after a time limit with no plan)."""
    broken = copy.copy(plan)
    broken.solution = copy.copy(plan.solution)
    info = copy.copy(plan.info)
    info.status, info.message = "no solution", "the solver stopped before finding any plan"
    broken.solution.info = info
    return broken


def test_the_largest_margin_caps_the_doubling_and_every_margin_is_recorded(six_weeks,
                                                                            settings6):
    res = safety_margin(six_weeks, 0.999999, replicates=400, seed=2, settings=settings6,
                        max_margin=0.03)
    assert not res.met and res.margin is None and res.extra_cost_per_week is None
    assert [r["margin"] for r in res.tried] == [0.0, 0.02, 0.03]
    assert res.largest_tried == 0.03 and "largest margin" in res.stopped
    # the result carries the base plan and its replay, judged against the real book
    assert res.plan is res.base_plan and res.risk is res.base_risk
    np.testing.assert_array_equal(res.risk.ordered,
                                  res.base_plan.data.ordered[:, :res.risk.weeks.size].sum(0))
    # each row's probabilities are those of a replay of that margin's plan, made afresh
    again = replay(plan_with_margin(six_weeks, 0.02, settings6, from_week=res.from_week),
                   replicates=400, seed=2, ordered=res.base_plan.data.ordered)
    row = res.tried[1]
    fill = again.fill_probability()
    judged = (again.weeks >= res.from_week) & (again.ordered > 0)
    # the same solve (one solver thread) and the same seed: the same numbers
    assert row["worst_week_fill_probability"] == pytest.approx(fill[judged].min())
    assert row["all_weeks_filled_probability"] == pytest.approx(
        np.all(again.filled()[judged], axis=0).mean())
    for r in res.tried:
        assert 0 <= r["all_weeks_filled_probability"] <= r["worst_week_fill_probability"] < 1
        assert not r["met"] and r["has_plan"]
    s = res.summary()
    assert s["met"] is False and s["largest_margin_tried"] == 0.03
    assert {"margin", "worst_week_fill_probability", "all_weeks_filled_probability"} <= set(
        s["tried"][0])
    dumps(s)  # strict JSON


def test_a_margin_without_a_plan_ends_the_search_without_an_error(six_weeks, settings6,
                                                                   monkeypatch):
    real = margin_mod.plan_with_margin

    def flaky(scn, m, *a, **k):
        plan = real(scn, m, *a, **k)
        return plan if m == 0 else _without_plan(plan)

    monkeypatch.setattr(margin_mod, "plan_with_margin", flaky)
    res = safety_margin(six_weeks, 0.95, replicates=300, seed=0, settings=settings6)
    assert not res.met
    assert [r["margin"] for r in res.tried] == [0.0, 0.02]
    bad = res.tried[1]
    assert bad["has_plan"] is False and bad["status"] == "no solution"
    assert bad["worst_week_fill_probability"] is None
    assert "no plan at a margin of 2.0 %" in res.stopped
    assert res.largest_tried == 0.0 and res.risk is res.base_risk
    dumps(res.summary())


def test_no_plan_even_without_a_margin_is_no_plan_error(six_weeks, settings6, monkeypatch):
    real = margin_mod.plan_with_margin
    monkeypatch.setattr(margin_mod, "plan_with_margin",
                        lambda *a, **k: _without_plan(real(*a, **k)))
    with pytest.raises(NoPlanError, match="even without a safety margin") as err:
        safety_margin(six_weeks, 0.9, replicates=100, settings=settings6)
    assert err.value.exit_code == 3


def test_a_plan_already_short_ends_the_search(six_weeks, settings6):
    """Orders 10 % above what the start colony can deliver in week 5: the plan cannot
    deliver even 2 % more in the worst week (no more than without a margin), so the search
    stops there; a larger margin indeed fills that week no better (within three binomial
    standard errors)."""
    scn = six_weeks.model_copy(deep=True)
    for o in scn.orders:
        o.weekly_volume *= 1.1
    res = safety_margin(scn, 0.9, replicates=500, seed=1, settings=settings6)
    assert not res.met and [r["margin"] for r in res.tried] == [0.0, 0.02]
    assert "plans no more there than at 0.0 %" in res.stopped
    row = res.tried[1]
    week = row["worst_week"]
    plan = plan_with_margin(scn, 0.02, settings6, from_week=res.from_week)
    w = plan.weekly.groupby("week")[["ordered", "released", "shortfall"]].sum()
    base = res.base_plan.weekly.groupby("week")["released"].sum()
    assert w.loc[week, "shortfall"] > 1e-3 * w.loc[week, "ordered"]
    assert w.loc[week, "released"] <= base[week] + 1e-3 * w.loc[week, "ordered"]
    more = replay(plan_with_margin(scn, 0.08, settings6, from_week=res.from_week),
                  replicates=500, seed=1, ordered=res.base_plan.data.ordered)
    p = row["worst_week_fill_probability"]
    se = np.sqrt(max(p * (1 - p), 1 / 500) * 2 / 500)
    assert more.fill_probability()[week - 1] <= p + 3 * se


def test_a_negative_largest_margin_is_a_clear_error(six_weeks):
    with pytest.raises(InputError, match="cannot be negative"):
        safety_margin(six_weeks, 0.9, max_margin=-0.1)
