"""The risk replay: the plan reproduced without variation, the survivors' distribution
against scipy.stats, seeds, and the safety margin."""

import numpy as np
import pytest
from scipy import stats

from planner.errors import InputError
from planner.optimise import settings_for
from planner.risk import NO_VARIATION, beta_parameters, replay, safety_margin
from planner.risk.margin import plan_with_margin
from planner.risk.simulate import batch_survivors


def test_without_variation_the_replay_is_the_plan(fly_plan):
    r = replay(fly_plan, NO_VARIATION, replicates=3, seed=1, binomial=False)
    d = fly_plan.daily
    n = len(d)
    # trays seeded, day by day, exactly
    np.testing.assert_array_equal(r.trays_seeded[:, 0], d["trays_seeded"].to_numpy()[:n])
    # eggs for each seeding day = eggs laid L days before, from the plan's own read-back
    lag = fly_plan.data.seed_lag
    laid = d["eggs_collected"].to_numpy()
    np.testing.assert_allclose(r.eggs[lag:, 0] * 1000.0, laid[:n - lag], rtol=1e-9, atol=1e-3)
    # the product released each week, from the daily harvests of the plan
    product = (d.loc[d["in_horizon"], "pupae_released"] * fly_plan.data.product_yield / 1e6)
    weekly = product.groupby(d.loc[d["in_horizon"], "week"]).sum().to_numpy()
    np.testing.assert_allclose(r.released[:, 0], weekly, rtol=1e-6)
    np.testing.assert_allclose(r.released[:, 0], r.released[:, 2], rtol=0, atol=0)
    assert r.colony_end[0] == pytest.approx(r.planned_colony_end, rel=1e-9)
    # the plan fills its book, so does its exact replay
    assert r.worst_fill() == 1.0


def test_one_batch_matches_the_beta_binomial(rng=np.random.default_rng(7)):
    """Survivors of one batch with beta hatch and fixed later survival: the beta-binomial
    of scipy.stats (general-purpose reference library); Johnson, Kemp & Kotz (2005)."""
    n, mean, cv = 400, 0.8, 0.1
    a, b = beta_parameters(mean, cv)
    draws = batch_survivors(rng, np.full(200_000, n), mean, cv, 1.0, 0.0)
    ref = stats.betabinom(n, a, b)
    se_mean = np.sqrt(ref.var() / draws.size)
    assert abs(draws.mean() - ref.mean()) < 4 * se_mean
    # the variance's standard error from the fourth central moment
    m4 = stats.moment(draws, 4)
    se_var = np.sqrt((m4 - draws.var() ** 2) / draws.size)
    assert abs(draws.var() - ref.var()) < 4 * se_var
    # far wider than a plain binomial: the batch effect dominates
    assert draws.var() > 5 * stats.binom(n, mean).var()


def test_two_stage_batch_matches_the_beta_mixture_moments(rng=np.random.default_rng(8)):
    """Hatch and larval survival both beta: mean n E[p] and variance
    n (E[p] - E[p^2]) + n^2 Var(p), with the beta moments from scipy.stats."""
    n, h, ch, s, cs, rest = 12_000, 0.85, 0.08, 0.7, 0.12, 0.9
    draws = batch_survivors(rng, np.full(200_000, n), h, ch, s, cs, rest)
    bh, bs = stats.beta(*beta_parameters(h, ch)), stats.beta(*beta_parameters(s, cs))
    ep = bh.mean() * bs.mean() * rest
    ep2 = bh.moment(2) * bs.moment(2) * rest ** 2
    mean, var = n * ep, n * (ep - ep2) + n ** 2 * (ep2 - ep ** 2)
    assert abs(draws.mean() - mean) < 4 * np.sqrt(var / draws.size)
    assert draws.var() == pytest.approx(var, rel=0.02)


def test_an_impossible_spread_is_a_clear_error():
    with pytest.raises(InputError, match="use less than"):
        beta_parameters(0.9, 0.5, "egg hatch")


def test_same_seed_same_numbers(fly_plan):
    a = replay(fly_plan, replicates=300, seed=11)
    b = replay(fly_plan, replicates=300, seed=11)
    c = replay(fly_plan, replicates=300, seed=12)
    np.testing.assert_array_equal(a.released, b.released)
    np.testing.assert_array_equal(a.colony_end, b.colony_end)
    assert not np.array_equal(a.released, c.released)


def test_bad_luck_costs_fill_and_the_colony_is_served_first(fly_plan):
    r = replay(fly_plan, replicates=2000, seed=3)
    fill = r.fill_probability()
    assert (fill < 1).all() and (fill > 0).all()
    # colony first: the colony's egg output keeps its median near the plan's, while the
    # released product's median falls below the order
    assert np.median(r.colony_end) == pytest.approx(r.planned_colony_end, rel=0.03)
    assert (np.median(r.released, axis=1) <= r.planned_release * (1 + 1e-9)).all()


@pytest.fixture(scope="module")
def six_weeks(fly):
    """The demo over six weeks (weeks 5-6 are those a margin from week 5 changes)."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 6
    return scn


def test_fill_rises_with_the_margin(six_weeks):
    settings = settings_for(six_weeks, time_limit=30)
    book = None  # the real orders: those of the plan without a margin
    fills = []
    for m in (0.0, 0.06, 0.15):
        plan = plan_with_margin(six_weeks, m, settings, from_week=5)
        book = plan.data.ordered if book is None else book
        r = replay(plan, replicates=1500, seed=4, ordered=book)
        fills.append(r.worst_fill(5))
    assert fills[0] < fills[1] < fills[2]


def test_the_found_margin_holds_on_a_fresh_seed(six_weeks):
    target = 0.8
    res = safety_margin(six_weeks, target, replicates=1000, seed=21, tolerance=0.05,
                        settings=settings_for(six_weeks, time_limit=30))
    s = res.summary()
    assert s["met"] and 0 < s["margin"] < 0.64
    assert s["extra_cost_per_week"] > 0
    assert s["worst_week_fill_with_margin"] >= target
    fresh = replay(res.plan, replicates=4000, seed=999, ordered=res.base_plan.data.ordered)
    # Monte-Carlo error of both estimates (binomial), three standard errors, plus the
    # selection of the worst of four weeks
    se = np.sqrt(target * (1 - target) * (1 / 1000 + 1 / 4000))
    assert fresh.worst_fill(res.from_week) >= target - 3 * se - 0.02


def test_a_replay_too_large_for_memory_is_refused_before_any_work(fly_plan):
    """Issue 12 item 11: `risk --replicates 10000000` grew 40 MB/s to 8 GB before printing
    anything. The count is refused at once with the limit and the largest count allowed;
    tracemalloc shows that nothing of that size was allocated."""
    import time
    import tracemalloc

    from planner.risk.simulate import MAX_REPLAY_BYTES
    tracemalloc.start()
    t0 = time.perf_counter()
    with pytest.raises(InputError, match="use at most") as info:
        replay(fly_plan, replicates=10_000_000, seed=1)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert time.perf_counter() - t0 < 5.0
    assert peak < MAX_REPLAY_BYTES / 20
    most = int(str(info.value).split("use at most ")[1].split(" ")[0].replace(",", ""))
    assert most >= 2000  # the default count stays far inside the limit
