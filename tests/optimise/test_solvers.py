"""The solve step against a second solver and against scipy's MILP on the same matrices."""

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from planner.errors import SolverError
from planner.optimise import (available_solvers, build_model, compile_horizon, plan_horizon,
                              plan_standard_week, settings_for, solve)
from planner.optimise.solve import SolveSettings, _interpret
from planner.optimise.standard_week import start_batches

needs_highs = pytest.mark.skipif("highs" not in available_solvers(),
                                 reason="the highs extra is not installed")


def _agree(a, b):
    """Each plan lies within the other solver's bound window (both are within their gap)."""
    ia, ib = a.info, b.info
    assert ia.status == ib.status == "optimal"
    assert ia.objective >= ib.best_bound - 1e-6 * abs(ib.objective)
    assert ib.objective >= ia.best_bound - 1e-6 * abs(ia.objective)
    tol = max(ia.gap, ib.gap) + 1e-9
    assert abs(ia.objective - ib.objective) <= tol * max(ia.objective, ib.objective)


@needs_highs
def test_cbc_and_highs_agree_on_a_horizon_plan(fly):
    # one start state for both: the standard week has several optima, and each solver's
    # would make a different horizon problem
    start = start_batches(fly, settings_for(fly, solver="highs"))
    a = plan_horizon(fly, settings_for(fly, solver="cbc", relative_gap=0.004), start=start,
                     horizon_weeks=6)
    b = plan_horizon(fly, settings_for(fly, solver="highs", relative_gap=0.004), start=start,
                     horizon_weeks=6)
    _agree(a, b)


@needs_highs
def test_cbc_and_highs_agree_on_a_standard_week(moth):
    a = plan_standard_week(moth, 1.0, settings_for(moth, solver="cbc", relative_gap=0.001))
    b = plan_standard_week(moth, 1.0, settings_for(moth, solver="highs", relative_gap=0.001))
    _agree(a, b)


@pytest.fixture(scope="module")
def tiny(fly):
    """One week plus one week of look-ahead, two discard ages, one crew's standards."""
    scn = fly.model_copy(deep=True)
    scn.colony.rearing.discard_ages = [50, 57]
    scn.colony.rearing.harvest_ages = [24, 25]
    start = start_batches(fly, settings_for(fly))
    start.cages = [(s, c, 57 if d not in (50, 57) else d) for s, c, d in start.cages]
    data = compile_horizon(scn, start, horizon_weeks=1, lookahead_weeks=1)
    return build_model(data)


def _scipy_milp(m):
    """The same matrices solved by scipy's milp (HiGHS inside scipy) to a 1e-9 gap."""
    a_ub, b_ub, a_eq, b_eq = m.stacked()
    cons = [LinearConstraint(a_ub, -np.inf, b_ub)]
    if a_eq.shape[0]:
        cons.append(LinearConstraint(a_eq, b_eq, b_eq))
    return milp(m.c, constraints=cons, integrality=m.integrality, bounds=Bounds(m.lb, m.ub),
                options={"mip_rel_gap": 1e-9, "time_limit": 120})


def test_tiny_instance_matches_scipy_milp(tiny):
    m = tiny.model
    ref = _scipy_milp(m)
    assert ref.status == 0, ref.message
    ref_obj = ref.fun + m.c0
    direct = solve(m, SolveSettings(relative_gap=1e-9, strategy="direct", duals=False))
    assert direct.info.objective == pytest.approx(ref_obj, rel=1e-6)
    two = solve(m, SolveSettings(relative_gap=0.005, duals=False))
    assert ref_obj - 1e-6 * ref_obj <= two.info.objective <= ref_obj * (1 + two.info.gap + 1e-9)
    assert two.info.best_bound <= ref_obj * (1 + 1e-9)


def _call(status, sol_status, x, bound, seconds, hit):
    from planner.optimise.solve import _Call
    return _Call(status, sol_status, x, bound, seconds, hit)


class _Clock:
    def elapsed(self):
        return 7.0


def test_statuses_are_interpreted_plainly(tiny):
    s = SolveSettings(time_limit=7)
    x = np.zeros(tiny.model.n)
    none = _interpret(s, _call("Not Solved", 0, x, None, 7.0, True), tiny.model, _Clock())
    assert none.status == "no solution" and none.objective is None and not none.has_plan
    assert "before finding any plan" in none.message and none.time_limited
    limited = _interpret(s, _call("Optimal", 2, x, -1.0, 7.0, True), tiny.model, _Clock())
    assert limited.status == "feasible" and limited.time_limited
    assert "time limit after 7.0 s" in limited.message
    # an open gap without a limit hit is not called time-limited
    stopped = _interpret(s, _call("Optimal", 2, x, -1.0, 3.0, False), tiny.model, _Clock())
    assert stopped.status == "feasible" and not stopped.time_limited
    bad = _interpret(s, _call("Infeasible", -1, x, None, 0.1, False), tiny.model, _Clock())
    assert bad.status == "infeasible"


def _tiny_variant(fly, **plan):
    scn = fly.model_copy(deep=True)
    scn.colony.rearing.discard_ages = [50, 57]
    scn.colony.rearing.harvest_ages = [24, 25]
    scn.plan = scn.plan.model_copy(update=plan)
    start = start_batches(fly, settings_for(fly))
    start.cages = [(s, c, 57 if d not in (50, 57) else d) for s, c, d in start.cages]
    return scn, start


@pytest.mark.parametrize("solver", ["cbc", "highs"])
@pytest.mark.parametrize("switches,options", [({}, False), ({"single_discard_age": True,
                                                              "single_harvest_age": True},
                                                             False), ({}, True)])
def test_a_closed_gap_is_called_optimal(fly, solver, switches, options):
    """--gap 0 on a tiny plan: proven optimal, gap under 1e-9, not time-limited, with
    and without policy switches and expansion options (the full-problem phase runs
    whenever the gap is open). Checked against scipy's milp (HiGHS inside scipy)."""
    scn, start = _tiny_variant(fly, **switches)
    data = compile_horizon(scn, start, horizon_weeks=1, lookahead_weeks=1,
                           use_expansion=options)
    m = build_model(data).model
    sol = solve(m, SolveSettings(solver=solver, relative_gap=0.0, time_limit=60,
                                 duals=False))
    assert sol.info.status == "optimal" and not sol.info.time_limited, sol.info.message
    assert sol.info.gap is not None and sol.info.gap < 1e-9
    assert sol.info.seconds < 55
    ref = _scipy_milp(m)
    assert sol.info.objective == pytest.approx(ref.fun + m.c0, rel=1e-6)


def test_missing_solver_is_a_clear_error(tiny, monkeypatch):
    import importlib
    mod = importlib.import_module("planner.optimise.solve")
    monkeypatch.setattr(mod, "available_solvers", lambda: ["cbc"])
    with pytest.raises(SolverError, match="pip install highspy"):
        solve(tiny.model, SolveSettings(solver="highs"))


def test_the_time_limit_bounds_a_104_week_plan(fly):
    """--time-limit 10 on 104 weeks: back within 15 s, with a plan marked for what it is
    (proven within the gap, or time-limited with its gap) or no plan at all."""
    import time
    t0 = time.perf_counter()
    res = plan_horizon(fly, settings_for(fly, time_limit=10), horizon_weeks=104)
    assert time.perf_counter() - t0 < 15.0
    info = res.info
    if info.status == "optimal":
        assert not info.time_limited and info.gap is not None and info.gap <= 0.005 + 1e-9
    elif info.time_limited and info.has_plan:
        assert info.status == "feasible" and "time limit" in info.message
        assert info.gap is None or info.gap > 0.005
    elif info.time_limited:  # no plan in the time: said so (the command exits 3)
        assert info.status == "no solution" and "(time limit 10 s)" in info.message
    elif info.has_plan:
        assert info.status == "feasible" and "stopped after" in info.message
    else:
        assert info.status in ("no solution", "infeasible")


def test_building_the_model_counts_in_the_time_limit(fly, monkeypatch):
    """Issue 12 item 8: --time-limit did not bound model building (a model that took 90 s
    to build ran with a full solver budget after it). Here the horizon model's build is
    made to take 2.5 s of a 4 s limit: the solver gets what is left, no further call
    starts once it is used up, and the seconds and message report the whole run against
    the limit as given."""
    import time

    import planner.optimise.build as build
    real = build.build_model

    def slow_build(data, *args, **kwargs):
        if data.mode == "horizon":
            time.sleep(2.5)
        return real(data, *args, **kwargs)
    monkeypatch.setattr(build, "build_model", slow_build)
    t0 = time.perf_counter()
    res = plan_horizon(fly, settings_for(fly, time_limit=4), horizon_weeks=4)
    took = time.perf_counter() - t0
    assert res.info.seconds >= 2.5
    # the limit, plus at most the 1 s floor of the one call that may start and read-back
    assert took < 4.0 + 2.0, took
    assert f"{res.info.seconds:.1f} s" in res.info.message  # the whole run, not the rest


def test_the_moth_demo_solves_within_its_own_limit(moth):
    """Issue 13: the shipped moth demo stopped at its own 120 s limit. With the gap its
    scenario states (3 %, explained there) the plan is proven within it, well inside the
    limit, and its shortfall is the one its notes announce (weeks from 9, the peak)."""
    res = plan_horizon(moth, settings_for(moth))
    info = res.info
    assert info.status == "optimal" and not info.time_limited, info.message
    assert info.gap <= moth.plan.relative_gap + 1e-9
    assert info.seconds < moth.plan.time_limit / 2
    w = res.weekly.groupby("week")[["ordered", "shortfall"]].sum()
    share = w["shortfall"] / w["ordered"]
    # the peak weeks are short as announced; an early week at most a little (its price
    # lies within the 3 % gap, as the notes say)
    assert (share[share.index >= 9] > 0.10).all()
    assert (share[share.index < 9] <= 0.02).all()
