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
    a = plan_horizon(fly, settings_for(fly, solver="cbc", relative_gap=0.002), horizon_weeks=6)
    b = plan_horizon(fly, settings_for(fly, solver="highs", relative_gap=0.002), horizon_weeks=6)
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


def test_tiny_instance_matches_scipy_milp(tiny):
    m = tiny.model
    a_ub, b_ub, a_eq, b_eq = m.stacked()
    cons = [LinearConstraint(a_ub, -np.inf, b_ub)]
    if a_eq.shape[0]:
        cons.append(LinearConstraint(a_eq, b_eq, b_eq))
    ref = milp(m.c, constraints=cons, integrality=m.integrality, bounds=Bounds(m.lb, m.ub),
               options={"mip_rel_gap": 1e-9, "time_limit": 120})
    assert ref.status == 0, ref.message
    ref_obj = ref.fun + m.c0
    direct = solve(m, SolveSettings(relative_gap=1e-9, strategy="direct", duals=False))
    assert direct.info.objective == pytest.approx(ref_obj, rel=1e-6)
    two = solve(m, SolveSettings(relative_gap=0.005, duals=False))
    assert ref_obj - 1e-6 * ref_obj <= two.info.objective <= ref_obj * (1 + two.info.gap + 1e-9)
    assert two.info.best_bound <= ref_obj * (1 + 1e-9)


def test_statuses_are_interpreted_plainly(tiny):
    s = SolveSettings(time_limit=7)
    x = np.zeros(tiny.model.n)
    none = _interpret(s, "Not Solved", 0, x, tiny.model, None, 7.0)
    assert none.status == "no solution" and none.objective is None and not none.has_plan
    assert "before finding any plan" in none.message
    limited = _interpret(s, "Optimal", 2, x, tiny.model, -1.0, 7.0)
    assert limited.status == "feasible" and limited.time_limited
    assert "time limit" in limited.message
    bad = _interpret(s, "Infeasible", -1, x, tiny.model, None, 0.1)
    assert bad.status == "infeasible"


def test_missing_solver_is_a_clear_error(tiny, monkeypatch):
    import importlib
    mod = importlib.import_module("planner.optimise.solve")
    monkeypatch.setattr(mod, "available_solvers", lambda: ["cbc"])
    with pytest.raises(SolverError, match="pip install 'broodline\\[highs\\]'"):
        solve(tiny.model, SolveSettings(solver="highs"))
